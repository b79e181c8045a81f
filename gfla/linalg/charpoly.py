"""Characteristic and minimal polynomials.

Characteristic polynomial methods (selectable, cross-checked in the tests):

* ``hessenberg`` -- similarity reduction to upper Hessenberg form, then the
  three-term recurrence for the leading principal blocks; O(n^3), fields only.
* ``berkowitz`` -- Berkowitz's division-free algorithm; O(n^4), valid over any
  commutative ring (the method for Z/n).
* ``krylov`` -- fields, for large n (the ``auto`` choice from ``krylov_min``): the
  Krylov sequence v, A v, A^2 v, ... of a random vector until its first dependency
  A^d v = c_0 v + ... + c_(d-1) A^(d-1) v, whose polynomial x^d - c_(d-1) x^(d-1) -
  ... - c_0 divides the characteristic polynomial; when d < n the matrix is similar
  to [[C, *], [0, A']] on a basis extending the Krylov vectors, and the rest is the
  characteristic polynomial of A' (a Schur complement, by the fast product),
  recursively. Cost: n matrix-vector products plus one block-recursive elimination
  for a generic matrix; correct for every matrix (derogatory ones just take more
  rounds);
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
.. [4] W. Keller-Gehrig, "Fast algorithms for the characteristic polynomial",
   Theoretical Computer Science 36, 1985 (the Krylov basis and its similarity
   transform).
.. [5] C. Pernet, A. Storjohann, "Faster algorithms for the characteristic polynomial",
   ISSAC 2007 (LU-Krylov: Krylov iteration with the elimination of the quotient).
"""

import math

import numpy as np

from ..errors import InputError, MethodNotApplicableError

__all__ = ["charpoly", "minpoly", "poly_at_matrix", "minpoly_factors", "METHODS"]

METHODS = ("auto", "hessenberg", "berkowitz", "csanky", "krylov")

# From this order on, ``auto`` runs the Krylov method over GF(2) and the primes whose
# matrix-vector product has the uint32 kernel (``_matvec``), from KRYLOV_MIN_TABLES on
# over GF(2^k); over larger primes the Hessenberg kernel stays (its O(n^3) scalar
# operations beat n matrix-vector products with a full modular reduction per term).
# Measured (seconds, Hessenberg / Krylov): GF(65521) n = 96 0.0017 / 0.0011, 192
# 0.016 / 0.0058; GF(2) 128 0.0032 / 0.0034, 512 0.24 / 0.023; GF(3) 512 0.31 / 0.043;
# GF(2^8) 192 0.017 / 0.018; GF(2^16) 256 0.083 / 0.059, 512 0.74 / 0.46; GF(2^61-1)
# 512 1.98 / 2.27; GF(2^31-1) 192 0.021 / 0.049.
KRYLOV_MIN = 128
KRYLOV_MIN_TABLES = 256


def charpoly(F, U, method="auto"):
    if method not in METHODS:
        raise InputError(f"unknown charpoly method {method!r}; choose one of "
                         + ", ".join(METHODS))
    if method == "auto":
        if not F.is_field:
            method = "berkowitz"
        else:
            start = krylov_min(F, U.shape[0])
            method = "krylov" if start is not None and U.shape[0] >= start else "hessenberg"
    if method == "krylov":
        if not F.is_field:
            raise MethodNotApplicableError(
                f"the Krylov method divides, which {F.spec} does not allow; use "
                "berkowitz")
        return _krylov(F, U)
    if method == "hessenberg":
        if not F.is_field:
            raise MethodNotApplicableError(
                f"the Hessenberg method divides, which {F.spec} does not allow; use "
                "berkowitz")
        return F._hessenberg(U)
    if method == "berkowitz":
        return F._berkowitz(U)
    return _csanky(F, U)


def _fast_matvec(F, n):
    return F.spec == "GF(2)" or (int(F._ctx[0]) == 0 and F.size < (1 << 32)
                                 and n * (F.size - 1) ** 2 < (1 << 64))


def krylov_min(F, n=1024):
    """The order from which ``auto`` picks the Krylov method over field F (None:
    never), for matrices of order about n."""
    if _fast_matvec(F, n):
        return KRYLOV_MIN
    if int(F._ctx[0]) == 1:
        return KRYLOV_MIN_TABLES
    return None


