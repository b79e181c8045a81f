"""Dense-matrix kernels generic over a context array.

A context ``ctx`` is a uint64 array whose first word selects the arithmetic:

* ``ctx[0] == 0`` -- integers modulo n = ``ctx[1]`` (0 stands for 2^64): GF(p), Z/n;
* ``ctx[0] == 1`` -- GF(2^k) with the log/exp tables laid out by ``extension``.

Matrices are C-contiguous uint64 arrays with entries already reduced. Every kernel is
compiled once for this single signature and cached on disk.

The base cases of the block-recursive elimination (``ple_base``,
``trsm_lower_unit``, ``trsm_upper``, ``sub_block``, ``schur_small``, and ``matvec``
for the Krylov method) work in place on a block ``M[r0:r0+m, c0:c0+n]`` of a
C-contiguous root matrix given with its offsets, so one compiled version serves every
block the recursion hands them.
"""

import numpy as np
from numba import njit

from .extension import EXP_OFFSET, ext_inv, ext_mul
from .modular import addmod, gcd_n, gcdex_mod, invmod, mulmod, negmod, submod

__all__ = ["f_add", "f_sub", "f_mul", "f_neg", "f_inv", "rref", "hessenberg_charpoly",
           "berkowitz_charpoly", "matmul_table", "ew_add", "ew_sub", "ew_mul", "ew_neg",
           "ew_scale", "ew_inv", "howell_form", "trace", "ple_base", "trsm_lower_unit",
           "trsm_upper", "sub_block", "schur_small", "matvec"]

_U0 = np.uint64(0)
_U1 = np.uint64(1)
_EXT = np.uint64(1)


@njit(cache=True, inline="always")
def f_add(a, b, ctx):
    if ctx[0] == _EXT:
        return a ^ b
    return addmod(a, b, ctx[1])


@njit(cache=True, inline="always")
def f_sub(a, b, ctx):
    if ctx[0] == _EXT:
        return a ^ b
    return submod(a, b, ctx[1])


@njit(cache=True, inline="always")
def f_neg(a, ctx):
    if ctx[0] == _EXT:
        return a
    return negmod(a, ctx[1])


@njit(cache=True, inline="always")
def f_mul(a, b, ctx):
    if ctx[0] == _EXT:
        return ext_mul(a, b, ctx)
    return mulmod(a, b, ctx[1])


@njit(cache=True, inline="always")
def f_inv(a, ctx):
    """Inverse, or 0 when a is not a unit."""
    if ctx[0] == _EXT:
        return ext_inv(a, ctx)
    return invmod(a, ctx[1])


@njit(cache=True)
def _row_submul(M, dst, src, f, c0, ctx):
    """M[dst, c0:] -= f * M[src, c0:]."""
    ncol = M.shape[1]
    if ctx[0] == _EXT:
        lo = EXP_OFFSET + 2 * np.int64(ctx[2])
        lf = np.int64(ctx[lo + np.int64(f)])
        for j in range(c0, ncol):
            b = M[src, j]
            if b != _U0:
                M[dst, j] ^= ctx[EXP_OFFSET + lf + np.int64(ctx[lo + np.int64(b)])]
    else:
        n = ctx[1]
        for j in range(c0, ncol):
            b = M[src, j]
            if b != _U0:
                M[dst, j] = submod(M[dst, j], mulmod(f, b, n), n)


@njit(cache=True)
def _row_scale(M, r, f, c0, ctx):
    for j in range(c0, M.shape[1]):
        M[r, j] = f_mul(M[r, j], f, ctx)


