"""Scalar and elementwise arithmetic modulo n, for 2 <= n <= 2^64.

Values are uint64 in [0, n). The modulus is passed as uint64; the value 0 stands for
n = 2^64, where arithmetic is the machine's wrapping arithmetic. Products use a float64
quotient estimate while n < 2^50, the same estimate on 21-bit chunks of one factor
while n < 2^62, and an exact 128-bit product with shift-and-subtract reduction above
that, so no product overflows silently anywhere in the range.

Shared by GF(p) (``fields.prime``) and Z/n (``fields.ring``).

The second half of the file serves the products and the block elimination of
``gfla.linalg``:

* limbs -- ``limb_leaves`` cuts uint64 entries into b-bit limbs and forms the operand
  sums of a Karatsuba scheme as float64 matrices (each leaf product is then one exact
  float64 BLAS product), ``limb_combine`` interpolates the leaf products into limb
  coefficients in exact int64 arithmetic and evaluates them at 2^b modulo n (Horner);
* the float64 representation of a small prime field (p^2 < 2^52): entries are exact
  integers held in float64, products of BLAS are reduced by ``reduce_float_to_*``
  (``range_to_float_*`` validate and convert the public inputs in one pass), and the
  base cases of the block-recursive elimination (``ple_base_float``,
  ``trsm_lower_unit_float``, ``trsm_upper_float``, ``sub_block_float``,
  ``schur_small_float``) work in place
  on a block ``M[r0:r0+m, c0:c0+n]`` of a C-contiguous root matrix, so each kernel
  compiles once whatever block it is given.
"""

import numpy as np
from numba import njit

__all__ = ["addmod", "submod", "negmod", "mulmod", "invmod", "gcdex_mod", "gcd_n",
           "mulmod_array", "limb_leaves", "limb_combine", "to_float", "reduce_float",
           "reduce_float_to_uint", "reduce_float_to_int64", "range_to_float_int64",
           "range_to_float_uint64", "ple_base_float", "trsm_lower_unit_float",
           "trsm_upper_float", "sub_block_float", "schur_small_float", "matvec_uint32",
           "range_copy_int64", "range_copy_uint64"]

_U0 = np.uint64(0)
_U1 = np.uint64(1)
_M32 = np.uint64(0xFFFFFFFF)
_S32 = np.uint64(32)
_FLOAT_LIMIT = np.uint64(1 << 50)
_SMALL_LIMIT = np.uint64(1 << 32)


@njit(cache=True, inline="always")
def addmod(a, b, n):
    s = a + b
    if n == _U0:
        return s
    if s < a or s >= n:
        s = s - n
    return s


@njit(cache=True, inline="always")
def submod(a, b, n):
    if n == _U0 or a >= b:
        return a - b
    return a + (n - b)


@njit(cache=True, inline="always")
def negmod(a, n):
    if a == _U0:
        return a
    if n == _U0:
        return _U0 - a
    return n - a


@njit(cache=True)
def _mul128(a, b):
    a0 = a & _M32
    a1 = a >> _S32
    b0 = b & _M32
    b1 = b >> _S32
    p00 = a0 * b0
    p01 = a0 * b1
    p10 = a1 * b0
    p11 = a1 * b1
    mid = (p00 >> _S32) + (p01 & _M32) + (p10 & _M32)
    lo = (p00 & _M32) | (mid << _S32)
    hi = p11 + (p01 >> _S32) + (p10 >> _S32) + (mid >> _S32)
    return hi, lo


@njit(cache=True)
def _mulmod_wide(a, b, n):
    # (hi * 2^64 + lo) mod n with hi < n, bit by bit so nothing exceeds 64 bits.
    hi, lo = _mul128(a, b)
    r = hi
    for i in range(63, -1, -1):
        if r >= n - r:
            r = r - (n - r)
        else:
            r = r + r
        if (lo >> np.uint64(i)) & _U1:
            r = r + _U1
            if r == n:
                r = _U0
    return r


_CHUNK = np.uint64(21)
_CHUNK_MASK = np.uint64((1 << 21) - 1)
_CHUNK_LIMIT = np.uint64(1 << 62)


