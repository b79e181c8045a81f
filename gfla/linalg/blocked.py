"""Block-recursive elimination over a field: PLE decomposition with Schur complements
updated by the fast product, and what follows from it (rank, rank profile, det,
reduced row echelon form, inverse).

The PLE decomposition of an m x n matrix A is A = P L E with P a permutation, L an
m x r unit lower trapezoidal matrix and E an r x n matrix in row echelon form whose
pivot columns are the column rank profile of A. It is computed in place by splitting
the columns in halves [A1 | A2]:

1. PLE of A1 (recursively): r1 pivots, rows permuted, A1 holds E1 and L1;
2. the same row permutation applied to A2 = [B1; B2] (B1 the first r1 rows);
3. B1 := L11^-1 B1 (triangular solve, itself recursive over the product);
4. B2 := B2 - L21 B1 (the Schur complement: one product);
5. PLE of B2 (recursively), its row permutation applied to L21.

L's column k is stored below pivot k, in the pivot's column; E's rows are the pivot
rows. Every step but the small base cases (``ple_base``, ``trsm_*`` in the kernels) is
a matrix product, so the whole costs a constant times one product.

* rank: r; rank profile: the pivot columns;
* det (square): sign(P) times the product of the pivots when r = n, else 0;
* rref: R = U_J^-1 E, U_J the columns of E at the pivots (upper triangular);
* inverse (square, r = n): A^-1 = U^-1 L^-1 P, as L^-1 by triangular solves on the
  identity, panel by panel (each panel only below its diagonal), then U^-1 times it,
  then the columns permuted. Working memory: the factors in place of one copy of A,
  the inverse being built, and one panel's temporaries.

Each family supplies a backend: a float64 representation for primes with
n (p - 1)^2 < 2^52 (products by BLAS with delayed reduction), uint64 with the
family's arithmetic for the other dense fields (products by limbs or bit-slicing), and
bit-packed rows for GF(2) (products by M4RM; column splits on word boundaries).

Over fields of 256 elements or more, inversion runs by Strassen's recursion on the
Schur complement instead (in place on float64 for the small primes, on uint64 over the
family's product otherwise; a node whose leading block is singular falls back to the
PLE path): it spends nearly all its time in large products. On the uint64 backend the
determinant does too (``schur_det``), and the rank of a square matrix is n when that
determinant is nonzero (``inverse_auto``, ``det_auto``, ``rank_auto``).

References
----------
.. [1] C.-P. Jeannerod, C. Pernet, A. Storjohann, "Rank-profile revealing Gaussian
   elimination and the CUP matrix decomposition", J. Symbolic Computation 56, 2013.
.. [2] O. H. Ibarra, S. Moran, R. Hui, "A generalization of the fast LUP matrix
   decomposition algorithm and applications", J. Algorithms 3, 1982.
.. [3] J.-G. Dumas, C. Pernet, Z. Sultan, "Simultaneous computation of the row and
   column rank profiles", ISSAC 2013.
.. [4] V. Strassen, "Gaussian elimination is not optimal", Numerische Mathematik 13,
   1969 (inversion through the Schur complement).
"""

import numpy as np

__all__ = ["backend_for", "ple", "rank", "det", "rref", "inverse", "inverse_auto",
           "schur_inverse", "schur_det", "det_auto", "rank_auto", "uses_schur",
           "uses_float_schur",
           "BLOCKED_MIN", "BINARY_BLOCKED_MIN"]

# Sizes from which the block-recursive path replaces plain Gauss-Jordan (the smaller
# of the two dimensions); the plain kernels stay the reference and the path for
# small matrices. Measured (ms, Gauss-Jordan / block path): GF(65521) inverse n = 48
# 0.34 / 0.32, 64 0.78 / 0.49, 96 1.9 / 0.62, 192 14.7 / 2.3; rank 64 0.37 / 0.19;
# GF(2^8) inverse 64 equal (the Schur recursion's base case), 96 2.2 / 1.5, 192
# 12.6 / 3.7; GF(2^31-1) inverse 96 2.7 / 1.5, rank 96 1.2 / 0.85.
BLOCKED_MIN = 64
# GF(2): the M4RI Gauss-Jordan kernel (``kernels.binary``, Four Russians tables, one
# pass per 32 columns) stayed faster than the block-recursive PLE at every size
# measured (seconds, M4RI / PLE, under a load of 3-4): rank 2048 0.012 / 0.053, 4096
# 0.066 / 0.21, 8192 0.47 / 1.06; inverse 4096 0.28 / 0.74, 8192 2.1 / 4.1. So GF(2)
# keeps M4RI by default; the packed PLE (``blocked.rank(F, U)`` and friends) is the
# block-recursive alternative, tested against it.
BINARY_BLOCKED_MIN = 1 << 62

