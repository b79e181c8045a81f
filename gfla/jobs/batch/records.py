"""JSON Lines records: reading one chunk of lines, grouping the records into stacks,
and writing one result or error line per record.

A chunk is a run of whole input lines (bytes). :func:`process_lines` turns it into the
output lines of its records, in input order; it is a pure function of the bytes and the
number of the first line, so any worker (a thread, a process, a Dask worker) gives the
same output and a chunk that is run twice gives the same bytes twice.

Record (one JSON object per line; other keys are ignored)::

    {"id": "r1", "field": "GF(2^8)", "modulus": "0x11b", "op": "inv",
     "matrix": [["02", "03"], ["01", "01"]]}

Result and error lines::

    {"id": "r1", "op": "inv", "result": [[1, 3], [1, 2]]}
    {"id": "r2", "op": "inv", "error": {"kind": "SingularMatrixError", "message": "...",
     "certificate": {"kernel_vector": [1, 1]}}, "line": 2}
"""

import gc
import itertools
import json
import re
from collections import Counter

import numpy as np

from ...errors import GflaError, InputError, MathError
from .ops import OPERATIONS, run_group

__all__ = ["ChunkResult", "process_lines", "scan_ids", "id_hashes", "matrix_rows", "vector_entries", "error_object",
           "field_of", "limit_threads"]

_HEX = re.compile(r"(?:0[xX])?[0-9a-fA-F]+\Z")
_MAX_HEX_TEXT = 200
_MAX_ENTRY_BITS = 1024
_quote = json.encoder.encode_basestring_ascii
# Results whose JSON is what Python prints for them (ints and lists of ints).
_PRINTED_AS_JSON = frozenset(("inv", "det", "rank", "nullspace", "order", "power", "mul"))


class ChunkResult:
    """Output of one chunk: the output bytes, the counts for the summary, and the ids.

    ``ids`` is None or a tuple of four arrays, one entry per record whose line is a
    JSON object with a valid id: the id's hash (:func:`id_hashes`), its input line, the
    byte offset of that line in the chunk, and its output line (slot) in ``data``.
    """

    __slots__ = ("data", "records", "failed", "kinds", "ids")

    def __init__(self, data, records, failed, kinds, ids=None):
        self.data = data
        self.records = records
        self.failed = failed
        self.kinds = kinds
        self.ids = ids

    def __reduce__(self):
        return (ChunkResult, (self.data, self.records, self.failed, self.kinds, self.ids))


def id_hashes(rids):
    """uint64 hashes of ids (strings or integers), computed by one compiled call.

    The integer 1 and the string "1" hash alike: a hash only routes an id to its slot
    (:mod:`gfla.jobs.batch.ids` compares the ids themselves, types included).
    """
    from ...kernels.batch import id_hashes as kernel
    keys = [r if type(r) is str else str(r) for r in rids]
    text = "".join(keys)
    if text.isascii():
        buf = text.encode("ascii")
        lengths = [len(k) for k in keys]
    else:
        parts = [k.encode("utf-8", "surrogatepass") for k in keys]
        buf = b"".join(parts)
        lengths = [len(b) for b in parts]
    ends = np.cumsum(np.array(lengths, dtype=np.int64)) if keys else np.zeros(0, np.int64)
    return kernel(np.frombuffer(buf, dtype=np.uint8), ends)


_FIELDS = {}


def field_of(spec, modulus):
    """The field of a record (cached per process, refusals too); raises ``InputError``."""
    try:
        key = (spec, modulus)
        hash(key)
    except TypeError:
        raise InputError("modulus must be an integer or hex text such as '0x11b'") from None
    F = _FIELDS.get(key)
    if F is None:
        import gfla
        if not isinstance(spec, str):
            F = "field must be text such as 'GF(2^8)'"
        elif modulus is not None and (isinstance(modulus, bool)
                                      or not isinstance(modulus, (int, str))):
            F = "modulus must be an integer or hex text such as '0x11b'"
        else:
            try:
                F = gfla.field(spec, modulus=modulus)
            except InputError as exc:
                F = str(exc)
        if len(_FIELDS) > 10000:
            _FIELDS.clear()
        _FIELDS[key] = F
    if isinstance(F, str):
        # A new exception each time: re-raising one instance would grow its traceback.
        raise InputError(F)
    return F


