"""Memory checks made before allocating: a declared size that cannot fit is refused.

Sizes reach gfla before the data does: the header of a ``.npy`` file states a shape, a
product of an m x k and a k x n matrix makes an m x n one, an erasure code of k + m
shards holds a (k + m) x k generator and k + m shard buffers, an inverse keeps a few
n x n work matrices alive. Each of these is checked here, in O(1), against the memory
the machine has available, and refused with an :class:`~gfla.errors.InputError` that
carries the estimate::

    inverse of a 200000 x 200000 matrix over GF(2305843009213693951) needs 1.6 TB
    (5 matrices of 200000 x 200000 entries, 8 bytes each), more than the 23.9 GB of
    memory available (MemAvailable in /proc/meminfo); decimal units, 1 TB = 10^12 bytes

Sizes in messages are decimal (1 kB = 10^3 bytes, 1 MB = 10^6, 1 GB = 10^9,
1 TB = 10^12). An estimate counts the arrays an operation keeps alive at its peak
(``matrices`` x rows x columns x bytes per entry). The numbers of arrays are the
callers' (each family's figures are in ``gfla.fields``: ``Field._WORKSPACE``), taken
from measured peaks and rounded down, so an estimate errs low: a refusal means at least
about that much would be needed, and a size that passes can still run out of memory
(other processes take memory meanwhile, and a peak can differ at other sizes).

Bytes per entry
---------------
============  ===============  ============================================
family        arrays in/out    inside the kernels
============  ===============  ============================================
GF(2)         uint8 0/1 (1 B)  bit-packed rows, 64 entries per uint64 word
GF(2^k)       int64 (8 B)      uint64 (8 B)
GF(p)         int64 (8 B)      uint64 (8 B)
Z/n           int64 or uint64  uint64 (8 B)
============  ===============  ============================================

Available memory (:func:`available_memory`)
-------------------------------------------
The environment variable ``GFLA_MEMORY_LIMIT`` (bytes, or a number with a unit: ``500M``,
``2G``, ``1.5T`` in decimal units, ``512Mi``, ``2Gi`` in binary ones) sets it outright; it
is meant for tests and for sharing a machine. Otherwise it is the smallest of
``MemAvailable`` in ``/proc/meminfo`` (or free physical pages from ``os.sysconf`` when
there is no ``/proc``), the room left under a cgroup memory limit, and the address-space
limit (``ulimit -v``). When none of these can be read nothing is refused.

This module imports nothing but the standard library and ``gfla.errors``, so every layer
may use it (it sits below the fields).
"""

import math
import os
import re
import time
import warnings

from .errors import InputError, file_error

__all__ = ["ENV_VARIABLE", "ALWAYS_FITS", "available_memory", "parse_size", "format_bytes",
           "Workspace", "fits", "check_memory", "check_matrices", "check_text_output",
           "check_npy_header", "read_npy_header", "load_npy", "short_text", "first_line"]

ENV_VARIABLE = "GFLA_MEMORY_LIMIT"

_UNITS = {"": 1, "k": 10**3, "m": 10**6, "g": 10**9, "t": 10**12, "p": 10**15,
          "ki": 1 << 10, "mi": 1 << 20, "gi": 1 << 30, "ti": 1 << 40, "pi": 1 << 50}
_LIMIT_TEXT = re.compile(r"\s*([0-9]+(?:\.[0-9]*)?)\s*([kKmMgGtTpP]i?)?[bB]?\s*\Z")
# cgroup files that state "no limit" with a huge number rather than "max"
_NO_LIMIT = 1 << 60


def parse_size(text, what=ENV_VARIABLE):
    """Bytes from ``"1000000"``, ``"500M"``, ``"2G"``, ``"1.5T"`` (decimal units) or
    ``"512Mi"``, ``"2Gi"`` (binary units); a trailing ``B`` is allowed.

    >>> parse_size("2G"), parse_size("1Ki")
    (2000000000, 1024)
    """
    match = _LIMIT_TEXT.match(str(text))
    if not match:
        raise InputError(f"{what} = {text!r} is not a size (e.g. 500M, 2G, 512Mi, or bytes)")
    unit = (match.group(2) or "").lower()
    return int(float(match.group(1)) * _UNITS[unit])


def _meminfo_available():
    try:
        with open("/proc/meminfo", "rb") as fh:
            for line in fh:
                if line.startswith(b"MemAvailable:"):
                    parts = line.split()
                    scale = 1024 if parts[2:3] == [b"kB"] else 1  # /proc writes KiB as kB
                    return int(parts[1]) * scale
    except (OSError, ValueError, IndexError):
        return None
    return None