@njit(cache=True)
def rref(M, ncols_pivot, ctx):
    """Reduced row echelon form in place by Gauss-Jordan elimination (fields only).

    Pivots are sought only in columns < ncols_pivot. Returns (pivots, det) where pivots
    is an int64 array of the pivot columns and det is the product of the pivots found
    times the sign of the row permutation (the determinant of the leading square block
    when the rank equals the number of rows and the pivots are columns 0..rank-1).
    """
    m = M.shape[0]
    pivots = np.empty(min(m, ncols_pivot), dtype=np.int64)
    det = _U1
    if ctx[0] != _EXT:
        det = det % ctx[1] if ctx[1] != _U0 else det
    r = 0
    for c in range(ncols_pivot):
        if r == m:
            break
        p = -1
        for i in range(r, m):
            if M[i, c] != _U0:
                p = i
                break
        if p < 0:
            continue
        if p != r:
            for j in range(c, M.shape[1]):
                t = M[p, j]
                M[p, j] = M[r, j]
                M[r, j] = t
            det = f_neg(det, ctx)
        piv = M[r, c]
        det = f_mul(det, piv, ctx)
        if piv != _U1:
            _row_scale(M, r, f_inv(piv, ctx), c, ctx)
        for i in range(m):
            if i != r:
                f = M[i, c]
                if f != _U0:
                    _row_submul(M, i, r, f, c, ctx)
        pivots[r] = c
        r += 1
    return pivots[:r].copy(), det


@njit(cache=True)
def hessenberg_charpoly(H, ctx):
    """Characteristic polynomial by reduction to upper Hessenberg form (in place).

    Returns the coefficients, highest degree first (monic). Fields only.
    """
    n = H.shape[0]
    for m in range(1, n - 1):
        p = -1
        for i in range(m, n):
            if H[i, m - 1] != _U0:
                p = i
                break
        if p < 0:
            continue
        if p != m:
            for j in range(n):
                t = H[p, j]
                H[p, j] = H[m, j]
                H[m, j] = t
            for i in range(n):
                t = H[i, p]
                H[i, p] = H[i, m]
                H[i, m] = t
        tinv = f_inv(H[m, m - 1], ctx)
        for i in range(m + 1, n):
            if H[i, m - 1] == _U0:
                continue
            u = f_mul(H[i, m - 1], tinv, ctx)
            _row_submul(H, i, m, u, m - 1, ctx)
            for r in range(n):
                hi = H[r, i]
                if hi != _U0:
                    H[r, m] = f_add(H[r, m], f_mul(u, hi, ctx), ctx)
    # P[m] is the charpoly of the leading m x m block, low degree first.
    P = np.zeros((n + 1, n + 1), dtype=np.uint64)
    P[0, 0] = _U1
    for m in range(1, n + 1):
        hmm = H[m - 1, m - 1]
        for d in range(m):
            c = P[m - 1, d]
            P[m, d + 1] = f_add(P[m, d + 1], c, ctx)
            P[m, d] = f_sub(P[m, d], f_mul(hmm, c, ctx), ctx)
        t = _U1
        for i in range(1, m):
            t = f_mul(t, H[m - i, m - i - 1], ctx)
            if t == _U0:
                break
            coef = f_mul(t, H[m - i - 1, m - 1], ctx)
            if coef == _U0:
                continue
            for d in range(m - i):
                P[m, d] = f_sub(P[m, d], f_mul(coef, P[m - i - 1, d], ctx), ctx)
    out = np.empty(n + 1, dtype=np.uint64)
    for d in range(n + 1):
        out[d] = P[n, n - d]
    return out


@njit(cache=True)
def berkowitz_charpoly(A, ctx):
    """Characteristic polynomial by Berkowitz's division-free algorithm.

    Valid over any commutative ring. Returns coefficients highest degree first.
    """
    n = A.shape[0]
    vect = np.zeros(n + 1, dtype=np.uint64)
    vect[0] = _U1
    if ctx[0] != _EXT and ctx[1] != _U0:
        vect[0] = _U1 % ctx[1]
    if n == 0:
        return vect
    vect[1] = f_neg(A[0, 0], ctx)
    C = np.zeros(n + 1, dtype=np.uint64)
    v = np.zeros(n, dtype=np.uint64)
    w = np.zeros(n, dtype=np.uint64)
    new = np.zeros(n + 1, dtype=np.uint64)
    for r in range(1, n):
        C[0] = vect[0]
        C[1] = f_neg(A[r, r], ctx)
        for j in range(r):
            v[j] = A[j, r]
        for k in range(r):
            c = _U0
            for j in range(r):
                c = f_add(c, f_mul(A[r, j], v[j], ctx), ctx)
            C[k + 2] = f_neg(c, ctx)
            if k < r - 1:
                for i in range(r):
                    s = _U0
                    for j in range(r):
                        s = f_add(s, f_mul(A[i, j], v[j], ctx), ctx)
                    w[i] = s
                for i in range(r):
                    v[i] = w[i]
        for i in range(r + 2):
            acc = _U0
            for j in range(min(i, r) + 1):
                acc = f_add(acc, f_mul(C[i - j], vect[j], ctx), ctx)
            new[i] = acc
        for i in range(r + 2):
            vect[i] = new[i]
    return vect


