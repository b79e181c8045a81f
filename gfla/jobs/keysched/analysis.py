"""Analyses of a linearised key schedule: invertibility, the structure of the
characteristic and minimal polynomials, periods, and fixed spaces (weak keys).

Period of the linear part. The characteristic polynomial comes from Krylov chains
(:func:`gfla.kernels.keysched.krylov_charpoly`) and is factored over GF(2)
(:mod:`.gf2poly`). For an irreducible factor f of multiplicity m, its exponent e in the
minimal polynomial is the least e with nullity f(M)^e = m deg f (found by repeated
squaring of f(M), then a binary search). The multiplicative order of an invertible M is
lcm_f ord(f) * 2^t with 2^t >= max e (Lidl and Niederreiter, Theorems 3.8 and 3.9), ord(f)
the order of x modulo f, which divides 2^deg f - 1. When a factorisation of 2^d - 1 is
not found within the time budget, the result is a proven divisor and multiple.

Period of the whole schedule. With constants that repeat with period P (P = 1 when they
do not vary), the state after L = lcm(ord M, P) rounds is key + d_L for every key, so the
period is L if d_L = 0 and 2L otherwise (a nonzero translation has order 2). d_L is
s(M) d_P with s = (x^L - 1) / (x^P - 1), computed modulo (minimal polynomial) *
(x^P - 1) and applied by Horner's rule.

Fixed spaces. The keys that the r-round map sends to themselves solve
(M^r + I) k = d_r; when the system is consistent they form an affine space of dimension
dim ker(M^r + I) (2^dim weak keys), otherwise there is none.

References
----------
.. [1] R. Lidl, H. Niederreiter, "Finite Fields", Cambridge University Press, 2nd ed.
   1997, Theorems 3.3, 3.8 and 3.9 (orders of polynomials), Chapter 8.
.. [2] M. S. Paterson, L. J. Stockmeyer, "On the number of nonscalar multiplications
   necessary to evaluate polynomials", SIAM J. Computing 2(1), 1973.
"""

import math
import time

import numpy as np

from . import bits as B
from . import gf2poly as P

__all__ = ["analyze", "check_analysis_memory", "poly_at_matrix", "linear_structure",
           "DEFAULT_UP_TO", "DEFAULT_FACTOR_SECONDS"]

DEFAULT_UP_TO = 32
DEFAULT_FACTOR_SECONDS = 20.0
_PERIOD_SEARCH_LIMIT = 1 << 16


def poly_at_matrix(poly, M):
    """p(M) for an int polynomial, by the method of Paterson and Stockmeyer: about
    2 sqrt(deg p) matrix products instead of deg p."""
    n = M.shape[0]
    d = poly.bit_length() - 1
    I = np.eye(n, dtype=np.uint8)
    if d < 0:
        return np.zeros((n, n), dtype=np.uint8)
    if d == 0:
        return I
    k = max(1, int(math.isqrt(d)))
    powers = [I, M]
    for _ in range(2, k + 1):
        powers.append(B.matmul(powers[-1], M))
    Mk = powers[k]
    blocks = []
    for start in range(0, d + 1, k):
        S = np.zeros((n, n), dtype=np.uint8)
        for i in range(k):
            if start + i <= d and (poly >> (start + i)) & 1:
                S ^= powers[i]
        blocks.append(S)
    R = blocks[-1]
    for S in reversed(blocks[:-1]):
        R = B.matmul(R, Mk) ^ S
    return R


def _nullity(A):
    return A.shape[1] - B.rank(A)


def _exponent(f, m, M):
    """(exponent of f in the minimal polynomial, number of blocks) for f of
    multiplicity m in the characteristic polynomial."""
    d = f.bit_length() - 1
    target = m * d
    if m == 1:
        return 1, 1
    Bf = poly_at_matrix(f, M)
    first = _nullity(Bf)
    blocks = first // d
    if first == target:
        return 1, blocks
    squares = [Bf]                  # squares[i] = f(M)^(2^i)
    while True:
        S = B.matmul(squares[-1], squares[-1])
        squares.append(S)
        if _nullity(S) == target:
            break
    j = len(squares) - 1            # nullity < target at 2^(j-1), = target at 2^j
    e = 1 << (j - 1)
    Pm = squares[j - 1]
    for i in range(j - 2, -1, -1):
        Q = B.matmul(Pm, squares[i])
        if _nullity(Q) < target:
            Pm = Q
            e += 1 << i
    return e + 1, blocks


