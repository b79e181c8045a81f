"""Batched kernels for stacks of small dense matrices, parallel over the stack.

A stack is a C-contiguous uint64 array of shape ``(N, m, n)`` (square where the
operation needs it), meant for n <= 32. Every kernel takes the context array ``ctx`` of
``dense`` and is compiled once for that single signature:

* ``ctx[0] == 1`` -- GF(2^k): log/exp table arithmetic with a "zero sentinel" (the log
  of 0 is an index into a stretch of zeros appended to the exp table), so a product
  ``exp[log a + log b]`` needs no test for zero;
* ``ctx[0] == 0`` -- integers modulo a prime p = ``ctx[1]`` (GF(p), GF(2)).

The kernels are for fields. A pivot that is not a unit (which happens only when a
residue ring's context is passed) is reported in the status array instead of being
divided by, so the caller can route that matrix elsewhere.

The stack is cut into blocks of ``BLOCK`` matrices; ``prange`` runs over the blocks and
each block allocates its small work arrays once, so nothing is allocated per matrix.
A matrix is copied into a work array, eliminated there and written out. Each
``batch_*`` kernel has a ``*_range`` twin that runs a slice of the stack in the calling
thread: for small stacks, where waking the thread pool costs more than the work.

References
----------
.. [1] W. H. Press, S. A. Teukolsky, W. T. Vetterling, B. P. Flannery, "Numerical
   Recipes", 3rd ed., Cambridge University Press, 2007, section 2.1 (Gauss-Jordan
   elimination in place, with the column unscrambling of the row interchanges).
.. [2] R. Lidl, H. Niederreiter, "Finite Fields", 2nd ed., Cambridge University Press,
   1997, chapter 9 (logarithm tables for arithmetic in GF(q)).
"""

import numpy as np
from numba import njit, prange

from .extension import EXP_OFFSET
from .modular import invmod, mulmod, negmod, submod

__all__ = ["BLOCK", "STATUS_OK", "STATUS_SINGULAR", "STATUS_NOT_A_UNIT", "tables",
           "batch_inverse", "batch_det", "batch_rank", "batch_solve", "inverse_range",
           "det_range", "rank_range", "solve_range", "id_hashes", "id_insert", "id_place"]

BLOCK = 64

STATUS_OK = 0
STATUS_SINGULAR = 1
STATUS_NOT_A_UNIT = 2

_U0 = np.uint64(0)
_U1 = np.uint64(1)
_EXT = np.uint64(1)


@njit(cache=True)
def _ext_tables(ctx):
    """int64 exp and log tables of GF(2^k) with a zero sentinel.

    ``logz[0] = Z = 2 (q - 1) - 1`` and ``expz[i] = 0`` for ``i >= Z``, so
    ``expz[logz[a] + logz[b]]`` is the product for all a, b (the largest genuine sum of
    two logs is 2 (q - 2) < Z), and ``expz[logz[a] + (q - 1 - logz[p])]`` is a / p.
    """
    q1 = np.int64(ctx[2])
    z = 2 * q1 - 1
    expz = np.zeros(2 * z + 1, dtype=np.int64)
    for i in range(z):
        expz[i] = np.int64(ctx[EXP_OFFSET + i])
    lo = EXP_OFFSET + 2 * q1
    logz = np.empty(q1 + 1, dtype=np.int64)
    logz[0] = z
    for a in range(1, q1 + 1):
        logz[a] = np.int64(ctx[lo + a])
    return expz, logz


@njit(cache=True)
def tables(ctx):
    """The int64 exp and log tables every kernel here takes (see ``_ext_tables``) for
    GF(2^k); one-entry dummies for the modular case. Build once per field."""
    if ctx[0] == _EXT:
        return _ext_tables(ctx)
    return np.zeros(1, dtype=np.int64), np.zeros(1, dtype=np.int64)


# ---------------------------------------------------------------------- inverse

