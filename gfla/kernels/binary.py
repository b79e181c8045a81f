"""Bit-packed GF(2) kernels.

Storage
-------
A GF(2) matrix with ``m`` rows and ``n`` columns is a C-contiguous ``uint64``
array of shape ``(m, w)`` with ``w = (n + 63) // 64``. Entry ``(i, j)`` is bit
``j % 64`` (least significant bit first) of word ``P[i, j // 64]``. Bits at
column positions ``>= n`` (the padding of the last word) are always 0: every
kernel here assumes it on input and keeps it on output. A packed vector of
length ``n`` is a ``uint64`` array of shape ``(w,)`` with the same bit layout.
A 20000 x 20000 matrix takes 20000 * 313 * 8 bytes, about 50 MB.

Every compiled kernel takes exactly one dtype: ``uint64`` C-contiguous arrays
and ``int64`` (Python ``int``) sizes, so each compiles once and is cached on
disk; other dtypes or non-contiguous views would compile extra versions, so
callers convert first. The kernels are internal: they do not validate entries
(that is the job of ``gfla.fields.binary``) beyond array shapes, and nothing
here is constant-time.

Functions
---------
pack, unpack
    0/1 ``uint8`` matrices to and from packed rows.
matmul, matmul_parallel, matmul_naive
    Product by the method of Four Russians (M4RM), the same over bands of rows
    in parallel, and by plain word XOR.
matvec
    Matrix times packed vector, packed result.
rref, rank, inverse, nullspace
    Gauss-Jordan elimination with Four Russians tables (M4RI).
rank_batch
    Ranks of a stack of matrices, in parallel over the stack.
ple_base, trsm_lower_unit, trsm_upper_unit, gather_columns, scatter_columns
    Base cases of the block-recursive elimination (``gfla.linalg.blocked``), in
    place on a block of a root matrix given by its row and word offsets.
"""

import numpy as np
from numba import njit, prange

__all__ = [
    "word_count",
    "pack",
    "unpack",
    "matmul",
    "matmul_parallel",
    "matmul_naive",
    "matvec",
    "rref",
    "rank",
    "inverse",
    "nullspace",
    "rank_batch",
    "ple_base",
    "trsm_lower_unit",
    "trsm_upper_unit",
    "gather_columns",
    "scatter_columns",
]

_ONE = np.uint64(1)
_ZERO = np.uint64(0)
_BYTE = np.uint64(0xFF)

# Words of a column block of C covered by one set of M4RM tables: 8 tables x
# 256 entries x 32 words x 8 bytes = 512 KiB, which stays in a 2 MiB L2 cache.
# Measured on n = 1000..8192: 32 beats 8 and 16 by 10-15 % at n >= 4096.
_MATMUL_BLOCK_WORDS = 32
# Rows of C swept per set of tables: 1024 rows x 32 words = 256 KiB, so the block
# of C stays in cache beside the tables. Without it the 8192 x 8192 product took
# 2.0-2.3 s against 0.08 s at 4096 (a 25x jump for 8x the work); with 2048-row
# blocks 0.95 s.
_MATMUL_BLOCK_ROWS = 1024

# Elimination: each table covers at most 8 columns (2^8 sums of pivot rows),
# and one step applies 4 tables (32 columns) in a single pass over each row,
# which cut the time of the 8192 x 16384 augmented elimination of an inverse
# by 2-3x against one table per pass (measured with 1, 2, 3 and 4 tables).
# A step's window never crosses a word boundary.
_MAX_WINDOW = 8
_TABLES = 4


def word_count(ncols):
    """Number of uint64 words of a packed row with `ncols` columns.

    Parameters
    ----------
    ncols : int
        Number of columns, ``>= 0``.

    Returns
    -------
    int
        ``(ncols + 63) // 64``.
    """
    return (int(ncols) + 63) // 64