def linear_structure(M):
    """Factored characteristic polynomial and minimal-polynomial exponents of M.

    Returns a list of dicts (degree, polynomial, multiplicity, exponent, blocks), sorted
    by degree, and the characteristic polynomial as an int.
    """
    chains = B.charpoly_chains(M)
    merged = {}
    for c in chains:
        if c.bit_length() <= 1:  # pragma: no cover - chain polynomials are monic, deg >= 1
            continue
        for f, m in P.factor(c):
            merged[f] = merged.get(f, 0) + m
    charpoly = 1
    for c in chains:
        charpoly = P.mul(charpoly, c)
    out = []
    for f in sorted(merged, key=lambda g: (g.bit_length(), g)):
        m = merged[f]
        e, blocks = _exponent(f, m, M)
        out.append({"polynomial": f, "degree": f.bit_length() - 1, "multiplicity": m,
                    "exponent": e, "blocks": blocks})
    return out, charpoly, len(chains)


def _order(factors, budget):
    """(divisor, multiple, unfactored) for the order of an invertible matrix."""
    lo, hi = 1, 1
    unfactored = []
    emax = 1
    for item in factors:
        a, b, un = P.order_of_x(item["polynomial"], budget)
        item["order"] = a if a == b else None
        item["order_bounds"] = None if a == b else (a, b)
        lo, hi = P.lcm(lo, a), P.lcm(hi, b)
        unfactored.extend(un)
        emax = max(emax, item["exponent"])
    t = 0
    while (1 << t) < emax:
        t += 1
    return lo << t, hi << t, sorted(set(unfactored))


def _period_value(lo, hi, unfactored):
    if lo == hi:
        return {"exact": True, "value": lo}
    return {"exact": False, "divisor": lo, "multiple": hi, "unfactored": unfactored,
            "note": "the factorisation of 2^d - 1 needed for the exact value was not "
                    "found in time; the period is a multiple of 'divisor' and divides "
                    "'multiple'"}


