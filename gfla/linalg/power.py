"""Matrix powers and multiplicative orders.

``power`` is binary (square-and-multiply) exponentiation: about 2 log2(e) products, so
exponents of 2^256 and beyond cost a few hundred products.

``order`` is exact: over a field, from the factorised minimal polynomial
prod f_i^(e_i): ord(A) = lcm_i ord(f_i) * p^t with t the least integer such that
p^t >= max e_i (Lidl and Niederreiter, Theorem 3.8 and Theorem 3.9), where ord(f) is the
order of x modulo f, found from the factorisation of q^deg(f) - 1. The result is checked
(A^ord = I) before it is returned. Over Z/n: the lcm over the prime powers p^e of n of
ord(A mod p) * p^j, j the least with (A^ord(A mod p))^(p^j) = I modulo p^e.

References
----------
.. [1] R. Lidl, H. Niederreiter, "Finite Fields", Cambridge University Press, 2nd ed.
   1997, Section 3.1.
"""

import math

import numpy as np

from ..errors import InputError, OrderUnavailableError
from .eliminate import singular_error

__all__ = ["power", "order"]


def _check_exponent(e):
    if isinstance(e, bool) or not isinstance(e, (int, np.integer)):
        raise InputError(f"exponent {e!r} is not an integer")
    return int(e)


def power(F, U, e):
    e = _check_exponent(e)
    n = U.shape[0]
    if e < 0:
        from .inverse import inv
        U = inv(F, U)
        e = -e
    result = F._identity(n)
    base = U
    first = True
    while e:
        if e & 1:
            result = base.copy() if first else F._matmul(result, base)
            first = False
        e >>= 1
        if e:
            base = F._matmul(base, base)
    return result


def _is_identity(U):
    n = U.shape[0]
    return bool(np.array_equal(U, np.eye(n, dtype=np.uint64)))


def order(F, U):
    if F.is_field:
        return _field_order(F, U)
    return _ring_order(F, U)


def _field_order(F, U):
    from . import numtheory, polynomials
    from .charpoly import minpoly_factors
    from .eliminate import det
    if det(F, U) == 0:
        raise singular_error(F, U, "matrix is singular, it has no multiplicative order")
    q = F.size
    p = F.characteristic
    lo_total, hi_total, emax = 1, 1, 1
    unfactored_all = []
    for f, e in minpoly_factors(F, U):
        emax = max(emax, e)
        d = len(f) - 1
        N = q ** d - 1
        factors, unfactored = numtheory.factor_q_power_minus_one(q, d)
        lo, hi = numtheory.cyclic_order(
            N, factors, unfactored, lambda E, f=f: polynomials.x_power_is_one(F, f, E))
        lo_total = math.lcm(lo_total, lo)
        hi_total = math.lcm(hi_total, hi)
        unfactored_all.extend(unfactored if lo != hi else [])
    t = 0
    while p ** t < emax:
        t += 1
    lo_total *= p ** t
    hi_total *= p ** t
    if lo_total != hi_total:
        raise OrderUnavailableError(
            f"the exact order needs the factorisation of {len(unfactored_all)} large "
            f"number(s) that could not be factored in time; the order is a multiple of "
            f"{lo_total} and divides {hi_total}", divisor=lo_total, multiple=hi_total,
            unfactored=unfactored_all)
    if not _is_identity(power(F, U, lo_total)):  # pragma: no cover - self-check
        raise AssertionError("order self-check failed")
    return lo_total


def _ring_order(F, U):
    from ..fields.ring import ResidueRing
    from .inverse import _mod, prime_view
    total = 1
    n = F.n
    for p, e in F.factorization():
        Fp = prime_view(p)
        Up = _mod(U, p)
        try:
            op = _field_order(Fp, Up)
        except Exception as exc:
            from ..errors import SingularMatrixError
            if isinstance(exc, SingularMatrixError):
                v = np.array(exc.kernel_vector, dtype=np.uint64)
                v_n = F._scale(v, (n // p) % (1 << 64)) if n != p else v
                raise SingularMatrixError(
                    f"matrix is not invertible over {F.spec}: its determinant is "
                    f"divisible by the prime {p}; A v = 0 for v = {[int(x) for x in v_n]}",
                    kernel_vector=v_n, prime=p) from None
            raise
        q = p ** e
        Fq = F if q == n else ResidueRing(q)
        B = power(Fq, _mod(U, q), op)
        j = 0
        while not _is_identity(B):
            B = power(Fq, B, p)
            j += 1
        total = math.lcm(total, op * p ** j)
    return total
