"""Batch jobs over vector files: one operation over millions of matrices.

Input is JSON Lines (one record per line, any mix of fields, operations and sizes) or a
``.npy`` stack with a JSON sidecar; the README's "Batch jobs" section describes both with
examples. Records of the same field, operation and size are stacked and sent through
the batched kernels (:mod:`gfla.linalg.batched`), so small matrices go at kernel speed.
A run streams (flat memory), writes results in input order, journals every chunk
(fsync'd) so that ``resume=True`` continues after a crash with every record in the
output exactly once, and runs in this process, in worker processes, or on a Dask
cluster with identical results.

>>> from gfla.jobs.batch import run            # doctest: +SKIP
>>> summary = run("records.jsonl", "results.jsonl", workers=2)   # doctest: +SKIP
>>> summary.exit_code                          # doctest: +SKIP
0
"""

from .engine import DEFAULT_CHUNK_LINES, DEFAULT_CHUNK_MATRICES, Summary, run
from .ops import BULK_OPERATIONS, OPERATIONS, Operation, register
from .records import process_lines

__all__ = ["run", "Summary", "OPERATIONS", "BULK_OPERATIONS", "Operation", "register",
           "process_lines", "DEFAULT_CHUNK_LINES", "DEFAULT_CHUNK_MATRICES"]
