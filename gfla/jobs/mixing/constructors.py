"""Structured matrices used as mixing layers: circulant, Hadamard form, Cauchy,
Vandermonde, companion (and its powers).

Every constructor takes the field object first and returns a plain int64 numpy array of
field elements, validated by the field (entries outside the field raise ``InputError``
naming the parameter).
"""

import numpy as np

from ...errors import InputError

__all__ = ["circulant", "hadamard_form", "cauchy", "vandermonde", "companion",
           "companion_power"]


def _elements(F, values, name, min_len=1):
    """A list of field elements, validated, as Python ints."""
    if isinstance(values, (str, bytes)) or not hasattr(values, "__len__"):
        raise InputError(f"`{name}` must be a list of field elements")
    if len(values) < min_len:
        raise InputError(f"`{name}` needs at least {min_len} "
                         f"element{'s' if min_len != 1 else ''}, got {len(values)}")
    arr = F.asarray(list(values), name=name, ndim=1)
    return [int(v) for v in arr]


def _check_size(F, what, rows, cols, matrices):
    """Refuse a constructor whose result would not fit: ``matrices`` int64 arrays of
    rows x cols are alive while it is built (index or power tables, the matrix, the
    field's validated copies); see :mod:`gfla.limits`."""
    from ...limits import check_matrices
    check_matrices(f"{what} matrix of {rows} x {cols} over {F.spec}", matrices,
                   (rows, cols), 8)


def circulant(F, first_row):
    """Circulant matrix with the given first row; row i is the first row rotated right
    by i places: ``C[i, j] = c[(j - i) mod n]``.

    Parameters
    ----------
    F : gfla field object
    first_row : sequence of int
        c_0 .. c_{n-1}, elements of F.

    Returns
    -------
    numpy.ndarray of int64, shape (n, n)

    Raises
    ------
    InputError
        If the row is empty or holds an entry outside F.

    References
    ----------
    .. [1] P. J. Davis, "Circulant Matrices", Wiley, 1979.

    Examples
    --------
    >>> import gfla
    >>> from gfla.jobs.mixing import circulant
    >>> F = gfla.field("GF(2^8)", modulus=0x11b)
    >>> circulant(F, [2, 3, 1, 1])[1].tolist()
    [1, 2, 3, 1]
    """
    c = _elements(F, first_row, "first_row")
    n = len(c)
    _check_size(F, "circulant", n, n, 4)    # index table, gathered matrix, 2 copies
    idx = (np.arange(n)[None, :] - np.arange(n)[:, None]) % n
    return F.asarray(np.asarray(c, dtype=np.int64)[idx], name="circulant")


def hadamard_form(F, h):
    """Matrix of Hadamard form (also called dyadic): ``H[i, j] = h[i XOR j]``.

    Parameters
    ----------
    h : sequence of int
        h_0 .. h_{n-1}, n a power of two.

    Raises
    ------
    InputError
        If n is not a power of two or an entry is outside F.

    References
    ----------
    .. [1] F. J. MacWilliams, N. J. A. Sloane, "The Theory of Error-Correcting Codes",
       North-Holland, 1977 (dyadic matrices).

    Examples
    --------
    >>> import gfla
    >>> from gfla.jobs.mixing import hadamard_form
    >>> F = gfla.field("GF(2^4)")
    >>> hadamard_form(F, [1, 2, 4, 6]).tolist()[1]
    [2, 1, 6, 4]
    """
    h = _elements(F, h, "h")
    n = len(h)
    if n & (n - 1):
        raise InputError(f"a Hadamard-form matrix needs a length that is a power of two, got {n}")
    _check_size(F, "Hadamard-form", n, n, 4)    # index table, gathered matrix, 2 copies
    idx = np.arange(n)[:, None] ^ np.arange(n)[None, :]
    return F.asarray(np.asarray(h, dtype=np.int64)[idx], name="hadamard form")