@njit(cache=True, inline="always")
def _mulmod_short(x, c, n):
    """x * c mod n for c < 2^21 and n < 2^62: the float64 quotient estimate is off by at
    most one, so the remainder computed with wrapping arithmetic lies in (-n, 2n)."""
    q = np.uint64(np.float64(x) * np.float64(c) / np.float64(n))
    r = np.int64(x * c - q * n)
    ns = np.int64(n)
    while r < 0:
        r += ns
    while r >= ns:
        r -= ns
    return np.uint64(r)


@njit(cache=True)
def _mulmod_chunked(a, b, n):
    # Horner in base 2^21 over the three chunks of b: r = r * 2^21 + a * chunk.
    r = _U0
    for s in range(2, -1, -1):
        c = (b >> (_CHUNK * np.uint64(s))) & _CHUNK_MASK
        r = _mulmod_short(r, np.uint64(1 << 21), n)
        r = addmod(r, _mulmod_short(a, c, n), n)
    return r


@njit(cache=True, inline="always")
def mulmod(a, b, n):
    if n == _U0:
        return a * b
    if n <= _SMALL_LIMIT:
        return (a * b) % n
    if n < _FLOAT_LIMIT:
        q = np.uint64(np.float64(a) * np.float64(b) / np.float64(n))
        r = np.int64(a * b - q * n)
        ns = np.int64(n)
        while r < 0:
            r += ns
        while r >= ns:
            r -= ns
        return np.uint64(r)
    if n < _CHUNK_LIMIT:
        return _mulmod_chunked(a, b, n)
    return _mulmod_wide(a, b, n)


@njit(cache=True)
def gcdex_mod(a, b, n):
    """Return (g, s, t) with g = gcd(a, b) as integers and s a + t b = g (mod n)."""
    r0 = a
    r1 = b
    s0 = _U1
    s1 = _U0
    t0 = _U0
    t1 = _U1
    if n != _U0:
        s0 = s0 % n
        t1 = t1 % n
    while r1 != _U0:
        q = r0 // r1
        qm = q if n == _U0 else q % n
        r0, r1 = r1, r0 - q * r1
        s0, s1 = s1, submod(s0, mulmod(qm, s1, n), n)
        t0, t1 = t1, submod(t0, mulmod(qm, t1, n), n)
    return r0, s0, t0


@njit(cache=True)
def gcd_n(a, n):
    """gcd(a, n) as an integer, with n = 0 standing for 2^64 (result 0 means a = 0 and
    the gcd is n itself)."""
    if n == _U0:
        if a == _U0:
            return _U0
        return a & (_U0 - a)
    x = a
    y = n
    while y != _U0:
        x, y = y, x % y
    return x


@njit(cache=True)
def invmod(a, n):
    """Inverse of a modulo n, or 0 when gcd(a, n) != 1."""
    if n == _U0:
        if a & _U1 == _U0:
            return _U0
        x = a
        for _ in range(6):
            x = x * (np.uint64(2) - a * x)
        return x
    if n == _U1:
        return _U0
    g, s, t = gcdex_mod(a % n, n, n)
    if g != _U1:
        return _U0
    return s


@njit(cache=True)
def mulmod_array(a, b, n, out):
    """out[i] = a[i] * b[i] mod n for 1-D uint64 arrays."""
    for i in range(a.shape[0]):
        out[i] = mulmod(a[i], b[i], n)


# ---------------------------------------------------------------------- limb products
_TWO53 = np.uint64(1 << 53)
_TWO62 = np.uint64(1 << 62)


@njit(cache=True)
def limb_leaves(A, b, subsets, out):
    """Leaf operands of a Karatsuba scheme on b-bit limbs.

    Parameters
    ----------
    A : uint64[m, c]
        Entries (any value below 2^64).
    b : int
        Limb width in bits; limb t of x is ``(x >> (b t)) & (2^b - 1)``.
    subsets : int64[leaves, L]
        ``subsets[s, t] = 1`` when limb t enters leaf s.
    out : float64[leaves, m, c]
        Receives, for each leaf, the sum of its limbs (exact: sums stay below 2^53).

    References
    ----------
    .. [1] A. Karatsuba, Yu. Ofman, "Multiplication of multidigit numbers on
       automata", Soviet Physics Doklady 7, 1963.
    """
    nleaf, L = subsets.shape
    mask = (_U1 << np.uint64(b)) - _U1
    m, c = A.shape
    for i in range(m):
        for s in range(nleaf):
            first = True
            for t in range(L):
                if subsets[s, t]:
                    sh = np.uint64(b * t)
                    if first:
                        for j in range(c):
                            out[s, i, j] = np.float64(np.int64((A[i, j] >> sh) & mask))
                        first = False
                    else:
                        for j in range(c):
                            out[s, i, j] += np.float64(np.int64((A[i, j] >> sh) & mask))


