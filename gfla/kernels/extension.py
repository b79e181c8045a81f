"""GF(2^k) arithmetic, 1 <= k <= 16, by log/exp tables.

Elements are integers 0 .. 2^k - 1 whose bit i is the coefficient of x^i. The tables are
built from a generator g of the multiplicative group (found by the field object; it is x
when the modulus is primitive): ``exp[i] = g^i`` for 0 <= i < 2(q - 1) (doubled so a sum of
two logs needs no reduction) and ``log[a]`` for a != 0.

The tables live inside the context array used by the dense kernels (see ``dense``):
``ctx[EXP_OFFSET : EXP_OFFSET + 2(q-1)]`` and ``ctx[log_offset(q) : ... + q]``.

``bitslice`` and ``unslice`` convert a matrix of elements to and from its k bit planes,
each a bit-packed GF(2) matrix in the layout of ``kernels.binary``: the product of two
GF(2^k) matrices is then a product of polynomials with GF(2)-matrix coefficients
(``gfla.linalg.multiply``).
"""

import numpy as np
from numba import njit

__all__ = ["clmul_mod", "element_power", "build_context", "EXP_OFFSET", "log_offset",
           "ext_mul", "ext_inv", "bitslice", "unslice"]

EXP_OFFSET = 8


@njit(cache=True, inline="always")
def log_offset(q):
    return EXP_OFFSET + 2 * (q - 1)


@njit(cache=True)
def clmul_mod(a, b, modulus, k):
    """a * b in GF(2)[x] / (modulus), by shift and add (reference and table builder)."""
    r = 0
    top = 1 << k
    while b:
        if b & 1:
            r ^= a
        b >>= 1
        a <<= 1
        if a & top:
            a ^= modulus
    return r


@njit(cache=True)
def element_power(a, e, modulus, k):
    r = 1
    while e:
        if e & 1:
            r = clmul_mod(r, a, modulus, k)
        a = clmul_mod(a, a, modulus, k)
        e >>= 1
    return r


@njit(cache=True)
def build_context(k, modulus, generator):
    """Context array for GF(2^k): header, exp table (doubled), log table."""
    q = 1 << k
    ctx = np.zeros(EXP_OFFSET + 2 * (q - 1) + q, dtype=np.uint64)
    ctx[0] = 1
    ctx[1] = k
    ctx[2] = q - 1
    ctx[3] = modulus
    lo = EXP_OFFSET + 2 * (q - 1)
    x = 1
    for i in range(q - 1):
        ctx[EXP_OFFSET + i] = x
        ctx[EXP_OFFSET + q - 1 + i] = x
        ctx[lo + x] = i
        x = clmul_mod(x, generator, modulus, k)
    return ctx


@njit(cache=True, inline="always")
def ext_mul(a, b, ctx):
    if a == 0 or b == 0:
        return np.uint64(0)
    lo = EXP_OFFSET + 2 * np.int64(ctx[2])
    return ctx[EXP_OFFSET + np.int64(ctx[lo + np.int64(a)]) + np.int64(ctx[lo + np.int64(b)])]


@njit(cache=True, inline="always")
def ext_inv(a, ctx):
    if a == 0:
        return np.uint64(0)
    q1 = np.int64(ctx[2])
    lo = EXP_OFFSET + 2 * q1
    la = np.int64(ctx[lo + np.int64(a)])
    if la == 0:
        return np.uint64(1)
    return ctx[EXP_OFFSET + q1 - la]


_LANES = np.uint64(0x0101010101010101)
_GATHER = np.uint64(0x0102040810204080)
_BYTE = np.uint64(0xFF)


@njit(cache=True)
def bitslice(A, k, out):
    """Bit planes of a matrix of GF(2^k) elements.

    Parameters
    ----------
    A : uint64[m, c]
        Entries below 2^k (k <= 16).
    k : int
        Number of planes.
    out : uint64[k, m, (c + 63) // 64]
        Receives plane t: the packed GF(2) matrix of bit t of each entry (padding
        bits 0).

    Notes
    -----
    Eight entries at a time: their low bytes side by side in one word, bit t of all
    eight is ``((x >> t) & 0x0101...01) * 0x0102040810204080 >> 56`` (one multiply
    gathers one bit from each byte), and the same for the high bytes when k > 8.

    References
    ----------
    .. [1] Common practice: bit-slicing, an element of GF(2^k) as its k coordinates
       over GF(2) in the polynomial basis.
    """
    m, c = A.shape
    w = out.shape[2]
    for i in range(m):
        for q in range(w):
            j0 = 64 * q
            for t in range(k):
                out[t, i, q] = 0
            for g in range(8):
                jb = j0 + 8 * g
                if jb >= c:
                    break
                lo = np.uint64(0)
                hi = np.uint64(0)
                for e in range(min(8, c - jb)):
                    x = A[i, jb + e]
                    lo |= (x & _BYTE) << np.uint64(8 * e)
                    hi |= ((x >> np.uint64(8)) & _BYTE) << np.uint64(8 * e)
                sh = np.uint64(8 * g)
                for t in range(min(k, 8)):
                    bits = (((lo >> np.uint64(t)) & _LANES) * _GATHER) >> np.uint64(56)
                    out[t, i, q] |= bits << sh
                for t in range(8, k):
                    bits = (((hi >> np.uint64(t - 8)) & _LANES) * _GATHER) >> np.uint64(56)
                    out[t, i, q] |= bits << sh


@njit(cache=True)
def _spread_table():
    """spread[b]: the 8 bits of b moved to the low bit of 8 bytes."""
    T = np.zeros(256, dtype=np.uint64)
    for b in range(256):
        v = np.uint64(0)
        for e in range(8):
            if (b >> e) & 1:
                v |= np.uint64(1) << np.uint64(8 * e)
        T[b] = v
    return T


@njit(cache=True)
def unslice(P, ncols, out):
    """Inverse of :func:`bitslice`: ``out[i, j] = sum_t bit j of P[t, i] * 2^t``,
    eight entries at a time (each plane's byte spread to eight byte lanes by a table,
    shifted to its bit position)."""
    k, m, w = P.shape
    spread = _spread_table()
    for i in range(m):
        for q in range(w):
            j0 = 64 * q
            for g in range(8):
                jb = j0 + 8 * g
                if jb >= ncols:
                    break
                sh = np.uint64(8 * g)
                lo = np.uint64(0)
                hi = np.uint64(0)
                for t in range(min(k, 8)):
                    lo |= spread[np.intp((P[t, i, q] >> sh) & _BYTE)] << np.uint64(t)
                for t in range(8, k):
                    hi |= spread[np.intp((P[t, i, q] >> sh) & _BYTE)] << np.uint64(t - 8)
                for e in range(min(8, ncols - jb)):
                    es = np.uint64(8 * e)
                    out[i, jb + e] = ((lo >> es) & _BYTE) | (((hi >> es) & _BYTE) << np.uint64(8))