def limit_threads(threads):
    """Cap the compiled kernels' threads in this process (for worker processes)."""
    if threads is None:
        return
    import numba
    numba.set_num_threads(max(1, min(int(threads), numba.config.NUMBA_NUM_THREADS)))


# --------------------------------------------------------------------------- entries

def _entry(x, name, where):
    if type(x) is int:
        if x.bit_length() > _MAX_ENTRY_BITS:
            raise InputError(f"{name}{where}: an integer of {x.bit_length()} bits is far "
                             "outside any field or ring")
        return x
    if isinstance(x, str):
        s = x.strip()
        if len(s) > _MAX_HEX_TEXT:
            # Far above any element (2^64 has 16 hex digits); a huge number would also
            # be too long to print in the range message.
            raise InputError(f"{name}{where}: an entry of {len(s)} characters is too long")
        if _HEX.match(s):
            return int(s, 16)
        raise InputError(f"{name}{where}: {x[:24]!r} is not a hexadecimal number")
    if isinstance(x, bool):
        raise InputError(f"{name}{where}: {str(x).lower()} is not an integer")
    raise InputError(f"{name}{where}: {json.dumps(x)[:24]} is not an integer")


def matrix_rows(value, name="matrix"):
    """A record's matrix as rows of Python ints.

    Entries are JSON integers, or strings read as hexadecimal (``"1f"`` or ``"0x1f"``).
    Raises ``InputError`` naming the row and column (from 1).
    """
    if not isinstance(value, list) or not value:
        raise InputError(f"{name} must be a non-empty list of rows")
    width = None
    rows = []
    for i, row in enumerate(value, start=1):
        if not isinstance(row, list):
            raise InputError(f"{name} row {i} is not a list of entries")
        if width is None:
            width = len(row)
            if width == 0:
                raise InputError(f"{name} row 1 is empty")
        elif len(row) != width:
            raise InputError(f"{name} row {i} has {len(row)} entries, row 1 has {width}")
        rows.append([_entry(x, name, f" row {i}, column {j}") for j, x in enumerate(row, 1)])
    return rows


def vector_entries(value, name="rhs"):
    """A record's vector as a list of Python ints (same entry rules as a matrix)."""
    if not isinstance(value, list) or not value:
        raise InputError(f"{name} must be a non-empty list of entries")
    return [_entry(x, name, f" entry {j}") for j, x in enumerate(value, start=1)]


def _stack_matrices(mats, shape):
    """Stack a group's matrices (nested lists) as an integer array (K, m, n), or None
    when numpy cannot do it cleanly (ragged rows, strings, floats, huge or mixed
    integers): those groups are converted entry by entry, with messages.

    The rows are flattened before numpy sees them (measured 1.0 us per 4 x 4 record
    against 2.9 us for ``np.array`` on the nested lists)."""
    rows_per, cols = shape
    chain = itertools.chain.from_iterable
    try:
        if set(map(len, mats)) != {rows_per}:
            return None
        rows = list(chain(mats))
        if set(map(len, rows)) != {cols}:
            return None
        arr = np.array(list(chain(rows)))
    except (ValueError, OverflowError, TypeError):
        return None
    if arr.ndim != 1 or arr.dtype.kind not in "iu" or arr.size != len(mats) * rows_per * cols:
        return None
    return arr.reshape(len(mats), rows_per, cols)


def _out_of_range(arr, size, axes):
    if arr.dtype.kind == "i":
        bad = arr < 0
        if size <= np.iinfo(np.int64).max:
            bad |= arr >= size
    elif size <= np.iinfo(np.uint64).max:
        bad = arr >= np.uint64(size)
    else:
        return np.zeros(arr.shape[0], dtype=bool)
    return bad.any(axis=axes)