# Panels narrower than this are eliminated by the scalar base kernel.
_BASE_COLS = 16
_BASE_COLS_BINARY = 64
_TRSM_BASE = 48
_INVERSE_PANEL = 512
# Schur updates by row operations (``schur_small*`` kernels) instead of the fast
# product when the inner dimension or the work is this small. Measured on 2048-row
# blocks: with one BLAS thread the float64 product beat the row operations from
# 32 x 32 by 32 x 1024 on (0.13 ms against 0.8 ms); the limb and bit-sliced products
# carry more fixed cost per call.
_FLOAT_SMALL = (0, 1 << 15)
_DENSE_SMALL = (8, 1 << 16)


# ----------------------------------------------------------------------- backends
class _FloatBackend:
    """GF(p) with n (p-1)^2 < 2^52: entries as exact integers in float64."""

    packed = False
    base_cols = _BASE_COLS
    trsm_base = _TRSM_BASE

    def __init__(self, F):
        from ..kernels import modular
        self.F = F
        self.p = int(F.characteristic)
        self.pf = float(self.p)
        self.k = modular

    def to_work(self, U):
        out = np.empty(U.shape)
        self.k.to_float(np.ascontiguousarray(U, dtype=np.uint64), out)
        return out

    def to_uint(self, X):
        return X.astype(np.uint64)

    def identity(self, n):
        return np.eye(n)

    def ple_base(self, M, r0, c0, m, n, perm, piv):
        return self.k.ple_base_float(M, r0, c0, m, n, self.pf, perm, piv)

    def trsm_lower_base(self, L, lr0, lc0, r, B, br0, bc0, w):
        self.k.trsm_lower_unit_float(L, lr0, lc0, r, B, br0, bc0, w, self.pf)

    def trsm_upper_base(self, U, ur0, uc0, r, B, br0, bc0, w):
        self.k.trsm_upper_float(U, ur0, uc0, r, B, br0, bc0, w, self.pf)

    def schur(self, M, r0, c0, X, xr0, xc0, Y, yr0, yc0, h, k, w):
        """M[r0:r0+h, c0:c0+w] -= X[xr0:xr0+h, xc0:xc0+k] Y[yr0:yr0+k, yc0:yc0+w]."""
        if h == 0 or w == 0 or k == 0:
            return
        if _small(h, k, w, *_FLOAT_SMALL):
            self.k.schur_small_float(M, r0, c0, X, xr0, xc0, Y, yr0, yc0, h, k, w,
                                     self.pf)
            return
        from .multiply import float_product
        P = float_product(X[xr0:xr0 + h, xc0:xc0 + k], Y[yr0:yr0 + k, yc0:yc0 + w],
                          self.p)
        self.k.sub_block_float(M, r0, c0, P, self.pf)


class _DenseBackend:
    """Any field with the dense uint64 kernels (GF(p) beyond the float bound,
    GF(2^k)); products by the family's fast ``_matmul``."""

    packed = False
    base_cols = _BASE_COLS
    trsm_base = _TRSM_BASE

    def __init__(self, F):
        from ..kernels import dense
        self.F = F
        self.ctx = F._ctx
        self.k = dense

    def to_work(self, U):
        return np.array(U, dtype=np.uint64, order="C")

    def to_uint(self, X):
        return X

    def identity(self, n):
        return np.eye(n, dtype=np.uint64)

    def ple_base(self, M, r0, c0, m, n, perm, piv):
        return self.k.ple_base(M, r0, c0, m, n, self.ctx, perm, piv)

    def trsm_lower_base(self, L, lr0, lc0, r, B, br0, bc0, w):
        self.k.trsm_lower_unit(L, lr0, lc0, r, B, br0, bc0, w, self.ctx)

    def trsm_upper_base(self, U, ur0, uc0, r, B, br0, bc0, w):
        self.k.trsm_upper(U, ur0, uc0, r, B, br0, bc0, w, self.ctx)

    def schur(self, M, r0, c0, X, xr0, xc0, Y, yr0, yc0, h, k, w):
        if h == 0 or w == 0 or k == 0:
            return
        if _small(h, k, w, *_DENSE_SMALL):
            self.k.schur_small(M, r0, c0, X, xr0, xc0, Y, yr0, yc0, h, k, w, self.ctx)
            return
        P = self.F._matmul(np.ascontiguousarray(X[xr0:xr0 + h, xc0:xc0 + k]),
                           np.ascontiguousarray(Y[yr0:yr0 + k, yc0:yc0 + w]))
        self.k.sub_block(M, r0, c0, P, self.ctx)