@njit(cache=True)
def _inverse_ext(A, k, out, kernel, status, W, perm, LR, expz, logz, q1):
    n = W.shape[0]
    for i in range(n):
        for j in range(n):
            W[i, j] = np.int64(A[k, i, j])
    for c in range(n):
        p = -1
        for i in range(c, n):
            if W[i, c] != 0:
                p = i
                break
        if p < 0:
            # Columns 0..c-1 hold pivots (reduced above and below), so
            # v = (-W[0, c], ..., -W[c-1, c], 1, 0, ..., 0) has A v = 0; -x = x here.
            for j in range(n):
                kernel[k, j] = _U0
            for i in range(c):
                kernel[k, i] = np.uint64(W[i, c])
            kernel[k, c] = _U1
            for i in range(n):
                for j in range(n):
                    out[k, i, j] = _U0
            status[k] = STATUS_SINGULAR
            return
        perm[c] = p
        if p != c:
            for j in range(n):
                t = W[p, j]
                W[p, j] = W[c, j]
                W[c, j] = t
        linv = q1 - logz[W[c, c]]
        if linv == q1:
            linv = 0
        W[c, c] = 1
        for j in range(n):
            v = expz[logz[W[c, j]] + linv]
            W[c, j] = v
            LR[j] = logz[v]
        for i in range(n):
            if i == c:
                continue
            f = W[i, c]
            if f == 0:
                continue
            W[i, c] = 0
            lf = logz[f]
            for j in range(n):
                W[i, j] ^= expz[lf + LR[j]]
    for c in range(n - 1, -1, -1):
        p = perm[c]
        if p != c:
            for i in range(n):
                t = W[i, p]
                W[i, p] = W[i, c]
                W[i, c] = t
    for i in range(n):
        for j in range(n):
            out[k, i, j] = np.uint64(W[i, j])
    for j in range(n):
        kernel[k, j] = _U0
    status[k] = STATUS_OK


@njit(cache=True)
def _inverse_mod(A, k, out, kernel, status, W, perm, m):
    n = W.shape[0]
    for i in range(n):
        for j in range(n):
            W[i, j] = A[k, i, j]
    for c in range(n):
        p = -1
        for i in range(c, n):
            if W[i, c] != _U0:
                p = i
                break
        if p < 0:
            for j in range(n):
                kernel[k, j] = _U0
            for i in range(c):
                kernel[k, i] = negmod(W[i, c], m)
            kernel[k, c] = _U1
            for i in range(n):
                for j in range(n):
                    out[k, i, j] = _U0
            status[k] = STATUS_SINGULAR
            return
        perm[c] = p
        if p != c:
            for j in range(n):
                t = W[p, j]
                W[p, j] = W[c, j]
                W[c, j] = t
        pinv = invmod(W[c, c], m)
        if pinv == _U0:
            for i in range(n):
                for j in range(n):
                    out[k, i, j] = _U0
            for j in range(n):
                kernel[k, j] = _U0
            status[k] = STATUS_NOT_A_UNIT
            return
        W[c, c] = _U1
        for j in range(n):
            W[c, j] = mulmod(W[c, j], pinv, m)
        for i in range(n):
            if i == c:
                continue
            f = W[i, c]
            if f == _U0:
                continue
            W[i, c] = _U0
            for j in range(n):
                b = W[c, j]
                if b != _U0:
                    W[i, j] = submod(W[i, j], mulmod(f, b, m), m)
    for c in range(n - 1, -1, -1):
        p = perm[c]
        if p != c:
            for i in range(n):
                t = W[i, p]
                W[i, p] = W[i, c]
                W[i, c] = t
    for i in range(n):
        for j in range(n):
            out[k, i, j] = W[i, j]
    for j in range(n):
        kernel[k, j] = _U0
    status[k] = STATUS_OK


@njit(cache=True, parallel=True)
def batch_inverse(A, ctx, expz, logz, out, kernel, status):
    """Invert every matrix of a stack by in-place Gauss-Jordan elimination.

    Parameters
    ----------
    A : uint64 (N, n, n)
        The stack, entries reduced.
    ctx : uint64 array
        Field context (see the module docstring).
    expz, logz : int64 arrays
        ``tables(ctx)``.
    out : uint64 (N, n, n)
        Receives the inverses (zeros where a matrix is singular).
    kernel : uint64 (N, n)
        Receives, for a singular matrix, a nonzero v with A v = 0: the kernel vector of
        the first column that is a combination of the columns before it (the first
        basis vector of the nullspace read from the reduced row echelon form); zeros
        for an invertible matrix.
    status : int8 (N,)
        ``STATUS_OK``, ``STATUS_SINGULAR``, or ``STATUS_NOT_A_UNIT`` (a pivot without
        an inverse: only over a residue ring).
    """
    N = A.shape[0]
    nblocks = (N + BLOCK - 1) // BLOCK
    for b in prange(nblocks):
        inverse_range(A, ctx, expz, logz, out, kernel, status, b * BLOCK,
                      min(N, (b + 1) * BLOCK))