# --------------------------------------------------------------------------- lines

def error_object(exc):
    """``{"kind", "message", "certificate"}`` for an exception raised by one record."""
    if isinstance(exc, GflaError):
        kind = type(exc).__name__
        message = str(exc)
        cert = exc.certificate() if isinstance(exc, MathError) else {}
    else:
        kind = "InternalError"
        message = f"{type(exc).__name__}: {exc}"
        cert = {}
    from .ops import to_json
    return {"kind": kind, "message": " ".join(message.split()), "certificate": to_json(cert)}


def _error_line(rid, op, line_no, exc):
    obj = {"id": rid, "op": op, "error": error_object(exc), "line": line_no}
    return json.dumps(obj) + "\n"


class _Output:
    """The output lines of a chunk, one slot per record, and the failure counts."""

    __slots__ = ("slots", "kinds")

    def __init__(self):
        self.slots = []
        self.kinds = Counter()

    def fail(self, slot, rid, op, line_no, exc):
        if isinstance(rid, bool) or not isinstance(rid, (str, int)):
            rid = None
        self.slots[slot] = _error_line(rid, op if isinstance(op, str) else None, line_no, exc)
        self.kinds[type(exc).__name__ if isinstance(exc, GflaError) else "InternalError"] += 1


# JSON's whitespace (RFC 8259, section 2): str.strip() would also drop characters such as
# U+001C or U+2028, turning a line that holds only them into a blank line instead of an
# error line.
_JSON_SPACE = " \t\r\n"
_JSON_SPACE_BYTES = b" \t\r\n"
_scan_once = json.decoder.JSONDecoder().scan_once


def _parse(text, line_no):
    """The record object of a line (str, stripped); raises InputError."""
    try:
        obj, end = _scan_once(text, 0)
    except (StopIteration, ValueError, RecursionError):
        end = -1
    if end != len(text):
        try:
            json.loads(text)
        except RecursionError:
            raise InputError(f"line {line_no} is not valid JSON: nested too deeply") from None
        except json.JSONDecodeError as exc:
            raise InputError(f"line {line_no} is not valid JSON: {exc.msg.lower()} "
                             f"(column {exc.colno})") from None
        except ValueError:
            # Python refuses to read integers of more than 4300 digits from text.
            raise InputError(f"line {line_no} is not valid JSON for gfla: it holds an "
                             "integer of more than 4300 digits") from None
        raise InputError(f"line {line_no} is not valid JSON")  # pragma: no cover
    if type(obj) is not dict:
        raise InputError(f"line {line_no} is not a JSON object")
    return obj


_SALVAGE = {key: re.compile(rb'"' + key.encode() + rb'"\s*:\s*("(?:[^"\\]|\\.)*"|-?[0-9]+)')
            for key in ("id", "op")}


def _salvage(raw):
    """Best effort: the id and op of a line that is not valid JSON, read from its text
    (so the error line can name the record)."""
    found = []
    for key in ("id", "op"):
        m = _SALVAGE[key].search(raw)
        value = None
        if m:
            try:
                value = json.loads(m.group(1))
            except ValueError:
                value = None
        found.append(value)
    rid, op = found
    return rid, op if isinstance(op, str) else None


def _check_id(obj):
    if "id" not in obj:
        raise InputError("record has no 'id'")
    rid = obj["id"]
    if isinstance(rid, bool) or not isinstance(rid, (str, int)):
        raise InputError("id must be a string or an integer")
    return rid


def _lines_of(data):
    """The lines of a chunk as str; a line that is not UTF-8 is returned as bytes."""
    try:
        lines = data.decode("utf-8").split("\n")
    except UnicodeDecodeError:
        lines = []
        for raw in data.split(b"\n"):
            try:
                lines.append(raw.decode("utf-8"))
            except UnicodeDecodeError:
                lines.append(raw)
    if lines and not lines[-1]:
        lines.pop()
    return lines