def pack(A):
    """Pack a 0/1 matrix into rows of uint64 words.

    Parameters
    ----------
    A : ndarray of uint8, shape (m, n)
        Entries 0 or 1 (any nonzero byte is read as 1; callers validate).

    Returns
    -------
    P : ndarray of uint64, shape (m, (n + 63) // 64)
        Packed rows; entry ``(i, j)`` is bit ``j % 64`` of ``P[i, j // 64]``,
        padding bits are 0.

    Notes
    -----
    Pure numpy (``np.packbits`` with little-endian bit order, then a
    little-endian view of each group of 8 bytes), which is faster than a
    compiled loop and compiles nothing.

    Examples
    --------
    >>> pack(np.array([[1, 0, 1]], dtype=np.uint8))
    array([[5]], dtype=uint64)
    """
    A = np.asarray(A)
    if A.ndim != 2:
        raise ValueError("`A` must be 2-D, got %d dimensions." % A.ndim)
    m, n = A.shape
    w = word_count(n)
    nbytes = (n + 7) // 8
    raw = np.zeros((m, 8 * w), dtype=np.uint8)
    if nbytes and m:
        raw[:, :nbytes] = np.packbits(A, axis=1, bitorder="little")
    # Byte 0 of the 8-byte group is the least significant: a little-endian view.
    return raw.view("<u8").astype(np.uint64, copy=False)


def unpack(P, ncols):
    """Unpack rows of uint64 words into a 0/1 matrix.

    Parameters
    ----------
    P : ndarray of uint64, shape (m, w)
        Packed rows, ``w >= (ncols + 63) // 64``.
    ncols : int
        Number of columns to return.

    Returns
    -------
    A : ndarray of uint8, shape (m, ncols)
        Entries 0 or 1.

    Examples
    --------
    >>> unpack(np.array([[5]], dtype=np.uint64), 3)
    array([[1, 0, 1]], dtype=uint8)
    """
    P = np.asarray(P)
    if P.ndim != 2:
        raise ValueError("`P` must be 2-D, got %d dimensions." % P.ndim)
    m, w = P.shape
    ncols = int(ncols)
    if ncols > 64 * w or ncols < 0:
        raise ValueError("`ncols` must be between 0 and 64 * P.shape[1] = %d." % (64 * w))
    raw = np.ascontiguousarray(P, dtype="<u8").view(np.uint8).reshape(m, 8 * w)
    return np.unpackbits(raw, axis=1, count=ncols, bitorder="little")


@njit(cache=True)
def _gray_steps(nbits):
    """Gray-code walk over ``2^nbits`` indices.

    Returns ``(code, previous, row)``: step ``i`` (``1 <= i < 2^nbits``) goes
    from index ``previous[i]`` to ``code[i]`` by flipping bit ``row[i]``.
    """
    size = 1 << nbits
    code = np.empty(size, np.int64)
    previous = np.empty(size, np.int64)
    row = np.empty(size, np.int64)
    code[0] = 0
    previous[0] = 0
    row[0] = 0
    for i in range(1, size):
        code[i] = i ^ (i >> 1)
        previous[i] = code[i - 1]
        # Consecutive Gray codes differ in the lowest set bit of i.
        b = 0
        while ((i >> b) & 1) == 0:
            b += 1
        row[i] = b
    return code, previous, row


