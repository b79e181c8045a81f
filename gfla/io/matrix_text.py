"""Reading matrices and vectors written as text, or stored in ``.npy`` files.

The text format is the one the command line takes::

    1 2 3; 4 5 6          rows split by ';' or newlines
    1,2,3
    0x1f 0x20 7           decimal, or hexadecimal with a 0x prefix
    02 03 01 01           with ``hex=True`` bare tokens are hexadecimal
    5 6 7   # a comment   '#' starts a comment that runs to the end of the line

Entries are returned as Python ints, never narrowed to a numpy dtype here: a residue
ring such as Z/2^64 has elements up to 2^64 - 1, which int64 cannot hold. Range checks
against a field are the field's job (``F.asarray``); this module only checks that the
text is a well-formed rectangular array of integers.
"""

import os
import re

from ..errors import InputError, file_error
from ..limits import first_line

__all__ = ["parse_matrix", "parse_vector", "load_matrix_file", "load_vector_file"]

_DECIMAL = re.compile(r"[+-]?[0-9]+\Z")
_PREFIXED_HEX = re.compile(r"[+-]?0[xX][0-9a-fA-F]+\Z")
_BARE_HEX = re.compile(r"[+-]?[0-9a-fA-F]+\Z")
# An entry separator is a comma (with any blanks around it) or a run of blanks; a comma
# with nothing before the next comma leaves an empty token, which is reported.
_SEPARATOR = re.compile(r"[ \t\f\v]*,[ \t\f\v]*|[ \t\f\v]+")
_NPY_MAGIC = b"\x93NUMPY"
# Longest token accepted: far above any element of a supported ring (2^64 has 20
# decimal digits), and well below Python's int-from-text safety limit.
_MAX_TOKEN = 200


def _show(token):
    """Quote a token for an error message, shortened so the message stays one line."""
    if len(token) > 24:
        token = token[:20] + "..."
    return repr(token)


def _parse_entry(token, hex, where):
    """Convert one token to a Python int; ``where`` names its place for messages."""
    if len(token) > _MAX_TOKEN:
        raise InputError(f"{where}: entry of {len(token)} characters is too long")
    if _PREFIXED_HEX.match(token):
        return int(token, 16)
    if hex:
        if _BARE_HEX.match(token):
            return int(token, 16)
        raise InputError(f"{where}: {_show(token)} is not a hexadecimal number")
    if _DECIMAL.match(token):
        return int(token, 10)
    if _BARE_HEX.match(token):
        raise InputError(
            f"{where}: {_show(token)} is not an integer "
            "(hexadecimal needs a 0x prefix, or read the text as hex)"
        )
    raise InputError(f"{where}: {_show(token)} is not an integer")


def _rows_of(text):
    """Split text into rows of raw tokens, dropping comments and blank rows."""
    if isinstance(text, (bytes, bytearray)):
        try:
            text = bytes(text).decode("utf-8")
        except UnicodeDecodeError:
            raise InputError("matrix text is not valid UTF-8") from None
    if not isinstance(text, str):
        raise InputError(f"matrix text must be a string, not {type(text).__name__}")
    rows = []
    for line in text.splitlines():
        line = line.split("#", 1)[0]
        for piece in line.split(";"):
            piece = piece.strip()
            if piece:
                rows.append(_SEPARATOR.split(piece))
    return rows


def _parse_rows(text, hex, what):
    rows = _rows_of(text)
    if not rows:
        raise InputError(f"empty {what}")
    parsed = []
    for i, tokens in enumerate(rows, start=1):
        row = []
        for j, token in enumerate(tokens, start=1):
            where = f"row {i}, column {j}"
            if token == "":
                raise InputError(f"{where}: empty entry (two commas in a row, or a comma at an end)")
            row.append(_parse_entry(token, hex, where))
        parsed.append(row)
    return parsed


def parse_matrix(text, hex=False):
    """Parse a matrix written as text.

    Parameters
    ----------
    text : str
        Rows separated by ``;`` or newlines, entries by blanks or commas. Entries are
        decimal integers or hexadecimal with a ``0x`` prefix; ``#`` starts a comment that
        runs to the end of the line. Blank rows are skipped.
    hex : bool, optional
        Read bare tokens as hexadecimal (``02 03 01 01; ...``). A ``0x`` prefix is
        accepted either way.

    Returns
    -------
    list of list of int
        The rows, as Python ints (not range-checked against any field).

    Raises
    ------
    InputError
        If the text is empty, an entry is not an integer, or the rows differ in length.
        The message names the row and column (1-based).

    Examples
    --------
    >>> parse_matrix("1 2; 3 4")
    [[1, 2], [3, 4]]
    >>> parse_matrix("02 03\\n0a ff  # two rows", hex=True)
    [[2, 3], [10, 255]]
    """
    rows = _parse_rows(text, hex, "matrix")
    width = len(rows[0])
    for i, row in enumerate(rows[1:], start=2):
        if len(row) != width:
            raise InputError(
                f"row {i} has {len(row)} {_entries(len(row))}, row 1 has {width}"
            )
    return rows


def _entries(count):
    return "entry" if count == 1 else "entries"


