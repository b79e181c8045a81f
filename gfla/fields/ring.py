"""Z/n, the integers modulo n, for 2 <= n <= 2^64 (n = 2^w included)."""

import numpy as np

from ..errors import InputError
from .base import Field

__all__ = ["ResidueRing"]

MAX_MODULUS = 1 << 64


class ResidueRing(Field):
    """The residue ring Z/n, elements 0 .. n-1.

    Ring arithmetic only: an element is invertible exactly when it is coprime to n, and
    nothing divides where no inverse exists. Over a composite n, ``rank`` is the McCoy
    rank, ``rref`` returns the Howell form, ``nullspace`` a generating set of the kernel
    module; ``det`` and ``charpoly`` are computed by Berkowitz's division-free method.

    Parameters
    ----------
    n : int
        The modulus, 2 <= n <= 2^64.
    """

    is_field = False
    # Measured (see fields/base.py) on Z/1000 and Z/2^64; operations not measured count
    # the validated copy only (Berkowitz keeps O(n) vectors beside it).
    _WORKSPACE = dict(Field._WORKSPACE, inv=10, det=1, rank=1, rref=1, nullspace=1,
                      solve=1, charpoly=1, minpoly=1, power=6, order=4,
                      poly_eval_matrix=4)
    _WORKSPACE_LARGE = dict(_WORKSPACE, matmul_in=3, matmul_out=4, power=13, order=13,
                            poly_eval_matrix=13)

    def _workspace(self, op):
        if self.size >= 1 << 32:
            figure = self._WORKSPACE_LARGE[op]
            return figure if isinstance(figure, tuple) else (figure, 8)
        return super()._workspace(op)

    def __init__(self, n):
        n = int(n)
        if not 2 <= n <= MAX_MODULUS:
            raise InputError(f"Z/n needs 2 <= n <= 2^64, got {n}")
        self.n = n
        self.size = n
        self.characteristic = n
        self.modulus = None
        if n & (n - 1) == 0:
            self.spec = f"Z/2^{n.bit_length() - 1}"
        else:
            self.spec = f"Z/{n}"
        self.dtype = np.dtype(np.int64) if n <= (1 << 63) else np.dtype(np.uint64)
        self._ctx = np.array([0, n % MAX_MODULUS, 0, 0], dtype=np.uint64)
        self._factors = None

    def factorization(self):
        """The prime factorisation of n as a list of (p, e)."""
        if self._factors is None:
            if self.n & (self.n - 1) == 0:
                self._factors = [(2, self.n.bit_length() - 1)]
            else:
                import galois
                ps, es = galois.factors(self.n)
                self._factors = [(int(p), int(e)) for p, e in zip(ps, es)]
        return self._factors

    def _ring_rank(self, U):
        """McCoy rank: the largest t such that the t x t minors have zero annihilator;
        over Z/n it is the least rank of U modulo a prime factor of n."""
        from ..linalg.inverse import prime_view
        return min(prime_view(p)._rank(U % np.uint64(p)) for p, _ in self.factorization())

    def info(self):
        import galois
        g = None
        if galois.is_cyclic(self.n):
            g = int(galois.primitive_root(self.n))
        return {"field": self.spec, "order": self.n, "characteristic": self.n,
                "degree": None, "modulus": None, "modulus_poly": None,
                "primitive": None, "generator": g, "is_field": False,
                "factorization": [[p, e] for p, e in self.factorization()],
                "unit_group_cyclic": g is not None}