@njit(cache=True)
def matmul_table(A, B, ctx, C):
    """C = A B for GF(2^k) by log/exp tables (row-oriented, zero entries skipped)."""
    m, kk = A.shape
    n = B.shape[1]
    lo = EXP_OFFSET + 2 * np.int64(ctx[2])
    logB = np.empty((kk, n), dtype=np.int64)
    for t in range(kk):
        for j in range(n):
            b = B[t, j]
            logB[t, j] = -1 if b == _U0 else np.int64(ctx[lo + np.int64(b)])
    for i in range(m):
        for j in range(n):
            C[i, j] = _U0
        for t in range(kk):
            a = A[i, t]
            if a == _U0:
                continue
            la = np.int64(ctx[lo + np.int64(a)]) + EXP_OFFSET
            for j in range(n):
                lb = logB[t, j]
                if lb >= 0:
                    C[i, j] ^= ctx[la + lb]


@njit(cache=True)
def matmul_generic(A, B, ctx, C):
    """C = A B with the context's scalar arithmetic (reference path)."""
    m, kk = A.shape
    n = B.shape[1]
    for i in range(m):
        for j in range(n):
            C[i, j] = _U0
        for t in range(kk):
            a = A[i, t]
            if a == _U0:
                continue
            for j in range(n):
                C[i, j] = f_add(C[i, j], f_mul(a, B[t, j], ctx), ctx)


@njit(cache=True)
def ew_add(a, b, ctx, out):
    for i in range(a.shape[0]):
        out[i] = f_add(a[i], b[i], ctx)


@njit(cache=True)
def ew_sub(a, b, ctx, out):
    for i in range(a.shape[0]):
        out[i] = f_sub(a[i], b[i], ctx)


@njit(cache=True)
def ew_mul(a, b, ctx, out):
    for i in range(a.shape[0]):
        out[i] = f_mul(a[i], b[i], ctx)


@njit(cache=True)
def ew_neg(a, ctx, out):
    for i in range(a.shape[0]):
        out[i] = f_neg(a[i], ctx)


@njit(cache=True)
def ew_scale(a, s, ctx, out):
    for i in range(a.shape[0]):
        out[i] = f_mul(a[i], s, ctx)


@njit(cache=True)
def ew_inv(a, ctx, out):
    """Elementwise inverse; returns the index of the first non-unit, or -1."""
    for i in range(a.shape[0]):
        x = f_inv(a[i], ctx)
        if x == _U0:
            return i
        out[i] = x
    return -1


@njit(cache=True)
def trace(A, ctx):
    s = _U0
    for i in range(A.shape[0]):
        s = f_add(s, A[i, i], ctx)
    return s