def _sysconf_available():
    try:
        pages = os.sysconf("SC_AVPHYS_PAGES")
        size = os.sysconf("SC_PAGE_SIZE")
    except (ValueError, OSError, AttributeError):
        return None
    if pages <= 0 or size <= 0:
        return None
    return pages * size


def _read_int(path):
    try:
        with open(path, "rb") as fh:
            text = fh.read().strip()
    except OSError:
        return None
    if text == b"max":
        return None
    try:
        value = int(text)
    except ValueError:
        return None
    return None if value >= _NO_LIMIT else value


def _cgroup_room():
    """Bytes left under this process's cgroup memory limit (v2, else v1), or None."""
    for limit_file, usage_file in (("/sys/fs/cgroup/memory.max", "/sys/fs/cgroup/memory.current"),
                                   ("/sys/fs/cgroup/memory/memory.limit_in_bytes",
                                    "/sys/fs/cgroup/memory/memory.usage_in_bytes")):
        limit = _read_int(limit_file)
        if limit is not None:
            usage = _read_int(usage_file) or 0
            return max(0, limit - usage)
    return None


def _address_space_room():
    try:
        import resource
        soft, _ = resource.getrlimit(resource.RLIMIT_AS)
    except (ImportError, ValueError, OSError, AttributeError):
        return None
    if soft == resource.RLIM_INFINITY or soft < 0:
        return None
    return soft


# The machine's figures are re-read at most this often: reading them costs about 50
# microseconds, which would double the time of a 4 x 4 inverse.
_CACHE_SECONDS = 0.5
_cache = [float("-inf"), None]


def available_memory():
    """``(bytes, source)``: the memory gfla may allocate, and where the figure comes from.

    ``bytes`` is None when nothing could be read (then no check refuses anything). The
    machine's figures are cached for ``_CACHE_SECONDS``; ``GFLA_MEMORY_LIMIT`` is read
    on every call.

    Raises
    ------
    InputError
        When ``GFLA_MEMORY_LIMIT`` is set but is not a size.
    """
    text = os.environ.get(ENV_VARIABLE, "").strip()
    if text:
        return parse_size(text), f"{ENV_VARIABLE}={text}"
    now = time.monotonic()
    if now < _cache[0]:
        return _cache[1]
    _cache[1] = _machine_memory()
    _cache[0] = now + _CACHE_SECONDS
    return _cache[1]


def _machine_memory():
    candidates = []
    value = _meminfo_available()
    if value is not None:
        candidates.append((value, "MemAvailable in /proc/meminfo"))
    else:
        value = _sysconf_available()
        if value is not None:
            candidates.append((value, "free physical memory, os.sysconf"))
    value = _cgroup_room()
    if value is not None:
        candidates.append((value, "room under the cgroup memory limit"))
    value = _address_space_room()
    if value is not None:
        candidates.append((value, "address-space limit, ulimit -v"))
    if not candidates:
        return None, "unknown"
    return min(candidates)


def format_bytes(n):
    """``320 GB``, ``1.54 kB``, ``12 bytes``: decimal units, three significant digits.

    >>> format_bytes(200000**2 * 8), format_bytes(1536), format_bytes(12)
    ('320 GB', '1.54 kB', '12 bytes')
    """
    n = int(n)
    if n < 1000:
        return f"{n} byte" + ("" if n == 1 else "s")
    if n >= 10 ** 21:  # past EB, and possibly past what a float holds
        return f"about 10^{int((n.bit_length() - 1) * 0.30103)} bytes"
    for unit, scale in (("kB", 10**3), ("MB", 10**6), ("GB", 10**9), ("TB", 10**12),
                        ("PB", 10**15), ("EB", 10**18)):
        text = f"{n / scale:.3g}"
        if "e" not in text and float(text) < 1000:   # 999.7 MB rounds to 1 GB
            return f"{text} {unit}"
    return f"{n:.3g} bytes".replace("e+", "e")


def _entry_text(nbytes):
    if nbytes == 0.125:
        return "1 bit each (packed)"
    if nbytes == 1:
        return "1 byte each"
    return f"{nbytes:g} bytes each"


def _shape_text(shape):
    return " x ".join(str(int(s)) for s in shape)


