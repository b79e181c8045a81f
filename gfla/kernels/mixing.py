"""Compiled loops of the mixing-layer job: MDS decision, branch numbers, family search,
XOR programs.

Conventions (the job module ``gfla.jobs.mixing.engine`` builds these inputs):

GF(2^k) elements are int32 values. Two int32 tables, made from the field's log/exp
context (``gfla.kernels.extension``), give branch-free products:

* ``log_ext[a]`` is the discrete logarithm of a != 0 and ``log_ext[0] = 2 (q - 1)``;
* ``exp_ext[i]`` is g^(i mod (q - 1)) for 0 <= i < 2 (q - 1) and 0 up to 4 (q - 1),

so ``exp_ext[log_ext[a] + log_ext[b]]`` is a * b for all a, b, zeros included, and the
log of a product of nonzero elements never leaves the first half of the table.

Subsets of rows, columns or cells are bit masks. ``masks`` lists every n-bit mask ordered
by popcount, ``level_start[s]`` is the position of the first mask of popcount s (n + 2
entries), ``mask_bits`` lists the set bits of each mask, ascending, mask after mask, and
``bits_start[s]`` is where the masks of popcount s begin in it (s entries per mask).

Binary matrices of width at most 64 are uint64 rows, bit j of row i = entry (i, j).

Characteristic 2 throughout: determinants need no signs and -a = a.
"""

import numpy as np
from numba import njit

__all__ = ["popcount64", "mds_minors", "branch_number_field", "branch_number_binary",
           "search_block", "paar_program", "bp_program"]

_U0 = np.uint64(0)
_U1 = np.uint64(1)
_M1 = np.uint64(0x5555555555555555)
_M2 = np.uint64(0x3333333333333333)
_M4 = np.uint64(0x0F0F0F0F0F0F0F0F)
_H01 = np.uint64(0x0101010101010101)
_GOLD = np.uint64(0x9E3779B97F4A7C15)

FAMILY_CIRCULANT = 0
FAMILY_HADAMARD = 1
FAMILY_COMPANION = 2
FAMILY_CAUCHY = 3

CRITERION_MDS = 0
CRITERION_BRANCH = 1
CRITERION_INVERTIBLE = 2

FLAG_REJECTED = -1
FLAG_EQUIVALENT = -2


@njit(cache=True, inline="always")
def popcount64(x):
    """Number of set bits of a uint64 (SWAR)."""
    x = x - ((x >> _U1) & _M1)
    x = (x & _M2) + ((x >> np.uint64(2)) & _M2)
    x = (x + (x >> np.uint64(4))) & _M4
    return np.int64((x * _H01) >> np.uint64(56))


@njit(cache=True, inline="always")
def _bit(i):
    return _U1 << np.uint64(i)


# --------------------------------------------------------------------------- MDS

@njit(cache=True)
def _minor_level(column, s, L, exp_ext, log_ext, level_start, sub_index, bits_start):
    """Minors of size s over every row set of popcount s, by Laplace expansion along the
    newest column (``column``: logs of its entries by row), reading the (s-1)-minors of
    the column prefix from ``L`` and writing the new ones there; ``L[p]`` is the minor
    (as a log) of the row set ``masks[p]``. Returns (number of vanishing minors, position
    of the first vanishing row set or -1).

    ``sub_index[bits_start[s] + (p - level_start[s]) s + t]`` packs, for the t-th row r of
    row set p, r (5 bits) and the rank within popcount s-1 of the row set without r, so
    the inner loop streams one array and reads minors from a window of C(n, s-1)."""
    zeros = 0
    first = -1
    b = np.uint64(bits_start[s])
    prev = np.uint64(level_start[s - 1])
    u5 = np.uint64(5)
    u31 = np.uint64(31)
    for p in range(level_start[s], level_start[s + 1]):
        v = 0
        for t in range(s):
            w = np.uint64(sub_index[b + np.uint64(t)])
            v ^= exp_ext[np.uint64(column[w & u31]) + np.uint64(L[prev + (w >> u5)])]
        b += np.uint64(s)
        L[p] = log_ext[v]
        if v == 0:
            zeros += 1
            if first < 0:
                first = p
    return zeros, first


@njit(cache=True)
def _record(counts, cert, s, zeros, first, cols, masks):
    counts[s] += zeros
    if cert[0] == 0 or s < cert[0]:
        cert[0] = s
        cert[1] = masks[first]
        for i in range(s):
            cert[2 + i] = cols[i]