@njit(cache=True)
def inverse_range(A, ctx, expz, logz, out, kernel, status, start, stop):
    """``batch_inverse`` on matrices start .. stop-1, in the calling thread."""
    n = A.shape[1]
    perm = np.empty(n, dtype=np.int64)
    if ctx[0] == _EXT:
        q1 = np.int64(ctx[2])
        W = np.empty((n, n), dtype=np.int64)
        LR = np.empty(n, dtype=np.int64)
        for k in range(start, stop):
            _inverse_ext(A, k, out, kernel, status, W, perm, LR, expz, logz, q1)
    else:
        m = ctx[1]
        W = np.empty((n, n), dtype=np.uint64)
        for k in range(start, stop):
            _inverse_mod(A, k, out, kernel, status, W, perm, m)


# ---------------------------------------------------------------------- det

@njit(cache=True)
def _det_ext(A, k, W, expz, logz, q1):
    n = W.shape[0]
    for i in range(n):
        for j in range(n):
            W[i, j] = np.int64(A[k, i, j])
    logdet = 0
    for c in range(n):
        p = -1
        for i in range(c, n):
            if W[i, c] != 0:
                p = i
                break
        if p < 0:
            return _U0
        if p != c:
            for j in range(c, n):
                t = W[p, j]
                W[p, j] = W[c, j]
                W[c, j] = t
        lp = logz[W[c, c]]
        logdet += lp
        if logdet >= q1:
            logdet -= q1
        linv = q1 - lp
        for i in range(c + 1, n):
            f = W[i, c]
            if f == 0:
                continue
            lf = logz[f] + linv  # log of the multiplier f / pivot, reduced mod q - 1
            if lf >= q1:
                lf -= q1
            for j in range(c + 1, n):
                W[i, j] ^= expz[lf + logz[W[c, j]]]
    return np.uint64(expz[logdet])


@njit(cache=True)
def _det_mod(A, k, W, m, status):
    n = W.shape[0]
    for i in range(n):
        for j in range(n):
            W[i, j] = A[k, i, j]
    det = _U1 % m
    for c in range(n):
        p = -1
        for i in range(c, n):
            if W[i, c] != _U0:
                p = i
                break
        if p < 0:
            return _U0
        if p != c:
            for j in range(c, n):
                t = W[p, j]
                W[p, j] = W[c, j]
                W[c, j] = t
            det = negmod(det, m)
        piv = W[c, c]
        det = mulmod(det, piv, m)
        pinv = invmod(piv, m)
        if pinv == _U0:
            status[k] = STATUS_NOT_A_UNIT
            return _U0
        for i in range(c + 1, n):
            f = W[i, c]
            if f == _U0:
                continue
            f = mulmod(f, pinv, m)
            for j in range(c + 1, n):
                b = W[c, j]
                if b != _U0:
                    W[i, j] = submod(W[i, j], mulmod(f, b, m), m)
    return det


@njit(cache=True, parallel=True)
def batch_det(A, ctx, expz, logz, out, status):
    """Determinants of a stack of square matrices by Gaussian elimination.

    Parameters
    ----------
    A : uint64 (N, n, n)
    ctx : uint64 array
    expz, logz : int64 arrays
        ``tables(ctx)``.
    out : uint64 (N,)
        Receives the determinants.
    status : int8 (N,)
        ``STATUS_OK``, or ``STATUS_NOT_A_UNIT`` where a pivot had no inverse (only
        over a residue ring; ``out`` is then meaningless).
    """
    N = A.shape[0]
    nblocks = (N + BLOCK - 1) // BLOCK
    for b in prange(nblocks):
        det_range(A, ctx, expz, logz, out, status, b * BLOCK, min(N, (b + 1) * BLOCK))


@njit(cache=True)
def det_range(A, ctx, expz, logz, out, status, start, stop):
    """``batch_det`` on matrices start .. stop-1, in the calling thread."""
    n = A.shape[1]
    if ctx[0] == _EXT:
        q1 = np.int64(ctx[2])
        W = np.empty((n, n), dtype=np.int64)
        for k in range(start, stop):
            status[k] = STATUS_OK
            out[k] = _det_ext(A, k, W, expz, logz, q1)
    else:
        m = ctx[1]
        W = np.empty((n, n), dtype=np.uint64)
        for k in range(start, stop):
            status[k] = STATUS_OK
            out[k] = _det_mod(A, k, W, m, status)


