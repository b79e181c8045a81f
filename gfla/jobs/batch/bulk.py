"""Bulk binary input: a ``.npy`` stack with a JSON sidecar, results as ``.npy``.

Input: ``X.npy`` holds an integer array of shape ``(N, m, n)``; ``X.json`` beside it
names ``field``, ``op`` and, optionally, ``modulus``, ``count``, ``shape`` (``[m, n]``),
``dtype``, ``rhs`` (for ``solve``: a ``.npy`` of shape ``(N, m)``, relative to the
sidecar), ``exponent`` (for ``power``). Whatever the sidecar states is checked against
the array; a mismatch makes the input unreadable (exit code 2), nothing is guessed.

Output for ``--out R.npy``: ``R.npy`` (results, one per input matrix, in input order),
``R.json`` (a sidecar describing them), ``R.errors.jsonl`` (one line per failed matrix:
``{"index": k, "op": ..., "error": {...}}``; its slot in ``R.npy`` is zero).
"""

import json
import os

import numpy as np

from ...errors import InconsistentSystemError, InputError
from ...limits import Workspace, check_npy_header, first_line, load_npy, short_text
from .ops import BULK_OPERATIONS, OPERATIONS
from .records import error_object, field_of, limit_threads

__all__ = ["BulkInput", "open_bulk", "bulk_paths", "result_layout", "process_stack",
           "StackResult", "SIDECAR_KEYS", "chunk_workspace"]

SIDECAR_KEYS = ("field", "modulus", "op", "count", "shape", "dtype", "rhs", "exponent")


def bulk_paths(out):
    """(results .npy, sidecar .json, errors .jsonl) for ``--out``."""
    out = os.fspath(out)
    base = out[:-4] if out.lower().endswith(".npy") else out
    return base + ".npy", base + ".json", base + ".errors.jsonl"


def _load(path, what):
    if not os.path.exists(path):
        raise InputError(f"{path}: no such file")
    if os.path.isdir(path):
        raise InputError(f"{path}: is a directory, not a file")
    # The header first: a malformed one, an object dtype (a pickle) or a shape larger
    # than the file is refused before numpy maps anything (memory-mapped: the memory
    # check is the workspace's, in open_bulk).
    check_npy_header(path, what, copies=0,
                     objects_note="for example matrices of different sizes; "
                     f"{what} must be one integer array")
    try:
        arr = load_npy(path, mmap_mode="r")
    except ValueError as exc:
        if "pickle" in str(exc).lower() or "object" in str(exc).lower():
            raise InputError(
                f"{path}: holds Python objects (for example matrices of different sizes); "
                f"{what} must be one integer array") from None
        raise InputError(f"{path}: not a readable .npy file ({first_line(exc)})") from None
    except (OSError, EOFError) as exc:
        raise InputError(f"{path}: not a readable .npy file ({first_line(exc)})") from None
    if not isinstance(arr, np.ndarray):
        raise InputError(f"{path}: holds several arrays; {what} must be one array")
    if arr.dtype.kind not in "iub":
        raise InputError(f"{path}: has dtype {arr.dtype}; {what} needs an integer dtype")
    return arr


class _Rows:
    """Reads rows start .. stop-1 of a ``.npy`` array with ``pread`` (C order), so the
    process holds one chunk at a time however large the file is; a Fortran-order array
    is sliced through its memory map instead."""

    def __init__(self, path, mm):
        self.path = path
        self.shape = tuple(int(x) for x in mm.shape)
        self.dtype = mm.dtype
        self.offset = int(mm.offset)
        self.fortran = bool(mm.flags.f_contiguous and not mm.flags.c_contiguous)
        self.mm = mm if self.fortran else None
        self.row = int(np.prod(self.shape[1:], dtype=np.int64))

    def read(self, start, stop):
        if self.fortran:
            return np.ascontiguousarray(self.mm[start:stop])
        count = (stop - start) * self.row
        nbytes = count * self.dtype.itemsize
        fd = os.open(self.path, os.O_RDONLY)
        try:
            buf = bytearray(nbytes)
            view = memoryview(buf)
            got = 0
            while got < nbytes:
                n = os.preadv(fd, [view[got:]], self.offset + start * self.row
                              * self.dtype.itemsize + got)
                if n == 0:
                    raise InputError(f"{self.path}: ends early (truncated .npy file)")
                got += n
        finally:
            os.close(fd)
        return np.frombuffer(buf, dtype=self.dtype, count=count).reshape(
            (stop - start,) + self.shape[1:])