def cauchy(F, x, y):
    """Cauchy matrix ``C[i, j] = 1 / (x_i + y_j)``.

    With x_1..x_m distinct, y_1..y_n distinct and every x_i + y_j nonzero, every square
    submatrix is again a Cauchy matrix with a nonzero determinant, so the matrix is MDS.

    Parameters
    ----------
    x, y : sequence of int
        Row and column points.

    Raises
    ------
    InputError
        If some x_i + y_j = 0 (the entry does not exist) or a point is outside F.

    References
    ----------
    .. [1] A. Cauchy, "Memoire sur les fonctions alternees et sur les sommes alternees",
       Exercices d'analyse et de phys. math. 2 (1841) (the determinant formula).
    .. [2] F. J. MacWilliams, N. J. A. Sloane, "The Theory of Error-Correcting Codes",
       North-Holland, 1977, Chapter 11 (Cauchy matrices and MDS codes).

    Examples
    --------
    >>> import gfla
    >>> from gfla.jobs.mixing import cauchy
    >>> F = gfla.field("GF(2^8)", modulus=0x11b)
    >>> cauchy(F, [1, 2], [3, 4]).shape
    (2, 2)
    """
    xs = _elements(F, x, "x")
    ys = _elements(F, y, "y")
    _check_size(F, "Cauchy", len(xs), len(ys), 4)    # sums, inverses, 2 copies
    X = np.asarray(xs, dtype=np.int64)[:, None]
    Y = np.asarray(ys, dtype=np.int64)[None, :]
    S = F.add(np.broadcast_to(X, (len(xs), len(ys))), np.broadcast_to(Y, (len(xs), len(ys))))
    zero = np.argwhere(np.asarray(S) == 0)
    if len(zero):
        i, j = (int(v) for v in zero[0])
        raise InputError(f"cauchy: x[{i}] + y[{j}] = 0 (x[{i}] = {xs[i]}, y[{j}] = {ys[j]}); "
                         "no point may be shared between x and y")
    out = np.empty(S.shape, dtype=np.int64)
    for (i, j), s in np.ndenumerate(np.asarray(S)):
        out[i, j] = F.inv_element(int(s))
    return F.asarray(out, name="cauchy")


def vandermonde(F, points, ncols=None):
    """Vandermonde matrix ``V[i, j] = points[i] ** j`` for j < ncols (default: square).

    References
    ----------
    .. [1] R. A. Horn, C. R. Johnson, "Matrix Analysis", Cambridge University Press,
       1985, Section 0.9.11.

    Examples
    --------
    >>> import gfla
    >>> from gfla.jobs.mixing import vandermonde
    >>> F = gfla.field("GF(2^8)", modulus=0x11b)
    >>> vandermonde(F, [1, 2, 3]).tolist()[1]
    [1, 2, 4]
    """
    p = _elements(F, points, "points")
    m = len(p) if ncols is None else int(ncols)
    if m < 1:
        raise InputError(f"`ncols` must be at least 1, got {m}")
    _check_size(F, "Vandermonde", len(p), m, 3)    # the matrix and the field's 2 copies
    out = np.empty((len(p), m), dtype=np.int64)
    col = np.ones(len(p), dtype=np.int64)
    P = np.asarray(p, dtype=np.int64)
    for j in range(m):
        out[:, j] = col
        col = np.asarray(F.mul(col, P), dtype=np.int64)
    return F.asarray(out, name="vandermonde")


def companion(F, poly):
    """Companion matrix of a monic polynomial x^n + c_{n-1} x^{n-1} + ... + c_0.

    Ones on the superdiagonal and last row (-c_0, -c_1, ..., -c_{n-1}) (in characteristic
    2 simply the coefficients), so its characteristic polynomial is ``poly``. This is the
    shape of serial (recursive) mixing layers, whose n-th power is the layer.

    Parameters
    ----------
    poly : sequence of int
        Coefficients highest degree first, leading coefficient 1: ``[1, c_{n-1}, ..., c_0]``.

    Raises
    ------
    InputError
        If the polynomial is not monic or has degree < 1.

    References
    ----------
    .. [1] R. A. Horn, C. R. Johnson, "Matrix Analysis", Cambridge University Press,
       1985, Section 3.3 (companion matrices).

    Examples
    --------
    >>> import gfla
    >>> from gfla.jobs.mixing import companion
    >>> F = gfla.field("GF(2^4)", modulus=0x13)
    >>> companion(F, [1, 4, 1, 2, 1]).tolist()[3]
    [1, 2, 1, 4]
    """
    c = _elements(F, poly, "poly", min_len=2)
    if c[0] != 1:
        raise InputError(f"the companion polynomial must be monic (leading coefficient 1), "
                         f"got leading coefficient {c[0]}")
    n = len(c) - 1
    _check_size(F, "companion", n, n, 3)    # the matrix and the field's 2 copies
    low_first = np.asarray(c[1:][::-1], dtype=np.int64)     # c_0 .. c_{n-1}
    A = np.zeros((n, n), dtype=np.int64)
    A[np.arange(n - 1), np.arange(1, n)] = 1
    A[n - 1, :] = np.asarray(F.neg(low_first), dtype=np.int64)
    return F.asarray(A, name="companion")


def companion_power(F, poly, exponent=None):
    """The companion matrix of ``poly`` raised to ``exponent`` (default: its degree),
    the matrix of a serial mixing layer.

    Examples
    --------
    >>> import gfla
    >>> from gfla.jobs.mixing import companion_power
    >>> F = gfla.field("GF(2^4)", modulus=0x13)
    >>> companion_power(F, [1, 4, 1, 2, 1]).shape
    (4, 4)
    """
    A = companion(F, poly)
    e = A.shape[0] if exponent is None else exponent
    return F.power(A, e)