# ---------------------------------------------------------------------- rank

@njit(cache=True)
def _rank_ext(A, k, W, expz, logz, q1):
    rows = W.shape[0]
    cols = W.shape[1]
    for i in range(rows):
        for j in range(cols):
            W[i, j] = np.int64(A[k, i, j])
    r = 0
    for c in range(cols):
        if r == rows:
            break
        p = -1
        for i in range(r, rows):
            if W[i, c] != 0:
                p = i
                break
        if p < 0:
            continue
        if p != r:
            for j in range(c, cols):
                t = W[p, j]
                W[p, j] = W[r, j]
                W[r, j] = t
        linv = q1 - logz[W[r, c]]
        for i in range(r + 1, rows):
            f = W[i, c]
            if f == 0:
                continue
            lf = logz[f] + linv
            if lf >= q1:
                lf -= q1
            for j in range(c + 1, cols):
                W[i, j] ^= expz[lf + logz[W[r, j]]]
        r += 1
    return r


@njit(cache=True)
def _rank_mod(A, k, W, m, status):
    rows = W.shape[0]
    cols = W.shape[1]
    for i in range(rows):
        for j in range(cols):
            W[i, j] = A[k, i, j]
    r = 0
    for c in range(cols):
        if r == rows:
            break
        p = -1
        for i in range(r, rows):
            if W[i, c] != _U0:
                p = i
                break
        if p < 0:
            continue
        if p != r:
            for j in range(c, cols):
                t = W[p, j]
                W[p, j] = W[r, j]
                W[r, j] = t
        pinv = invmod(W[r, c], m)
        if pinv == _U0:
            status[k] = STATUS_NOT_A_UNIT
            return 0
        for i in range(r + 1, rows):
            f = W[i, c]
            if f == _U0:
                continue
            f = mulmod(f, pinv, m)
            for j in range(c + 1, cols):
                b = W[r, j]
                if b != _U0:
                    W[i, j] = submod(W[i, j], mulmod(f, b, m), m)
        r += 1
    return r


@njit(cache=True, parallel=True)
def batch_rank(A, ctx, expz, logz, out, status):
    """Ranks of a stack of (not necessarily square) matrices by Gaussian elimination.

    Parameters
    ----------
    A : uint64 (N, m, n)
    ctx : uint64 array
    expz, logz : int64 arrays
        ``tables(ctx)``.
    out : int64 (N,)
        Receives the ranks.
    status : int8 (N,)
        ``STATUS_OK``, or ``STATUS_NOT_A_UNIT`` (residue rings only).
    """
    N = A.shape[0]
    nblocks = (N + BLOCK - 1) // BLOCK
    for b in prange(nblocks):
        rank_range(A, ctx, expz, logz, out, status, b * BLOCK, min(N, (b + 1) * BLOCK))


@njit(cache=True)
def rank_range(A, ctx, expz, logz, out, status, start, stop):
    """``batch_rank`` on matrices start .. stop-1, in the calling thread."""
    rows = A.shape[1]
    cols = A.shape[2]
    if ctx[0] == _EXT:
        q1 = np.int64(ctx[2])
        W = np.empty((rows, cols), dtype=np.int64)
        for k in range(start, stop):
            status[k] = STATUS_OK
            out[k] = _rank_ext(A, k, W, expz, logz, q1)
    else:
        m = ctx[1]
        W = np.empty((rows, cols), dtype=np.uint64)
        for k in range(start, stop):
            status[k] = STATUS_OK
            out[k] = _rank_mod(A, k, W, m, status)


# ---------------------------------------------------------------------- solve

@njit(cache=True)
def _solve_ext(A, B, k, x, null, nullity, consistent, W, pivcol, LR, expz, logz, q1):
    rows = W.shape[0]
    n = W.shape[1] - 1
    for i in range(rows):
        for j in range(n):
            W[i, j] = np.int64(A[k, i, j])
        W[i, n] = np.int64(B[k, i])
    r = 0
    for c in range(n):
        if r == rows:
            break
        p = -1
        for i in range(r, rows):
            if W[i, c] != 0:
                p = i
                break
        if p < 0:
            continue
        if p != r:
            for j in range(c, n + 1):
                t = W[p, j]
                W[p, j] = W[r, j]
                W[r, j] = t
        linv = q1 - logz[W[r, c]]
        if linv == q1:
            linv = 0
        for j in range(c, n + 1):
            v = expz[logz[W[r, j]] + linv]
            W[r, j] = v
            LR[j] = logz[v]
        for i in range(rows):
            if i == r:
                continue
            f = W[i, c]
            if f == 0:
                continue
            lf = logz[f]
            for j in range(c, n + 1):
                W[i, j] ^= expz[lf + LR[j]]
        pivcol[r] = c
        r += 1
    ok = 1
    for i in range(r, rows):
        if W[i, n] != 0:
            ok = 0
    consistent[k] = ok
    for j in range(n):
        x[k, j] = _U0
    for i in range(r):
        x[k, pivcol[i]] = np.uint64(W[i, n])
    _nullspace_rows(W, pivcol, r, n, k, null, nullity, _U1, _U0, True)