def _matvec(F, U):
    """A function x -> U x (uint64 vectors) for the field's fastest kernel."""
    n = U.shape[1]
    if F.spec == "GF(2)":
        from ..kernels import binary
        P = binary.pack(np.ascontiguousarray(U, dtype=np.uint8))
        y = np.empty((U.shape[0] + 63) // 64, dtype=np.uint64)

        def mv(x):
            binary.matvec(P, binary.pack(x.reshape(1, -1).astype(np.uint8))[0], y)
            return binary.unpack(y.reshape(1, -1), U.shape[0])[0].astype(np.uint64)
        return mv
    if _fast_matvec(F, n):
        from ..kernels import modular
        A32 = np.ascontiguousarray(U, dtype=np.uint32)
        p = np.uint64(F.size)

        def mv(x):
            out = np.empty(U.shape[0], dtype=np.uint64)
            modular.matvec_uint32(A32, x, p, out)
            return out
        return mv
    from ..kernels import dense
    A = np.ascontiguousarray(U, dtype=np.uint64)

    def mv(x):
        out = np.empty(U.shape[0], dtype=np.uint64)
        dense.matvec(A, x, F._ctx, out)
        return out
    return mv


def _krylov_round(F, A, rng):
    """One round on the square A: (polynomial of the first Krylov dependency, highest
    degree first, and the quotient matrix A' or None when the Krylov space is the
    whole space)."""
    from .eliminate import solve
    n = A.shape[0]
    mv = _matvec(F, A)
    KT = np.empty((n + 1, n), dtype=np.uint64)
    x = rng.integers(0, min(F.size, 1 << 63), size=n, dtype=np.uint64)
    if not x.any():
        x[0] = 1
    KT[0] = x
    d = None
    check = 32
    for t in range(1, n + 1):
        KT[t] = mv(KT[t - 1])
        if t + 1 == check and t + 1 <= n:
            r = F._rank(KT[:t + 1])
            if r < t + 1:
                d = r
                break
            check *= 4
    if d is None:
        ok, c, N = solve(F, np.ascontiguousarray(KT[:n].T), KT[n])
        d = n - N.shape[0]
        if d < n:
            c = None
    else:
        c = None
    if c is None:
        ok, c, N = solve(F, np.ascontiguousarray(KT[:d].T), KT[d])
        if not ok or N.shape[0]:  # pragma: no cover - the Krylov property forbids it
            raise AssertionError("Krylov dependency not found")
    poly = [1] + [int(v) for v in F._neg(np.ascontiguousarray(c[::-1]))]
    if d == n:
        return poly, None
    # Q = [K | E] with E the unit vectors off the row rank profile J of K: then
    # Q^-1 A Q = [[C, *], [0, A']] with A' = A[C, C] - K[C] K[J]^-1 A[J, C].
    R = KT[:d].copy()
    piv, _ = F._rref(R)
    J = np.asarray(piv, dtype=np.int64)
    Cc = np.setdiff1d(np.arange(n, dtype=np.int64), J)
    K1 = np.ascontiguousarray(KT[:d][:, J].T)
    K2 = np.ascontiguousarray(KT[:d][:, Cc].T)
    K1inv = F._inverse(K1)
    Z = F._matmul(K1inv, np.ascontiguousarray(A[J][:, Cc]))
    Aq = F._sub(np.ascontiguousarray(A[Cc][:, Cc]), F._matmul(K2, Z))
    return poly, Aq


def _krylov(F, U, seed=0):
    rng = np.random.default_rng(seed)
    factors = []
    A = np.ascontiguousarray(U, dtype=np.uint64)
    while A is not None and A.shape[0]:
        if A.shape[0] < 16:
            factors.append(F._hessenberg(A))
            break
        poly, A = _krylov_round(F, A, rng)
        factors.append(poly)
    return _poly_product(F, factors)


def _poly_product(F, factors):
    if len(factors) == 1:
        return factors[0]
    if F.size == F.characteristic:
        p = F.size
        out = [1]
        for f in factors:
            prod = [0] * (len(out) + len(f) - 1)
            for i, a in enumerate(out):
                if a:
                    for j, b in enumerate(f):
                        prod[i + j] += a * b
            out = [v % p for v in prod]
        return out
    from . import polynomials
    out = [1]
    for f in factors:
        out = polynomials.poly_mul(F, out, f)
    return out


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
