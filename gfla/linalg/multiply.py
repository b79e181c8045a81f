"""Matrix products.

Over the modular families (GF(p), Z/n) the product runs on float64 BLAS with delayed
reduction: exact while k (p-1)^2 < 2^53 for inner dimension k; beyond that each operand
is split into limbs of b bits with k (2^b - 1)^2 < 2^53, the limb products are exact
float64 matrix products, and the limbs are recombined modulo n with exact integer
arithmetic. Over GF(2^k) the product uses log/exp tables.

References
----------
.. [1] J.-G. Dumas, P. Giorgi, C. Pernet, "Dense linear algebra over word-size prime
   fields: the FFLAS and FFPACK packages", ACM TOMS 35(3), 2008 (delayed reduction over
   floating-point BLAS).
"""

import numpy as np

from ..errors import InputError

__all__ = ["matmul", "dense_matmul", "modular_matmul"]

_EXACT = 1 << 53
_MAX_K_CHUNK = 1 << 20


def matmul(F, A, B):
    """Validated product A B (internal uint64 arrays)."""
    if A.shape[1] != B.shape[0]:
        raise InputError(f"cannot multiply a {A.shape[0]} x {A.shape[1]} matrix by a "
                         f"{B.shape[0]} x {B.shape[1]} matrix")
    return F._matmul(A, B)


def dense_matmul(F, A, B):
    """Product for the dense families, dispatching on the context's arithmetic."""
    from ..kernels import dense
    ctx = F._ctx
    if int(ctx[0]) == 1:
        C = np.empty((A.shape[0], B.shape[1]), dtype=np.uint64)
        dense.matmul_table(np.ascontiguousarray(A), np.ascontiguousarray(B), ctx, C)
        return C
    return modular_matmul(A, B, int(ctx[1]) or (1 << 64))


def _limb_bits(k):
    b = 26
    while b > 1 and k * ((1 << b) - 1) ** 2 >= _EXACT:
        b -= 1
    return b


def modular_matmul(A, B, n):
    """A B mod n (2 <= n <= 2^64) for uint64 arrays with entries < n."""
    from ..kernels import modular
    m, k = A.shape
    ncols = B.shape[1]
    if k > _MAX_K_CHUNK:
        C = np.zeros((m, ncols), dtype=np.uint64)
        for s in range(0, k, _MAX_K_CHUNK):
            part = modular_matmul(A[:, s:s + _MAX_K_CHUNK], B[s:s + _MAX_K_CHUNK], n)
            C = _addmod(C, part, n)
        return C
    if k == 0:
        return np.zeros((m, ncols), dtype=np.uint64)
    if k * (n - 1) ** 2 < _EXACT:
        prod = A.astype(np.float64) @ B.astype(np.float64)
        return np.fmod(prod, float(n)).astype(np.uint64)
    b = _limb_bits(k)
    nbits = (n - 1).bit_length()
    L = -(-nbits // b)
    mask = np.uint64((1 << b) - 1)
    Al = [((A >> np.uint64(b * s)) & mask).astype(np.float64) for s in range(L)]
    Bl = [((B >> np.uint64(b * s)) & mask).astype(np.float64) for s in range(L)]
    D = 2 * L - 1
    partials = np.zeros((D, m * ncols), dtype=np.uint64)
    for s in range(L):
        for t in range(L):
            partials[s + t] += (Al[s] @ Bl[t]).astype(np.uint64).ravel()
    shifts = np.array([pow(2, b * d, n) % (1 << 64) for d in range(D)], dtype=np.uint64)
    out = np.empty(m * ncols, dtype=np.uint64)
    modular.combine_limbs(partials, shifts, np.uint64(n % (1 << 64)), out)
    return out.reshape(m, ncols)


def _addmod(X, Y, n):
    if n == 1 << 64:
        return X + Y
    s = X + Y
    wrap = (s < X) | (s >= np.uint64(n))
    s[wrap] -= np.uint64(n)
    return s