class BulkInput:
    """An opened ``.npy`` stack and its sidecar (arrays memory-mapped for their
    headers, read a chunk at a time)."""

    def __init__(self, path, stack, sidecar, F, op, rhs, exponent, rhs_path=None):
        self.path = path
        self.rhs_path = rhs_path
        self.stack = stack
        self.sidecar = sidecar
        self.F = F
        self.op = op
        self.rhs = rhs
        self.exponent = exponent

    @property
    def count(self):
        return int(self.stack.shape[0])

    def task(self, start, stop):
        """Arguments of :func:`process_stack` for matrices start .. stop-1."""
        if not hasattr(self, "_rows"):
            self._rows = _Rows(self.path, self.stack)
            self._rhs_rows = None if self.rhs is None else _Rows(self.rhs_path, self.rhs)
        rhs = None if self.rhs is None else self._rhs_rows.read(start, stop)
        return (self.sidecar["field"], self.sidecar.get("modulus"), self.op.name,
                self.exponent, self._rows.read(start, stop), rhs, start)


def open_bulk(path, chunk_size=None, workers=1, remote_workers=False):
    """Open ``X.npy`` with its sidecar ``X.json`` and check that they agree.

    Parameters
    ----------
    path : str
    chunk_size : int, optional
        Matrices per chunk of the run that will read the stack; with it the memory the
        chunks in flight need is checked (:func:`chunk_workspace`).
    workers : int
        Worker processes (each holds one chunk while the reader holds two per worker).
    remote_workers : bool
        The workers run elsewhere (a Dask scheduler given by address): only the
        reader's buffers count against this machine's memory.

    Raises
    ------
    InputError
        Missing or unreadable files, an array that is not ``(N, m, n)`` integers, a
        sidecar that names no field or op, an op without a fixed-shape result, any
        stated count, shape, dtype that does not match the array, or a matrix size or
        chunk that would not fit in memory (the message carries the estimate).
    """
    path = os.fspath(path)
    base = path[:-4] if path.lower().endswith(".npy") else path
    side_path = base + ".json"
    stack = _load(path, "a stack of matrices")
    if not os.path.exists(side_path):
        raise InputError(f"{path}: needs a sidecar {side_path} naming at least 'field' "
                         "and 'op'")
    try:
        with open(side_path, "rb") as fh:
            sidecar = json.loads(fh.read())
    except RecursionError:
        raise InputError(f"{side_path}: not a readable JSON file (nested too deeply)") from None
    except (OSError, ValueError) as exc:
        raise InputError(f"{side_path}: not a readable JSON file "
                         f"({short_text(first_line(exc))})") from None
    if not isinstance(sidecar, dict):
        raise InputError(f"{side_path}: must hold one JSON object")
    mismatch = f"sidecar {side_path} does not match {path}"
    for key in ("field", "op"):
        if key not in sidecar:
            raise InputError(f"{side_path}: names no {key!r}")
    opname = sidecar["op"]
    if not isinstance(opname, str):
        raise InputError(f"{side_path}: op must be text such as 'inv', got "
                         f"{short_text(repr(opname))}")
    if opname not in OPERATIONS:
        raise InputError(f"{side_path}: unknown op {opname!r} (known: "
                         f"{', '.join(sorted(OPERATIONS))})")
    if opname not in BULK_OPERATIONS:
        raise InputError(f"{side_path}: op {opname!r} has no fixed-shape result, so it is "
                         f"not available for .npy input (use JSON Lines); .npy ops: "
                         f"{', '.join(BULK_OPERATIONS)}")
    op = OPERATIONS[opname]
    try:
        F = field_of(sidecar["field"], sidecar.get("modulus"))
    except InputError as exc:
        raise InputError(f"{side_path}: {exc}") from None
    if stack.ndim != 3:
        raise InputError(f"{path}: has shape {tuple(stack.shape)}; a stack of matrices "
                         "(N, m, n) is needed")
    N, m, n = (int(x) for x in stack.shape)
    if "count" in sidecar and (type(sidecar["count"]) is not int or sidecar["count"] != N):
        raise InputError(f"{mismatch}: count {short_text(repr(sidecar['count']))} in the "
                         f"sidecar, {N} matrices in the array")
    shape = sidecar.get("shape")
    if "shape" in sidecar and (type(shape) is not list
                               or [type(x) for x in shape] != [int, int] or shape != [m, n]):
        raise InputError(f"{mismatch}: shape {short_text(repr(shape))} in the sidecar, "
                         f"matrices of {m} x {n} in the array")
    if "dtype" in sidecar and sidecar["dtype"] != str(stack.dtype):
        raise InputError(f"{mismatch}: dtype {short_text(repr(sidecar['dtype']))} in the "
                         f"sidecar, {stack.dtype} in the array")
    if m == 0 or n == 0:
        raise InputError(f"{path}: holds empty matrices (shape {tuple(stack.shape)})")
    if op.square and m != n:
        raise InputError(f"{path}: op {opname!r} needs square matrices, the stack holds "
                         f"{m} x {n}")
    rhs = rhs_path = None
    if opname == "solve":
        if "rhs" not in sidecar:
            raise InputError(f"{side_path}: op 'solve' needs 'rhs', the file of "
                             "right-hand sides (N, m)")
        if not isinstance(sidecar["rhs"], str) or not sidecar["rhs"]:
            raise InputError(f"{side_path}: rhs must name a .npy file, got "
                             f"{short_text(repr(sidecar['rhs']))}")
        rhs_path = os.path.join(os.path.dirname(os.path.abspath(side_path)), sidecar["rhs"])
        rhs = _load(rhs_path, "the right-hand sides")
        if rhs.shape != (N, m):
            raise InputError(f"{rhs_path}: has shape {tuple(rhs.shape)}; the right-hand "
                             f"sides of {path} need ({N}, {m})")
    exponent = None
    if opname == "power":
        if "exponent" not in sidecar:
            raise InputError(f"{side_path}: op 'power' needs 'exponent'")
        exponent = sidecar["exponent"]
        if isinstance(exponent, bool) or not isinstance(exponent, (int, str)):
            raise InputError(f"{side_path}: exponent must be an integer or text such as "
                             "'2^100'")
        if isinstance(exponent, str):
            from ...io.spec import parse_int_expr
            try:
                exponent = parse_int_expr(exponent, "exponent")
            except InputError as exc:
                raise InputError(f"{side_path}: {exc}") from None
    bulk = BulkInput(path, stack, sidecar, F, op, rhs, exponent, rhs_path=rhs_path)
    # One matrix's own work (the per-matrix path of large matrices runs the field
    # operation, whose workspace is that of the field), then the chunks in flight.
    if opname in _FIELD_WORKSPACE:
        F._check_workspace(_FIELD_WORKSPACE[opname], (m, n),
                           f"{path}: op {opname!r} on one {m} x {n} matrix over {F.spec}")
    if chunk_size is not None:
        chunk_workspace(bulk, chunk_size, workers, remote_workers).check(
            "fewer matrices per chunk, or fewer workers, need less")
    return bulk


