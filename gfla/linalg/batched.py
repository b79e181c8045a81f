"""Operations on stacks of matrices: one call for ``(N, m, n)`` arrays.

Over a field, stacks of matrices with at most ``MAX_BATCHED_SIZE`` rows and columns go
through the compiled kernels of ``gfla.kernels.batch`` (Gauss-Jordan or Gaussian
elimination per matrix, parallel over the stack). Over a residue ring Z/n, or for
larger matrices, each matrix goes through the field object's own method (the
division-free and CRT/Hensel paths of ``gfla.linalg``), one call per matrix: same
results, Python speed.

Nothing here raises for one bad matrix of a stack: a singular matrix is flagged in a
mask and its certificate is available from :func:`singular_error`. Input errors
(entries outside the field, wrong number of dimensions, shapes that do not match) are
raised for the whole stack as :class:`gfla.InputError`.

References
----------
.. [1] W. H. Press, S. A. Teukolsky, W. T. Vetterling, B. P. Flannery, "Numerical
   Recipes", 3rd ed., Cambridge University Press, 2007, section 2.1 (Gauss-Jordan
   elimination).
.. [2] J. A. Howell, "Spans in the module (Z_m)^s", Linear and Multilinear Algebra 19,
   1986 (the residue-ring path, through ``gfla.linalg.eliminate``).
"""

from collections import namedtuple

import numpy as np

from ..errors import InputError, SingularMatrixError

__all__ = ["MAX_BATCHED_SIZE", "PARALLEL_MIN", "Inverses", "Solutions", "uses_kernels", "validate_stack",
           "inv", "det", "rank", "solve", "nullspace", "singular_error"]

MAX_BATCHED_SIZE = 32

Inverses = namedtuple("Inverses", ["inverse", "singular", "kernel_vectors", "primes",
                                   "messages"])
Inverses.__doc__ = """Result of :func:`inv` on a stack of N matrices n x n.

inverse : (N, n, n) array, the inverses (zero matrices where singular)
singular : (N,) bool array
kernel_vectors : (N, n) array; for a singular matrix a nonzero v with A v = 0 (over Z/n:
    nonzero modulo ``primes[k]``); zero rows elsewhere
primes : (N,) int64 array or None; over Z/n a prime dividing n and det(A) where singular
messages : dict or None; the message of each refusal taken from the per-matrix path
"""

Solutions = namedtuple("Solutions", ["consistent", "particular", "nullspace", "nullity"])
Solutions.__doc__ = """Result of :func:`solve` on N systems A_k x = b_k, A_k m x n.

consistent : (N,) bool array
particular : (N, n) array, one solution where consistent (free unknowns 0 over a field),
    zero rows elsewhere
nullspace : (N, r, n) array, r >= n; rows 0 .. nullity[k]-1 of nullspace[k] span
    {v : A_k v = 0} (a basis over a field, generators over Z/n); the other rows are zero
nullity : (N,) int64 array, the number of those rows
"""


def uses_kernels(F, shape):
    """True when a stack of matrices of ``shape`` (m, n) over F goes through the batched
    kernels (a field and m, n <= ``MAX_BATCHED_SIZE``)."""
    return bool(F.is_field and max(shape) <= MAX_BATCHED_SIZE)


def validate_stack(F, A, name="stack", square=False):
    """Validate a stack of matrices over F; return it as a C-contiguous uint64
    ``(N, m, n)`` array (a stack of no matrices is allowed).

    Raises
    ------
    InputError
        When ``A`` is not 3-D, an entry lies outside F (the message gives the index
        k, i, j of the first one, counted from 0), a matrix is empty, or ``square`` is
        set and the matrices are not square.
    """
    if isinstance(A, np.ndarray) and A.ndim == 3 and A.shape[0] == 0:
        if A.dtype.kind not in "iub":
            raise InputError(f"{name} must hold integers, got dtype {A.dtype}")
        U = np.zeros(A.shape, dtype=np.uint64)
    else:
        U = F._validate(A, name, 3)
    if U.shape[1] == 0 or U.shape[2] == 0:
        raise InputError(f"{name} holds empty matrices (shape {U.shape})")
    if square and U.shape[1] != U.shape[2]:
        raise InputError(f"{name} must hold square matrices, got {U.shape[1]} x "
                         f"{U.shape[2]}")
    return U


# Below this many matrices a stack runs in the calling thread: waking the kernels'
# thread pool costs more than the work (measured: a parallel call on 3 small matrices
# took 0.6 to 2.7 ms on the 2-core machine under load, the serial call microseconds).
PARALLEL_MIN = 256

_TABLES = {}


def _kernels():
    from ..kernels import batch
    return batch


def _tables(F):
    key = (type(F).__name__, F.spec, F.modulus)
    t = _TABLES.get(key)
    if t is None:
        t = _TABLES[key] = _kernels().tables(F._ctx)
    return t