@njit(cache=True)
def _nullspace_rows(W, pivcol, r, n, k, null, nullity, one, m, char2):
    """Rows of the nullspace basis from the reduced form in W: one per free column f,
    with v[f] = 1 and v[pivcol[i]] = -W[i, f] (the order of the free columns)."""
    t = 0
    pi = 0
    for f in range(n):
        if pi < r and pivcol[pi] == f:
            pi += 1
            continue
        for j in range(n):
            null[k, t, j] = _U0
        null[k, t, f] = one
        for i in range(pi):
            w = W[i, f]
            if w != 0:
                if char2:
                    null[k, t, pivcol[i]] = np.uint64(w)
                else:
                    null[k, t, pivcol[i]] = negmod(np.uint64(w), m)
        t += 1
    for s in range(t, n):
        for j in range(n):
            null[k, s, j] = _U0
    nullity[k] = t


@njit(cache=True)
def _solve_mod(A, B, k, x, null, nullity, consistent, W, pivcol, m):
    rows = W.shape[0]
    n = W.shape[1] - 1
    for i in range(rows):
        for j in range(n):
            W[i, j] = A[k, i, j]
        W[i, n] = B[k, i]
    r = 0
    for c in range(n):
        if r == rows:
            break
        p = -1
        for i in range(r, rows):
            if W[i, c] != _U0:
                p = i
                break
        if p < 0:
            continue
        if p != r:
            for j in range(c, n + 1):
                t = W[p, j]
                W[p, j] = W[r, j]
                W[r, j] = t
        pinv = invmod(W[r, c], m)
        if pinv == _U0:
            consistent[k] = STATUS_NOT_A_UNIT
            nullity[k] = -1
            return
        for j in range(c, n + 1):
            W[r, j] = mulmod(W[r, j], pinv, m)
        for i in range(rows):
            if i == r:
                continue
            f = W[i, c]
            if f == _U0:
                continue
            for j in range(c, n + 1):
                b = W[r, j]
                if b != _U0:
                    W[i, j] = submod(W[i, j], mulmod(f, b, m), m)
        pivcol[r] = c
        r += 1
    ok = 1
    for i in range(r, rows):
        if W[i, n] != _U0:
            ok = 0
    consistent[k] = ok
    for j in range(n):
        x[k, j] = _U0
    for i in range(r):
        x[k, pivcol[i]] = W[i, n]
    _nullspace_rows(W, pivcol, r, n, k, null, nullity, _U1 % m, m, m == np.uint64(2))


@njit(cache=True, parallel=True)
def batch_solve(A, B, ctx, expz, logz, x, null, nullity, consistent):
    """Solve A_k x = b_k for every system of a stack by Gauss-Jordan elimination on
    the augmented matrix [A_k | b_k].

    Parameters
    ----------
    A : uint64 (N, m, n)
    B : uint64 (N, m)
        The right-hand sides.
    ctx : uint64 array
    expz, logz : int64 arrays
        ``tables(ctx)``.
    x : uint64 (N, n)
        Receives a particular solution (free unknowns set to 0) where consistent.
    null : uint64 (N, n, n)
        Receives in its first ``nullity[k]`` rows a basis of {v : A_k v = 0}, one row
        per non-pivot column in increasing order (v = 1 there, 0 at the other free
        columns); the remaining rows are zero.
    nullity : int64 (N,)
        Receives n - rank (-1 when a pivot had no inverse: residue rings only).
    consistent : int8 (N,)
        Receives 1 when the system has a solution, 0 when not, ``STATUS_NOT_A_UNIT``
        (2) when a pivot had no inverse.
    """
    N = A.shape[0]
    nblocks = (N + BLOCK - 1) // BLOCK
    for b in prange(nblocks):
        solve_range(A, B, ctx, expz, logz, x, null, nullity, consistent, b * BLOCK,
                    min(N, (b + 1) * BLOCK))