_FIELD_WORKSPACE = {"inv": "inv", "det": "det", "rank": "rank", "solve": "solve",
                    "charpoly": "charpoly", "power": "power"}


def chunk_workspace(bulk, chunk_size, workers=1, remote_workers=False):
    """The memory a run of ``bulk`` in chunks of ``chunk_size`` matrices holds at once,
    as a :class:`gfla.limits.Workspace` (not yet checked).

    Per matrix of a chunk: the rows read (the stack's dtype), their uint64 copy, the
    result (uint64 from the kernels, its copy in the result dtype). One process runs a
    chunk at a time; with ``workers`` > 1 the reader also holds ``2 * workers`` chunks
    read ahead.
    """
    N, m, n = (int(x) for x in bulk.stack.shape)
    K = max(1, min(N, int(chunk_size)))
    shape, dtype, _ = result_layout(bulk)
    per_result = int(np.prod(shape[1:], dtype=np.int64)) if len(shape) > 1 else 1
    item = bulk.stack.dtype.itemsize
    if workers <= 1:            # this process reads a chunk and computes it
        ahead, running, held = 1, 1, 1
    else:                       # the reader's chunks in flight, and each worker's own
        ahead = 2 * workers
        running = 0 if remote_workers else workers
        held = ahead + running
    w = Workspace(f"{bulk.path}: chunks of {K} matrices of {m} x {n} "
                  f"({ahead} read, {running} computing at once)")
    w.add(K * held, (m, n), item, "read matrix")
    w.add(K * running, (m, n), 8, "uint64 matrix")
    w.add(K * running, (per_result,), 8 + dtype.itemsize, "result")
    if bulk.rhs is not None:
        w.add(K * held, (m,), bulk.rhs.dtype.itemsize, "right-hand side")
    return w


def element_dtype(F):
    """The smallest unsigned dtype holding every element of F."""
    for dt in (np.uint8, np.uint16, np.uint32):
        if F.size <= 1 + int(np.iinfo(dt).max):
            return np.dtype(dt)
    return np.dtype(np.uint64)


