"""Scalar and elementwise arithmetic modulo n, for 2 <= n <= 2^64.

Values are uint64 in [0, n). The modulus is passed as uint64; the value 0 stands for
n = 2^64, where arithmetic is the machine's wrapping arithmetic. Products use a float64
quotient estimate while n < 2^50, the same estimate on 21-bit chunks of one factor
while n < 2^62, and an exact 128-bit product with shift-and-subtract reduction above
that, so no product overflows silently anywhere in the range.

Shared by GF(p) (``fields.prime``) and Z/n (``fields.ring``).
"""

import numpy as np
from numba import njit, prange

__all__ = ["addmod", "submod", "negmod", "mulmod", "invmod", "gcdex_mod", "gcd_n",
           "mulmod_array", "combine_limbs"]

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


@njit(cache=True, parallel=True)
def combine_limbs(partials, shifts, n, out):
    """out = sum_d partials[d] * shifts[d] mod n.

    partials: uint64 (D, m) exact partial products grouped by limb degree, each entry
    already < 2^63; shifts: uint64 (D,) the values 2^(b d) mod n.
    """
    D = partials.shape[0]
    m = partials.shape[1]
    for j in prange(m):
        acc = _U0
        for d in range(D):
            v = partials[d, j]
            if n != _U0:
                v = v % n
            acc = addmod(acc, mulmod(v, shifts[d], n), n)
        out[j] = acc