@njit(cache=True)
def _mds_tasks(logc, exp_ext, log_ext, masks, level_start, sub_index, bits_start, tasks,
               task_list, count_from, max_level, stop_first, counts, cert, stop_flag):
    """The column sets of the tasks in ``task_list`` (see ``mds_minors``)."""
    ncols = logc.shape[0]
    nrows = logc.shape[1]
    prefix_len = tasks.shape[1]
    L = np.empty(1 << nrows, dtype=np.int32)
    L[0] = 0
    cols = np.zeros(max_level + 1, dtype=np.int64)
    nxt = np.zeros(max_level + 2, dtype=np.int64)
    for ti in range(task_list.shape[0]):
        if stop_first and stop_flag[0] != 0:
            break
        task = task_list[ti]
        for d in range(prefix_len):
            c = tasks[task, d]
            cols[d] = c
            z, first = _minor_level(logc[c], d + 1, L, exp_ext, log_ext, level_start,
                                    sub_index, bits_start)
            if z > 0 and d + 1 >= count_from:
                _record(counts, cert, d + 1, z, first, cols, masks)
                if stop_first:
                    stop_flag[0] = 1
        d0 = prefix_len
        d = d0
        nxt[d] = cols[d0 - 1] + 1 if d0 > 0 else 0
        while not (stop_first and stop_flag[0] != 0):
            if d < max_level and nxt[d] < ncols:
                c = nxt[d]
                nxt[d] = c + 1
                cols[d] = c
                z, first = _minor_level(logc[c], d + 1, L, exp_ext, log_ext, level_start,
                                        sub_index, bits_start)
                if z > 0 and d + 1 >= count_from:
                    _record(counts, cert, d + 1, z, first, cols, masks)
                    if stop_first:
                        stop_flag[0] = 1
                d += 1
                nxt[d] = c + 1
            else:
                if d == d0:
                    break
                d -= 1


@njit(cache=True, nogil=True)
def mds_minors(logc, exp_ext, log_ext, masks, level_start, sub_index, bits_start,
               tasks, task_list, count_from, max_level, stop_first, counts, cert,
               stop_flag):
    """Every square minor of a matrix, column sets in depth-first order.

    ``logc[c, r]`` is the log of entry (r, c) (the matrix transposed). A task is a column
    prefix ``tasks[t]`` (ascending); the tasks ``task_list`` are run in turn, each
    enumerating every column set that starts with its prefix and continues with larger
    columns, up to ``max_level`` columns, counting the vanishing minors of size >=
    ``count_from`` in ``counts[size]``. The smallest vanishing minor seen is written to
    ``cert = (size, row mask, columns...)``. One table of 2^rows minors serves all sizes,
    since minors of size s sit at row sets of popcount s. With ``stop_first`` the run
    stops after the first vanishing minor and sets ``stop_flag[0]``, which also stops
    other calls sharing the flag. The GIL is released: calls on disjoint task lists run
    in parallel from several threads.

    The work is sum_s s C(rows, s) C(cols, s) table look-ups.
    """
    _mds_tasks(logc, exp_ext, log_ext, masks, level_start, sub_index, bits_start, tasks,
               task_list, count_from, max_level, stop_first, counts, cert, stop_flag)


# --------------------------------------------------------------------------- branch numbers

@njit(cache=True, inline="always")
def _gmul(a, b, exp_ext, log_ext):
    return exp_ext[log_ext[a] + log_ext[b]]


@njit(cache=True, inline="always")
def _ginv(a, exp_ext, log_ext, q1):
    return exp_ext[(q1 - log_ext[a]) % q1]


@njit(cache=True)
def _field_kernel_vector(N, nr, nc, exp_ext, log_ext, q1, piv, x):
    """Gauss-Jordan on N[:nr, :nc] in place; when its rank is nr = nc - 1 write the kernel
    vector (1 at the free column) to x[:nc] and return True."""
    r = 0
    for c in range(nc):
        if r == nr:
            break
        p = -1
        for i in range(r, nr):
            if N[i, c] != 0:
                p = i
                break
        if p < 0:
            continue
        if p != r:
            for j in range(nc):
                t = N[p, j]
                N[p, j] = N[r, j]
                N[r, j] = t
        f = _ginv(N[r, c], exp_ext, log_ext, q1)
        for j in range(nc):
            N[r, j] = _gmul(N[r, j], f, exp_ext, log_ext)
        for i in range(nr):
            if i != r and N[i, c] != 0:
                g = N[i, c]
                for j in range(nc):
                    N[i, j] ^= _gmul(g, N[r, j], exp_ext, log_ext)
        piv[r] = c
        r += 1
    if r < nr:
        return False
    free = nc - 1
    for i in range(nr):
        if piv[i] != i:
            free = i
            break
    for j in range(nc):
        x[j] = 0
    x[free] = 1
    for i in range(nr):
        x[piv[i]] = N[i, free]
    return True


