"""Polynomials over a field object, as lists of ints (highest degree first), with the
polynomial algebra (factorisation, irreducibility, products, modular powers) delegated to
galois."""

import functools

__all__ = ["galois_field", "to_galois", "from_galois", "factor", "poly_mul",
           "poly_pow", "x_power_is_one", "is_squarefree"]


@functools.lru_cache(maxsize=None)
def _galois_field_cached(kind, order, modulus):
    import galois
    # galois' numba modes compile per process (about 10 s for a factorisation); the
    # pure-Python mode answers the small polynomial questions gfla asks in well under
    # a second. The modulus was already checked irreducible by the field.
    if kind == "extension":
        return galois.GF(order, irreducible_poly=modulus, compile="python-calculate",
                         verify=False)
    return galois.GF(order, compile="python-calculate", verify=False)


def galois_field(F):
    """The galois FieldArray class matching F (GF(p), GF(2), GF(2^k) with F's modulus)."""
    if not F.is_field:
        raise TypeError("polynomial factorisation needs a field")
    if F.modulus is not None:
        return _galois_field_cached("extension", F.size, F.modulus)
    return _galois_field_cached("prime", F.size, None)


def to_galois(F, coeffs):
    import galois
    return galois.Poly([int(c) for c in coeffs], field=galois_field(F))


def from_galois(poly):
    return [int(c) for c in poly.coeffs]


def factor(F, coeffs):
    """Monic irreducible factors with multiplicities: [(coeffs, multiplicity), ...]."""
    f = to_galois(F, coeffs)
    if f.degree == 0:
        return []
    facs, mults = f.factors()
    return [(from_galois(g), int(m)) for g, m in zip(facs, mults)]


def is_squarefree(F, coeffs):
    """Whether the polynomial has no repeated factor: gcd(f, f') = 1 (f' != 0)."""
    import galois
    f = to_galois(F, coeffs)
    d = f.derivative()
    if d == 0:
        return f.degree == 0
    return galois.gcd(f, d).degree == 0


def poly_mul(F, a, b):
    return from_galois(to_galois(F, a) * to_galois(F, b))


def poly_pow(F, a, e):
    return from_galois(to_galois(F, a) ** e)


def x_power_is_one(F, f, e):
    """Whether x^e = 1 modulo the polynomial f (coefficient list)."""
    import galois
    GF = galois_field(F)
    x = galois.Poly([1, 0], field=GF)
    fp = to_galois(F, f)
    r = pow(x, int(e), fp)
    return r.degree == 0 and int(r.coeffs[0]) == 1
