"""Polynomials over GF(2) as Python integers, with factorisation and orders.

A polynomial is a non-negative ``int`` whose bit i is the coefficient of x^i
(``0b1011`` is x^3 + x + 1), the convention gfla uses for GF(2^k) moduli. Python's big
integers make a 4096-bit polynomial one object, and XOR, shifts and ``bit_length`` are
the whole of the arithmetic.

The key-schedule analyses factor characteristic polynomials of degree up to several
thousand; general-purpose polynomial code is far too slow there, so this module keeps
to GF(2) and to the three steps that matter:

* square-free factorisation (derivative, gcd and square roots, which over GF(2) are bit
  manipulations);
* Berlekamp's algorithm on each square-free part: the subalgebra {g : g^2 = g mod f}
  is the kernel of Q - I, Q the matrix of squaring modulo f, and its dimension is the
  number of irreducible factors; random elements of it split f by gcds until that
  number is reached (so the result is always complete and correct; only the running
  time is random, and the generator is seeded);
* the order of x modulo an irreducible f, from the factorisation of 2^deg(f) - 1 with a
  time budget; when a cofactor cannot be split in time the result is a proven divisor
  and multiple of the order.

References
----------
.. [1] E. R. Berlekamp, "Factoring polynomials over finite fields", Bell System
   Technical Journal 46, 1967.
.. [2] R. Lidl, H. Niederreiter, "Finite Fields", Cambridge University Press, 2nd ed.
   1997, Theorem 3.3 (order of an irreducible polynomial) and Section 4.1 (Berlekamp).
.. [3] D. Y. Y. Yun, "On square-free decomposition algorithms", SYMSAC 1976.
"""

import math
import time

import numpy as np

__all__ = [
    "degree", "mul", "divmod_poly", "mod", "gcd", "derivative", "sqrt", "squarefree",
    "factor", "powmod_x", "Reducer", "order_of_x", "to_coeffs", "from_coeffs",
    "to_text", "nullspace_gf2",
]

# SPREAD[b] has the bits of the byte b at the even positions 0, 2, ..., 14.
_SPREAD = np.array([sum(((b >> i) & 1) << (2 * i) for i in range(8)) for b in range(256)],
                   dtype="<u2")


def degree(a):
    """Degree of a (-1 for the zero polynomial)."""
    return a.bit_length() - 1


def to_coeffs(a):
    """Coefficient list, highest degree first (gfla's polynomial convention)."""
    if a == 0:
        return [0]
    return [(a >> i) & 1 for i in range(a.bit_length() - 1, -1, -1)]


def from_coeffs(coeffs):
    """Inverse of :func:`to_coeffs`."""
    a = 0
    for c in coeffs:
        a = (a << 1) | (int(c) & 1)
    return a


def to_text(a):
    """``x^4 + x + 1`` style text."""
    if a == 0:
        return "0"
    terms = []
    for i in range(a.bit_length() - 1, -1, -1):
        if (a >> i) & 1:
            terms.append("1" if i == 0 else "x" if i == 1 else f"x^{i}")
    return " + ".join(terms)