def process_lines(data, first_line, threads=None):
    """Run every record of a chunk of JSON Lines.

    Parameters
    ----------
    data : bytes
        Whole lines (the last may lack its newline at the end of the input).
    first_line : int
        Number of the first line in the input (from 1), for error lines.
    threads : int, optional
        Cap on the compiled kernels' threads in this process.

    Returns
    -------
    ChunkResult
        ``data``: one output line per record (blank lines give none), in input order.
    """
    limit_threads(threads)
    # The records are acyclic (dicts and lists from JSON); the cyclic collector would
    # otherwise traverse every live object of the process many times per chunk, which
    # measured 2.5x slower parsing once numba is imported.
    collecting = gc.isenabled()
    gc.disable()
    try:
        return _process_lines(data, first_line)
    finally:
        if collecting:
            gc.enable()


def _line_starts(data, lines):
    """Byte offset in ``data`` of each line of :func:`_lines_of`."""
    if data.isascii():
        sizes = [len(t) + 1 for t in lines]
    else:
        sizes = [(len(t) if type(t) is bytes else len(t.encode("utf-8", "surrogatepass")))
                 + 1 for t in lines]
    return [0, *itertools.accumulate(sizes)]


def _process_lines(data, first_line):
    out = _Output()
    slots = out.slots
    groups = {}
    scan = _scan_once
    lines = _lines_of(data)
    starts = _line_starts(data, lines)
    ids = ([], [], [])  # per record with an id: the id, its line in the chunk, its slot
    id_rids, id_lines, id_slots = ids
    for offset, text in enumerate(lines):
        text = text.strip(_JSON_SPACE if type(text) is str else _JSON_SPACE_BYTES)
        if not text:
            continue
        slot = len(slots)
        slots.append(None)
        try:
            obj, end = scan(text, 0)
        except (StopIteration, ValueError, TypeError, RecursionError):
            obj = end = None
        if end != len(text) or type(obj) is not dict:
            _reject(out, slot, text, first_line + offset, None)
            continue
        rid = obj.get("id")
        if type(rid) is str or type(rid) is int:
            id_rids.append(rid)
            id_lines.append(offset)
            id_slots.append(slot)
        opname = obj.get("op")
        mat = obj.get("matrix")
        if ((type(rid) is str or type(rid) is int) and type(opname) is str
                and type(mat) is list and mat and type(mat[0]) is list):
            key = (obj.get("field"), obj.get("modulus"), opname, len(mat), len(mat[0]))
            member = (slot, first_line + offset, rid, obj, "true" in text or "false" in text)
            try:
                groups[key].append(member)
                continue
            except KeyError:
                groups[key] = [member]
                continue
            except TypeError:  # an unhashable modulus; reported below
                pass
        _reject(out, slot, text, first_line + offset, obj)
    for (spec, modulus, opname, rows, cols), members in groups.items():
        _run_group_lines(spec, modulus, opname, (rows, cols), members, out)
    failed = sum(out.kinds.values())
    return ChunkResult("".join(slots).encode("utf-8"), len(slots), failed, dict(out.kinds),
                       _id_arrays(ids, starts, first_line))


def mark_duplicates(data, found):
    """Output lines of a chunk with the records whose id was seen before replaced by
    error lines.

    Parameters
    ----------
    data : bytes
        ``ChunkResult.data``.
    found : list of (int, int, int)
        (output slot, input line, line of the first record with that id), as from
        :meth:`gfla.jobs.batch.ids.IdRegistry.add`.

    Returns
    -------
    (bytes, int, Counter)
        The new lines, the change in the number of failed records and in the failure
        counts by kind (a count may go down: a record that had failed for another
        reason now fails as a duplicate).
    """
    lines = data.split(b"\n")
    failed = 0
    kinds = Counter()
    for slot, line, first in found:
        old = json.loads(lines[slot])
        if "error" in old:
            kinds[old["error"]["kind"]] -= 1
        else:
            failed += 1
        rid = old["id"]
        exc = InputError(f"duplicate id {json.dumps(rid)}: the record on line {first} has "
                         "the same id, so this one is not run")
        kinds["InputError"] += 1
        lines[slot] = _error_line(rid, old.get("op"), line, exc)[:-1].encode("utf-8")
    return b"\n".join(lines), failed, kinds