@njit(cache=True)
def _m4rm_rows(A, B, C, r0, r1):
    """Rows r0..r1-1 of C = A B by M4RM (see :func:`matmul`)."""
    m, wk = A.shape
    k, wn = B.shape
    for i in range(r0, r1):
        for j in range(wn):
            C[i, j] = 0
    if r1 <= r0 or k == 0 or wn == 0:
        return
    code, previous, row = _gray_steps(8)
    block = min(wn, _MATMUL_BLOCK_WORDS)
    T = np.zeros((8, 256, block), np.uint64)
    for rb in range(r0, r1, _MATMUL_BLOCK_ROWS):
        re = min(r1, rb + _MATMUL_BLOCK_ROWS)
        for c0 in range(0, wn, block):
            cb = min(block, wn - c0)
            for kw in range(wk):
                r_base = 64 * kw
                ntab = min(8, (k - r_base + 7) // 8)
                for t in range(ntab):
                    rr = r_base + 8 * t
                    nrows = min(8, k - rr)
                    for j in range(cb):
                        T[t, 0, j] = 0
                    for s in range(1, 256):
                        g = code[s]
                        gp = previous[s]
                        b = row[s]
                        if b < nrows:
                            for j in range(cb):
                                T[t, g, j] = T[t, gp, j] ^ B[rr + b, c0 + j]
                        else:
                            for j in range(cb):
                                T[t, g, j] = T[t, gp, j]
                if ntab == 8:
                    for i in range(rb, re):
                        a = A[i, kw]
                        if a == 0:
                            continue
                        i0 = np.intp(a & _BYTE)
                        i1 = np.intp((a >> np.uint64(8)) & _BYTE)
                        i2 = np.intp((a >> np.uint64(16)) & _BYTE)
                        i3 = np.intp((a >> np.uint64(24)) & _BYTE)
                        i4 = np.intp((a >> np.uint64(32)) & _BYTE)
                        i5 = np.intp((a >> np.uint64(40)) & _BYTE)
                        i6 = np.intp((a >> np.uint64(48)) & _BYTE)
                        i7 = np.intp((a >> np.uint64(56)) & _BYTE)
                        for j in range(cb):
                            C[i, c0 + j] ^= (
                                T[0, i0, j] ^ T[1, i1, j] ^ T[2, i2, j] ^ T[3, i3, j]
                                ^ T[4, i4, j] ^ T[5, i5, j] ^ T[6, i6, j] ^ T[7, i7, j]
                            )
                else:
                    for i in range(rb, re):
                        a = A[i, kw]
                        if a == 0:
                            continue
                        for t in range(ntab):
                            idx = np.intp((a >> np.uint64(8 * t)) & _BYTE)
                            if idx != 0:
                                for j in range(cb):
                                    C[i, c0 + j] ^= T[t, idx, j]


@njit(cache=True)
def matmul(A, B, C):
    """Product of packed GF(2) matrices by the method of Four Russians.

    Parameters
    ----------
    A : ndarray of uint64, shape (m, wk)
        Left factor with ``k`` columns, ``wk = (k + 63) // 64``.
    B : ndarray of uint64, shape (k, wn)
        Right factor with ``n`` columns, ``wn = (n + 63) // 64``.
    C : ndarray of uint64, shape (m, wn)
        Output, overwritten with ``A B`` (zeroed here first).

    Raises
    ------
    ValueError
        If the shapes do not agree.

    Notes
    -----
    M4RM: each group of 8 consecutive rows of ``B`` gives a table of all
    ``2^8`` sums of those rows, built along a Gray code so each entry costs one
    row XOR. Byte ``t`` of a word of a row of ``A`` selects the table entry to
    add. Eight tables (64 rows of ``B``, one word of ``A``) are applied at once
    so each word of ``C`` is loaded and stored once per 64 rows of ``B``, and
    ``C`` is processed in blocks of 32 words by 1024 rows so the tables and the
    block of ``C`` stay in a core's cache together.
    Cost: ``m k n / 4096`` word updates of ``C`` (each the XOR of 8 table
    words) plus about ``k n / 2`` word XORs per row block to build the tables.
    When ``k`` is not a multiple of 8 the last group has fewer rows; the missing
    rows count as zero (and the matching bits of ``A`` are padding, hence 0).

    References
    ----------
    .. [1] V. L. Arlazarov, E. A. Dinic, M. A. Kronrod, I. A. Faradzev, "On
       economical construction of the transitive closure of an oriented
       graph", Soviet Mathematics Doklady 11, 1970.
    .. [2] M. R. Albrecht, G. V. Bard, W. Hart, "Algorithm 898: Efficient
       multiplication of dense matrices over GF(2)", ACM Transactions on
       Mathematical Software 37(1), 2010.
    """
    m, wk = A.shape
    k, wn = B.shape
    if C.shape[0] != m or C.shape[1] != wn:
        raise ValueError("`C` must have shape (A.shape[0], B.shape[1]).")
    if wk != (k + 63) // 64:
        raise ValueError("A.shape[1] must be (B.shape[0] + 63) // 64.")
    _m4rm_rows(A, B, C, 0, m)


@njit(cache=True, parallel=True)
def matmul_parallel(A, B, C, nchunks):
    """:func:`matmul` with the rows of ``C`` split into ``nchunks`` bands computed in
    parallel (each band builds its own tables). Same arguments as :func:`matmul`,
    shapes checked by the caller."""
    m = A.shape[0]
    step = (m + nchunks - 1) // nchunks
    for c in prange(nchunks):
        r0 = c * step
        r1 = min(m, r0 + step)
        if r0 < r1:
            _m4rm_rows(A, B, C, r0, r1)


@njit(cache=True)
def matmul_naive(A, B, C):
    """Product of packed GF(2) matrices by plain word XOR (reference).

    Parameters
    ----------
    A : ndarray of uint64, shape (m, wk)
        Left factor with ``k`` columns.
    B : ndarray of uint64, shape (k, wn)
        Right factor.
    C : ndarray of uint64, shape (m, wn)
        Output, overwritten with ``A B``.

    Notes
    -----
    Row ``i`` of ``C`` is the XOR of the rows ``l`` of ``B`` with ``A[i, l] = 1``
    (the row-times-matrix form of the definition). About ``m k n / 128`` word
    XORs for random input; used to check :func:`matmul`.

    References
    ----------
    .. [1] Common practice: the definition of the matrix product, one row of
       the result as a sum of rows of the right factor.
    """
    m, wk = A.shape
    k, wn = B.shape
    if C.shape[0] != m or C.shape[1] != wn:
        raise ValueError("`C` must have shape (A.shape[0], B.shape[1]).")
    if wk != (k + 63) // 64:
        raise ValueError("A.shape[1] must be (B.shape[0] + 63) // 64.")
    C[:, :] = 0
    for i in range(m):
        for kw in range(wk):
            a = A[i, kw]
            if a == 0:
                continue
            top = min(64, k - 64 * kw)
            for b in range(top):
                if (a >> np.uint64(b)) & _ONE:
                    r = 64 * kw + b
                    for j in range(wn):
                        C[i, j] ^= B[r, j]


@njit(cache=True)
def matvec(P, x, y):
    """Matrix times packed vector over GF(2).

    Parameters
    ----------
    P : ndarray of uint64, shape (m, w)
        Packed matrix with ``n`` columns, ``w = (n + 63) // 64``.
    x : ndarray of uint64, shape (w,)
        Packed vector of length ``n``.
    y : ndarray of uint64, shape ((m + 63) // 64,)
        Output, overwritten with the packed vector ``P x`` of length ``m``
        (bit ``i % 64`` of ``y[i // 64]`` is entry ``i``; padding bits 0).

    Notes
    -----
    Entry ``i`` is the parity of ``P[i] & x``, folded by shifts.

    References
    ----------
    .. [1] Common practice: an inner product over GF(2) is the parity of the
       AND of the two bit strings.
    """
    m, w = P.shape
    if x.shape[0] != w:
        raise ValueError("`x` must have P.shape[1] words.")
    if y.shape[0] != (m + 63) // 64:
        raise ValueError("`y` must have (P.shape[0] + 63) // 64 words.")
    y[:] = 0
    for i in range(m):
        acc = _ZERO
        for q in range(w):
            acc ^= P[i, q] & x[q]
        acc ^= acc >> np.uint64(32)
        acc ^= acc >> np.uint64(16)
        acc ^= acc >> np.uint64(8)
        acc ^= acc >> np.uint64(4)
        acc ^= acc >> np.uint64(2)
        acc ^= acc >> np.uint64(1)
        y[i >> 6] |= (acc & _ONE) << np.uint64(i & 63)


@njit(cache=True)
def _window_size(nrows):
    """Columns per table in one elimination step for `nrows` rows.

    A table over ``k`` columns costs about ``2^k`` row XORs to build and
    saves work on each of the ``nrows`` rows: take the ``k <= 8`` minimising
    ``(2^k + nrows) / k``.
    """
    best = 1
    best_cost = (2.0 + nrows) / 1.0
    for k in range(2, _MAX_WINDOW + 1):
        cost = ((1 << k) + nrows) / k
        if cost < best_cost:
            best = k
            best_cost = cost
    return best


@njit(cache=True)
def _eliminate(P, ncols, full, pivots):
    """Row reduction in place by Gauss-Jordan with Four Russians tables.

    Parameters
    ----------
    P : uint64[m, w], modified in place.
    ncols : columns that may hold pivots (``<= 64 w``; later columns are
        carried along, as in an augmented matrix).
    full : if true, clear each pivot column above and below (reduced row
        echelon form); if false, only below (row echelon form, rank only).
    pivots : int64[>= min(m, ncols)], receives the pivot columns.

    Returns the rank. Rows ``rank..m-1`` are zero in columns ``< ncols`` on
    exit.

    Each step takes a window of up to ``_TABLES * k`` columns inside one word
    (``k = _window_size(m)``, 8 for m >= 1024). It finds the window's pivots
    among the unreduced rows by looking only at the window bits of each row,
    and reduces those few pivot rows against each other. The pivots of each
    sub-window of ``k`` columns get a Gray-code table of all their sums; every
    other row then clears the whole window with one pass over its words,
    XORing in one entry of each table.
    """
    m, w = P.shape
    kbits = _window_size(m)
    size = 1 << kbits
    span = _TABLES * kbits
    code, previous, row = _gray_steps(kbits)
    T = np.zeros((_TABLES, size, w), np.uint64)
    combination = np.zeros((_TABLES, size), np.int64)
    offset = np.zeros(span, np.int64)      # pivot column - window start
    window = np.zeros(span, np.uint64)      # window bits of each pivot row
    first = np.zeros(_TABLES + 1, np.int64) # first pivot of each sub-window
    low = np.uint64(size - 1)
    kb = np.uint64(kbits)
    rk = 0
    c = 0
    while c < ncols and rk < m:
        word = c >> 6
        off = c & 63
        width = min(span, 64 - off, ncols - c)
        shift = np.uint64(off)
        mask = (_ONE << np.uint64(width)) - _ONE
        found = 0
        for j in range(width):
            jj = np.uint64(j)
            hit = -1
            for r in range(rk + found, m):
                x = (P[r, word] >> shift) & mask
                for p in range(found):
                    if (x >> np.uint64(offset[p])) & _ONE:
                        x ^= window[p]
                if (x >> jj) & _ONE:
                    hit = r
                    break
            if hit < 0:
                continue
            # Pivots found so far are reduced against each other, so the raw
            # bit of `hit` at each of their columns decides its combination.
            for p in range(found):
                if (P[hit, word] >> np.uint64(off + offset[p])) & _ONE:
                    src = rk + p
                    for q in range(word, w):
                        P[hit, q] ^= P[src, q]
            dst = rk + found
            if hit != dst:
                # Unreduced rows are zero before word `word`.
                for q in range(word, w):
                    tmp = P[hit, q]
                    P[hit, q] = P[dst, q]
                    P[dst, q] = tmp
            for p in range(found):
                tgt = rk + p
                if (P[tgt, word] >> np.uint64(off + j)) & _ONE:
                    for q in range(word, w):
                        P[tgt, q] ^= P[dst, q]
                    window[p] = (P[tgt, word] >> shift) & mask
            window[found] = (P[dst, word] >> shift) & mask
            offset[found] = j
            found += 1
        if found == 0:
            c += width
            continue
        ngroups = (width + kbits - 1) // kbits
        p = 0
        for g in range(ngroups):
            first[g] = p
            while p < found and offset[p] < (g + 1) * kbits:
                p += 1
        first[ngroups] = found
        for g in range(ngroups):
            for q in range(word, w):
                T[g, 0, q] = 0
            for s in range(1, 1 << (first[g + 1] - first[g])):
                src = rk + first[g] + row[s]
                gc = code[s]
                gp = previous[s]
                for q in range(word, w):
                    T[g, gc, q] = T[g, gp, q] ^ P[src, q]
            # Sub-window bits of a row -> index of its sum of pivot rows.
            lo = g * kbits
            for v in range(1 << min(kbits, width - lo)):
                idx = 0
                for pp in range(first[g], first[g + 1]):
                    if (v >> (offset[pp] - lo)) & 1:
                        idx |= 1 << (pp - first[g])
                combination[g, v] = idx
        start = 0 if full else rk + found
        for r in range(start, m):
            if r >= rk and r < rk + found:
                continue
            x = (P[r, word] >> shift) & mask
            if x == 0:
                continue
            if ngroups == 4:  # unrolled for _TABLES == 4
                i0 = combination[0, np.intp(x & low)]
                i1 = combination[1, np.intp((x >> kb) & low)]
                i2 = combination[2, np.intp((x >> (kb + kb)) & low)]
                i3 = combination[3, np.intp((x >> (kb + kb + kb)) & low)]
                for q in range(word, w):
                    P[r, q] ^= T[0, i0, q] ^ T[1, i1, q] ^ T[2, i2, q] ^ T[3, i3, q]
            else:
                for g in range(ngroups):
                    ig = combination[g, np.intp((x >> np.uint64(g * kbits)) & low)]
                    if ig != 0:
                        for q in range(word, w):
                            P[r, q] ^= T[g, ig, q]
        for p in range(found):
            pivots[rk + p] = c + offset[p]
        rk += found
        c += width
    return rk


@njit(cache=True)
def _rank_plain(P, ncols):
    """Rank by plain forward elimination, in place, no allocation.

    For small matrices (a stack of many), where building tables costs more
    than it saves.
    """
    m, w = P.shape
    rk = 0
    for c in range(ncols):
        if rk == m:
            break
        word = c >> 6
        bit = np.uint64(c & 63)
        hit = -1
        for r in range(rk, m):
            if (P[r, word] >> bit) & _ONE:
                hit = r
                break
        if hit < 0:
            continue
        if hit != rk:
            for q in range(word, w):
                tmp = P[hit, q]
                P[hit, q] = P[rk, q]
                P[rk, q] = tmp
        for r in range(hit + 1, m):
            if (P[r, word] >> bit) & _ONE:
                for q in range(word, w):
                    P[r, q] ^= P[rk, q]
        rk += 1
    return rk


@njit(cache=True)
def rref(P, ncols):
    """Reduced row echelon form in place.

    Parameters
    ----------
    P : ndarray of uint64, shape (m, w)
        Packed matrix with `ncols` columns, overwritten with its reduced row
        echelon form: pivot row ``i`` has its leading 1 at ``pivots[i]``, every
        other row is 0 in that column, rows ``rank..m-1`` are zero.
    ncols : int
        Number of columns, ``<= 64 w``.

    Returns
    -------
    pivots : ndarray of int64, shape (rank,)
        Pivot columns, increasing.

    Notes
    -----
    Gauss-Jordan elimination with word-wise row XORs (M4RI). The pivots of a
    window of up to 32 columns are found and reduced against each other;
    their row operations are gathered into Gray-code tables of all sums of
    the pivot rows of each 8-column sub-window, so every other row is cleared
    of the whole window in one pass over its words (one lookup per table).
    Rows whose window bits are all zero are skipped. Row XORs start at the
    word of the current column, since the rows still to be reduced are zero
    before it.

    References
    ----------
    .. [1] G. V. Bard, "Accelerating cryptanalysis with the Method of Four
       Russians", Cryptology ePrint Archive, Report 2006/251, 2006.
    .. [2] G. V. Bard, "Algebraic Cryptanalysis", Springer, 2009.
    """
    m, w = P.shape
    if ncols > 64 * w or ncols < 0:
        raise ValueError("`ncols` must be between 0 and 64 * P.shape[1].")
    pivots = np.empty(min(m, ncols), np.int64)
    r = _eliminate(P, ncols, True, pivots)
    return pivots[:r].copy()


@njit(cache=True)
def rank(P, ncols):
    """Rank, destroying `P`.

    Parameters
    ----------
    P : ndarray of uint64, shape (m, w)
        Packed matrix with `ncols` columns; overwritten with a row echelon
        form (forward elimination only).
    ncols : int
        Number of columns.

    Returns
    -------
    int
        The rank over GF(2).

    References
    ----------
    .. [1] G. V. Bard, "Accelerating cryptanalysis with the Method of Four
       Russians", Cryptology ePrint Archive, Report 2006/251, 2006.
    """
    m, w = P.shape
    if ncols > 64 * w or ncols < 0:
        raise ValueError("`ncols` must be between 0 and 64 * P.shape[1].")
    pivots = np.empty(min(m, ncols), np.int64)
    return _eliminate(P, ncols, False, pivots)


@njit(cache=True)
def inverse(P, n, out):
    """Inverse of a square packed matrix by Gauss-Jordan on ``[A | I]``.

    Parameters
    ----------
    P : ndarray of uint64, shape (n, w)
        Packed ``n x n`` matrix, ``w = (n + 63) // 64``; not modified.
    n : int
        Order of the matrix.
    out : ndarray of uint64, shape (n, w)
        Receives the inverse when there is one (left unspecified otherwise).

    Returns
    -------
    bool
        True if `P` is invertible, False if singular.

    Notes
    -----
    The augmented matrix keeps ``A`` in words ``0..w-1`` and ``I`` in words
    ``w..2w-1``, so no bit shifting is needed; pivots are sought only in the
    first `n` columns and the right half is carried along by the same M4RI
    row operations as :func:`rref`. Memory: ``2 n w`` words.

    References
    ----------
    .. [1] G. V. Bard, "Algebraic Cryptanalysis", Springer, 2009 (matrix
       inversion by the Method of Four Russians).
    """
    m, w = P.shape
    if m != n or w != (n + 63) // 64:
        raise ValueError("`P` must have shape (n, (n + 63) // 64).")
    if out.shape[0] != n or out.shape[1] != w:
        raise ValueError("`out` must have the shape of `P`.")
    aug = np.zeros((n, 2 * w), np.uint64)
    for i in range(n):
        for q in range(w):
            aug[i, q] = P[i, q]
        aug[i, w + (i >> 6)] = _ONE << np.uint64(i & 63)
    pivots = np.empty(n, np.int64)
    r = _eliminate(aug, n, True, pivots)
    if r < n:
        return False
    for i in range(n):
        for q in range(w):
            out[i, q] = aug[i, w + q]
    return True


@njit(cache=True)
def nullspace(R, pivots, ncols):
    """Basis of the right kernel from a reduced row echelon form.

    Parameters
    ----------
    R : ndarray of uint64, shape (m, w)
        Output of :func:`rref` (rows ``0..rank-1`` are the pivot rows).
    pivots : ndarray of int64, shape (rank,)
        Pivot columns returned by :func:`rref`.
    ncols : int
        Number of columns of the matrix.

    Returns
    -------
    N : ndarray of uint64, shape (ncols - rank, w)
        Packed rows, a basis of ``{x : A x = 0}``: one row per free column
        ``f`` (increasing), with a 1 at ``f``, 0 at the other free columns and
        ``R[i, f]`` at pivot column ``pivots[i]``.

    References
    ----------
    .. [1] Common practice: the kernel basis read off a reduced row echelon
       form, one vector per free variable.
    """
    m, w = R.shape
    rk = pivots.shape[0]
    if rk > m or ncols > 64 * w or rk > ncols:
        raise ValueError("`pivots` and `ncols` do not fit `R`.")
    N = np.zeros((ncols - rk, w), np.uint64)
    is_pivot = np.zeros(ncols, np.bool_)
    for i in range(rk):
        is_pivot[pivots[i]] = True
    t = 0
    for f in range(ncols):
        if is_pivot[f]:
            continue
        word = f >> 6
        bit = np.uint64(f & 63)
        N[t, word] |= _ONE << bit
        for i in range(rk):
            if (R[i, word] >> bit) & _ONE:
                p = pivots[i]
                N[t, p >> 6] |= _ONE << np.uint64(p & 63)
        t += 1
    return N


@njit(parallel=True, cache=True)
def rank_batch(P3, ncols):
    """Ranks of a stack of packed matrices, destroying the stack.

    Parameters
    ----------
    P3 : ndarray of uint64, shape (N, m, w)
        Stack of packed matrices with `ncols` columns each; overwritten.
    ncols : int
        Number of columns of each matrix.

    Returns
    -------
    ndarray of int64, shape (N,)
        Rank of each matrix.

    Notes
    -----
    The stack is split over threads with ``prange``. Matrices with fewer than
    64 rows use plain forward elimination (no tables, no allocation); larger
    ones the M4RI elimination of :func:`rank`.

    References
    ----------
    .. [1] G. V. Bard, "Accelerating cryptanalysis with the Method of Four
       Russians", Cryptology ePrint Archive, Report 2006/251, 2006.
    """
    count, m, w = P3.shape
    if ncols > 64 * w or ncols < 0:
        raise ValueError("`ncols` must be between 0 and 64 * P3.shape[2].")
    out = np.empty(count, np.int64)
    small = m < 64
    for s in prange(count):
        if small:
            out[s] = _rank_plain(P3[s], ncols)
        else:
            pivots = np.empty(min(m, ncols), np.int64)
            out[s] = _eliminate(P3[s], ncols, False, pivots)
    return out


# ----------------------------------------------------- base cases of block elimination
@njit(cache=True)
def ple_base(P, r0, w0, m, nbits, perm, pivots):
    """PLE decomposition in place of a packed block.

    Parameters
    ----------
    P : ndarray of uint64, shape (M, W)
        Root matrix; the block is rows ``r0 .. r0+m-1`` and columns ``64 w0 ..
        64 w0 + nbits - 1``. Bits of the block's last word beyond ``nbits`` are
        neither read as pivots nor changed, except by row swaps (which move whole
        words of the block).
    r0, w0, m, nbits : int
        Block position and size.
    perm : ndarray of int64, shape (m,)
        Receives the block row now at row i.
    pivots : ndarray of int64, shape (>= min(m, nbits),)
        Receives the pivot columns relative to ``64 w0``.

    Returns
    -------
    int
        The rank r. Rows 0..r-1 of the block hold E (row echelon form) and the
        entries of L below each pivot are left in place: a pivot column keeps its
        bits below the pivot (they are L's multipliers), only columns to the right
        of the pivot are cleared.

    References
    ----------
    .. [1] C.-P. Jeannerod, C. Pernet, A. Storjohann, "Rank-profile revealing
       Gaussian elimination and the CUP matrix decomposition", J. Symbolic
       Computation 56, 2013.
    """
    wb = (nbits + 63) // 64
    for i in range(m):
        perm[i] = i
    r = 0
    for c in range(nbits):
        if r == m:
            break
        word = w0 + (c >> 6)
        bit = np.uint64(c & 63)
        hit = -1
        for i in range(r, m):
            if (P[r0 + i, word] >> bit) & _ONE:
                hit = i
                break
        if hit < 0:
            continue
        if hit != r:
            for q in range(w0, w0 + wb):
                t = P[r0 + hit, q]
                P[r0 + hit, q] = P[r0 + r, q]
                P[r0 + r, q] = t
            t2 = perm[hit]
            perm[hit] = perm[r]
            perm[r] = t2
        above = ~((_ONE << bit) | ((_ONE << bit) - _ONE))
        head = P[r0 + r, word] & above
        for i in range(r + 1, m):
            if (P[r0 + i, word] >> bit) & _ONE:
                P[r0 + i, word] ^= head
                for q in range(word + 1, w0 + wb):
                    P[r0 + i, q] ^= P[r0 + r, q]
        pivots[r] = c
        r += 1
    return r


@njit(cache=True)
def trsm_lower_unit(L, lr0, lw0, r, B, br0, bw0, wb):
    """B[br0:br0+r, words bw0:bw0+wb] := L^-1 B over GF(2), with L the unit lower
    triangular r x r block of packed ``L`` at row lr0, columns from ``64 lw0`` (bits
    on and above its diagonal are not read). Forward substitution by row XORs."""
    for i in range(1, r):
        for k in range(i):
            if (L[lr0 + i, lw0 + (k >> 6)] >> np.uint64(k & 63)) & _ONE:
                for q in range(bw0, bw0 + wb):
                    B[br0 + i, q] ^= B[br0 + k, q]


@njit(cache=True)
def trsm_upper_unit(U, ur0, uw0, r, B, br0, bw0, wb):
    """B[br0:br0+r, words bw0:bw0+wb] := U^-1 B over GF(2), with U the unit upper
    triangular r x r block of packed ``U`` at row ur0, columns from ``64 uw0`` (bits
    on and below its diagonal are not read). Back substitution by row XORs."""
    for i in range(r - 2, -1, -1):
        for k in range(i + 1, r):
            if (U[ur0 + i, uw0 + (k >> 6)] >> np.uint64(k & 63)) & _ONE:
                for q in range(bw0, bw0 + wb):
                    B[br0 + i, q] ^= B[br0 + k, q]


@njit(cache=True)
def gather_columns(P, r0, m, cols, out):
    """out[i] = bits ``cols`` of row r0+i of ``P``, packed (``out`` zeroed here)."""
    wo = out.shape[1]
    for i in range(m):
        for q in range(wo):
            out[i, q] = 0
        for t in range(cols.shape[0]):
            c = cols[t]
            if (P[r0 + i, c >> 6] >> np.uint64(c & 63)) & _ONE:
                out[i, t >> 6] |= _ONE << np.uint64(t & 63)


@njit(cache=True)
def scatter_columns(X, cols, P, r0):
    """Bit t of row i of ``X`` goes to column ``cols[t]`` of row r0+i of ``P`` (the
    target bits are overwritten, other bits kept)."""
    for i in range(X.shape[0]):
        for t in range(cols.shape[0]):
            c = cols[t]
            q = c >> 6
            b = np.uint64(c & 63)
            v = (X[i, t >> 6] >> np.uint64(t & 63)) & _ONE
            P[r0 + i, q] = (P[r0 + i, q] & ~(_ONE << b)) | (v << b)
