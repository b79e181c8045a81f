"""``gfla batch``: one operation over many matrices from a vector file.

Only click and the shared CLI helpers are imported here; the job itself
(``gfla.jobs.batch``) is imported inside the command, so ``gfla --help`` stays fast.
"""

import json
import sys
import time

import click

from .common import GflaGroup

__all__ = ["batch", "main"]

CONTEXT = {"help_option_names": ["-h", "--help"], "max_content_width": 100}


@click.group(name="batch", cls=GflaGroup, context_settings=CONTEXT)
def batch():
    """Run operations over vector files (JSON Lines or .npy).

    Millions of records, streamed in chunks, resumable after a crash, on local
    processes or a Dask cluster.

    \b
    Examples:
      printf '%s\\n' '{"id": "a", "field": "GF(2^8)", "modulus": "0x11b", "op": "inv", "matrix": [[2, 3], [1, 1]]}' > records.jsonl
      gfla batch run records.jsonl --out results.jsonl
    """


class _Progress:
    """A progress bar on stderr: records done, rate, time left (from the input done)."""

    def __init__(self):
        self.bar = None
        self.start = time.perf_counter()
        self.first_records = None
        self.records = 0
        self.last = 0

    def _label(self, _item=None):
        seconds = max(time.perf_counter() - self.start, 1e-9)
        rate = (self.records - (self.first_records or 0)) / seconds
        return f"{self.records:,} records, {rate:,.0f}/s"

    def __call__(self, done, total, records):
        if self.bar is None:
            self.first_records = records
            self.bar = click.progressbar(length=max(total, 1), file=sys.stderr,
                                         label="batch", show_eta=True, show_percent=True,
                                         item_show_func=self._label, width=24)
            self.bar.__enter__()
            self.last = 0
        self.records = records
        step = done - self.last
        self.last = done
        self.bar.update(step, current_item=records)

    def close(self):
        if self.bar is not None:
            self.bar.__exit__(None, None, None)
            self.bar = None


@batch.command("run", context_settings=CONTEXT)
@click.argument("input_path", metavar="INPUT")
@click.option("-o", "--out", "out", metavar="OUTPUT", required=True,
              help="Results: JSON Lines for a JSON Lines input; for a .npy input the "
                   "result stack OUTPUT.npy with OUTPUT.json and OUTPUT.errors.jsonl.")
@click.option("-w", "--workers", type=click.IntRange(min=1), default=1, show_default=True,
              help="Worker processes (local) or LocalCluster workers (dask). With 1, "
                   "the work runs in this process on every core.")
@click.option("--resume", is_flag=True,
              help="Continue an interrupted run from its journal (OUTPUT.journal): "
                   "every record ends up in the output exactly once.")
@click.option("--engine", type=click.Choice(["local", "dask"]), default="local",
              show_default=True, help="Where chunks run: here, or on a Dask cluster.")
@click.option("--scheduler", metavar="ADDRESS", default=None,
              help="Dask scheduler address (tcp://host:port). Without it the dask "
                   "engine starts a LocalCluster on 127.0.0.1.")
@click.option("--chunk-size", type=click.IntRange(min=1), default=None, metavar="N",
              help="Records per chunk (the unit of work and of the journal). Default: "
                   "16384 lines of JSON Lines, 65536 matrices of .npy.")
@click.option("--id-check/--no-id-check", default=True, show_default=True,
              help="JSON Lines: a record whose id an earlier record has becomes an "
                   "error line naming that record's line (memory: about 35-70 bytes "
                   "per record). --no-id-check runs every record, memory flat.")
@click.option("-q", "--quiet", is_flag=True, help="No progress bar and no summary.")
@click.option("--json", "as_json", is_flag=True,
              help="Print the summary as one JSON object on stdout.")
def run(input_path, out, workers, resume, engine, scheduler, chunk_size, id_check, quiet,
        as_json):
    """Run every record of INPUT; write one result per record.

    INPUT is JSON Lines, one record per line:

    \b
      {"id": "a", "field": "GF(2^8)", "modulus": "0x11b", "op": "inv",
       "matrix": [["02", "03"], ["01", "01"]]}

    (entries: integers, or strings read as hex), or a .npy stack (N, m, n) with a
    sidecar X.json naming field, op (and modulus, rhs, exponent). Ops: inv, det,
    rank, solve (rhs), nullspace, charpoly, minpoly, order, power (exponent),
    mul (right), mds, branch_number. Records of the same field, op and size run
    together through the batched kernels.

    A bad record becomes an error line for its id and the run goes on. Exit code:
    0 no record failed, 1 some failed, 2 the input cannot be read.

    \b
    Examples:
      gfla batch run records.jsonl --out results.jsonl --workers 2
      gfla batch run records.jsonl --out results.jsonl --resume
      gfla batch run stack.npy --out inverses.npy
      gfla batch run records.jsonl --out results.jsonl --engine dask
    """
    from gfla.jobs.batch import run as run_batch

    if scheduler and engine != "dask":
        raise click.UsageError("--scheduler needs --engine dask")
    # The bar redraws itself with carriage returns: only on a terminal (a log file gets
    # the summary line alone).
    progress = None if quiet or not sys.stderr.isatty() else _Progress()
    try:
        summary = run_batch(input_path, out, workers=workers, resume=resume, engine=engine,
                            scheduler=scheduler, chunk_size=chunk_size, progress=progress,
                            check_ids=id_check)
    finally:
        if progress is not None:
            progress.close()
    if as_json:
        click.echo(json.dumps(summary.as_dict()))
    elif not quiet:
        click.echo(summary.text(), err=True)
    sys.exit(summary.exit_code)


def main():
    """Entry point for ``python -m gfla.cli.batch``."""
    batch.main(prog_name="gfla batch")


if __name__ == "__main__":  # pragma: no cover
    main()