def _id_arrays(ids, starts, first_line):
    rids, where, slots = ids
    if not rids:
        return None
    where = np.array(where, dtype=np.int64)
    starts = np.fromiter(starts, dtype=np.int64, count=len(starts))
    return (id_hashes(rids), where + first_line, starts[where],
            np.array(slots, dtype=np.int64))


def scan_ids(data, first_line, threads=None):
    """The ``ids`` of :class:`ChunkResult` for a chunk of lines, without running the
    records (rebuilding the ids of a run that is resumed)."""
    limit_threads(threads)
    lines = _lines_of(data)
    starts = _line_starts(data, lines)
    ids = ([], [], [])
    slot = 0
    for offset, text in enumerate(lines):
        text = text.strip(_JSON_SPACE if type(text) is str else _JSON_SPACE_BYTES)
        if not text:
            continue
        try:
            obj = json.loads(text)
        except (ValueError, TypeError, RecursionError):
            obj = None
        if type(obj) is dict:
            rid = obj.get("id")
            if type(rid) is str or type(rid) is int:
                ids[0].append(rid)
                ids[1].append(offset)
                ids[2].append(slot)
        slot += 1
    return _id_arrays(ids, starts, first_line)


def _reject(out, slot, text, line_no, obj):
    """Fill the error line of a record that is not well formed."""
    rid = opname = None
    try:
        if type(text) is bytes:
            raise InputError(f"line {line_no} is not valid UTF-8")
        if obj is None:
            obj = _parse(text, line_no)
        rid = obj.get("id")
        opname = obj.get("op")
        _check_id(obj)
        if not isinstance(opname, str):
            raise InputError("record has no 'op'" if opname is None
                             else "op must be text such as 'inv'")
        mat = obj.get("matrix")
        if type(mat) is not list or not mat or type(mat[0]) is not list:
            raise InputError("record has no 'matrix'" if mat is None
                             else "matrix must be a non-empty list of rows")
        field_of(obj.get("field"), obj.get("modulus"))
        raise InputError("record is not well formed")  # pragma: no cover
    except InputError as exc:
        if obj is None:
            rid, opname = _salvage(text if type(text) is bytes else text.encode())
        out.fail(slot, rid, opname, line_no, exc)


def _run_group_lines(spec, modulus, opname, shape, members, out):
    """Check what a group shares (field, op, shape), then each member's own keys."""
    try:
        op = OPERATIONS.get(opname)
        if op is None:
            raise InputError(f"unknown op {opname!r} (known: "
                             f"{', '.join(sorted(OPERATIONS))})")
        if spec is None:
            raise InputError("record has no 'field'")
        F = field_of(spec, modulus)
        if op.square and shape[0] != shape[1]:
            raise InputError(f"op {opname!r} needs a square matrix, got "
                             f"{shape[0]} x {shape[1]}")
    except InputError as exc:
        for m in members:
            out.fail(m[0], m[2], opname, m[1], exc)
        return
    if op.extras:
        keep = []
        for m in members:
            missing = [key for key in op.extras if key not in m[3]]
            if missing:
                out.fail(m[0], m[2], opname, m[1],
                         InputError(f"op {opname!r} needs {missing[0]!r}"))
            else:
                keep.append(m)
        members = keep
    if members:
        _run_members(F, op, shape, members, out)