def result_layout(bulk):
    """(shape, dtype, description) of the result array for a bulk input."""
    F = bulk.F
    N, m, n = (int(x) for x in bulk.stack.shape)
    kind = bulk.op.bulk_shape
    el = element_dtype(F)
    if kind == "matrix":
        return (N, n, n), el, "one matrix per input matrix"
    if kind == "scalar":
        if bulk.op.name == "rank":
            return (N,), np.dtype(np.int64), "the rank of each matrix"
        return (N,), el, f"the {bulk.op.name} of each matrix"
    if kind == "vector":
        return (N, n), el, ("a particular solution of each system (free unknowns 0; "
                            "the nullspace is not stored: use JSON Lines for it)")
    if kind == "poly":
        return (N, n + 1), el, "charpoly coefficients, highest degree first"
    raise AssertionError(kind)  # pragma: no cover


class StackResult:
    """Output of one bulk chunk: the result rows and the error lines."""

    __slots__ = ("start", "values", "errors", "failed", "kinds")

    def __init__(self, start, values, errors, failed, kinds):
        self.start = start
        self.values = values
        self.errors = errors
        self.failed = failed
        self.kinds = kinds

    def __reduce__(self):
        return (StackResult, (self.start, self.values, self.errors, self.failed, self.kinds))


def process_stack(spec, modulus, opname, exponent, stack, rhs, start, threads=None):
    """Run one chunk of a bulk input: matrices ``start .. start + len(stack) - 1``.

    Returns
    -------
    StackResult
        ``values``: the results (zeros where a matrix failed), ``errors``: bytes of
        JSON Lines ``{"index", "op", "error"}``.
    """
    from ...linalg import batched
    from ...linalg.eliminate import left_certificate
    from .ops import run_group
    limit_threads(threads)
    F = field_of(spec, modulus)
    op = OPERATIONS[opname]
    K, m, n = stack.shape
    bulk = BulkInput(None, stack, None, F, op, None, exponent)
    shape, dtype, _ = result_layout(bulk)
    values = np.zeros(shape, dtype=dtype)
    errors = {}
    bad = _bad_entries(stack, F.size, (1, 2))
    if rhs is not None:
        bad |= _bad_entries(rhs, F.size, (1,))
    for k in np.flatnonzero(bad):
        try:
            F.asarray(stack[k], name="matrix")
            if rhs is not None:
                F.asarray(rhs[k], name="rhs", ndim=1)
        except InputError as exc:
            errors[int(k)] = exc
    good = np.flatnonzero(~bad)
    if len(good):
        U = np.ascontiguousarray(stack[good], dtype=np.uint64)
        if opname == "inv":
            r = batched.inv(F, U)
            values[good] = r.inverse
            for j in np.flatnonzero(r.singular):
                errors[int(good[j])] = batched.singular_error(F, r, j)
        elif opname == "det":
            values[good] = batched.det(F, U)
        elif opname == "rank":
            values[good] = batched.rank(F, U)
        elif opname == "solve":
            V = np.ascontiguousarray(rhs[good], dtype=np.uint64)
            s = batched.solve(F, U, V)
            values[good] = s.particular
            for j in np.flatnonzero(~s.consistent):
                y = left_certificate(F, U[j], V[j]) if F.is_field else None
                errors[int(good[j])] = InconsistentSystemError(
                    "the system has no solution" + (
                        "" if y is None else
                        f": y A = 0 and y b != 0 for y = {[int(t) for t in y]}"),
                    left_vector=y)
        else:
            recs = [{"exponent": exponent}] * len(good)
            items, failures = run_group(F, op, U, recs)
            for j, item in enumerate(items):
                if j in failures:
                    errors[int(good[j])] = failures[j]
                else:
                    values[good[j]] = np.array(item, dtype=object).astype(dtype)
    lines = []
    kinds = {}
    for k in sorted(errors):
        exc = errors[k]
        obj = error_object(exc)
        kinds[obj["kind"]] = kinds.get(obj["kind"], 0) + 1
        values[k] = 0
        lines.append(json.dumps({"index": start + k, "op": opname, "error": obj}) + "\n")
    return StackResult(start, values, "".join(lines).encode("utf-8"), len(errors), kinds)


def _bad_entries(arr, size, axes):
    if arr.dtype.kind == "b":
        return np.zeros(arr.shape[0], dtype=bool)
    if arr.dtype.kind == "i":
        bad = arr < 0
        if size <= np.iinfo(arr.dtype).max:
            bad |= arr >= size
    else:
        if size <= np.iinfo(arr.dtype).max:
            bad = arr >= size
        else:
            return np.zeros(arr.shape[0], dtype=bool)
    return bad.any(axis=axes)