def _constant_period(sched):
    """(P, reason): the least period of the round constants, or None with a reason."""
    kind = sched.constant_kind
    if kind in ("none", "fixed"):
        return 1, None
    if sched._round_constant is not None:
        return None, ("the round constants come from a callable that takes the round "
                      "number; their period is unknown")
    used = [g for g in sched.generators if sched._generator_used(g)]
    periods = []
    for g in used:
        if g.kind == "finite":
            return None, (f"the round constants {g.name!r} are a finite list "
                          f"({g.dim} rounds), not a repeating sequence")
        if g.period is None:
            return None, (f"the constant sequence {g.name!r} does not return to its start "
                          f"within {1 << 20} rounds")
        periods.append(g.period)
    Pv = 1
    for p in periods:
        Pv = P.lcm(Pv, p)
    if Pv > _PERIOD_SEARCH_LIMIT:
        return None, (f"the constant sequences have a joint period of {Pv} rounds, "
                      f"beyond the {_PERIOD_SEARCH_LIMIT} this analysis runs through")
    consts = sched.constants(0, 2 * Pv)
    best = Pv
    for p in sorted(_prime_factors(Pv)):
        while best % p == 0 and np.array_equal(consts[:Pv], consts[best // p:best // p + Pv]):
            best //= p
    return best, None


def _prime_factors(n):
    out = set()
    p = 2
    while p * p <= n:
        while n % p == 0:
            out.add(p)
            n //= p
        p += 1
    if n > 1:
        out.add(n)
    return out


def _schedule_period(sched, order_lo, order_hi, minpoly):
    """Period of the whole schedule (state sequence for every key)."""
    Pc, reason = _constant_period(sched)
    if Pc is None:
        return {"available": False, "reason": reason}
    out = {"available": True, "constant_period": Pc}
    if order_lo != order_hi:
        lo = P.lcm(order_lo, Pc)
        hi = 2 * P.lcm(order_hi, Pc)
        out.update(_period_value(lo, hi, []))
        out["note"] = ("the period of the linear part is known only within bounds; the "
                       "whole schedule's period is a multiple of 'divisor' and divides "
                       "'multiple'")
        return out
    L = P.lcm(order_lo, Pc)
    n = sched.n
    zero = np.zeros(n, dtype=np.uint8)
    D = sched.states(zero, Pc, Pc)[0] if Pc > 0 else zero
    h = (1 << Pc) | 1                       # x^P + 1
    g = P.mul(minpoly, h)
    r = P.Reducer(g).powmod_x(L)
    q, rem = P.divmod_poly(r ^ 1, h)
    if rem:  # pragma: no cover - x^P - 1 divides x^L - 1 and g
        raise AssertionError("period computation: inexact division")
    q = P.mod(q, minpoly)
    dL = B.unpack(B.poly_apply(sched.packed_M(), n, q, B.pack(D)), n)
    out.update(_period_value(L if not dL.any() else 2 * L, L if not dL.any() else 2 * L, []))
    out["translation_after_lcm"] = B.bits_to_int(dL)
    return out


def fixed_spaces(sched, up_to):
    """Per r = 1 .. up_to: dimension of ker(M^r + I) and of the r-round fixed keys."""
    n = sched.n
    zero = np.zeros(n, dtype=np.uint8)
    d = sched.states(zero, 0, up_to)
    I = np.eye(n, dtype=np.uint8)
    Mr = I
    out = []
    for r in range(1, up_to + 1):
        Mr = sched.M.copy() if r == 1 else B.matmul(Mr, sched.M)
        ok, part, N = B.solve(Mr ^ I, d[r])
        lin = int(N.shape[0])
        out.append({"rounds": r, "linear_dimension": lin, "has_fixed_keys": ok,
                    "dimension": lin if ok else None,
                    "example": B.bits_to_int(part) if ok else None})
    return out


def check_analysis_memory(n, name):
    """Refuse analysing an n-bit schedule whose work matrices would not fit
    (``gfla.limits``): n x n 0/1 byte matrices alive at the peak beside M (the powers
    and blocks of poly_at_matrix, the products, M^r + I in the fixed spaces), 17 of them
    (peak resident memory measured at n = 4096 on a rotation: 17.4 n^2 bytes)."""
    from ...limits import Workspace
    Workspace(f"analysis of the {n}-bit schedule {name}").add(17, (n, n), 1).check()


def analyze(sched, up_to=None, factor_seconds=DEFAULT_FACTOR_SECONDS):
    """Everything ``gfla keysched analyze`` reports, as a JSON-ready dict.

    Parameters
    ----------
    sched : AffineSchedule
    up_to : int, optional
        Fixed spaces of the r-round maps for r = 1 .. up_to (default 32, limited to
        the rounds the constants define).
    factor_seconds : float
        Time budget for the integer factorisations that exact orders need.
    """
    t0 = time.perf_counter()
    n = sched.n
    check_analysis_memory(n, sched.name)
    up_to = DEFAULT_UP_TO if up_to is None else int(up_to)
    if sched.round_limit is not None:
        up_to = min(up_to, sched.round_limit)
    rank = B.rank(sched.M)
    result = {
        "name": sched.name,
        "source": sched.kind,
        "state_bits": n,
        "round_key_bits": sched.key_bits,
        "affine": True,
        "affine_check": dict(sched.checked),
        "constants": describe_constants(sched),
        "rank": rank,
        "invertible": rank == n,
    }
    if rank < n:
        v = B.nullspace(sched.M)[0]
        result["collision"] = {
            "kernel_vector": B.bits_to_int(v),
            "note": "keys k and k ^ kernel_vector give the same state after one round, "
                    "so every round key from round 1 on is the same for both"}
    factors, charpoly, chains = linear_structure(sched.M)
    minpoly = 1
    for item in factors:
        minpoly = P.mul(minpoly, pow_poly(item["polynomial"], item["exponent"]))
    result["charpoly"] = {"degree": n, "polynomial": charpoly, "krylov_chains": chains}
    result["minpoly"] = {"degree": minpoly.bit_length() - 1, "polynomial": minpoly}
    budget = P.FactorBudget(factor_seconds)
    if rank == n:
        lo, hi, unfactored = _order(factors, budget)
        if lo == hi and P.Reducer(minpoly).powmod_x(lo) != 1:  # pragma: no cover
            raise AssertionError("order self-check failed: x^order != 1 mod minpoly")
        result["period_linear"] = _period_value(lo, hi, unfactored)
        result["period_schedule"] = _schedule_period(sched, lo, hi, minpoly)
    else:
        result["period_linear"] = {"exact": True, "value": None,
                                   "note": "the linear part is singular: it has no period"}
        result["period_schedule"] = {"available": False,
                                     "reason": "the linear part is singular"}
    result["factors"] = [{
        "degree": f["degree"], "polynomial": f["polynomial"],
        "multiplicity_in_charpoly": f["multiplicity"], "exponent_in_minpoly": f["exponent"],
        "blocks": f["blocks"], "order": f.get("order"),
        "order_bounds": f.get("order_bounds")} for f in factors]
    result["minpoly_factor_degrees"] = [f["degree"] for f in factors
                                        for _ in range(f["exponent"])]
    result["fixed_spaces"] = fixed_spaces(sched, up_to) if up_to >= 1 else []
    result["seconds"] = time.perf_counter() - t0
    return result


def pow_poly(f, e):
    r = 1
    base = f
    while e:
        if e & 1:
            r = P.mul(r, base)
        e >>= 1
        if e:
            base = P.square(base)
    return r


def describe_constants(sched):
    kind = sched.constant_kind
    out = {"kind": kind}
    if kind == "fixed":
        out["value"] = B.bits_to_int(sched.c)
    if sched.generators:
        out["sequences"] = [{"name": g.name, "kind": g.kind, "description": g.description,
                             "period": g.period, "used": sched._generator_used(g)}
                            for g in sched.generators]
        if sched.c.any():
            out["fixed_part"] = B.bits_to_int(sched.c)
    if sched._round_constant is not None:
        out["note"] = "per-round constants from the callable (f(0, r))"
    return out
