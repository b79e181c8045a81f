"""GF(2^k) arithmetic, 1 <= k <= 16, by log/exp tables.

Elements are integers 0 .. 2^k - 1 whose bit i is the coefficient of x^i. The tables are
built from a generator g of the multiplicative group (found by the field object; it is x
when the modulus is primitive): ``exp[i] = g^i`` for 0 <= i < 2(q - 1) (doubled so a sum of
two logs needs no reduction) and ``log[a]`` for a != 0.

The tables live inside the context array used by the dense kernels (see ``dense``):
``ctx[EXP_OFFSET : EXP_OFFSET + 2(q-1)]`` and ``ctx[log_offset(q) : ... + q]``.
"""

import numpy as np
from numba import njit

__all__ = ["clmul_mod", "element_power", "build_context", "EXP_OFFSET", "log_offset",
           "ext_mul", "ext_inv"]

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
