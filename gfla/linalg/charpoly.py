"""Characteristic and minimal polynomials.

Characteristic polynomial methods (selectable, cross-checked in the tests):

* ``hessenberg`` -- similarity reduction to upper Hessenberg form, then the
  three-term recurrence for the leading principal blocks; O(n^3), fields only.
* ``berkowitz`` -- Berkowitz's division-free algorithm; O(n^4), valid over any
  commutative ring (the method for Z/n).
* ``csanky`` -- power sums s_k = tr(A^k) and Newton's identities
  s_k + c_1 s_(k-1) + ... + c_(k-1) s_1 + k c_k = 0; divides by 1..n, so it is valid
  only when every k <= n is invertible (characteristic 0 or greater than n). Otherwise
  it is refused, never answered wrongly.

The minimal polynomial over a field comes from the factorised characteristic
polynomial: for an irreducible factor f of multiplicity m, its exponent in the minimal
polynomial is the least e with nullity(f(A)^e) = m deg f. Over Z/n it is a monic
annihilating polynomial of least degree, found by solving for the coefficients.

References
----------
.. [1] H. Cohen, "A Course in Computational Algebraic Number Theory", Springer GTM 138,
   1993, Algorithm 2.2.9 (Hessenberg).
.. [2] S. J. Berkowitz, "On computing the determinant in small parallel time using a
   small number of processors", Information Processing Letters 18, 1984.
.. [3] L. Csanky, "Fast parallel matrix inversion algorithms", SIAM J. Computing 5(4),
   1976.
"""

import math

import numpy as np

from ..errors import InputError, MethodNotApplicableError

__all__ = ["charpoly", "minpoly", "poly_at_matrix", "minpoly_factors", "METHODS"]

METHODS = ("auto", "hessenberg", "berkowitz", "csanky")


def charpoly(F, U, method="auto"):
    if method not in METHODS:
        raise InputError(f"unknown charpoly method {method!r}; choose one of "
                         + ", ".join(METHODS))
    if method == "auto":
        method = "hessenberg" if F.is_field else "berkowitz"
    if method == "hessenberg":
        if not F.is_field:
            raise MethodNotApplicableError(
                f"the Hessenberg method divides, which {F.spec} does not allow; use "
                "berkowitz")
        return F._hessenberg(U)
    if method == "berkowitz":
        return F._berkowitz(U)
    return _csanky(F, U)


def _smallest_nonunit_integer(F):
    """The least positive integer that is not invertible in F (its characteristic for a
    field, the least prime factor of n for Z/n)."""
    if F.is_field:
        return F.characteristic
    return min(p for p, _ in F.factorization())


def _csanky(F, U):
    n = U.shape[0]
    bad = _smallest_nonunit_integer(F)
    if bad <= n:
        raise MethodNotApplicableError(
            f"the power-sum (Csanky) method divides by 1..{n}, but {bad} is not "
            f"invertible in {F.spec} (characteristic {F.characteristic}); it needs "
            f"every integer up to n = {n} to be a unit; use hessenberg or berkowitz")
    order = F.size
    s = [0] * (n + 1)
    P = U
    for k in range(1, n + 1):
        if k > 1:
            P = F._matmul(P, U)
        s[k] = F._trace(P)
    c = [1] + [0] * n
    for k in range(1, n + 1):
        acc = s[k]
        for i in range(1, k):
            acc = F._add_scalar(acc, F._mul_scalar(c[i], s[k - i]))
        kinv = F._inv_scalar(k % order)
        c[k] = int(F._neg(np.array([F._mul_scalar(acc, kinv)], dtype=np.uint64))[0])
    return c


def poly_at_matrix(F, poly, U):
    """p(U) by Horner's rule (poly highest degree first)."""
    n = U.shape[0]
    diag = np.diag_indices(n)
    X = np.zeros((n, n), dtype=np.uint64)
    X[diag] = poly[0] if poly else 0
    for c in poly[1:]:
        X = F._matmul(X, U)
        if c:
            X[diag] = F._add(X[diag].copy(), np.full(n, c, dtype=np.uint64))
    return X


def minpoly_factors(F, U, char=None):
    """[(irreducible f, exponent in the minimal polynomial)] over a field."""
    from . import polynomials
    from .eliminate import rank
    n = U.shape[0]
    out = []
    if char is None:
        char = charpoly(F, U)
    for f, m in polynomials.factor(F, char):
        e = 1
        if m > 1:
            target = m * (len(f) - 1)
            B = poly_at_matrix(F, f, U)
            P = B
            while n - rank(F, P) < target:
                P = F._matmul(P, B)
                e += 1
        out.append((f, e))
    return out


def minpoly(F, U):
    if not F.is_field:
        return _ring_minpoly(F, U)
    from . import polynomials
    c = charpoly(F, U)
    if polynomials.is_squarefree(F, c):
        # every irreducible factor has multiplicity 1, so the minimal polynomial, which
        # has every irreducible factor of the charpoly, is the charpoly itself
        return c
    result = [1]
    for f, e in minpoly_factors(F, U, c):
        result = polynomials.poly_mul(F, result, polynomials.poly_pow(F, f, e))
    return result


def _ring_minpoly(F, U):
    """Least-degree monic annihilating polynomial over Z/n, by binary search on the
    degree (an annihilator of degree d gives one of degree d + 1) and a Howell-form
    solve for the coefficients at each degree."""
    from .eliminate import solve
    n = U.shape[0]
    powers = [F._identity(n)]
    for _ in range(n):
        powers.append(F._matmul(powers[-1], U))

    def attempt(d):
        if d == 0:
            return None
        M = np.stack([powers[i].ravel() for i in range(d)], axis=1)
        ok, x, _ = solve(F, np.ascontiguousarray(M), F._neg(powers[d].ravel()))
        return x if ok else None

    lo, hi = 1, n
    best = None
    while lo <= hi:
        mid = (lo + hi) // 2
        x = attempt(mid)
        if x is not None:
            best = (mid, x)
            hi = mid - 1
        else:
            lo = mid + 1
    if best is None:  # pragma: no cover - Cayley-Hamilton guarantees degree n works
        return charpoly(F, U)
    d, x = best
    return [1] + [int(x[i]) for i in range(d - 1, -1, -1)]
