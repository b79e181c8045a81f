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

    def info(self):
        import galois
        g = int(galois.primitive_root(self.p))
        return {"field": self.spec, "order": self.p, "characteristic": self.p,
                "degree": 1, "modulus": None, "modulus_poly": None,
                "primitive": None, "generator": g, "is_field": True}