def _run_members(F, op, shape, members, out):
    """Validate a group's matrices, stack the good ones, run them, fill the slots.

    ``members`` are tuples (slot, line, id, record, strict): strict records (their line
    holds ``true`` or ``false``) are converted entry by entry, so that a JSON boolean is
    refused instead of being read as 0 or 1 by numpy.
    """
    name = op.name
    fast = [m for m in members if not m[4]]
    slow = [m for m in members if m[4]]
    good = []
    parts = []
    arr = _stack_matrices([m[3]["matrix"] for m in fast], shape) if fast else None
    if arr is not None and arr.shape[1:] == shape:
        bad = _out_of_range(arr, F.size, (1, 2))
        if bad.any():
            for k in np.flatnonzero(bad):
                m = fast[k]
                try:
                    F.asarray(arr[k], name="matrix")
                except InputError as exc:
                    out.fail(m[0], m[2], name, m[1], exc)
            keep = ~bad
            good = [m for m, ok in zip(fast, keep.tolist()) if ok]
            if good:
                parts.append(arr[keep].astype(np.uint64))
        else:
            good = fast
            parts.append(arr.astype(np.uint64))
    else:
        slow = members
    arrays = []
    for m in slow:
        try:
            rows = matrix_rows(m[3]["matrix"])
            U = F._validate(rows, "matrix", 2)
            if U.shape != shape:
                raise InputError(f"matrix has {U.shape[0]} rows of {U.shape[1]} entries")
        except InputError as exc:
            out.fail(m[0], m[2], name, m[1], exc)
            continue
        good.append(m)
        arrays.append(U)
    if arrays:
        parts.append(np.stack(arrays))
    if not good:
        return
    stack = parts[0] if len(parts) == 1 else np.concatenate(parts)
    rhs = None
    if name == "solve":
        stack, good, rhs = _solve_rhs(F, shape, stack, good, out)
        if not good:
            return
    records = None if op.batched else [m[3] for m in good]
    values, errors = run_group(F, op, stack, records, rhs=rhs)
    for k, exc in errors.items():
        m = good[k]
        out.fail(m[0], m[2], name, m[1], exc)
    slots = out.slots
    quote = _quote
    opname = quote(name)
    if isinstance(values, np.ndarray):
        # One %-template per group: much faster than tolist() + repr per record.
        template = ('{"id": %s, "op": ' + opname + ', "result": '
                    + _template(values.shape[1:]) + '}\n')
        rows = values.reshape(len(good), -1).tolist()
        for k, (m, row) in enumerate(zip(good, rows)):
            if errors and k in errors:
                continue
            rid = m[2]
            slots[m[0]] = template % (quote(rid) if type(rid) is str else str(rid), *row)
        return
    printed = name in _PRINTED_AS_JSON
    for k, m in enumerate(good):
        if k not in errors:
            value = values[k]
            text = repr(value) if printed else json.dumps(value)
            rid = m[2]
            slots[m[0]] = (f'{{"id": {quote(rid) if type(rid) is str else str(rid)}, '
                           f'"op": {opname}, "result": {text}}}\n')


def _template(shape):
    """%-format text of a JSON integer array of the given shape."""
    if not shape:
        return "%d"
    inner = _template(shape[1:])
    return "[" + ", ".join([inner] * shape[0]) + "]"


def _solve_rhs(F, shape, stack, good, out):
    keep = []
    vectors = []
    for k, m in enumerate(good):
        try:
            v = F._validate(vector_entries(m[3]["rhs"]), "rhs", 1)
            if v.shape[0] != shape[0]:
                raise InputError(f"rhs has {v.shape[0]} entries, the matrix has "
                                 f"{shape[0]} rows")
        except InputError as exc:
            out.fail(m[0], m[2], "solve", m[1], exc)
            continue
        keep.append(k)
        vectors.append(v)
    if not vectors:
        return stack, [], None
    if len(keep) == len(good):
        return stack, good, np.stack(vectors)
    idx = np.array(keep, dtype=np.int64)
    return stack[idx], [good[k] for k in keep], np.stack(vectors)
