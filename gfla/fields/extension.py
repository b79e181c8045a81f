"""GF(2^k), 2 <= k <= 16, with any irreducible modulus (log/exp tables)."""

import numpy as np

from ..errors import InputError
from .base import Field

__all__ = ["ExtensionField", "DEFAULT_MODULI", "poly_text"]

# Default modulus per degree: the primitive polynomial of degree k that is smallest as
# an integer (bit i = coefficient of x^i). Checked against galois.primitive_poly(2, k,
# method="min") in the tests.
DEFAULT_MODULI = {
    1: 0x3, 2: 0x7, 3: 0xB, 4: 0x13, 5: 0x25, 6: 0x43, 7: 0x83, 8: 0x11D,
    9: 0x211, 10: 0x409, 11: 0x805, 12: 0x1053, 13: 0x201B, 14: 0x402B, 15: 0x8003,
    16: 0x1002D,
}

# Moduli known to be irreducible without asking galois (whose import costs most of a
# second): the defaults and the FIPS 197 polynomial. Each is re-checked with galois in
# the tests.
KNOWN_IRREDUCIBLE = frozenset(DEFAULT_MODULI.values()) | {0x11B}

_CONTEXT_CACHE = {}


def poly_text(m):
    """x^8 + x^4 + x^3 + x + 1 style text of a GF(2) polynomial given as an int."""
    terms = []
    for i in range(m.bit_length() - 1, -1, -1):
        if (m >> i) & 1:
            terms.append("1" if i == 0 else ("x" if i == 1 else f"x^{i}"))
    return " + ".join(terms) if terms else "0"


def _gf2_poly(m):
    import galois
    # pure-Python arithmetic: galois' numba modes would compile for seconds per process
    return galois.Poly.Int(m, field=galois.GF(2, compile="python-calculate"))


def _poly_int(poly):
    v = 0
    for c in poly.coeffs:
        v = (v << 1) | int(c)
    return v


def check_modulus(k, modulus):
    """Refuse a modulus that is not an irreducible polynomial of degree k, naming a
    factor when it is reducible."""
    if modulus.bit_length() - 1 != k:
        raise InputError(f"modulus {modulus:#x} has degree {modulus.bit_length() - 1}, "
                         f"GF(2^{k}) needs degree {k}")
    if modulus in KNOWN_IRREDUCIBLE:
        return
    f = _gf2_poly(modulus)
    if not f.is_irreducible():
        factors, _ = f.factors()
        fac = _poly_int(factors[0])
        raise InputError(f"modulus {modulus:#x} ({poly_text(modulus)}) is reducible: "
                         f"it is divisible by {fac:#x} ({poly_text(fac)})")


class ExtensionField(Field):
    """The binary extension field GF(2^k) = GF(2)[x] / (modulus).

    Elements are integers 0 .. 2^k - 1 whose bit i is the coefficient of x^i.

    Parameters
    ----------
    k : int
        Degree, 2 <= k <= 16.
    modulus : int, optional
        Irreducible polynomial of degree k as an integer (``0x11b`` is
        x^8 + x^4 + x^3 + x + 1). Default: ``DEFAULT_MODULI[k]``.
    """

    def __init__(self, k, modulus=None):
        k = int(k)
        if not 2 <= k <= 16:
            raise InputError(f"GF(2^k) needs 1 <= k <= 16, got k = {k}")
        modulus = DEFAULT_MODULI[k] if modulus is None else int(modulus)
        check_modulus(k, modulus)
        self.k = k
        self.size = 1 << k
        self.characteristic = 2
        self.modulus = modulus
        self.spec = f"GF(2^{k})"
        self.dtype = np.dtype(np.int64)
        key = (k, modulus)
        if key not in _CONTEXT_CACHE:
            from ..kernels import extension as kx
            g = _find_generator(k, modulus)
            _CONTEXT_CACHE[key] = (g, kx.build_context(k, modulus, g))
        self.generator, self._ctx = _CONTEXT_CACHE[key]

    def _validate_entries(self, A, name, ndim):
        from .prime import fast_entries
        fast = fast_entries(A, ndim, self.size)
        if fast is not None:
            return fast
        return super()._validate_entries(A, name, ndim)

    def info(self):
        return {"field": self.spec, "order": self.size, "characteristic": 2,
                "degree": self.k, "modulus": self.modulus,
                "modulus_poly": poly_text(self.modulus),
                "primitive": self.generator == 2, "generator": self.generator,
                "is_field": True}


def _prime_factors_small(n):
    out, d = [], 2
    while d * d <= n:
        if n % d == 0:
            out.append(d)
            while n % d == 0:
                n //= d
        d += 1
    if n > 1:
        out.append(n)
    return out


def _find_generator(k, modulus):
    """Smallest element generating the multiplicative group (x when primitive)."""
    from ..kernels import extension as kx
    q1 = (1 << k) - 1
    primes = _prime_factors_small(q1)
    for g in range(2, 1 << k):
        if all(kx.element_power(g, q1 // r, modulus, k) != 1 for r in primes):
            return g
    raise AssertionError("no generator found")  # impossible for an irreducible modulus
