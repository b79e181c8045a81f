"""Elimination: rank, reduced row echelon form, nullspace, solve and determinant.

Over a field these come from Gauss-Jordan elimination (the family's ``_rref``
primitive). Over Z/n they come from the Howell form (a canonical echelon form over
Z/n whose rows with leading zeros span every row-module vector with those leading zeros),
the rank is the McCoy rank, and the determinant comes from Berkowitz's division-free
characteristic polynomial.

References
----------
.. [1] J. A. Howell, "Spans in the module (Z_m)^s", Linear and Multilinear Algebra 19,
   1986.
.. [2] A. Storjohann, T. Mulders, "Fast algorithms for linear algebra modulo N",
   ESA 1998, LNCS 1461.
.. [3] N. H. McCoy, "Rings and Ideals", Carus Mathematical Monographs 8, 1948 (McCoy
   rank).
"""

import numpy as np

from ..errors import SingularMatrixError

__all__ = ["rank", "rref", "nullspace", "solve", "det", "howell", "kernel_vector"]


def rank(F, U):
    if not F.is_field:
        return F._ring_rank(U)
    return F._rank(U)


def rref(F, U):
    if not F.is_field:
        R, piv = howell(F, U)
        return R, piv
    M = U.copy()
    piv, _ = F._rref(M)
    return M, piv


def _field_nullspace_from_rref(F, R, piv, ncols):
    piv = [int(p) for p in piv]
    pivot_set = set(piv)
    free = [j for j in range(ncols) if j not in pivot_set]
    N = np.zeros((len(free), ncols), dtype=np.uint64)
    if not free:
        return N
    N[np.arange(len(free)), free] = 1
    if piv:
        block = np.ascontiguousarray(R[:len(piv)][:, free].T)
        N[:, piv] = F._neg(block)
    return N


def nullspace(F, U):
    """Rows spanning {x : U x = 0} (a basis over a field, generators over Z/n)."""
    if not F.is_field:
        return _ring_nullspace(F, U)
    M = U.copy()
    piv, _ = F._rref(M)
    return _field_nullspace_from_rref(F, M, piv, U.shape[1])


def solve(F, U, b):
    """(consistent, particular or None, nullspace rows) for U x = b."""
    if not F.is_field:
        return _ring_solve(F, U, b)
    m, n = U.shape
    M = np.empty((m, n + 1), dtype=np.uint64)
    M[:, :n] = U
    M[:, n] = b
    piv, _ = F._rref(M)
    N = _field_nullspace_from_rref(F, M[:, :n], [p for p in piv if p < n], n)
    if len(piv) and int(piv[-1]) == n:
        return False, None, N
    x = np.zeros(n, dtype=np.uint64)
    for i, p in enumerate(piv):
        x[int(p)] = M[i, n]
    return True, x, N


def left_certificate(F, U, b):
    """For an inconsistent system over a field: y with y U = 0 and y b != 0."""
    m, n = U.shape
    M = np.zeros((m, n + 1 + m), dtype=np.uint64)
    M[:, :n] = U
    M[:, n] = b
    M[:, n + 1:] = F._identity(m)
    piv, _ = F._rref(M, n + 1)
    for i, p in enumerate(piv):
        if int(p) == n:
            return M[i, n + 1:].copy()
    return None


def det(F, U):
    if not F.is_field:
        c = F._berkowitz(U)
        d = c[-1]
        if U.shape[0] % 2:
            d = int(F._neg(np.array([d], dtype=np.uint64))[0])
        return d
    return F._det(U)


def kernel_vector(F, U):
    """A nonzero v with U v = 0 over a field (checked), or None when U has full column
    rank."""
    N = nullspace(F, U)
    if N.shape[0] == 0:
        return None
    v = N[0]
    check = F._matmul(U, v.reshape(-1, 1)).ravel()
    if check.any():  # pragma: no cover - a failed self-check is a bug, not user error
        raise AssertionError("kernel vector self-check failed")
    return v


def singular_error(F, U, what="matrix is singular"):
    v = kernel_vector(F, U)
    return SingularMatrixError(f"{what}: A v = 0 for v = {[int(x) for x in v]}",
                               kernel_vector=v)


# ---------------------------------------------------------------- residue rings
def howell(F, U, extra_rows=None):
    """Howell form of U over Z/n: (rows, pivot columns)."""
    from ..kernels import dense
    m, c = U.shape
    M = np.zeros((m + c + 1, c), dtype=np.uint64)
    M[:m] = U
    r, piv = dense.howell_form(M, m, F._ctx[1])
    return M[:r].copy(), piv


def _ring_nullspace(F, U):
    m, n = U.shape
    M = np.zeros((n, m + n), dtype=np.uint64)
    M[:, :m] = U.T
    M[:, m:] = F._identity(n)
    H, piv = howell(F, M)
    rows = [i for i, p in enumerate(piv) if p >= m]
    if not rows:
        return np.zeros((0, n), dtype=np.uint64)
    return H[rows][:, m:].copy()


def _ring_solve(F, U, b):
    m, n = U.shape
    M = np.zeros((n + 1, m + 1 + n), dtype=np.uint64)
    M[:n, :m] = U.T
    M[:n, m + 1:] = F._identity(n)
    M[n, :m] = F._neg(b)
    M[n, m] = 1
    H, piv = howell(F, M)
    x = None
    kern = []
    for i, p in enumerate(piv):
        if p == m and int(H[i, m]) == 1:
            x = H[i, m + 1:].copy()
        elif p > m:
            kern.append(H[i, m + 1:])
    N = np.array(kern, dtype=np.uint64).reshape(len(kern), n)
    return x is not None, x, N