@njit(cache=True)
def solve_range(A, B, ctx, expz, logz, x, null, nullity, consistent, start, stop):
    """``batch_solve`` on systems start .. stop-1, in the calling thread."""
    rows = A.shape[1]
    n = A.shape[2]
    pivcol = np.empty(max(rows, 1), dtype=np.int64)
    if ctx[0] == _EXT:
        q1 = np.int64(ctx[2])
        W = np.empty((rows, n + 1), dtype=np.int64)
        LR = np.empty(n + 1, dtype=np.int64)
        for k in range(start, stop):
            _solve_ext(A, B, k, x, null, nullity, consistent, W, pivcol, LR, expz, logz, q1)
    else:
        m = ctx[1]
        W = np.empty((rows, n + 1), dtype=np.uint64)
        for k in range(start, stop):
            _solve_mod(A, B, k, x, null, nullity, consistent, W, pivcol, m)


# --------------------------------------------------------------------------- record ids

_FNV_OFFSET = np.uint64(0xcbf29ce484222325)
_FNV_PRIME = np.uint64(0x100000001b3)


@njit(cache=True)
def id_hashes(buf, ends):
    """64-bit hashes of the byte strings ``buf[ends[i-1]:ends[i]]`` (FNV-1a, then the
    splitmix64 finaliser so that every input bit reaches every output bit).

    The hash only routes ids to slots of :func:`id_insert`'s table: equal hashes are
    confirmed by comparing the ids themselves, so a collision costs time, never a
    wrong answer.

    References
    ----------
    .. [1] G. Fowler, L. C. Noll, K.-P. Vo, D. Eastlake, "The FNV Non-Cryptographic
       Hash Algorithm", IETF draft draft-eastlake-fnv.
    .. [2] G. L. Steele, D. Lea, C. H. Flood, "Fast splittable pseudorandom number
       generators", OOPSLA 2014 (the splitmix64 finaliser).
    """
    out = np.empty(ends.shape[0], dtype=np.uint64)
    start = 0
    for i in range(ends.shape[0]):
        h = _FNV_OFFSET
        for j in range(start, ends[i]):
            h = (h ^ np.uint64(buf[j])) * _FNV_PRIME
        h ^= h >> np.uint64(30)
        h *= np.uint64(0xbf58476d1ce4e5b9)
        h ^= h >> np.uint64(27)
        h *= np.uint64(0x94d049bb133111eb)
        h ^= h >> np.uint64(31)
        out[i] = h
        start = ends[i]
    return out


@njit(cache=True)
def id_insert(keys, lines, offsets, h, line, offset, hits):
    """Insert ids, in order, into an open-addressing table (linear probing).

    ``keys``, ``lines``, ``offsets`` are the table (a power-of-two length; a slot is free
    while ``lines`` is 0: input lines count from 1). Id i has hash ``h[i]``, input line
    ``line[i]`` and byte offset ``offset[i]``. When a slot with the same hash is found,
    id i is not inserted and ``hits[i]`` receives that slot's index (else -1): the caller
    compares the ids and calls :func:`id_place` for those that differ.

    Returns the number of ids inserted.

    References
    ----------
    .. [1] D. E. Knuth, "The Art of Computer Programming", vol. 3, 2nd ed.,
       Addison-Wesley, 1998, section 6.4, algorithm L (linear probing).
    """
    mask = np.uint64(keys.shape[0] - 1)
    added = 0
    for i in range(h.shape[0]):
        j = h[i] & mask
        hits[i] = -1
        while True:
            if lines[j] == 0:
                keys[j] = h[i]
                lines[j] = line[i]
                offsets[j] = offset[i]
                added += 1
                break
            if keys[j] == h[i]:
                hits[i] = np.int64(j)
                break
            j = (j + _U1) & mask
    return added


@njit(cache=True)
def id_place(keys, lines, offsets, h, line, offset):
    """Insert entries without looking for equal hashes (growing the table, or an id
    whose hash collided with a different id's)."""
    mask = np.uint64(keys.shape[0] - 1)
    for i in range(h.shape[0]):
        j = h[i] & mask
        while lines[j] != 0:
            j = (j + _U1) & mask
        keys[j] = h[i]
        lines[j] = line[i]
        offsets[j] = offset[i]