class _PackedBackend:
    """GF(2), rows bit-packed in uint64 words; column offsets and splits fall on
    multiples of 64 (the block boundaries are word boundaries)."""

    packed = True
    base_cols = _BASE_COLS_BINARY
    trsm_base = 64

    def __init__(self, F):
        from ..kernels import binary
        self.F = F
        self.k = binary

    def ple_base(self, M, r0, c0, m, n, perm, piv):
        return self.k.ple_base(M, r0, c0 // 64, m, n, perm, piv)

    def trsm_lower_base(self, L, lr0, lc0, r, B, br0, bc0, w):
        self.k.trsm_lower_unit(L, lr0, lc0 // 64, r, B, br0, bc0 // 64, _words(bc0, w))

    def trsm_upper_base(self, U, ur0, uc0, r, B, br0, bc0, w):
        self.k.trsm_upper_unit(U, ur0, uc0 // 64, r, B, br0, bc0 // 64, _words(bc0, w))

    def schur(self, M, r0, c0, X, xr0, xc0, Y, yr0, yc0, h, k, w):
        if h == 0 or w == 0 or k == 0:
            return
        from .multiply import binary_product
        P = binary_product(X[xr0:xr0 + h, _cols(self, xc0, xc0 + k)],
                           Y[yr0:yr0 + k, _cols(self, yc0, yc0 + w)])
        M[r0:r0 + h, c0 // 64:c0 // 64 + P.shape[1]] ^= P


def _small(h, k, w, small_k, small_work):
    """Whether a Schur update is done by row operations instead of the product."""
    return k <= small_k or h * k * w <= small_work


def _words(c0, w):
    return (c0 + w + 63) // 64 - c0 // 64


def backend_for(F, size):
    """The elimination backend of field ``F`` for matrices whose larger dimension is
    ``size``."""
    if F.spec == "GF(2)":
        return _PackedBackend(F)
    if int(F._ctx[0]) == 0 and size * (int(F.characteristic) - 1) ** 2 < (1 << 52):
        return _FloatBackend(F)
    return _DenseBackend(F)


# -------------------------------------------------------------------- block views
def _cols(be, c0, c1):
    """Storage slice of logical columns [c0, c1)."""
    if be.packed:
        return slice(c0 // 64, (c1 + 63) // 64)
    return slice(c0, c1)


def _block(be, M, r0, r1, c0, c1):
    return M[r0:r1, _cols(be, c0, c1)]


def _split(be, n):
    if be.packed:
        return 64 * max(1, (n // 64) // 2)
    return n // 2


def _permute_rows(be, M, r0, m, c0, c1, perm):
    if c1 <= c0 or m <= 1:
        return
    moved = np.flatnonzero(perm != np.arange(m))
    if len(moved) == 0:
        return
    blk = _block(be, M, r0, r0 + m, c0, c1)
    blk[moved] = blk[perm[moved]]


def _gather(be, M, r0, r1, cols, c0):
    """Columns c0 + cols of rows r0..r1-1 as a new contiguous matrix."""
    if be.packed:
        k = len(cols)
        if k and c0 % 64 == 0 and int(cols[-1]) == k - 1:
            # leading columns: whole words, the tail of the last one cleared
            w0 = c0 // 64
            out = np.array(M[r0:r1, w0:w0 + (k + 63) // 64], dtype=np.uint64, order="C")
            if k % 64:
                out[:, -1] &= np.uint64((1 << (k % 64)) - 1)
            return out
        out = np.empty((r1 - r0, (k + 63) // 64), dtype=np.uint64)
        be.k.gather_columns(M, r0, r1 - r0, np.ascontiguousarray(cols + c0,
                                                                  dtype=np.int64), out)
        return out
    return np.ascontiguousarray(M[r0:r1, c0 + cols])


# ---------------------------------------------------------------- triangular solves
def trsm_lower(be, L, lr0, lc0, r, B, br0, bc0, w):
    """B[br0:br0+r, cols bc0..bc0+w) := L^-1 B for the unit lower triangular r x r
    block of L at (lr0, lc0), recursively over the product."""
    if r <= be.trsm_base:
        if r > 1 and w > 0:
            be.trsm_lower_base(L, lr0, lc0, r, B, br0, bc0, w)
        return
    h = _split(be, r) if be.packed else r // 2
    trsm_lower(be, L, lr0, lc0, h, B, br0, bc0, w)
    be.schur(B, br0 + h, bc0, L, lr0 + h, lc0, B, br0, bc0, r - h, h, w)
    trsm_lower(be, L, lr0 + h, lc0 + h, r - h, B, br0 + h, bc0, w)


def trsm_upper(be, U, ur0, uc0, r, B, br0, bc0, w):
    """B[br0:br0+r, cols bc0..bc0+w) := U^-1 B for the upper triangular r x r block of
    U at (ur0, uc0) (nonzero diagonal), recursively over the product."""
    if r <= be.trsm_base:
        if r > 0 and w > 0:
            be.trsm_upper_base(U, ur0, uc0, r, B, br0, bc0, w)
        return
    h = _split(be, r) if be.packed else r // 2
    trsm_upper(be, U, ur0 + h, uc0 + h, r - h, B, br0 + h, bc0, w)
    be.schur(B, br0, bc0, U, ur0, uc0 + h, B, br0 + h, bc0, h, r - h, w)
    trsm_upper(be, U, ur0, uc0, h, B, br0, bc0, w)


# ---------------------------------------------------------------------------- PLE
def ple(be, M, r0=0, c0=0, m=None, n=None):
    """In-place PLE of the block M[r0:r0+m, c0:c0+n] (logical columns).

    Returns ``(r, pivots, perm)``: the rank, the pivot columns relative to c0 (the
    column rank profile, int64) and the row permutation (block row now at row i).
    Row swaps are applied to the block's columns only.
    """
    if m is None:
        m = M.shape[0] - r0
    if n is None:
        n = (64 * M.shape[1] if be.packed else M.shape[1]) - c0
    if m == 0 or n == 0:
        return 0, np.zeros(0, dtype=np.int64), np.arange(m, dtype=np.int64)
    if n <= be.base_cols:
        perm = np.empty(m, dtype=np.int64)
        piv = np.empty(min(m, n), dtype=np.int64)
        r = int(be.ple_base(M, r0, c0, m, n, perm, piv))
        return r, piv[:r].copy(), perm
    n1 = _split(be, n)
    r1, J1, p1 = ple(be, M, r0, c0, m, n1)
    _permute_rows(be, M, r0, m, c0 + n1, c0 + n, p1)
    if r1 == 0:
        r2, J2, p2 = ple(be, M, r0, c0 + n1, m, n - n1)
        _permute_rows(be, M, r0, m, c0, c0 + n1, p2)
        return r2, J2 + n1, p1[p2]
    if not be.packed and J1[-1] == r1 - 1:
        # pivots 0..r1-1: L1 is the leading columns of the block, used in place
        L, lr0, lc0 = M, r0, c0
    else:
        L, lr0, lc0 = _gather(be, M, r0, r0 + m, J1, c0), 0, 0
    trsm_lower(be, L, lr0, lc0, r1, M, r0, c0 + n1, n - n1)
    if r1 == m:
        return r1, J1, p1
    be.schur(M, r0 + r1, c0 + n1, L, lr0 + r1, lc0, M, r0, c0 + n1, m - r1, r1, n - n1)
    del L
    r2, J2, p2 = ple(be, M, r0 + r1, c0 + n1, m - r1, n - n1)
    _permute_rows(be, M, r0 + r1, m - r1, c0, c0 + n1, p2)
    perm = p1.copy()
    perm[r1:] = p1[r1:][p2]
    return r1 + r2, np.concatenate([J1, J2 + n1]), perm


def _permutation_sign(perm):
    seen = np.zeros(len(perm), dtype=bool)
    swaps = 0
    for i in range(len(perm)):
        if seen[i]:
            continue
        j, length = i, 0
        while not seen[j]:
            seen[j] = True
            j = int(perm[j])
            length += 1
        swaps += length - 1
    return -1 if swaps % 2 else 1


# ----------------------------------------------------------------------- results
def _work(F, U):
    be = backend_for(F, max(U.shape))
    if be.packed:
        M = F._pack(U)
    else:
        M = be.to_work(U)
    return be, M


def rank(F, U):
    """Rank of U (any shape)."""
    be, M = _work(F, U)
    return ple(be, M, n=U.shape[1])[0]


def det(F, U):
    """Determinant of a square U."""
    n = U.shape[0]
    be, M = _work(F, U)
    r, _, perm = ple(be, M, n=n)
    if r < n:
        return 0
    if be.packed:
        return 1
    return _det_from_factors(F, be, M, n, perm)


def rref(F, U):
    """(R, pivots, det) with R the reduced row echelon form (uint64, or uint8 0/1 for
    GF(2)) and det as in ``dense.rref``."""
    m, n = U.shape
    be, M = _work(F, U)
    r, J, perm = ple(be, M, n=n)
    d = 0
    if r == m and np.array_equal(J, np.arange(r)):
        d = 1 if be.packed else _det_from_factors(F, be, M, r, perm)
    free = np.setdiff1d(np.arange(n, dtype=np.int64), J)
    if be.packed:
        R = np.zeros((m, (n + 63) // 64), dtype=np.uint64)
        if r:
            UJ = _gather(be, M, 0, r, J, 0)
            if len(free):
                N = _gather(be, M, 0, r, free, 0)
                trsm_upper(be, UJ, 0, 0, r, N, 0, 0, len(free))
                be.k.scatter_columns(N, free, R, 0)
            I = be.k.pack(np.eye(r, dtype=np.uint8))
            be.k.scatter_columns(I, J, R, 0)
        from ..kernels import binary
        return binary.unpack(R, n), J, d
    R = np.zeros((m, n), dtype=np.uint64)
    if r:
        UJ = np.ascontiguousarray(M[:r, J])
        if len(free):
            N = np.ascontiguousarray(M[:r, free])
            trsm_upper(be, UJ, 0, 0, r, N, 0, 0, len(free))
            R[:r, free] = be.to_uint(N)
        R[np.arange(r), J] = 1
    return R, J, d


def _det_from_factors(F, be, M, n, perm):
    """sign(P) times the product of the n leading pivots (on the diagonal)."""
    d = 1 if _permutation_sign(perm) > 0 else int(F._neg(np.array([1], dtype=np.uint64))[0])
    diag = be.to_uint(np.ascontiguousarray(np.diagonal(M)[:n]))
    if F.size == F.characteristic:
        p = F.size
        prod = d
        for x in diag.tolist():
            prod = prod * int(x) % p
        return prod
    for x in diag.tolist():
        d = F._mul_scalar(d, int(x))
    return d


def inverse(F, U):
    """A^-1 by the PLE decomposition (uint64; uint8 for GF(2)), or None when A is
    singular."""
    n = U.shape[0]
    be, M = _work(F, U)
    r, _, perm = ple(be, M, n=n)
    if r < n:
        return None
    panel = _INVERSE_PANEL
    if be.packed:
        Y = be.k.pack(np.eye(n, dtype=np.uint8))
    else:
        Y = be.identity(n)
    for c in range(0, n, panel):
        w = min(panel, n - c)
        # column panel c..c+w of L^-1: zero above row c, so solve with L[c:, c:]
        trsm_lower(be, M, c, c, n - c, Y, c, c, w)
    for c in range(0, n, panel):
        w = min(panel, n - c)
        trsm_upper(be, M, 0, 0, n, Y, 0, c, w)
    del M
    inv_perm = np.empty(n, dtype=np.int64)
    inv_perm[perm] = np.arange(n, dtype=np.int64)
    # A^-1 = X P: column perm[i] of A^-1 is column i of X, i.e. A^-1[:, j] = X[:, inv[j]]
    if be.packed:
        if not np.array_equal(perm, np.arange(n)):
            Z = np.empty_like(Y)
            be.k.gather_columns(Y, 0, n, inv_perm, Z)
            Y = Z
        return be.k.unpack(Y, n)
    out = np.empty((n, n), dtype=np.uint64)
    # rows per chunk: temporaries of at most 2 MiB and a sixteenth of the matrix
    step = max(1, min((1 << 18) // n, n // 16))
    for s in range(0, n, step):
        out[s:s + step] = be.to_uint(np.take(Y[s:s + step], inv_perm, axis=1))
    return out


def schur_inverse(F, U, base=64):
    """A^-1 by block recursion on the Schur complement (Strassen's inversion): with
    A = [A11 A12; A21 A22] and S = A22 - A21 A11^-1 A12,

        A^-1 = [A11^-1 + A11^-1 A12 S^-1 A21 A11^-1,  -A11^-1 A12 S^-1;
                -S^-1 A21 A11^-1,                      S^-1],

    six products of half size per level, so the whole costs about one product, all of
    it in large products. Where a leading block A11 or a Schur complement S is
    singular (the matrix itself may still be invertible) that node is inverted by the
    PLE path instead, which also decides singularity: the result is None exactly when
    U is singular.

    References
    ----------
    .. [1] V. Strassen, "Gaussian elimination is not optimal", Numerische Mathematik
       13, 1969.
    """
    return _schur_inverse(F, np.ascontiguousarray(U), base)[0]


def _schur_inverse(F, U, base):
    """(A^-1 or None, det A)."""
    n = U.shape[0]
    if n <= base:
        M = np.zeros((n, 2 * n), dtype=np.uint64)
        M[:, :n] = U
        M[:, n:] = np.eye(n, dtype=np.uint64)
        piv, d = F._rref_gauss_jordan(M, n)
        if len(piv) < n:
            return None, 0
        return M[:, n:].copy(), int(d)
    h = n // 2
    c = np.ascontiguousarray
    X11, d11 = _schur_inverse(F, c(U[:h, :h]), base)
    if X11 is None:
        return _ple_inverse_det(F, U)
    A12, A21 = c(U[:h, h:]), c(U[h:, :h])
    T21 = F._matmul(A21, X11)
    T12 = F._matmul(X11, A12)
    del A12
    S = F._sub(c(U[h:, h:]), F._matmul(A21, T12))
    del A21
    XS, dS = _schur_inverse(F, S, base)
    del S
    if XS is None:
        return _ple_inverse_det(F, U)
    out = np.empty((n, n), dtype=np.uint64)
    X12 = F._neg(F._matmul(T12, XS))
    del T12
    out[:h, :h] = F._sub(X11, F._matmul(X12, T21))
    out[:h, h:] = X12
    del X12, X11
    out[h:, :h] = F._neg(F._matmul(XS, T21))
    out[h:, h:] = XS
    return out, F._mul_scalar(d11, dS)


def _ple_inverse_det(F, U):
    X = inverse(F, U)
    return X, (det(F, U) if X is not None else 0)


def schur_det(F, U, base=64):
    """det A = det A11 det S (S = A22 - A21 A11^-1 A12, the Schur complement), with
    A11^-1 and det A11 from ``schur_inverse``'s recursion: about half a product. A
    singular leading block sends that node to the PLE path.

    References
    ----------
    .. [1] V. Strassen, "Gaussian elimination is not optimal", Numerische Mathematik
       13, 1969.
    """
    U = np.ascontiguousarray(U)
    n = U.shape[0]
    if n <= base:
        return F._det_gauss_jordan(U)
    h = n // 2
    c = np.ascontiguousarray
    X11, d11 = _schur_inverse(F, c(U[:h, :h]), base)
    if X11 is None:
        return det(F, U)
    T12 = F._matmul(X11, c(U[:h, h:]))
    del X11
    S = F._sub(c(U[h:, h:]), F._matmul(c(U[h:, :h]), T12))
    del T12
    dS = schur_det(F, S, base)
    return F._mul_scalar(d11, dS)


def _float_schur_inverse(be, R, r0=0, c0=0, n=None, base=64):
    """The block R[r0:r0+n, c0:c0+n] := its inverse, in place, by the Schur recursion
    of ``schur_inverse`` on the float64 representation (products by BLAS, delayed
    reduction); returns False when a leading block met on the way is singular (the
    block is then garbage).

    With X11 = A11^-1, T12 = X11 A12, T21 = A21 X11: A22 becomes S = A22 - A21 T12 and
    then S^-1, A12 becomes -T12 S^-1, A11 becomes X11 - A12' T21 and A21 becomes
    -S^-1 T21. The temporaries are T12, T21 and one product: about three quarters of
    the matrix at the top level, less below.
    """
    from .multiply import float_product
    if n is None:
        n = R.shape[0]
    p, pf, k = be.p, be.pf, be.k
    if n <= base:
        X = be.F._inverse_gauss_jordan(be.to_uint(R[r0:r0 + n, c0:c0 + n]))
        if X is None:
            return False
        R[r0:r0 + n, c0:c0 + n] = X
        return True
    h = n // 2
    A11 = R[r0:r0 + h, c0:c0 + h]
    A12 = R[r0:r0 + h, c0 + h:c0 + n]
    A21 = R[r0 + h:r0 + n, c0:c0 + h]
    A22 = R[r0 + h:r0 + n, c0 + h:c0 + n]
    if not _float_schur_inverse(be, R, r0, c0, h, base):
        return False
    T12 = float_product(A11, A12, p)
    k.reduce_float(T12, pf)
    T21 = float_product(A21, A11, p)
    k.reduce_float(T21, pf)
    k.sub_block_float(R, r0 + h, c0 + h, float_product(A21, T12, p), pf)
    if not _float_schur_inverse(be, R, r0 + h, c0 + h, n - h, base):
        return False
    P = float_product(T12, A22, p)
    del T12
    A12[...] = 0.0
    k.sub_block_float(R, r0, c0 + h, P, pf)
    k.sub_block_float(R, r0, c0, float_product(A12, T21, p), pf)
    P = float_product(A22, T21, p)
    del T21
    A21[...] = 0.0
    k.sub_block_float(R, r0 + h, c0, P, pf)
    return True


def uses_schur(F, n):
    """Whether inverse, determinant and rank of order n run by the Schur recursion on
    uint64 (see ``inverse_auto``)."""
    return isinstance(backend_for(F, n), _DenseBackend) and F.size >= 256


def uses_float_schur(F, n):
    """Whether the inverse of order n runs by the Schur recursion on float64."""
    return isinstance(backend_for(F, n), _FloatBackend) and F.size >= 256


def inverse_auto(F, U):
    """A^-1 by the method that measured fastest for the family: Strassen's Schur
    recursion where fields have 256 elements or more (singular leading blocks are then
    rare; a node that meets one goes to the PLE path) -- in place on the float64
    representation for the small primes (``_float_schur_inverse``), on uint64 over
    the product of the family otherwise (``schur_inverse``); the PLE path for smaller
    fields and GF(2). Measured inverse / product time: GF(2^8) n = 1024 PLE 4.2-7.2,
    Schur 2.2-3.3; GF(2^31-1) n = 1024 1.2-1.5 and 0.6-0.9; GF(65521) n = 2048 2.9
    and 1.6 (float64 in place, peak memory 3.0 times the input; the uint64 recursion
    needed 4.0)."""
    n = U.shape[0]
    if uses_float_schur(F, n):
        be = backend_for(F, n)
        W = be.to_work(U)
        if _float_schur_inverse(be, W):
            return _float_to_uint_rows(W)
        del W
        return inverse(F, U)
    if uses_schur(F, n):
        return schur_inverse(F, U)
    return inverse(F, U)


def _float_to_uint_rows(W):
    """W as uint64, converted a band of rows at a time (no second float copy)."""
    n = W.shape[0]
    out = np.empty(W.shape, dtype=np.uint64)
    step = max(1, min((1 << 18) // max(1, W.shape[1]), max(1, n // 16)))
    for s in range(0, n, step):
        out[s:s + step] = W[s:s + step]
    return out


def det_auto(F, U):
    """det A by the Schur recursion where ``uses_schur``, else by PLE."""
    if uses_schur(F, U.shape[0]):
        return schur_det(F, U)
    return det(F, U)


def rank_auto(F, U):
    """Rank; a square matrix with nonzero determinant (``det_auto``, cheaper than a
    PLE where the Schur recursion applies) has full rank, anything else goes through
    the PLE decomposition."""
    m, n = U.shape
    if m == n and uses_schur(F, n) and det_auto(F, U) != 0:
        return n
    return rank(F, U)