@njit(cache=True)
def _branch_field(M, exp_ext, log_ext, q1, masks, level_start, mask_bits, bits_start,
                  bound, first_only, xbest, N, piv, xs, y):
    """min over x != 0 of wt(x) + wt(M x) below ``bound`` (returns ``bound`` when none).

    A codeword of least weight has a support A whose vector is the unique one (up to a
    scalar) vanishing on the zero rows of M x, so it is the kernel vector of some
    (|A|-1) x |A| submatrix M[R0, A] of rank |A|-1; every such pair is tried."""
    n = M.shape[0]
    best = bound
    for a in range(1, n + 1):
        if a >= best:
            break
        ba = bits_start[a]
        for pA in range(level_start[a], level_start[a + 1]):
            br = bits_start[a - 1]
            for pR in range(level_start[a - 1], level_start[a]):
                for i in range(a - 1):
                    r = mask_bits[br + i]
                    for j in range(a):
                        N[i, j] = M[r, mask_bits[ba + j]]
                br += a - 1
                if not _field_kernel_vector(N, a - 1, a, exp_ext, log_ext, q1, piv, xs):
                    continue
                w = 0
                for j in range(a):
                    if xs[j] != 0:
                        w += 1
                for i in range(n):
                    v = 0
                    for j in range(a):
                        v ^= _gmul(M[i, mask_bits[ba + j]], xs[j], exp_ext, log_ext)
                    y[i] = v
                    if v != 0:
                        w += 1
                if w < best:
                    best = w
                    for j in range(n):
                        xbest[j] = 0
                    for j in range(a):
                        xbest[mask_bits[ba + j]] = xs[j]
                    if first_only:
                        return best
            ba += a
    return best


@njit(cache=True)
def branch_number_field(M, exp_ext, log_ext, q1, masks, level_start, mask_bits,
                        bits_start, xbest):
    """Exact differential branch number of a square matrix over GF(2^k) (cells = field
    elements) with a witness x (written to ``xbest``) attaining it."""
    n = M.shape[0]
    N = np.zeros((n, n), dtype=np.int32)
    piv = np.zeros(n, dtype=np.int32)
    xs = np.zeros(n, dtype=np.int32)
    y = np.zeros(n, dtype=np.int32)
    return _branch_field(M, exp_ext, log_ext, q1, masks, level_start, mask_bits,
                         bits_start, n + 2, False, xbest, N, piv, xs, y)


@njit(cache=True)
def _cell_weight(v, cell, ncells):
    w = 0
    m = (_U1 << np.uint64(cell)) - _U1 if cell < 64 else ~_U0
    for i in range(ncells):
        if (v >> np.uint64(i * cell)) & m:
            w += 1
    return w


@njit(cache=True)
def _apply_bits(rows, x):
    y = _U0
    for r in range(rows.shape[0]):
        if popcount64(rows[r] & x) & 1:
            y |= _bit(r)
    return y


@njit(cache=True)
def branch_number_binary(rows, cell, masks, level_start, mask_bits, bits_start, xbest):
    """Exact branch number of a binary N x N matrix (N <= 64) with weights counted in cells
    of ``cell`` bits, and a witness written to ``xbest[0]``.

    For input cells A and output cells Z the vectors supported on A whose image vanishes
    on Z form a subspace; it is nonzero exactly when the rows of Z restricted to the
    columns of A have rank < |A| cell, and then it holds a vector of weight at most
    |A| + n - |Z|. The least such bound over (A, Z) is the branch number."""
    N = rows.shape[0]
    ncells = N // cell
    cm = (_U1 << np.uint64(cell)) - _U1 if cell < 64 else ~_U0
    cellmask = np.zeros(ncells, dtype=np.uint64)
    for i in range(ncells):
        cellmask[i] = cm << np.uint64(i * cell)
    buf = np.zeros(N, dtype=np.uint64)
    pivc = np.zeros(N, dtype=np.int64)
    # x = the first unit vector: weight at most 1 + ncells.
    x0 = _U1
    best = 1 + _cell_weight(_apply_bits(rows, x0), cell, ncells)
    xbest[0] = x0
    for a in range(1, ncells + 1):
        if a >= best:
            break
        ba = bits_start[a]
        for pA in range(level_start[a], level_start[a + 1]):
            colmask = _U0
            for j in range(a):
                colmask |= cellmask[mask_bits[ba + j]]
            ba += a
            for z in range(ncells, a - 1, -1):
                if a + ncells - z >= best:
                    break
                found = False
                bz = bits_start[z]
                for pZ in range(level_start[z], level_start[z + 1]):
                    nr = 0
                    for i in range(z):
                        cz = mask_bits[bz + i]
                        for t in range(cell):
                            buf[nr] = rows[cz * cell + t] & colmask
                            nr += 1
                    bz += z
                    # reduced row echelon form over GF(2)
                    rank = 0
                    for c in range(N):
                        bc = _bit(c)
                        if not (colmask & bc):
                            continue
                        p = -1
                        for i in range(rank, nr):
                            if buf[i] & bc:
                                p = i
                                break
                        if p < 0:
                            continue
                        t = buf[p]
                        buf[p] = buf[rank]
                        buf[rank] = t
                        for i in range(nr):
                            if i != rank and (buf[i] & bc):
                                buf[i] ^= t
                        pivc[rank] = c
                        rank += 1
                    if rank >= a * cell:
                        continue
                    # a free column f gives the kernel vector e_f + sum of pivots hit
                    pivmask = _U0
                    for i in range(rank):
                        pivmask |= _bit(pivc[i])
                    free = colmask & ~pivmask
                    f = 0
                    while not ((free >> np.uint64(f)) & _U1):
                        f += 1
                    x = _bit(f)
                    for i in range(rank):
                        if buf[i] & _bit(f):
                            x |= _bit(pivc[i])
                    w = _cell_weight(x, cell, ncells) + _cell_weight(_apply_bits(rows, x),
                                                                     cell, ncells)
                    if w < best:
                        best = w
                        xbest[0] = x
                    found = True
                    break
                if found:
                    break
    return best