@njit(cache=True)
def limb_combine(P, M, b, n, out):
    """Interpolate leaf products into limb coefficients and evaluate at 2^b mod n.

    Parameters
    ----------
    P : float64[leaves, m, c]
        Exact leaf products (integers below 2^53).
    M : int64[D, leaves]
        Interpolation: coefficient d of the limb product is ``sum_s M[d, s] P[s]``,
        an integer in [0, 2^53) (the caller's choice of b guarantees it).
    b : int
        Limb width.
    n : uint64
        Modulus, 0 standing for 2^64.
    out : uint64[m, c]
        Receives ``sum_d c_d 2^(b d) mod n``.

    Notes
    -----
    Horner's rule from the top coefficient: acc <- acc 2^b + c_d. The shift is a
    product by a constant below 2^21 with a float64 quotient estimate while n < 2^62
    (remainder off by at most n, fixed by a compare), b doublings with a conditional
    subtraction above, the machine's wrapping shift for n = 2^64. Row by row, with
    each step a loop over the row that the compiler vectorises.

    References
    ----------
    .. [1] J.-G. Dumas, P. Giorgi, C. Pernet, "Dense linear algebra over word-size
       prime fields: the FFLAS and FFPACK packages", ACM TOMS 35(3), 2008.
    """
    D, nleaf = M.shape
    m, c = out.shape
    coef = np.empty(c, dtype=np.int64)
    acc = np.empty(c, dtype=np.uint64)
    ns = np.int64(n)
    nf = np.float64(n) if n != _U0 else 1.0
    ninv = 1.0 / nf
    wide = n >= _TWO62 or n == _U0
    small = n != _U0 and n < _TWO53
    for i in range(m):
        for d in range(D - 1, -1, -1):
            for j in range(c):
                coef[j] = 0
            for s in range(nleaf):
                w = M[d, s]
                if w != 0:
                    for j in range(c):
                        coef[j] += w * np.int64(P[s, i, j])
            if small:
                for j in range(c):
                    x = coef[j]
                    q = np.int64(np.float64(x) * ninv)
                    r = x - q * ns
                    r = r + ns if r < 0 else r
                    r = r - ns if r >= ns else r
                    coef[j] = r
            if d == D - 1:
                for j in range(c):
                    acc[j] = np.uint64(coef[j])
                continue
            if n == _U0:
                for j in range(c):
                    acc[j] = acc[j] << np.uint64(b)
            elif not wide:
                left = b
                while left > 0:
                    step = min(left, 20)
                    cf = np.float64(1 << step)
                    cu = np.uint64(1 << step)
                    for j in range(c):
                        x = acc[j]
                        q = np.uint64(np.float64(x) * cf * ninv)
                        r = np.int64(x * cu - q * n)
                        r = r + ns if r < 0 else r
                        r = r - ns if r >= ns else r
                        acc[j] = np.uint64(r)
                    left -= step
            else:
                for _ in range(b):
                    for j in range(c):
                        x = acc[j]
                        t = n - x
                        acc[j] = x - t if x >= t else x + x
            for j in range(c):
                acc[j] = addmod(acc[j], np.uint64(coef[j]), n)
        for j in range(c):
            out[i, j] = acc[j]


# ------------------------------------------------- float64 representation, p^2 < 2^52
@njit(cache=True)
def to_float(A, out):
    """out = A (uint64 entries below 2^53) as float64."""
    for i in range(A.shape[0]):
        for j in range(A.shape[1]):
            out[i, j] = np.float64(A[i, j])


@njit(cache=True, inline="always")
def _freduce(x, p, pinv):
    # x an integer-valued float with |x| < 2^52: floor(x / p) is off by at most one.
    r = x - p * np.floor(x * pinv)
    r = r + p if r < 0.0 else r
    return r - p if r >= p else r


@njit(cache=True)
def reduce_float(C, p):
    """C mod p in place (entries integer-valued, |C| < 2^52), into [0, p)."""
    pinv = 1.0 / p
    for i in range(C.shape[0]):
        for j in range(C.shape[1]):
            C[i, j] = _freduce(C[i, j], p, pinv)