def _launch(parallel, serial, N, *args):
    """Run a batched kernel on N items: the parallel kernel for large stacks, its
    ``*_range`` twin in this thread for small ones."""
    if N >= PARALLEL_MIN:
        parallel(*args)
    else:
        serial(*args, 0, N)


def inv(F, A):
    """Inverses of a stack of square matrices.

    Parameters
    ----------
    F : gfla field object
    A : array_like, shape (N, n, n)

    Returns
    -------
    Inverses
        Singular matrices are flagged, not raised; see :func:`singular_error`.

    Raises
    ------
    InputError
        Invalid stack (see :func:`validate_stack`).

    Notes
    -----
    Over a field with n <= 32: in-place Gauss-Jordan elimination with row pivoting in
    compiled code [1]_; the kernel vector of a singular matrix is the basis vector of its
    nullspace for the first column that depends on the columns before it (what
    ``F.nullspace(A)[0]`` gives). Otherwise ``F.inv`` per matrix.

    References
    ----------
    .. [1] W. H. Press et al., "Numerical Recipes", 3rd ed., 2007, section 2.1.

    Examples
    --------
    >>> import gfla
    >>> from gfla.linalg import batched
    >>> F = gfla.field("GF(2^8)", modulus=0x11b)
    >>> r = batched.inv(F, [[[2, 3], [1, 1]], [[1, 1], [1, 1]]])
    >>> r.inverse[0].tolist(), r.singular.tolist(), r.kernel_vectors[1].tolist()
    ([[1, 3], [1, 2]], [False, True], [1, 1])
    """
    U = validate_stack(F, A, "stack", square=True)
    N, n, _ = U.shape
    if N and uses_kernels(F, (n, n)):
        kb = _kernels()
        out = np.empty_like(U)
        kernel = np.empty((N, n), dtype=np.uint64)
        status = np.empty(N, dtype=np.int8)
        _launch(kb.batch_inverse, kb.inverse_range, N, U, F._ctx, *_tables(F), out, kernel,
                status)
        if (status == kb.STATUS_NOT_A_UNIT).any():  # pragma: no cover - fields only
            raise AssertionError("a field pivot without an inverse")
        singular = status == kb.STATUS_SINGULAR
        return Inverses(F._out(out), singular, F._out(kernel), None, None)
    out = np.zeros((N, n, n), dtype=F.dtype)
    kernel = np.zeros((N, n), dtype=F.dtype)
    singular = np.zeros(N, dtype=bool)
    primes = None if F.is_field else np.zeros(N, dtype=np.int64)
    messages = {}
    for k in range(N):
        try:
            out[k] = F.inv(U[k])
        except SingularMatrixError as exc:
            singular[k] = True
            messages[k] = str(exc)
            if exc.kernel_vector is not None:
                kernel[k] = np.array(exc.kernel_vector, dtype=np.uint64).astype(F.dtype)
            if primes is not None and exc.prime is not None:
                primes[k] = exc.prime
    return Inverses(out, singular, kernel, primes, messages)


def singular_error(F, result, k):
    """The :class:`gfla.SingularMatrixError` (with its certificate) for matrix ``k`` of
    an :func:`inv` result."""
    if not result.singular[k]:
        raise ValueError(f"matrix {k} of the stack is invertible")
    v = [int(x) for x in result.kernel_vectors[k]]
    prime = None
    if result.primes is not None and result.primes[k]:
        prime = int(result.primes[k])
    if result.messages and k in result.messages:
        message = result.messages[k]
    else:
        message = f"matrix is singular: A v = 0 for v = {v}"
    return SingularMatrixError(message, kernel_vector=v, prime=prime)


def det(F, A):
    """Determinants of a stack of square matrices.

    Returns
    -------
    ndarray, shape (N,), dtype ``F.dtype``

    Notes
    -----
    Over a field with n <= 32: Gaussian elimination with row pivoting in compiled code
    (product of the pivots, sign of the row permutation). Otherwise ``F.det`` per matrix
    (Berkowitz's division-free method over Z/n).

    Examples
    --------
    >>> import gfla
    >>> from gfla.linalg import batched
    >>> batched.det(gfla.field("GF(7)"), [[[1, 2], [3, 4]], [[2, 0], [0, 4]]]).tolist()
    [5, 1]
    """
    U = validate_stack(F, A, "stack", square=True)
    N, n, _ = U.shape
    if N and uses_kernels(F, (n, n)):
        kb = _kernels()
        out = np.empty(N, dtype=np.uint64)
        status = np.empty(N, dtype=np.int8)
        _launch(kb.batch_det, kb.det_range, N, U, F._ctx, *_tables(F), out, status)
        return F._out(out)
    out = np.zeros(N, dtype=F.dtype)
    for k in range(N):
        out[k] = F.det(U[k])
    return out


