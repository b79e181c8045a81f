"""Matrix inversion.

Methods:

* ``gauss-jordan`` -- elimination (fields): Gauss-Jordan on [A | I] for small n, the
  block-recursive PLE decomposition of ``linalg.blocked`` above its cutoff;
* ``cayley-hamilton`` -- from the characteristic polynomial
  p(x) = x^n + c_1 x^(n-1) + ... + c_n, A^-1 = -(A^(n-1) + c_1 A^(n-2) + ... +
  c_(n-1) I) / c_n, valid in any characteristic and over any commutative ring once the
  charpoly is known and c_n is a unit;
* ``hensel`` -- over Z/p^e: invert modulo p, then Newton-Hensel lifting
  X <- X (2I - A X), which doubles the p-adic precision at each step;
* ``crt`` -- over Z/n: invert modulo each prime power of n and combine by the Chinese
  remainder theorem.

``verify=True`` runs Freivalds' randomised check of A X = I in O(n^2) per round. Its
random vectors come from ``seed`` (default ``FREIVALDS_SEED``), so a run repeats exactly
and a failed check can be reproduced; ``seed=None`` draws fresh entropy.

References
----------
.. [1] R. Freivalds, "Probabilistic machines can use less running time", IFIP Congress
   1977.
.. [2] R. T. Moenck, J. H. Carter, "Approximate algorithms to derive exact solutions to
   systems of linear equations", EUROSAM 1979 (p-adic / Newton-Hensel lifting).
"""

import math

import numpy as np

from ..errors import GflaError, InputError, SingularMatrixError
from .eliminate import singular_error

__all__ = ["inv", "freivalds", "FREIVALDS_SEED"]

# Seed of Freivalds' random vectors unless the caller gives one: the check guards
# gfla's own results against defects, and a fixed seed makes a failure reproducible.
FREIVALDS_SEED = 0x46726569

FIELD_METHODS = ("gauss-jordan", "cayley-hamilton")
RING_METHODS = ("crt", "hensel", "cayley-hamilton")


def inv(F, U, method="auto", verify=False, seed=FREIVALDS_SEED):
    n = U.shape[0]
    if F.is_field:
        allowed = ("auto",) + FIELD_METHODS
    else:
        allowed = ("auto",) + RING_METHODS
    if method not in allowed:
        raise InputError(f"unknown inverse method {method!r} for {F.spec}; choose one of "
                         + ", ".join(allowed))
    if method == "auto":
        method = "gauss-jordan" if F.is_field else "crt"
    if method == "gauss-jordan":
        X = _gauss_jordan(F, U)
    elif method == "cayley-hamilton":
        X = _cayley_hamilton(F, U)
    elif method == "hensel":
        fac = F.factorization()
        if len(fac) != 1:
            raise InputError(f"method 'hensel' needs n = p^e; {F.spec} has "
                             f"{len(fac)} distinct prime factors (use 'crt')")
        X = _ring_inverse(F, U)
    else:
        X = _ring_inverse(F, U)
    if verify and not freivalds(F, U, X, seed=seed):
        raise GflaError("internal error: Freivalds' check of A X = I failed")
    return X


def _gauss_jordan(F, U):
    """Elimination: the family's ``_inverse`` (Gauss-Jordan on [A | I] for small n,
    the block-recursive PLE of ``linalg.blocked`` above its cutoff)."""
    X = F._inverse(U)
    if X is None:
        raise singular_error(F, U)
    return X


def _cayley_hamilton(F, U):
    from .charpoly import charpoly
    n = U.shape[0]
    c = charpoly(F, U)
    cn = c[-1]
    try:
        inv_cn = F._inv_scalar(cn)
    except GflaError:
        if F.is_field:
            raise singular_error(F, U) from None
        return _ring_inverse(F, U)  # raises the ring's certificate
    X = F._identity(n)
    for ci in c[1:n]:
        X = F._matmul(X, U)
        if ci:
            X[np.diag_indices(n)] = F._add(np.diagonal(X).copy(),
                                           np.full(n, ci, dtype=np.uint64))
    return F._neg(F._scale(X, inv_cn))


def prime_view(p):
    """A field object for arithmetic modulo the prime p (p may exceed 2^63 when it is a
    prime modulus of Z/n)."""
    from ..fields.prime import PrimeField, MAX_PRIME
    if p <= MAX_PRIME:
        from ..io.spec import field
        return field(f"GF({p})")
    return PrimeField.unchecked(p)


def _mod(U, q):
    return U if q >= (1 << 64) else U % np.uint64(q)


def _ring_inverse(F, U):
    """CRT over the prime powers of n, Newton-Hensel lifting within each."""
    from ..fields.ring import ResidueRing
    n = F.n
    parts = []
    for p, e in F.factorization():
        q = p ** e
        Fp = prime_view(p)
        Up = _mod(U, p)
        try:
            X = _gauss_jordan(Fp, Up)
        except SingularMatrixError as exc:
            v = np.array(exc.kernel_vector, dtype=np.uint64)
            v_n = F._scale(v, (n // p) % (1 << 64)) if n != p else v
            raise SingularMatrixError(
                f"matrix is not invertible over {F.spec}: its determinant is divisible "
                f"by the prime {p}; A v = 0 for v = {[int(x) for x in v_n]}",
                kernel_vector=v_n, prime=p) from None
        if e > 1:
            Fq = F if q == n else ResidueRing(q)
            X = _hensel_lift(Fq, _mod(U, q), X, e)
        parts.append((q, X))
    if len(parts) == 1:
        return parts[0][1]
    out = np.zeros(U.shape, dtype=np.uint64)
    for q, X in parts:
        Mq = n // q
        c = Mq * pow(Mq, -1, q) % n
        out = F._add(out, F._scale(X, c))
    return out


def _hensel_lift(Fq, Uq, X, e):
    """Newton-Hensel: X correct modulo p is lifted to modulo p^e = Fq.n."""
    n = Uq.shape[0]
    diag = np.diag_indices(n)
    prec = 1
    while prec < e:
        prec = min(2 * prec, e)
        R = Fq._neg(Fq._matmul(Uq, X))
        R[diag] = Fq._add(R[diag].copy(), np.full(n, 2 % Fq.n, dtype=np.uint64))
        X = Fq._matmul(X, R)
    return X


def freivalds(F, U, X, rounds=None, seed=FREIVALDS_SEED):
    """Freivalds' check that U X = I: each round multiplies by a random vector.

    Parameters
    ----------
    rounds : int, optional
        Default: ceil(64 / log2 |F|), at least 2 (over a field a wrong X passes one
        round with probability at most 1 / |F|).
    seed : int, numpy Generator or None
        Source of the random vectors (default ``FREIVALDS_SEED``: the same vectors on
        every run; None: fresh entropy).

    References
    ----------
    .. [1] R. Freivalds, "Probabilistic machines can use less running time", IFIP
       Congress 1977.
    """
    n = U.shape[0]
    from .random import rng_from
    rng = rng_from(seed)
    if rounds is None:
        rounds = max(2, math.ceil(64 / max(1.0, math.log2(F.size))))
    for _ in range(rounds):
        r = _random_elements(rng, F.size, (n, 1))
        lhs = F._matmul(U, F._matmul(X, r))
        if not np.array_equal(lhs, r):
            return False
    return True


def _random_elements(rng, order, shape):
    if order == 1 << 64:
        return rng.integers(0, 1 << 64, size=shape, dtype=np.uint64)
    return rng.integers(0, order, size=shape, dtype=np.uint64)