@njit(cache=True)
def reduce_float_to_uint(C, p, out):
    """out = C mod p as uint64 (entries integer-valued, |C| < 2^52)."""
    pinv = 1.0 / p
    for i in range(C.shape[0]):
        for j in range(C.shape[1]):
            out[i, j] = np.uint64(np.int64(_freduce(C[i, j], p, pinv)))


@njit(cache=True)
def reduce_float_to_int64(C, p, out):
    """out = C mod p as int64 (entries integer-valued, |C| < 2^52)."""
    pinv = 1.0 / p
    for i in range(C.shape[0]):
        for j in range(C.shape[1]):
            out[i, j] = np.int64(_freduce(C[i, j], p, pinv))


@njit(cache=True)
def range_to_float_int64(a, bound, out):
    """out = a as float64 when every entry lies in [0, bound) (bound <= 2^53); returns
    -1, or the index of the first entry outside."""
    for i in range(a.shape[0]):
        x = a[i]
        if x < 0 or x >= bound:
            return i
        out[i] = np.float64(x)
    return -1


@njit(cache=True)
def range_to_float_uint64(a, bound, out):
    """As :func:`range_to_float_int64` for uint64 input."""
    for i in range(a.shape[0]):
        x = a[i]
        if x >= np.uint64(bound):
            return i
        out[i] = np.float64(np.int64(x))
    return -1


@njit(cache=True)
def sub_block_float(M, r0, c0, P, p):
    """M[r0:r0+h, c0:c0+w] = (M[...] - P) mod p for P of shape (h, w), 0 <= P < 2^52."""
    pinv = 1.0 / p
    for i in range(P.shape[0]):
        for j in range(P.shape[1]):
            M[r0 + i, c0 + j] = _freduce(M[r0 + i, c0 + j] - P[i, j], p, pinv)


@njit(cache=True)
def ple_base_float(M, r0, c0, m, n, p, perm, pivots):
    """PLE decomposition in place of the block M[r0:r0+m, c0:c0+n] (float64, p prime).

    Gaussian elimination by columns with row swaps inside the block: on return the
    pivot rows 0..r-1 hold E (row echelon form, pivots not normalised) and, below each
    pivot, the multipliers of L (unit lower triangular, column k of L stored in the
    column of pivot k). ``perm[i]`` is the block row now at row i; ``pivots[:r]`` the
    pivot columns (relative to c0). Returns the rank r.

    Reduction is delayed: a column is reduced only when it becomes the pivot column,
    so each entry is reduced once and the row updates are plain multiply-adds (at most
    n of them per entry, and n p^2 < 2^52 is the caller's bound).

    References
    ----------
    .. [1] C.-P. Jeannerod, C. Pernet, A. Storjohann, "Rank-profile revealing Gaussian
       elimination and the CUP matrix decomposition", J. Symbolic Computation 56, 2013.
    .. [2] J.-G. Dumas, P. Giorgi, C. Pernet, "Dense linear algebra over word-size
       prime fields: the FFLAS and FFPACK packages", ACM TOMS 35(3), 2008 (delayed
       reduction).
    """
    pinv = 1.0 / p
    pu = np.uint64(p)
    for i in range(m):
        perm[i] = i
    r = 0
    for c in range(n):
        if r == m:
            break
        hit = -1
        for i in range(r, m):
            x = _freduce(M[r0 + i, c0 + c], p, pinv)
            M[r0 + i, c0 + c] = x
            if hit < 0 and x != 0.0:
                hit = i
        if hit < 0:
            continue
        if hit != r:
            for j in range(n):
                t = M[r0 + hit, c0 + j]
                M[r0 + hit, c0 + j] = M[r0 + r, c0 + j]
                M[r0 + r, c0 + j] = t
            t2 = perm[hit]
            perm[hit] = perm[r]
            perm[r] = t2
        for j in range(c + 1, n):
            M[r0 + r, c0 + j] = _freduce(M[r0 + r, c0 + j], p, pinv)
        inv = np.float64(invmod(np.uint64(M[r0 + r, c0 + c]), pu))
        for i in range(r + 1, m):
            a = M[r0 + i, c0 + c]
            if a == 0.0:
                continue
            f = _freduce(a * inv, p, pinv)
            M[r0 + i, c0 + c] = f
            for j in range(c + 1, n):
                M[r0 + i, c0 + j] -= f * M[r0 + r, c0 + j]
        pivots[r] = c
        r += 1
    for i in range(r, m):
        for j in range(n):
            M[r0 + i, c0 + j] = _freduce(M[r0 + i, c0 + j], p, pinv)
    return r