def rank(F, A):
    """Ranks of a stack of matrices (any shape m x n; over Z/n the McCoy rank).

    Returns
    -------
    ndarray, shape (N,), dtype int64

    Examples
    --------
    >>> import gfla
    >>> from gfla.linalg import batched
    >>> batched.rank(gfla.field("GF(2)"), [[[1, 1, 0], [0, 1, 1]], [[1, 1, 0], [1, 1, 0]]]).tolist()
    [2, 1]
    """
    U = validate_stack(F, A, "stack")
    N, m, n = U.shape
    out = np.zeros(N, dtype=np.int64)
    if N and uses_kernels(F, (m, n)):
        status = np.empty(N, dtype=np.int8)
        kb = _kernels()
        _launch(kb.batch_rank, kb.rank_range, N, U, F._ctx, *_tables(F), out, status)
        return out
    for k in range(N):
        out[k] = F.rank(U[k])
    return out


def solve(F, A, B):
    """Solve A_k x = b_k for a stack of systems.

    Parameters
    ----------
    A : array_like, shape (N, m, n)
    B : array_like, shape (N, m)
        The right-hand sides.

    Returns
    -------
    Solutions
        An inconsistent system is an answer (``consistent[k]`` False), not an error.

    Notes
    -----
    Over a field with m, n <= 32: Gauss-Jordan elimination of [A_k | b_k] in compiled
    code. The particular solution sets the free unknowns to 0 and the nullspace basis
    has one row per non-pivot column, as ``F.solve`` gives them (both are read off the
    reduced row echelon form, which is unique). Otherwise ``F.solve`` per system.

    Examples
    --------
    >>> import gfla
    >>> from gfla.linalg import batched
    >>> s = batched.solve(gfla.field("GF(7)"), [[[1, 2], [3, 4]]], [[5, 6]])
    >>> s.consistent.tolist(), s.particular.tolist(), s.nullity.tolist()
    ([True], [[3, 1]], [0])
    """
    U = validate_stack(F, A, "stack")
    N, m, n = U.shape
    V = _validate_rhs(F, B, N, m)
    if N and uses_kernels(F, (m, n)):
        kb = _kernels()
        x = np.empty((N, n), dtype=np.uint64)
        null = np.empty((N, n, n), dtype=np.uint64)
        nullity = np.empty(N, dtype=np.int64)
        consistent = np.empty(N, dtype=np.int8)
        _launch(kb.batch_solve, kb.solve_range, N, U, V, F._ctx, *_tables(F), x, null,
                nullity, consistent)
        ok = consistent == 1
        x[~ok] = 0
        return Solutions(ok, F._out(x), F._out(null), nullity)
    results = [F.solve(U[k], V[k]) for k in range(N)]
    width = max([n] + [len(r.nullspace) for r in results])
    x = np.zeros((N, n), dtype=F.dtype)
    null = np.zeros((N, width, n), dtype=F.dtype)
    nullity = np.zeros(N, dtype=np.int64)
    ok = np.zeros(N, dtype=bool)
    for k, r in enumerate(results):
        ok[k] = bool(r.consistent)
        if r.consistent:
            x[k] = r.particular
        nullity[k] = len(r.nullspace)
        if len(r.nullspace):
            null[k, :len(r.nullspace)] = r.nullspace
    return Solutions(ok, x, null, nullity)


def _validate_rhs(F, B, N, m):
    if isinstance(B, np.ndarray) and B.ndim == 2 and B.shape[0] == 0:
        V = np.zeros(B.shape, dtype=np.uint64)
    else:
        V = F._validate(B, "right-hand sides", 2)
    if V.shape != (N, m):
        raise InputError(f"right-hand sides must have shape ({N}, {m}) to match the "
                         f"stack, got {V.shape}")
    return V


def nullspace(F, A):
    """Nullspaces of a stack of matrices.

    Returns
    -------
    basis : ndarray, shape (N, r, n), r >= n
        Rows 0 .. nullity[k]-1 of ``basis[k]`` span {x : A_k x = 0} (as ``F.nullspace``
        gives them); the other rows are zero.
    nullity : ndarray, shape (N,), int64

    Examples
    --------
    >>> import gfla
    >>> from gfla.linalg import batched
    >>> basis, nullity = batched.nullspace(gfla.field("GF(2)"), [[[1, 1, 0], [0, 1, 1]]])
    >>> basis[0, :nullity[0]].tolist()
    [[1, 1, 1]]
    """
    U = validate_stack(F, A, "stack")
    N, m, n = U.shape
    if N and uses_kernels(F, (m, n)):
        s = solve(F, U, np.zeros((N, m), dtype=np.uint64))
        return s.nullspace, s.nullity
    bases = [F.nullspace(U[k]) for k in range(N)]
    width = max([n] + [len(b) for b in bases])
    null = np.zeros((N, width, n), dtype=F.dtype)
    nullity = np.zeros(N, dtype=np.int64)
    for k, b in enumerate(bases):
        nullity[k] = len(b)
        if len(b):
            null[k, :len(b)] = b
    return null, nullity

