"""Integer factorisation with a time budget, and element orders in cyclic groups.

The exact multiplicative order of a matrix needs the prime factors of q^d - 1 for the
degrees d of its minimal polynomial's irreducible factors. q^d - 1 is first split into
cyclotomic values Phi_e(q), e | d; each part is factored by galois in a worker process
with a time limit. A part that cannot be factored in time is reported as unfactored, and
callers then give a proven divisor and multiple of the order instead of a guess.

References
----------
.. [1] R. Lidl, H. Niederreiter, "Finite Fields", Cambridge University Press, 2nd ed.
   1997, Theorem 3.3 (order of a polynomial) and Theorem 3.9 (order of a power).
"""

import multiprocessing

__all__ = ["factor_integer", "factor_q_power_minus_one", "cyclic_order"]

_FAST_LIMIT = 1 << 64
DEFAULT_TIMEOUT = 30.0


def _galois_factors(n):
    import galois
    ps, es = galois.factors(n)
    return [(int(p), int(e)) for p, e in zip(ps, es)]


def _worker(n, conn):
    try:
        conn.send(_galois_factors(n))
    except BaseException as exc:  # pragma: no cover - reported to the parent
        conn.send(exc)
    finally:
        conn.close()


def factor_integer(n, timeout=DEFAULT_TIMEOUT):
    """Factor n >= 1. Returns (factors, unfactored): factors is {prime: exponent};
    unfactored lists composite cofactors that could not be split within ``timeout``
    seconds."""
    import galois
    if n == 1:
        return {}, []
    if n < _FAST_LIMIT or galois.is_prime(n):
        return dict(_galois_factors(n)), []
    factors = {}
    # Small primes first: cheap and usually most of the work.
    for p in galois.primes(1 << 16):
        if n % p == 0:
            e = 0
            while n % p == 0:
                n //= p
                e += 1
            factors[int(p)] = e
    if n == 1:
        return factors, []
    if galois.is_prime(n):
        factors[n] = factors.get(n, 0) + 1
        return factors, []
    ctx = multiprocessing.get_context("fork")
    parent, child = ctx.Pipe(duplex=False)
    proc = ctx.Process(target=_worker, args=(n, child), daemon=True)
    proc.start()
    child.close()
    result = None
    if parent.poll(timeout):
        result = parent.recv()
    proc.kill()
    proc.join()
    if isinstance(result, list):
        for p, e in result:
            factors[p] = factors.get(p, 0) + e
        return factors, []
    return factors, [n]


def _cyclotomic_value(e, q):
    import galois
    num, den = 1, 1
    for f in galois.divisors(e):
        mu = galois.mobius(e // f)
        if mu == 1:
            num *= q ** f - 1
        elif mu == -1:
            den *= q ** f - 1
    return num // den


def factor_q_power_minus_one(q, d, timeout=DEFAULT_TIMEOUT):
    """Factor q^d - 1 through its cyclotomic parts. Returns (factors, unfactored)."""
    import galois
    factors, unfactored = {}, []
    for e in galois.divisors(d):
        part = _cyclotomic_value(e, q)
        fs, un = factor_integer(part, timeout)
        for p, k in fs.items():
            factors[p] = factors.get(p, 0) + k
        unfactored.extend(un)
    return factors, unfactored


def cyclic_order(N, factors, unfactored, is_one):
    """Order of an element g with g^N = 1, N = prod p^k * prod(unfactored).

    ``is_one(E)`` tells whether g^E = 1. Returns (divisor, multiple): equal when the order
    is exact; otherwise the order is a multiple of ``divisor`` and divides ``multiple``.
    """
    order = N
    for p in sorted(factors):
        for _ in range(factors[p]):
            if order % p == 0 and is_one(order // p):
                order //= p
            else:
                break
    unknown = 1
    for c in unfactored:
        if is_one(order // c):
            order //= c
        else:
            unknown *= c
    return order // unknown, order