class Workspace:
    """The arrays an operation keeps alive at its peak, for one estimate.

    Examples
    --------
    >>> w = Workspace("inverse of a 200000 x 200000 matrix over GF(2^61-1)")
    >>> w.add(2, (200000, 200000), 8).nbytes
    640000000000
    >>> w.describe()
    '2 matrices of 200000 x 200000 entries, 8 bytes each'
    """

    def __init__(self, what):
        self.what = what        # text, or a callable giving it (called when refusing)
        self.parts = []

    def add(self, count, shape, bytes_each, label=None):
        """Add ``count`` arrays of ``shape`` with ``bytes_each`` bytes per entry
        (0.125 for bit-packed rows, rounded up to whole 64-bit words per row)."""
        count = int(count)
        shape = tuple(int(s) for s in shape)
        if count > 0 and all(s > 0 for s in shape):
            self.parts.append((count, shape, bytes_each, label))
        return self

    @staticmethod
    def _part_bytes(count, shape, bytes_each):
        if bytes_each == 0.125:
            rows = math.prod(shape[:-1]) if len(shape) > 1 else 1
            return count * rows * (-(-shape[-1] // 64)) * 8
        return count * math.prod(shape) * int(bytes_each)

    @property
    def nbytes(self):
        return sum(self._part_bytes(c, s, b) for c, s, b, _ in self.parts)

    def describe(self):
        pieces = []
        for count, shape, bytes_each, label in self.parts:
            kind = label or ("matrix" if len(shape) == 2 else
                             "vector" if len(shape) == 1 else "array")
            plural = kind
            if count != 1:
                plural = kind[:-6] + "matrices" if kind.endswith("matrix") else kind + "s"
            head = "one" if count == 1 else str(count)
            pieces.append(f"{head} {plural} of {_shape_text(shape)} entries, "
                          f"{_entry_text(bytes_each)}")
        return "; ".join(pieces)

    def check(self, hint=None):
        """Raise :class:`InputError` with the estimate when it exceeds the available
        memory; return the estimate in bytes otherwise."""
        return check_memory(self.nbytes, self.what, self.describe, hint)


# Estimates up to this many bytes are never refused and cost no look-up: no machine
# running Python has less free, and it keeps the check off the smallest matrices (a
# 4 x 4 inverse takes about 15 microseconds; reading the limit takes 1 to 2).
ALWAYS_FITS = 2048


def fits(nbytes):
    """True when ``nbytes`` fit in the available memory (the cheap test a caller makes
    before building a message with :class:`Workspace`)."""
    if nbytes <= ALWAYS_FITS:
        return True
    available, _ = available_memory()
    return available is None or nbytes <= available


def check_memory(nbytes, what, detail=None, hint=None):
    """Refuse ``what`` when it needs more than the available memory.

    Parameters
    ----------
    nbytes : int
        The estimate, in bytes.
    what : str or callable
        What needs it (``"inverse of a 3 x 3 matrix over GF(7)"``); starts the message.
        A callable returning the text is called only when refusing.
    detail : str or callable, optional
        How the estimate is made up, shown in parentheses (a callable: as ``what``).
    hint : str, optional
        What would need less, appended to the message.

    Returns
    -------
    int
        ``nbytes``, when it fits.

    Raises
    ------
    InputError
        ``"<what> needs 320 GB (<detail>), more than the 24 GB of memory available
        (<source>); decimal units, 1 GB = 10^9 bytes"``.
    """
    if nbytes <= ALWAYS_FITS:
        return nbytes
    available, source = available_memory()
    if available is None or nbytes <= available:
        return nbytes
    what = what() if callable(what) else what
    detail = detail() if callable(detail) else detail
    unit = format_bytes(nbytes).split()[-1]
    scale = {"kB": "1 kB = 10^3", "MB": "1 MB = 10^6", "GB": "1 GB = 10^9",
             "TB": "1 TB = 10^12", "PB": "1 PB = 10^15", "EB": "1 EB = 10^18"}.get(unit)
    tail = f"; decimal units, {scale} bytes" if scale else ""
    inner = f" ({detail})" if detail else ""
    raise InputError(f"{what} needs {format_bytes(nbytes)}{inner}, more than the "
                     f"{format_bytes(available)} of memory available ({source}){tail}"
                     + (f"; {hint}" if hint else ""))


def check_matrices(what, count, shape, bytes_each):
    """Shorthand: ``count`` arrays of ``shape`` at ``bytes_each`` bytes per entry."""
    return Workspace(what).add(count, shape, bytes_each).check()


def check_text_output(what, entries, digits):
    """Refuse printing ``entries`` numbers of up to ``digits`` characters as text when
    the text would not fit: the printer holds, per entry, a slot in a list of the
    values and in a list of their cells (8 bytes each) and the characters of the joined
    text (digits + a separator), at the least."""
    entries, digits = int(entries), int(digits)
    return check_memory(entries * (16 + digits + 1), what,
                        f"{entries} entries of up to {digits} digit{'' if digits == 1 else 's'}: 2 list slots of "
                        f"8 bytes and {digits + 1} characters each")


# --------------------------------------------------------------------------- .npy

_NPY_MAGIC = b"\x93NUMPY"


def short_text(text, limit=60):
    """``text`` cut to ``limit`` characters (with "...") for a one-line message."""
    return text if len(text) <= limit else text[:limit - 3] + "..."


def first_line(exc):
    """The first line of an exception's message, short, or its class name."""
    text = str(exc).strip().splitlines()
    return short_text(text[0], 100) if text else type(exc).__name__


def read_npy_header(path, what="array", objects_note="only integer arrays are read"):
    """``(shape, dtype, fortran_order, data_offset)`` of a ``.npy`` file, read from its
    header alone (nothing of the data is read or allocated).

    The header (NumPy's format: magic, version 1.0 or 2.0, a header length, a Python
    dict literal giving ``descr``, ``fortran_order`` and ``shape``) is parsed by numpy's
    own reader; whatever that reader raises on a malformed header becomes an
    ``InputError``. Object dtypes (stored as pickles) are refused here, before any
    data is read, so nothing in the file is ever unpickled.

    Raises
    ------
    InputError
        Missing or unreadable file, a pickle or a zip archive, a malformed header, an
        unsupported version, an object or non-integer dtype, a negative dimension.
    """
    import numpy as np
    from numpy.lib import format as npy_format

    try:
        with open(path, "rb") as fh:
            start = fh.read(6)
            fh.seek(0)
            if start[:1] == b"\x80":
                raise InputError(f"{path}: is a Python pickle, not a .npy file; pickles are "
                                 "never loaded")
            if start[:4] == b"PK\x03\x04":
                raise InputError(f"{path}: is a zip archive (.npz, several arrays), not one "
                                 f".npy {what}")
            try:
                version = npy_format.read_magic(fh)
                if version in ((1, 0), (2, 0)):
                    # numpy warns on a header it had to re-parse (Python 2 style); the
                    # header is either read or refused, the warning adds nothing.
                    with warnings.catch_warnings():
                        warnings.simplefilter("ignore")
                        if version == (1, 0):
                            shape, fortran, dtype = npy_format.read_array_header_1_0(fh)
                        else:
                            shape, fortran, dtype = npy_format.read_array_header_2_0(fh)
                else:
                    raise InputError(f"{path}: .npy format version {version[0]}.{version[1]} "
                                     "is not read here (1.0 and 2.0 are)")
            except InputError:
                raise
            except Exception as exc:  # numpy's header reader raises many kinds on junk
                raise InputError(f"{path}: not a readable .npy file (bad header: "
                                 f"{first_line(exc)})") from None
            offset = fh.tell()
    except InputError:
        raise
    except (OSError, ValueError) as exc:
        raise file_error(path, exc) from None
    dtype = np.dtype(dtype)
    if dtype.hasobject:
        raise InputError(f"{path}: holds Python objects (object dtype); {objects_note}")
    if dtype.kind not in "iub" or dtype.fields is not None or dtype.subdtype is not None:
        raise InputError(f"{path}: has dtype {short_text(str(dtype))}; an integer dtype is needed")
    if any(d < 0 for d in shape):
        raise InputError(f"{path}: header declares a negative dimension "
                         f"(shape {short_text(str(shape))})")
    return tuple(int(s) for s in shape), dtype, bool(fortran), offset


def load_npy(path, mmap_mode=None):
    """``numpy.load`` with pickles disallowed and numpy's warning about re-parsed
    (Python 2 style) headers silenced: call :func:`check_npy_header` first."""
    import numpy as np
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return np.load(path, mmap_mode=mmap_mode, allow_pickle=False)


def check_npy_header(path, what="the array", copies=1,
                     objects_note="only integer arrays are read"):
    """Check a ``.npy`` file's header and declared size before it is loaded.

    :func:`read_npy_header` first (a malformed header or an object dtype is refused
    unread); then the array must fit in the available memory ``copies`` times
    (``copies=0`` skips the memory check, for memory-mapped reading), and the file must
    be long enough to hold the data the header declares.

    Returns
    -------
    tuple
        ``(shape, dtype)``.

    Raises
    ------
    InputError
        As :func:`read_npy_header`; a declared size that does not fit (the message
        carries the estimate); a file shorter than its header declares.
    """
    shape, dtype, _, offset = read_npy_header(path, what.removeprefix("the "), objects_note)
    declared = math.prod(shape) * dtype.itemsize
    if copies:
        check_memory(declared * copies,
                     f"{path}: {what} of shape {tuple(shape)}",
                     f"{'one copy' if copies == 1 else f'{copies} copies'} of "
                     f"{_shape_text(shape) or 'a scalar'} entries, "
                     f"{_entry_text(dtype.itemsize)}")
    try:
        size = os.path.getsize(path)
    except OSError:
        size = None
    if size is not None and size - offset < declared:
        raise InputError(f"{path}: truncated .npy file: the header declares shape "
                         f"{short_text(str(tuple(shape)))} of {dtype} "
                         f"({format_bytes(declared)}), the file holds "
                         f"{format_bytes(max(0, size - offset))} of data")
    return shape, dtype