# --------------------------------------------------------------------------- search

@njit(cache=True)
def _mds_by_plan(logM, exp_ext, log_ext, plan, memo):
    """True when no minor listed in ``plan`` vanishes.

    ``plan`` is a sequence of records (slot, c, s, r_1, src_1, ..., r_s, src_s): the
    minor stored (as a log) in ``memo[slot]`` is the sum of M[r_t, c] times the minor in
    ``memo[src_t]``, by Laplace expansion along column c; ``memo[0]`` holds the empty
    minor (1). Records come by increasing size, so most candidates stop at 1x1 or 2x2.
    For a family with symmetries (a circulant is invariant under shifting rows and
    columns together) the plan lists one minor per orbit; equal minors up to a row and a
    column permutation are equal in characteristic 2."""
    memo[0] = 0
    p = 0
    end = plan.shape[0]
    while p < end:
        slot = plan[p]
        c = plan[p + 1]
        s = plan[p + 2]
        p += 3
        v = 0
        for t in range(s):
            v ^= exp_ext[logM[plan[p], c] + memo[plan[p + 1]]]
            p += 2
        if v == 0:
            return False
        memo[slot] = log_ext[v]
    return True


@njit(cache=True)
def _unrank_combination(rank, total, k, binom, out, offset):
    """The k-subset of range(total) of lexicographic rank ``rank`` -> out[offset:]."""
    x = 0
    for i in range(k):
        while binom[total - x - 1, k - i - 1] <= rank:
            rank -= binom[total - x - 1, k - i - 1]
            x += 1
        out[offset + i] = x
        x += 1


