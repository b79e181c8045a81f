"""``gfla bench``: the benchmark suite, printed as one table."""

import json
import sys

import click

from .common import gfla_command

__all__ = ["bench"]

PARTS = ("core", "erasure", "mixing", "keysched", "batch")


@click.command()
@click.option("--quick", is_flag=True,
              help="Small sizes (the whole suite in about two minutes); CI runs this.")
@click.option("--only", "only", multiple=True, type=click.Choice(PARTS),
              help="Run only these parts (repeatable). Default: all.")
@click.option("--json", "as_json", is_flag=True, help="Print the rows as one JSON object.")
@gfla_command
def bench(quick, only, as_json):
    """Measure gfla against galois and float64 BLAS on this machine.

    Prints one table: operation, family, n, gfla seconds, galois seconds (skipped, with
    the reason, where galois would take over a minute), float64 BLAS matrix-product
    seconds at the same n, and the ratios. Each figure is the median of several runs;
    JIT warm-up is excluded and reported in its own column. Nothing is asserted: the
    figures are for you to read.

    \b
    Examples:
      gfla bench --quick
      gfla bench --only core --json
    """
    from gfla import bench as suite

    parts = set(only or PARTS)

    def progress(what):
        click.echo(f"bench: {what}", err=True)

    rows = suite.collect(quick=quick, core="core" in parts,
                         jobs=tuple(p for p in PARTS if p != "core" and p in parts),
                         progress=progress)
    if as_json:
        click.echo(json.dumps({"quick": quick, "rows": rows}, default=float))
    else:
        click.echo(suite.format_table(rows))
    sys.stdout.flush()