def parse_vector(text, hex=False):
    """Parse a vector (for example the right-hand side of a linear system).

    Parameters
    ----------
    text : str
        The entries on one row (``1 2 3``) or one per row (``1; 2; 3`` or one per line),
        in the number format of :func:`parse_matrix`.
    hex : bool, optional
        Read bare tokens as hexadecimal.

    Returns
    -------
    list of int

    Raises
    ------
    InputError
        If the text is empty, an entry is not an integer, or the text is a matrix with
        more than one row and more than one column.

    Examples
    --------
    >>> parse_vector("1 2 3")
    [1, 2, 3]
    >>> parse_vector("1\\n2\\n3")
    [1, 2, 3]
    """
    rows = _parse_rows(text, hex, "vector")
    if len(rows) == 1:
        return rows[0]
    if all(len(row) == 1 for row in rows):
        return [row[0] for row in rows]
    widths = sorted({len(row) for row in rows})
    raise InputError(
        f"a vector must be one row or one column; got {len(rows)} rows with "
        f"{'/'.join(map(str, widths))} entries"
    )



def _read_npy(path, what):
    import numpy as np

    from ..limits import check_npy_header, load_npy

    # The header alone first: a malformed one or an object dtype is refused unread, and
    # a declared shape that would not fit in memory (or that the file is too short to
    # hold) is refused with its size before numpy allocates it.
    check_npy_header(path, f"the {what}")
    try:
        array = load_npy(path)
    except ValueError as exc:
        if "allow_pickle" in str(exc) or "pickle" in str(exc).lower():
            raise InputError(
                f"{path}: holds Python objects (object dtype); only integer arrays are read"
            ) from None
        raise InputError(f"{path}: not a readable .npy file ({first_line(exc)})") from None
    except (OSError, EOFError) as exc:
        raise InputError(f"{path}: not a readable .npy file ({first_line(exc)})") from None
    if not isinstance(array, np.ndarray):
        raise InputError(f"{path}: holds an archive of several arrays, not one {what}")
    if array.dtype.kind == "O":
        raise InputError(f"{path}: holds Python objects (object dtype); only integer arrays are read")
    if array.dtype.kind not in "iub":
        raise InputError(f"{path}: has dtype {array.dtype}; an integer dtype is needed")
    return array



def _read_text(path):
    try:
        with open(path, "rb") as handle:
            data = handle.read()
    except (OSError, ValueError) as exc:
        raise file_error(path, exc) from None
    if data.startswith(_NPY_MAGIC):
        return None
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError(f"{path}: is neither UTF-8 text nor a .npy file") from None


def _is_npy(path):
    return str(path).lower().endswith(".npy")


def load_matrix_file(path, hex=False):
    """Load a matrix from a ``.npy`` file or a text file.

    Parameters
    ----------
    path : str or os.PathLike
        A file whose name ends in ``.npy`` (or that starts with the ``.npy`` magic) is
        read with ``numpy.load(..., allow_pickle=False)``; any other file is read as
        UTF-8 text in the format of :func:`parse_matrix`.
    hex : bool, optional
        For text files: read bare tokens as hexadecimal.

    Returns
    -------
    list of list of int or numpy.ndarray
        Text gives nested lists of Python ints; ``.npy`` gives the stored 2-D integer
        (or boolean) array, unchanged, so that large files are not copied into Python
        objects.

    Raises
    ------
    InputError
        If the file is missing or unreadable, a ``.npy`` file holds objects, a
        non-integer dtype or not exactly 2 dimensions, or the text is malformed. The
        message starts with the path.
    """
    path = os.fspath(path)
    text = None if _is_npy(path) else _read_text(path)
    if text is None:
        if _is_npy(path) and not os.path.exists(path):
            raise InputError(f"{path}: no such file")
        array = _read_npy(path, "matrix")
        if array.ndim != 2:
            raise InputError(
                f"{path}: has {array.ndim} dimension{'s' if array.ndim != 1 else ''} "
                f"(shape {array.shape}); a matrix needs 2"
            )
        if array.size == 0:
            raise InputError(f"{path}: empty matrix (shape {array.shape})")
        return array
    try:
        return parse_matrix(text, hex=hex)
    except InputError as exc:
        raise InputError(f"{path}: {exc}") from None


def load_vector_file(path, hex=False):
    """Load a vector from a ``.npy`` file (1-D, or 2-D with one row or one column) or a
    text file in the format of :func:`parse_vector`.

    Returns
    -------
    list of int or numpy.ndarray
        Text gives a list of Python ints; ``.npy`` a 1-D integer array.

    Raises
    ------
    InputError
        As :func:`load_matrix_file`.
    """
    path = os.fspath(path)
    text = None if _is_npy(path) else _read_text(path)
    if text is None:
        if _is_npy(path) and not os.path.exists(path):
            raise InputError(f"{path}: no such file")
        array = _read_npy(path, "vector")
        if array.ndim == 2 and 1 in array.shape:
            array = array.reshape(-1)
        if array.ndim != 1:
            raise InputError(f"{path}: has shape {array.shape}; a vector needs 1 dimension")
        if array.size == 0:
            raise InputError(f"{path}: empty vector")
        return array
    try:
        return parse_vector(text, hex=hex)
    except InputError as exc:
        raise InputError(f"{path}: {exc}") from None