@njit(cache=True)
def _decode(family, n, nv, idx, binom, digits, used):
    if family == FAMILY_CAUCHY:
        per_y = binom[nv - n, n]
        _unrank_combination(idx // per_y, nv, n, binom, digits, 0)
        for i in range(nv):
            used[i] = 0
        for i in range(n):
            used[digits[i]] = 1
        _unrank_combination(idx % per_y, nv - n, n, binom, digits, n)
        # map ranks among the unused values back to value positions
        for i in range(n):
            want = digits[n + i]
            pos = -1
            cnt = -1
            while cnt < want:
                pos += 1
                if used[pos] == 0:
                    cnt += 1
            digits[n + i] = pos
        return
    for i in range(n - 1, -1, -1):
        digits[i] = idx % nv
        idx //= nv


@njit(cache=True, inline="always")
def _next_digits(n, nv, digits):
    """digits + 1 in base nv (the next candidate of the product families)."""
    i = n - 1
    while i >= 0:
        digits[i] += 1
        if digits[i] < nv:
            return
        digits[i] = 0
        i -= 1


@njit(cache=True)
def _is_canonical(family, n, digits):
    """Skip a candidate equivalent (same matrix up to a row or column permutation) to an
    earlier one: circulants by rotation of the first row, Hadamard forms h[i ^ t]."""
    if family == FAMILY_CIRCULANT:
        for t in range(1, n):
            for i in range(n):
                a = digits[(i + t) % n]
                b = digits[i]
                if a < b:
                    return False
                if a > b:
                    break
        return True
    if family == FAMILY_HADAMARD:
        for t in range(1, n):
            for i in range(n):
                a = digits[i ^ t]
                b = digits[i]
                if a < b:
                    return False
                if a > b:
                    break
        return True
    return True


@njit(cache=True)
def _matmul_small(A, B, C, exp_ext, log_ext):
    n = A.shape[0]
    for i in range(n):
        for j in range(n):
            v = 0
            for t in range(n):
                v ^= _gmul(A[i, t], B[t, j], exp_ext, log_ext)
            C[i, j] = v


@njit(cache=True)
def _build(family, n, values, power, digits, M, T, U, exp_ext, log_ext, q1):
    if family == FAMILY_CIRCULANT:
        for i in range(n):
            for j in range(n):
                M[i, j] = values[digits[(j - i) % n]]
    elif family == FAMILY_HADAMARD:
        for i in range(n):
            for j in range(n):
                M[i, j] = values[digits[i ^ j]]
    elif family == FAMILY_CAUCHY:
        for i in range(n):
            for j in range(n):
                M[i, j] = _ginv(values[digits[i]] ^ values[digits[n + j]], exp_ext,
                                log_ext, q1)
    else:
        # row i of C^e is e_i C^e = e_0 C^(i+e) (e_0 C^i = e_i for i < n), and
        # (v C)_j = v_(j-1) + v_(n-1) c_j: n products per step
        for j in range(n):
            T[0, j] = 0
        T[0, 0] = 1
        for k in range(1, power + n):
            top = T[0, n - 1]
            for j in range(n - 1, 0, -1):
                T[0, j] = T[0, j - 1] ^ _gmul(top, values[digits[j]], exp_ext, log_ext)
            T[0, 0] = _gmul(top, values[digits[0]], exp_ext, log_ext)
            i = k - power
            if i >= 0:
                for j in range(n):
                    M[i, j] = T[0, j]


@njit(cache=True)
def _invertible(M, W, exp_ext, log_ext, q1):
    n = M.shape[0]
    for i in range(n):
        for j in range(n):
            W[i, j] = M[i, j]
    for c in range(n):
        p = -1
        for i in range(c, n):
            if W[i, c] != 0:
                p = i
                break
        if p < 0:
            return False
        if p != c:
            for j in range(n):
                t = W[p, j]
                W[p, j] = W[c, j]
                W[c, j] = t
        f = _ginv(W[c, c], exp_ext, log_ext, q1)
        for i in range(c + 1, n):
            if W[i, c] != 0:
                g = _gmul(W[i, c], f, exp_ext, log_ext)
                for j in range(c, n):
                    W[i, j] ^= _gmul(g, W[c, j], exp_ext, log_ext)
    return True


@njit(cache=True, nogil=True)
def search_block(family, n, values, power, start, count, exp_ext, log_ext, q1, plan,
                 masks, level_start, mask_bits, bits_start, binom, weights, criterion,
                 target_branch, involutory, canonical, flags):
    """Test candidates start .. start+count-1 of a family; ``flags[i]`` is set to
    FLAG_REJECTED, FLAG_EQUIVALENT (skipped: equivalent to an earlier one) or, for a
    kept candidate, its naive XOR count sum(weights[M[i, j]]) - n k, ``weights[a]``
    being the number of ones of the multiplication matrix of a.

    Candidate idx has digits (indices into ``values``): for circulant, Hadamard and
    companion families idx = sum_i digits[i] * nv^(n-1-i); for Cauchy the lexicographic
    rank of the x-point subset times C(nv-n, n) plus the rank of the y-point subset among
    the remaining values. Criteria: MDS (the minors of ``plan``, see ``_mds_by_plan``),
    branch numbers (differential and linear) >= target_branch with M invertible, or
    invertible only; ``involutory`` also requires M^2 = I. The GIL is released, so
    disjoint ranges run in parallel from several threads."""
    nv = values.shape[0]
    kbits = 0
    while (1 << kbits) < q1 + 1:
        kbits += 1
    lo = start
    hi = start + count
    digits = np.zeros(2 * n, dtype=np.int64)
    used = np.zeros(nv, dtype=np.int32)
    M = np.zeros((n, n), dtype=np.int32)
    Mt = np.zeros((n, n), dtype=np.int32)
    T = np.zeros((n, n), dtype=np.int32)
    U = np.zeros((n, n), dtype=np.int32)
    logM = np.zeros((n, n), dtype=np.int32)
    memo = np.zeros(plan.shape[0] + 1, dtype=np.int32)
    N = np.zeros((n, n), dtype=np.int32)
    piv = np.zeros(n, dtype=np.int32)
    xs = np.zeros(n, dtype=np.int32)
    y = np.zeros(n, dtype=np.int32)
    xb = np.zeros(n, dtype=np.int32)
    logv = np.zeros(nv, dtype=np.int32)
    for i in range(nv):
        logv[i] = log_ext[values[i]]
    product = family != FAMILY_CAUCHY
    if lo < hi and product:
        _decode(family, n, nv, lo, binom, digits, used)
    for idx in range(lo, hi):
        if product:
            if idx > lo:
                _next_digits(n, nv, digits)
        else:
            _decode(family, n, nv, idx, binom, digits, used)
        if canonical and not _is_canonical(family, n, digits):
            flags[idx - start] = FLAG_EQUIVALENT
            continue
        flags[idx - start] = FLAG_REJECTED
        built = False
        if family == FAMILY_CIRCULANT and not involutory and criterion == CRITERION_MDS:
            for i in range(n):
                for j in range(n):
                    logM[i, j] = logv[digits[(j - i) % n]]
        elif family == FAMILY_HADAMARD and not involutory and criterion == CRITERION_MDS:
            for i in range(n):
                for j in range(n):
                    logM[i, j] = logv[digits[i ^ j]]
        else:
            _build(family, n, values, power, digits, M, T, U, exp_ext, log_ext, q1)
            built = True
            for i in range(n):
                for j in range(n):
                    logM[i, j] = log_ext[M[i, j]]
        if involutory:
            _matmul_small(M, M, U, exp_ext, log_ext)
            ok = True
            for i in range(n):
                for j in range(n):
                    if U[i, j] != (1 if i == j else 0):
                        ok = False
            if not ok:
                continue
        if criterion == CRITERION_MDS:
            if not _mds_by_plan(logM, exp_ext, log_ext, plan, memo):
                continue
        else:
            if not _invertible(M, U, exp_ext, log_ext, q1):
                continue
            if criterion == CRITERION_BRANCH:
                if _branch_field(M, exp_ext, log_ext, q1, masks, level_start,
                                 mask_bits, bits_start, target_branch, True, xb,
                                 N, piv, xs, y) < target_branch:
                    continue
                for i in range(n):
                    for j in range(n):
                        Mt[i, j] = M[j, i]
                if _branch_field(Mt, exp_ext, log_ext, q1, masks, level_start,
                                 mask_bits, bits_start, target_branch, True, xb,
                                 N, piv, xs, y) < target_branch:
                    continue
        if not built:
            _build(family, n, values, power, digits, M, T, U, exp_ext, log_ext, q1)
        ones = 0
        for i in range(n):
            for j in range(n):
                ones += weights[M[i, j]]
        flags[idx - start] = ones - n * kbits
# --------------------------------------------------------------------------- XOR programs

@njit(cache=True, inline="always")
def _rand_next(state):
    state = state * np.uint64(6364136223846793005) + np.uint64(1442695040888963407)
    return state


@njit(cache=True)
def paar_program(rows, nin, seed, prog, outsig):
    """Paar's greedy common-subexpression heuristic for y = B x over GF(2).

    ``rows[t]``: bits over the nin inputs of output t (at most 64 outputs). Repeatedly
    the two signals that occur together in the most outputs are XORed into a new signal
    (ties: the first pair, or a random one when seed != 0); when no pair is shared any
    more every output is finished by a chain of XORs. Writes the program to ``prog``
    (pairs of signal indices; signal nin + i is the output of XOR i) and the signal of
    each output to ``outsig`` (-1 for a zero row). Returns the number of XORs.

    References: C. Paar, "Optimized arithmetic for Reed-Solomon encoders", IEEE ISIT 1997.
    """
    T = rows.shape[0]
    cap = prog.shape[0] + nin
    cols = np.zeros(cap, dtype=np.uint64)
    for t in range(T):
        for i in range(nin):
            if (rows[t] >> np.uint64(i)) & _U1:
                cols[i] |= _bit(t)
    m = nin
    length = 0
    state = np.uint64(seed) * _GOLD + _U1
    while True:
        best = 1
        ba = -1
        bb = -1
        ties = 0
        for a in range(m):
            ca = cols[a]
            if popcount64(ca) < 2:
                continue
            for b in range(a + 1, m):
                c = popcount64(ca & cols[b])
                if c > best:
                    best = c
                    ba = a
                    bb = b
                    ties = 1
                elif c == best and ba >= 0 and seed != 0:
                    ties += 1
                    state = _rand_next(state)
                    if (state >> np.uint64(33)) % np.uint64(ties) == _U0:
                        ba = a
                        bb = b
        if ba < 0:
            break
        shared = cols[ba] & cols[bb]
        cols[m] = shared
        cols[ba] &= ~shared
        cols[bb] &= ~shared
        prog[length, 0] = ba
        prog[length, 1] = bb
        length += 1
        m += 1
    for t in range(T):
        cur = -1
        bt = _bit(t)
        for s in range(m):
            if cols[s] & bt:
                if cur < 0:
                    cur = s
                else:
                    prog[length, 0] = cur
                    prog[length, 1] = s
                    length += 1
                    cur = m
                    m += 1
        outsig[t] = cur
    return length


@njit(cache=True, inline="always")
def _hash_slot(key, bits):
    return np.int64((key * _GOLD) >> np.uint64(64 - bits))


@njit(cache=True)
def _set_find(skey, key, bits):
    mask = (1 << bits) - 1
    h = _hash_slot(key, bits)
    while skey[h] != _U0:
        if skey[h] == key:
            return h
        h = (h + 1) & mask
    return -1 - h


@njit(cache=True)
def _mark_pairs(rep, k, t, d, S, skey, sbits, step, ckey, cstamp, clast, ccount, csq, ca,
                cb, used, nused, cbits):
    """Count, once per target t, every pair sum of the representation rep[:k] that is
    not yet in S as a candidate reducing t (at distance d). Returns the new nused."""
    csize = 1 << cbits
    for i in range(k):
        for j in range(i + 1, k):
            v = S[rep[i]] ^ S[rep[j]]
            if _set_find(skey, v, sbits) >= 0:
                continue
            h = _hash_slot(v, cbits)
            probes = 0
            while cstamp[h] == step and ckey[h] != v and probes < csize:
                h = (h + 1) & (csize - 1)
                probes += 1
            if probes >= csize:
                continue
            if cstamp[h] != step:
                cstamp[h] = step
                ckey[h] = v
                clast[h] = -1
                ccount[h] = 0
                csq[h] = 0
                ca[h] = rep[i]
                cb[h] = rep[j]
                used[nused] = h
                nused += 1
            if clast[h] != t:
                clast[h] = t
                ccount[h] += 1
                csq[h] += 2 * d - 1
    return nused


@njit(cache=True)
def _unit_list(r, rep, k):
    """Append the input indices of the set bits of r to rep[k:]; returns the new k."""
    while r != _U0:
        low = r & (~r + _U1)
        rep[k] = popcount64(low - _U1)
        k += 1
        r ^= low
    return k


@njit(cache=True)
def bp_program(targets, nin, seed, node_budget, prog, outsig, info):
    """The Boyar-Peralta heuristic for a short XOR program computing y = B x over GF(2).

    The base S starts as the inputs. The distance of a target f is the least number of
    elements of S whose sum is f, minus one. Each step adds to S the sum of two elements
    of S that most reduces the sum of the distances (ties: the largest Euclidean norm of
    the new distance vector, then the first, or a random one when seed != 0); a target
    at distance one is taken at once. The candidates that reduce a target are exactly
    the pair sums inside its least representations.

    A representation of f is a set E' of non-input elements of S plus the inputs in
    f + sum(E'). Distances are searched over sets E' of at most L elements, L the
    largest with at most ``node_budget`` sets per target, so they are exact while L
    reaches the distance (``info[0]`` stays 1). Each target also keeps one explicit
    representation, shortened whenever a chosen pair lies inside it, so the distances
    used are never worse than that and every step shortens some target: the program is
    never longer than the naive one.

    Writes the program to ``prog`` and output signals to ``outsig`` as ``paar_program``
    does, returns the number of XORs; info = (exact, steps, sets searched, -).

    References: J. Boyar, R. Peralta, "A new combinational logic minimization technique
    with applications to cryptology", SEA 2010, LNCS 6049; J. Boyar, P. Matthews,
    R. Peralta, "Logic minimization techniques with applications to cryptology", Journal
    of Cryptology 26 (2013).
    """
    T = targets.shape[0]
    cap = prog.shape[0] + nin
    S = np.zeros(cap, dtype=np.uint64)
    sbits = 1
    while (1 << sbits) < 4 * cap:
        sbits += 1
    skey = np.zeros(1 << sbits, dtype=np.uint64)
    sidx = np.zeros(1 << sbits, dtype=np.int32)
    for i in range(nin):
        S[i] = _bit(i)
        h = -1 - _set_find(skey, S[i], sbits)
        skey[h] = S[i]
        sidx[h] = i
    m = nin
    cbits = 17
    csize = 1 << cbits
    ckey = np.zeros(csize, dtype=np.uint64)
    cstamp = np.zeros(csize, dtype=np.int32)
    clast = np.zeros(csize, dtype=np.int32)
    ccount = np.zeros(csize, dtype=np.int32)
    csq = np.zeros(csize, dtype=np.int64)
    ca = np.zeros(csize, dtype=np.int32)
    cb = np.zeros(csize, dtype=np.int32)
    used = np.zeros(csize, dtype=np.int32)
    stack_e = np.zeros(66, dtype=np.int64)
    stack_r = np.zeros(66, dtype=np.uint64)
    stack_p = np.zeros(66, dtype=np.int64)
    rep = np.zeros(132, dtype=np.int64)
    # the kept representation of each target (signal indices)
    trk = np.zeros((T, 64), dtype=np.int64)
    trk_n = np.zeros(T, dtype=np.int64)
    for t in range(T):
        trk_n[t] = _unit_list(targets[t], trk[t], 0)
    done = np.zeros(T, dtype=np.int8)
    length = 0
    step = 0
    exact = 1
    searched = 0
    state = np.uint64(seed) * _GOLD + _U1
    while True:
        step += 1
        remaining = 0
        for t in range(T):
            if done[t] == 0 and (targets[t] == _U0 or _set_find(skey, targets[t], sbits) >= 0):
                done[t] = 1
            if done[t] == 0:
                remaining += 1
        if remaining == 0:
            break
        ne = m - nin
        # the largest L with sum_{i <= L} C(ne, i) <= node_budget
        L = 0
        total = 1
        term = 1
        while L < ne:
            term = term * (ne - L) // (L + 1)
            if total + term > node_budget:
                break
            total += term
            L += 1
        nused = 0
        quick_a = -1
        quick_b = -1
        quick_ties = 0
        for t in range(T):
            if done[t]:
                continue
            f = targets[t]
            # pass 1: the least representation size, starting from the kept one
            best = trk_n[t]
            found = False
            if popcount64(f) < best:
                best = popcount64(f)
                trk_n[t] = _unit_list(f, trk[t], 0)
            depth = 0
            stack_r[0] = f
            stack_p[0] = nin
            while depth >= 0:
                if depth < L and depth + 1 < best and stack_p[depth] < m:
                    e = stack_p[depth]
                    stack_p[depth] += 1
                    stack_e[depth] = e
                    r = stack_r[depth] ^ S[e]
                    searched += 1
                    size = depth + 1 + popcount64(r)
                    if size < best:
                        best = size
                        for i in range(depth + 1):
                            trk[t, i] = stack_e[i]
                        trk_n[t] = _unit_list(r, trk[t], depth + 1)
                    if depth + 2 < best:
                        depth += 1
                        stack_r[depth] = r
                        stack_p[depth] = e + 1
                else:
                    depth -= 1
            if L < ne and L < best - 1:
                exact = 0
            d = best - 1
            if best == 2:
                quick_ties += 1
                if quick_a < 0:
                    quick_a = trk[t, 0]
                    quick_b = trk[t, 1]
                elif seed != 0:
                    state = _rand_next(state)
                    if (state >> np.uint64(33)) % np.uint64(quick_ties) == _U0:
                        quick_a = trk[t, 0]
                        quick_b = trk[t, 1]
            if quick_a >= 0:
                continue    # a target at distance one will be taken: no scoring needed
            # pass 2: every least representation found by the search, and the kept one
            nused = _mark_pairs(trk[t], trk_n[t], t, d, S, skey, sbits, step, ckey,
                                cstamp, clast, ccount, csq, ca, cb, used, nused, cbits)
            if popcount64(f) == best:
                k = _unit_list(f, rep, 0)
                nused = _mark_pairs(rep, k, t, d, S, skey, sbits, step, ckey, cstamp,
                                    clast, ccount, csq, ca, cb, used, nused, cbits)
            depth = 0
            stack_r[0] = f
            stack_p[0] = nin
            while depth >= 0:
                if depth < L and depth + 1 <= best and stack_p[depth] < m:
                    e = stack_p[depth]
                    stack_p[depth] += 1
                    stack_e[depth] = e
                    r = stack_r[depth] ^ S[e]
                    if depth + 1 + popcount64(r) == best:
                        for i in range(depth + 1):
                            rep[i] = stack_e[i]
                        k = _unit_list(r, rep, depth + 1)
                        nused = _mark_pairs(rep, k, t, d, S, skey, sbits, step, ckey,
                                            cstamp, clast, ccount, csq, ca, cb, used,
                                            nused, cbits)
                    if depth + 2 <= best:
                        depth += 1
                        stack_r[depth] = r
                        stack_p[depth] = e + 1
                else:
                    depth -= 1
        if quick_a >= 0:
            a = quick_a
            b = quick_b
        else:
            a = -1
            b = -1
            bc = -1
            bs = np.int64(0)
            ties = 0
            for u in range(nused):
                h = used[u]
                if ccount[h] > bc or (ccount[h] == bc and csq[h] < bs):
                    bc = ccount[h]
                    bs = csq[h]
                    a = ca[h]
                    b = cb[h]
                    ties = 1
                elif ccount[h] == bc and csq[h] == bs and seed != 0:
                    ties += 1
                    state = _rand_next(state)
                    if (state >> np.uint64(33)) % np.uint64(ties) == _U0:
                        a = ca[h]
                        b = cb[h]
        if a < 0:
            # no pair sum outside S (a kept representation with a pair summing to an
            # element of S): use that element, no XOR needed
            for t in range(T):
                if done[t] == 0 and trk_n[t] >= 2:
                    k = trk_n[t]
                    for i in range(k):
                        for j in range(i + 1, k):
                            if a < 0:
                                h = _set_find(skey, S[trk[t, i]] ^ S[trk[t, j]], sbits)
                                if h >= 0:
                                    trk[t, i] = sidx[h]
                                    trk[t, j] = trk[t, k - 1]
                                    trk_n[t] = k - 1
                                    a = 0
                    if a >= 0:
                        break
            if a >= 0:
                step -= 1
                continue
            for t in range(T):
                if done[t] == 0 and trk_n[t] >= 2:
                    a = trk[t, 0]
                    b = trk[t, 1]
                    break
        prog[length, 0] = a
        prog[length, 1] = b
        v = S[a] ^ S[b]
        S[m] = v
        h = -1 - _set_find(skey, v, sbits)
        skey[h] = v
        sidx[h] = m
        # shorten every kept representation holding a pair that sums to v
        for t in range(T):
            if done[t]:
                continue
            k = trk_n[t]
            hit = False
            for i in range(k):
                for j in range(i + 1, k):
                    if S[trk[t, i]] ^ S[trk[t, j]] == v:
                        trk[t, j] = trk[t, k - 1]
                        trk[t, i] = m
                        trk_n[t] = k - 1
                        hit = True
                        break
                if hit:
                    break
        m += 1
        length += 1
    for t in range(T):
        if targets[t] == _U0:
            outsig[t] = -1
        else:
            outsig[t] = sidx[_set_find(skey, targets[t], sbits)]
    info[0] = exact
    info[1] = step
    info[2] = searched
    return length