@njit(cache=True)
def trsm_lower_unit_float(L, lr0, lc0, r, B, br0, bc0, w, p):
    """B[br0:br0+r, bc0:bc0+w] := L^-1 B for the unit lower triangular r x r block of L
    at (lr0, lc0) (entries on and above the diagonal are ignored); forward
    substitution with one reduction per row (r p^2 < 2^52 is the caller's bound)."""
    pinv = 1.0 / p
    for i in range(1, r):
        for k in range(i):
            f = L[lr0 + i, lc0 + k]
            if f != 0.0:
                for j in range(w):
                    B[br0 + i, bc0 + j] -= f * B[br0 + k, bc0 + j]
        for j in range(w):
            B[br0 + i, bc0 + j] = _freduce(B[br0 + i, bc0 + j], p, pinv)


@njit(cache=True)
def trsm_upper_float(U, ur0, uc0, r, B, br0, bc0, w, p):
    """B[br0:br0+r, bc0:bc0+w] := U^-1 B for the upper triangular r x r block of U at
    (ur0, uc0) with nonzero diagonal (entries below the diagonal are ignored)."""
    pinv = 1.0 / p
    pu = np.uint64(p)
    for i in range(r - 1, -1, -1):
        for k in range(i + 1, r):
            f = U[ur0 + i, uc0 + k]
            if f != 0.0:
                for j in range(w):
                    B[br0 + i, bc0 + j] -= f * B[br0 + k, bc0 + j]
        d = np.float64(invmod(np.uint64(U[ur0 + i, uc0 + i]), pu))
        for j in range(w):
            B[br0 + i, bc0 + j] = _freduce(_freduce(B[br0 + i, bc0 + j], p, pinv) * d,
                                           p, pinv)


@njit(cache=True)
def schur_small_float(M, r0, c0, X, xr0, xc0, Y, yr0, yc0, h, k, w, p):
    """M[r0:r0+h, c0:c0+w] := (M - X Y) mod p with X = X[xr0:xr0+h, xc0:xc0+k] and
    Y = Y[yr0:yr0+k, yc0:yc0+w] (k p^2 < 2^52): the Schur update for a small inner
    dimension, where a multithreaded BLAS call costs more than the arithmetic."""
    pinv = 1.0 / p
    acc = np.empty(w)
    for i in range(h):
        for j in range(w):
            acc[j] = M[r0 + i, c0 + j]
        for t in range(k):
            f = X[xr0 + i, xc0 + t]
            if f != 0.0:
                for j in range(w):
                    acc[j] -= f * Y[yr0 + t, yc0 + j]
        for j in range(w):
            M[r0 + i, c0 + j] = _freduce(acc[j], p, pinv)


@njit(cache=True)
def matvec_uint32(A, x, p, out):
    """out = A x mod p for A uint32 (entries < p), x uint64 (entries < p), with
    ncols (p - 1)^2 < 2^64 (the caller's bound): exact uint64 dot products, one
    reduction per entry. A quarter of the memory traffic of a float64 product, which
    is what a matrix-vector product is bound by."""
    for i in range(A.shape[0]):
        acc = np.uint64(0)
        for j in range(A.shape[1]):
            acc += np.uint64(A[i, j]) * x[j]
        out[i] = acc % p


@njit(cache=True)
def range_copy_int64(a, bound, out):
    """out = a as uint64 when every entry lies in [0, bound); returns -1, or the index
    of the first entry outside (``out`` then partly written). One pass: the check and
    the conversion of input validation together."""
    for i in range(a.shape[0]):
        x = a[i]
        if x < 0 or np.uint64(x) >= bound:
            return i
        out[i] = np.uint64(x)
    return -1


@njit(cache=True)
def range_copy_uint64(a, bound, out):
    """As :func:`range_copy_int64` for uint64 input."""
    for i in range(a.shape[0]):
        x = a[i]
        if x >= bound:
            return i
        out[i] = x
    return -1