@njit(cache=True)
def _unit_normaliser(a, g, n):
    """A unit w of Z/n with w a = g (mod n), where g = gcd(a, n) (Storjohann's stab)."""
    if g == _U1:
        return invmod(a, n)
    if n == _U0:
        nq = (_U0 - g) // g + _U1
    else:
        nq = n // g
    ap = (a // g) % nq
    w0 = invmod(ap, nq) if nq != _U1 else _U0
    w = w0
    for _ in range(1 << 16):
        if gcd_n(w, n) == _U1:
            return w
        w = addmod(w, nq % n if n != _U0 else nq, n)
    return _U0


@njit(cache=True)
def howell_form(M, used, n):
    """Howell form over Z/n in place (n = 0 stands for 2^64).

    M has at least ``used + M.shape[1]`` rows; rows from ``used`` on are zero and serve
    for the annihilator rows. Returns (rank_rows, pivots): the number of nonzero rows of
    the form and their pivot columns. Each pivot divides n, entries above a pivot are
    reduced modulo it, and the rows with their first j entries zero span every vector of
    the row module with that property (the Howell property).
    """
    R, C = M.shape
    pivots = np.empty(C, dtype=np.int64)
    r = 0
    for c in range(C):
        if r >= used:
            break
        for i in range(r + 1, used):
            b = M[i, c]
            if b == _U0:
                continue
            a = M[r, c]
            g, s, t = gcdex_mod(a, b, n)
            u = negmod((b // g) % n if n != _U0 else b // g, n)
            v = (a // g) % n if n != _U0 else a // g
            for j in range(c, C):
                x = M[r, j]
                y = M[i, j]
                M[r, j] = addmod(mulmod(s, x, n), mulmod(t, y, n), n)
                M[i, j] = addmod(mulmod(u, x, n), mulmod(v, y, n), n)
        a = M[r, c]
        if a == _U0:
            continue
        g = gcd_n(a, n)
        if g != a:
            w = _unit_normaliser(a, g, n)
            for j in range(c, C):
                M[r, j] = mulmod(M[r, j], w, n)
        for i in range(r):
            if M[i, c] >= g:
                q = M[i, c] // g
                if n != _U0:
                    q = q % n
                for j in range(c, C):
                    M[i, j] = submod(M[i, j], mulmod(q, M[r, j], n), n)
        if g != _U1:
            f = (_U0 - g) // g + _U1 if n == _U0 else n // g
            for j in range(c, C):
                M[used, j] = mulmod(f, M[r, j], n)
            nonzero = False
            for j in range(c, C):
                if M[used, j] != _U0:
                    nonzero = True
                    break
            if nonzero:
                used += 1
        pivots[r] = c
        r += 1
    return r, pivots[:r].copy()


# ----------------------------------------------------- base cases of block elimination
@njit(cache=True)
def _axpy_block(M, dst, src, f, c0, c1, ctx):
    """M[dst, c0:c1] -= f * M[src, c0:c1] (rows of one matrix)."""
    if ctx[0] == _EXT:
        lo = EXP_OFFSET + 2 * np.int64(ctx[2])
        lf = np.int64(ctx[lo + np.int64(f)]) + EXP_OFFSET
        for j in range(c0, c1):
            b = M[src, j]
            if b != _U0:
                M[dst, j] ^= ctx[lf + np.int64(ctx[lo + np.int64(b)])]
    else:
        n = ctx[1]
        for j in range(c0, c1):
            b = M[src, j]
            if b != _U0:
                M[dst, j] = submod(M[dst, j], mulmod(f, b, n), n)


@njit(cache=True)
def ple_base(M, r0, c0, m, n, ctx, perm, pivots):
    """PLE decomposition in place of the block M[r0:r0+m, c0:c0+n] (fields only).

    Gaussian elimination by columns with row swaps inside the block. On return the
    pivot rows 0..r-1 of the block hold E (row echelon form, pivots not normalised)
    and, below each pivot, the multipliers of L (unit lower triangular; column k of L
    is stored in the column of pivot k). ``perm[i]`` is the block row now at row i,
    ``pivots[:r]`` the pivot columns relative to c0. Returns the rank r.

    References
    ----------
    .. [1] C.-P. Jeannerod, C. Pernet, A. Storjohann, "Rank-profile revealing Gaussian
       elimination and the CUP matrix decomposition", J. Symbolic Computation 56, 2013.
    """
    for i in range(m):
        perm[i] = i
    r = 0
    for c in range(n):
        if r == m:
            break
        hit = -1
        for i in range(r, m):
            if M[r0 + i, c0 + c] != _U0:
                hit = i
                break
        if hit < 0:
            continue
        if hit != r:
            for j in range(c0, c0 + n):
                t = M[r0 + hit, j]
                M[r0 + hit, j] = M[r0 + r, j]
                M[r0 + r, j] = t
            t2 = perm[hit]
            perm[hit] = perm[r]
            perm[r] = t2
        inv = f_inv(M[r0 + r, c0 + c], ctx)
        for i in range(r + 1, m):
            a = M[r0 + i, c0 + c]
            if a == _U0:
                continue
            f = f_mul(a, inv, ctx)
            M[r0 + i, c0 + c] = f
            _axpy_block(M, r0 + i, r0 + r, f, c0 + c + 1, c0 + n, ctx)
        pivots[r] = c
        r += 1
    return r


@njit(cache=True)
def trsm_lower_unit(L, lr0, lc0, r, B, br0, bc0, w, ctx):
    """B[br0:br0+r, bc0:bc0+w] := L^-1 B, with L the unit lower triangular r x r block
    of ``L`` at (lr0, lc0); entries on and above its diagonal are not read (forward
    substitution)."""
    for i in range(1, r):
        for k in range(i):
            f = L[lr0 + i, lc0 + k]
            if f != _U0:
                _axpy_block(B, br0 + i, br0 + k, f, bc0, bc0 + w, ctx)


@njit(cache=True)
def trsm_upper(U, ur0, uc0, r, B, br0, bc0, w, ctx):
    """B[br0:br0+r, bc0:bc0+w] := U^-1 B, with U the upper triangular r x r block of
    ``U`` at (ur0, uc0), nonzero diagonal; entries below it are not read (back
    substitution)."""
    for i in range(r - 1, -1, -1):
        for k in range(i + 1, r):
            f = U[ur0 + i, uc0 + k]
            if f != _U0:
                _axpy_block(B, br0 + i, br0 + k, f, bc0, bc0 + w, ctx)
        d = f_inv(U[ur0 + i, uc0 + i], ctx)
        if d != _U1:
            for j in range(bc0, bc0 + w):
                B[br0 + i, j] = f_mul(B[br0 + i, j], d, ctx)


@njit(cache=True)
def sub_block(M, r0, c0, P, ctx):
    """M[r0:r0+h, c0:c0+w] -= P for P of shape (h, w), entries reduced."""
    for i in range(P.shape[0]):
        for j in range(P.shape[1]):
            M[r0 + i, c0 + j] = f_sub(M[r0 + i, c0 + j], P[i, j], ctx)


@njit(cache=True)
def schur_small(M, r0, c0, X, xr0, xc0, Y, yr0, yc0, h, k, w, ctx):
    """M[r0:r0+h, c0:c0+w] -= X[xr0:xr0+h, xc0:xc0+k] Y[yr0:yr0+k, yc0:yc0+w]: the
    Schur update for a small inner dimension, by row operations."""
    for i in range(h):
        for t in range(k):
            f = X[xr0 + i, xc0 + t]
            if f == _U0:
                continue
            if ctx[0] == _EXT:
                lo = EXP_OFFSET + 2 * np.int64(ctx[2])
                lf = np.int64(ctx[lo + np.int64(f)]) + EXP_OFFSET
                for j in range(w):
                    b = Y[yr0 + t, yc0 + j]
                    if b != _U0:
                        M[r0 + i, c0 + j] ^= ctx[lf + np.int64(ctx[lo + np.int64(b)])]
            else:
                n = ctx[1]
                for j in range(w):
                    b = Y[yr0 + t, yc0 + j]
                    if b != _U0:
                        M[r0 + i, c0 + j] = submod(M[r0 + i, c0 + j], mulmod(f, b, n), n)


@njit(cache=True)
def matvec(A, x, ctx, out):
    """out = A x with the context's arithmetic."""
    for i in range(A.shape[0]):
        acc = _U0
        if ctx[0] == _EXT:
            lo = EXP_OFFSET + 2 * np.int64(ctx[2])
            for j in range(A.shape[1]):
                a = A[i, j]
                b = x[j]
                if a != _U0 and b != _U0:
                    acc ^= ctx[EXP_OFFSET + np.int64(ctx[lo + np.int64(a)])
                               + np.int64(ctx[lo + np.int64(b)])]
        else:
            n = ctx[1]
            for j in range(A.shape[1]):
                a = A[i, j]
                if a != _U0:
                    acc = addmod(acc, mulmod(a, x[j], n), n)
        out[i] = acc
