"""GF(p) for any prime p < 2^63."""

import numpy as np

from ..errors import InputError
from .base import Field

__all__ = ["PrimeField", "is_prime"]

MAX_PRIME = (1 << 63) - 1


def is_prime(n):
    """Deterministic primality for n < 2^64 (Miller-Rabin with the first 12 prime bases,
    which is exact below 3.3 x 10^24; Jaeschke 1993, Sorenson and Webster 2015)."""
    if n < 2:
        return False
    small = (2, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37)
    for q in small:
        if n % q == 0:
            return n == q
    d, s = n - 1, 0
    while d % 2 == 0:
        d //= 2
        s += 1
    for a in small:
        x = pow(a, d, n)
        if x in (1, n - 1):
            continue
        for _ in range(s - 1):
            x = x * x % n
            if x == n - 1:
                break
        else:
            return False
    return True


def fast_entries(A, ndim, size):
    """Validated uint64 copy of a C-contiguous, writable int64 or uint64 array whose
    entries all lie in [0, size), in one compiled pass; None when the fast path does
    not apply or an entry is out of range (the general validation then runs and
    words the error)."""
    if (not isinstance(A, np.ndarray) or A.dtype not in (np.int64, np.uint64)
            or not A.flags.c_contiguous or not A.flags.writeable or A.size == 0
            or (ndim is not None and A.ndim != ndim) or size >= 1 << 64):
        return None
    from ..kernels import modular
    out = np.empty(A.shape, dtype=np.uint64)
    kernel = modular.range_copy_int64 if A.dtype == np.int64 else modular.range_copy_uint64
    if kernel(A.reshape(-1), np.uint64(size), out.reshape(-1)) >= 0:
        return None
    return out


def _float_operand(A, bound):
    """float64 copy of a C-contiguous writable 2-D int64/uint64 array with entries in
    [0, bound), validated in the same pass; None when that does not apply."""
    if (not isinstance(A, np.ndarray) or A.dtype not in (np.int64, np.uint64)
            or A.ndim != 2 or A.size == 0 or not A.flags.c_contiguous
            or not A.flags.writeable):
        return None
    from ..kernels import modular
    out = np.empty(A.shape)
    kernel = (modular.range_to_float_int64 if A.dtype == np.int64
              else modular.range_to_float_uint64)
    if kernel(A.reshape(-1), bound, out.reshape(-1)) >= 0:
        return None
    return out


def _smallest_factor(n):
    import galois
    return int(galois.factors(n)[0][0])


class PrimeField(Field):
    """The prime field GF(p), elements 0 .. p-1.

    Parameters
    ----------
    p : int
        A prime, 2 <= p < 2^63 (checked).
    """

    # Measured (see fields/base.py): p < 2^32 on GF(7), larger p on GF(2^31-1) (the
    # products of larger p split into more limbs: GF(2^61-1) needs 7 arrays per
    # product entry, inverse 6, power 15).
    _WORKSPACE = dict(Field._WORKSPACE, inv=3, nullspace=2, solve=2, charpoly=8, power=7,
                      order=3, poly_eval_matrix=3)
    _WORKSPACE_LARGE = dict(_WORKSPACE, matmul_in=3, matmul_out=4, inv=5, power=13,
                            order=5, poly_eval_matrix=5)

    def _workspace(self, op):
        if self.size >= 1 << 32:
            figure = self._WORKSPACE_LARGE[op]
            return figure if isinstance(figure, tuple) else (figure, 8)
        return super()._workspace(op)

    def __init__(self, p):
        p = int(p)
        if p < 2 or p > MAX_PRIME:
            raise InputError(f"GF(p) needs a prime 2 <= p < 2^63, got {p}")
        if not is_prime(p):
            raise InputError(f"GF({p}): {p} is not prime (it is divisible by "
                             f"{_smallest_factor(p)})")
        self.p = p
        self.size = p
        self.characteristic = p
        self.spec = f"GF({p})"
        self.modulus = None
        self.dtype = np.dtype(np.int64)
        self._ctx = np.array([0, p, 0, 0], dtype=np.uint64)

    @classmethod
    def unchecked(cls, p):
        """Arithmetic modulo a prime p < 2^64 without the GF(p) range check (used
        internally for prime moduli of Z/n above 2^63)."""
        F = cls.__new__(cls)
        F.p = F.size = F.characteristic = p
        F.spec = f"GF({p})"
        F.modulus = None
        F.dtype = np.dtype(np.uint64)
        F._ctx = np.array([0, p % (1 << 64), 0, 0], dtype=np.uint64)
        return F

    def matmul(self, A, B):
        """Matrix product A B.

        When both operands are C-contiguous int64 (or uint64) matrices and the float64
        product is exact without chunking (k (p-1)^2 < 2^53), they are validated and
        converted to float64 in one pass each and the reduced product is written
        straight into the int64 result: the same arithmetic as the general path
        (``linalg.multiply``) without its uint64 intermediates. Anything else, errors
        included, goes the general way.
        """
        from ..linalg import multiply
        if (isinstance(A, np.ndarray) and isinstance(B, np.ndarray) and A.ndim == 2
                and B.ndim == 2 and A.shape[1] == B.shape[0]):
            self._check_product(A.shape, B.shape)
            L, _, kc = multiply.limb_plan((self.p - 1).bit_length(), A.shape[1])
            if L == 1 and kc >= A.shape[1]:
                Af = _float_operand(A, self.p)
                Bf = _float_operand(B, self.p) if Af is not None else None
                if Bf is not None:
                    from ..kernels import modular
                    C = multiply.int_product(Af, Bf, self.p - 1, self.p - 1)
                    del Af, Bf
                    out = np.empty(C.shape, dtype=np.int64)
                    modular.reduce_float_to_int64(C, float(self.p), out)
                    return out
        return super().matmul(A, B)

    def _validate_entries(self, A, name, ndim):
        fast = fast_entries(A, ndim, self.size)
        if fast is not None:
            return fast
        return super()._validate_entries(A, name, ndim)

    def info(self):
        import galois
        g = int(galois.primitive_root(self.p))
        return {"field": self.spec, "order": self.p, "characteristic": self.p,
                "degree": 1, "modulus": None, "modulus_poly": None,
                "primitive": None, "generator": g, "is_field": True}