def mul(a, b):
    """Product of two polynomials (8-bit windows over the shorter factor)."""
    if a.bit_length() < b.bit_length():
        a, b = b, a
    if b < 256:
        r = 0
        while b:
            low = b & -b
            r ^= a << (low.bit_length() - 1)
            b ^= low
        return r
    table = [0] * 256
    for j in range(8):
        base = a << j
        step = 1 << j
        for t in range(step):
            table[step + t] = table[t] ^ base
    r = 0
    shift = 0
    data = b.to_bytes((b.bit_length() + 7) // 8, "little")
    for byte in data:
        if byte:
            r ^= table[byte] << shift
        shift += 8
    return r


def square(a):
    """a^2: over GF(2) squaring spreads the bits to even positions."""
    if a == 0:
        return 0
    raw = np.frombuffer(a.to_bytes((a.bit_length() + 7) // 8, "little"), dtype=np.uint8)
    return int.from_bytes(_SPREAD[raw].tobytes(), "little")


def divmod_poly(a, b):
    """Quotient and remainder of a by b (b nonzero)."""
    if b == 0:
        raise ZeroDivisionError("polynomial division by zero")
    db = b.bit_length()
    q = 0
    while a.bit_length() >= db:
        s = a.bit_length() - db
        a ^= b << s
        q |= 1 << s
    return q, a


def mod(a, b):
    """Remainder of a by b."""
    db = b.bit_length()
    while a.bit_length() >= db:
        a ^= b << (a.bit_length() - db)
    return a


def gcd(a, b):
    """Monic greatest common divisor (monic is automatic over GF(2))."""
    while b:
        a, b = b, mod(a, b)
    return a


def derivative(a):
    """Formal derivative: the odd-degree coefficients move down by one."""
    mask = int("01" * ((a.bit_length() + 1) // 2 + 1), 2) if a else 0
    return (a >> 1) & mask


def sqrt(a):
    """Square root of a polynomial that is a square (only even powers present)."""
    if a == 0:
        return 0
    n = a.bit_length()
    bits = np.unpackbits(np.frombuffer(a.to_bytes((n + 7) // 8, "little"), dtype=np.uint8),
                         bitorder="little")
    if bits[1::2].any():
        raise ValueError("not a square")
    half = np.packbits(bits[0::2], bitorder="little")
    return int.from_bytes(half.tobytes(), "little")


class Reducer:
    """Fast reduction modulo a fixed polynomial f, eight bits per step.

    ``table[t]`` is the multiple q f (deg q < 8) whose coefficients of x^d .. x^(d+7)
    are the bits of t (d = deg f), so one XOR clears a byte of the dividend.
    """

    def __init__(self, f):
        if f < 2:
            raise ValueError("modulus must have degree >= 1")
        self.f = f
        self.d = f.bit_length() - 1
        d = self.d
        basis = []
        for j in range(8):
            v = f << j
            lower = (v >> d) & ((1 << j) - 1)
            for i in range(j):
                if (lower >> i) & 1:
                    v ^= basis[i]
            basis.append(v)
        table = [0] * 256
        for j in range(8):
            step = 1 << j
            for t in range(step):
                table[step + t] = table[t] ^ basis[j]
        self.table = table

    def reduce(self, a):
        d = self.d
        table = self.table
        top = a.bit_length() - 1
        while top >= d:
            k = top - d - 7
            if k < 0:
                k = 0
            a ^= table[(a >> (d + k)) & 0xFF] << k
            top = a.bit_length() - 1
        return a

    def powmod_x(self, e):
        """x^e modulo f (square-and-multiply; multiplying by x is a shift). Degrees
        above ``COMPILED_DEGREE`` run in a compiled loop."""
        if e < 0:
            raise ValueError("negative exponent")
        if self.d >= COMPILED_DEGREE and e.bit_length() > 64:
            return self._powmod_compiled(e)
        r = 1
        if self.d == 0:
            return 0
        for bit in bin(e)[2:]:
            r = self.reduce(square(r))
            if bit == "1":
                r <<= 1
                if r >> self.d:
                    r ^= self.f
        return self.reduce(r)


    def _powmod_compiled(self, e):
        from ...kernels import keysched as K
        d = self.d
        nwt = (d + 8 + 63) // 64 + 1
        if getattr(self, "_packed_table", None) is None:
            raw = b"".join(t.to_bytes(8 * nwt, "little") for t in self.table)
            self._packed_table = np.frombuffer(raw, dtype="<u8").reshape(256, nwt).astype(
                np.uint64)
            nf = (d + 64) // 64
            self._packed_f = np.frombuffer(self.f.to_bytes(8 * nf, "little"),
                                           dtype="<u8").astype(np.uint64)
        ebits = np.frombuffer(bin(e)[2:].encode(), dtype=np.uint8) - ord("0")
        out = np.zeros((d + 63) // 64, dtype=np.uint64)
        K.x_power_mod(self._packed_f, d, np.ascontiguousarray(ebits), self._packed_table,
                      _SPREAD64, out)
        return int.from_bytes(np.ascontiguousarray(out, dtype="<u8").tobytes(), "little")


COMPILED_DEGREE = 192
_SPREAD64 = _SPREAD.astype(np.uint64)


def powmod_x(e, f):
    """x^e modulo f."""
    return Reducer(f).powmod_x(e)


def nullspace_gf2(A):
    """Rows spanning {v : A v = 0} over GF(2) (from gfla's reduced row echelon form)."""
    from .bits import nullspace
    return nullspace(A)


def _bits_matrix(columns, d):
    """d x d 0/1 matrix whose column i holds the bits of columns[i]."""
    nbytes = (d + 7) // 8
    raw = b"".join(c.to_bytes(nbytes, "little") for c in columns)
    bits = np.unpackbits(np.frombuffer(raw, dtype=np.uint8).reshape(len(columns), nbytes),
                         axis=1, count=d, bitorder="little")
    return np.ascontiguousarray(bits.T)


def _bits_to_int(row):
    packed = np.packbits(np.asarray(row, dtype=np.uint8), bitorder="little")
    return int.from_bytes(packed.tobytes(), "little")


def squarefree(f):
    """Square-free factorisation: [(g, m)] with g square-free, pairwise coprime, and
    f = prod g^m (f of degree >= 1; the factor x is kept like any other)."""
    out = []

    def run(f, mult):
        if f.bit_length() <= 1:
            return
        fp = derivative(f)
        if fp == 0:
            run(sqrt(f), 2 * mult)
            return
        c = gcd(f, fp)
        w = divmod_poly(f, c)[0]
        i = 1
        while w != 1:
            y = gcd(w, c)
            z = divmod_poly(w, y)[0]
            if z != 1:
                out.append((z, i * mult))
            i += 1
            w = y
            c = divmod_poly(c, y)[0]
        if c != 1:
            run(sqrt(c), 2 * mult)

    run(f, 1)
    return out


def _berlekamp(f, rng):
    """Irreducible factors of a square-free f of degree >= 2."""
    d = f.bit_length() - 1
    red = Reducer(f)
    columns = []
    u = 1
    for _ in range(d):
        columns.append(u)
        u = red.reduce(u << 2)
    Q = _bits_matrix(columns, d)
    Q[np.arange(d), np.arange(d)] ^= 1
    basis = nullspace_gf2(Q)
    k = basis.shape[0]
    if k == 1:
        return [f]
    elements = [_bits_to_int(row) for row in basis]
    factors = [f]
    done = []
    while len(factors) + len(done) < k:
        g = 0
        for e in elements:
            if rng.random() < 0.5:
                g ^= e
        nxt = []
        for h in factors:
            a = gcd(h, mod(g, h))
            if 0 < degree(a) < degree(h):
                parts = [a, divmod_poly(h, a)[0]]
            else:
                parts = [h]
            for p in parts:
                (done if degree(p) == 1 else nxt).append(p)
        factors = nxt
        if len(factors) + len(done) >= k:
            break
    return done + factors


def factor(f, seed=0x6b73):
    """Irreducible factorisation of f (degree >= 1): sorted list of (g, multiplicity)."""
    import random
    if f < 2:
        raise ValueError("factor needs a polynomial of degree >= 1")
    rng = random.Random(seed)
    result = {}
    for g, m in squarefree(f):
        pieces = []
        if g & 1 == 0:
            pieces.append(0b10)
            g >>= 1
        if g.bit_length() - 1 == 1:
            pieces.append(g)
        elif g.bit_length() - 1 >= 2:
            pieces.extend(_berlekamp(g, rng))
        for p in pieces:
            result[p] = result.get(p, 0) + m
    return sorted(result.items(), key=lambda item: (degree(item[0]), item[0]))


def _cyclotomic_value(e):
    """Phi_e(2) by Moebius inversion over the divisors of e."""
    num, den = 1, 1
    for f in _divisors(e):
        mu = _mobius(e // f)
        if mu == 1:
            num *= (1 << f) - 1
        elif mu == -1:
            den *= (1 << f) - 1
    return num // den


def _divisors(n):
    small, large = [], []
    i = 1
    while i * i <= n:
        if n % i == 0:
            small.append(i)
            if i * i != n:
                large.append(n // i)
        i += 1
    return small + large[::-1]


def _mobius(n):
    result = 1
    p = 2
    while p * p <= n:
        if n % p == 0:
            n //= p
            if n % p == 0:
                return 0
            result = -result
        p += 1
    if n > 1:
        result = -result
    return result


class FactorBudget:
    """Factorisations of 2^d - 1, cached by cyclotomic part, under one deadline.

    ``seconds`` is the total time the analysis may spend factoring integers (each
    cyclotomic part gets at most a quarter of it); a part that cannot be split in time
    is reported as unfactored.
    """

    def __init__(self, seconds=20.0):
        self.seconds = float(seconds)
        self.deadline = time.monotonic() + self.seconds
        self._parts = {}

    def remaining(self):
        return max(0.0, self.deadline - time.monotonic())

    def part(self, e):
        if e not in self._parts:
            from ...linalg import numtheory
            value = _cyclotomic_value(e)
            remaining = self.remaining()
            if remaining <= 0.0 and value >= (1 << 64):
                self._parts[e] = ({}, [value])
            else:
                # One hard number must not eat the whole budget: each part gets at
                # most a quarter of it (and at least half a second).
                timeout = max(min(remaining, self.seconds / 4), 0.5)
                factors, unfactored = numtheory.factor_integer(value, timeout=timeout)
                self._parts[e] = (dict(factors), list(unfactored))
        return self._parts[e]

    def two_power_minus_one(self, d):
        """(factors {p: k}, unfactored [c]) with 2^d - 1 = prod p^k * prod c."""
        factors, unfactored = {}, []
        for e in _divisors(d):
            fs, un = self.part(e)
            for p, k in fs.items():
                factors[p] = factors.get(p, 0) + k
            unfactored.extend(un)
        return factors, unfactored


def order_of_x(f, budget=None):
    """Order of x modulo the irreducible f with f(0) = 1: (divisor, multiple, unfactored).

    divisor == multiple when the order is exact. The order divides 2^d - 1
    (Lidl and Niederreiter, Theorem 3.3); it is found by removing prime factors of
    2^d - 1 while x^(N/p) = 1 still holds.
    """
    from ...linalg import numtheory
    d = f.bit_length() - 1
    if d == 1:
        return 1, 1, []
    budget = budget or FactorBudget()
    factors, unfactored = budget.two_power_minus_one(d)
    N = (1 << d) - 1
    red = Reducer(f)
    lo, hi = numtheory.cyclic_order(N, factors, unfactored, lambda E: red.powmod_x(E) == 1)
    return lo, hi, ([] if lo == hi else list(unfactored))


def lcm(a, b):
    return a * b // math.gcd(a, b)
