"""``gfla bench``: the benchmark suite, printed as one table."""

import json
import sys

import click

from .common import gfla_command

__all__ = ["bench"]

PARTS = ("core", "erasure", "mixing", "keysched", "batch")

# Job rows carry their own figures (throughput, targets); fold them into the table's
# columns so the suite prints one table.
_FIGURES = (("gb_per_s", "GB/s"), ("gb_per_s_cpu", "GB/s of CPU time"),
            ("ratio_to_numpy_xor", "x one numpy XOR pass"),
            ("ratio_to_galois", "x faster than galois"))


def _table_row(suite, row):
    if "gfla_s" in row and "operation" in row:
        return row
    parts = []
    if "value" in row:
        value = row["value"]
        value = f"{value:.4g}" if isinstance(value, float) else value
        parts.append(f"{value} {row.get('unit', '')}".strip())
    if row.get("target"):
        parts.append(f"target {row['target']}")
    if row.get("met") is not None:
        parts.append("met" if row["met"] else "MISSED")
    for key, label in _FIGURES:
        if row.get(key) is not None:
            parts.append(f"{row[key]:.3g} {label}")
    if row.get("note"):
        parts.append(str(row["note"]))
    size = row.get("n") or row.get("shape")
    if size is None and row.get("size_bytes"):
        size = f"{row['size_bytes'] / 2 ** 20:.0f} MiB"
    return suite.Row(row.get("operation") or row.get("name") or "-",
                     row.get("family") or row.get("field") or "-", size,
                     gfla_s=row.get("seconds"), note="; ".join(parts))


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
        click.echo(suite.format_table([_table_row(suite, r) for r in rows]))
    sys.stdout.flush()
