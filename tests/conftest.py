"""Shared helpers for the gfla tests.

The helpers here are deliberately independent of gfla's own arithmetic wherever they
serve as a reference: products and scalar operations are done with Python integers
(GF(p), Z/n, GF(2)) or with Python log/exp tables of GF(2^k) built from the modulus;
``galois_field_of`` gives the matching galois field for the galois comparisons. Only ``matrix_polynomial`` uses gfla
(``F.matmul`` / ``F.add``), because evaluating a polynomial at a matrix with the library
under test is what the Cayley-Hamilton checks are about.

They are exposed as session-scoped fixtures so hypothesis tests can use them too.
"""

import functools
import pathlib

import numpy as np
import pytest

VECTOR_DIR = pathlib.Path(__file__).resolve().parent.parent / "vectors"


def is_extension(F):
    """True for GF(2^k) with k >= 2 (order is a proper power of the characteristic)."""
    return F.is_field and F.size != F.characteristic


@functools.lru_cache(maxsize=None)
def _galois_field(order, modulus):
    import galois

    if modulus is None:
        return galois.GF(order)
    return galois.GF(order, irreducible_poly=galois.Poly.Int(modulus, field=galois.GF(2)))


def galois_field_of(F):
    """The galois field with the same order and (for GF(2^k)) the same modulus as F."""
    if not F.is_field:
        raise ValueError("galois has no residue rings")
    return _galois_field(int(F.size), None if not is_extension(F) else int(F.modulus))


def _int_rows(M):
    """Nested lists of Python ints from a 2-D numpy array or nested lists."""
    if isinstance(M, np.ndarray):
        if M.ndim != 2:
            raise ValueError("expected a 2-D array")
        return [[int(x) for x in row] for row in M.tolist()]
    return [[int(x) for x in row] for row in M]


def to_int_rows(A):
    """A numpy array (any integer dtype) as nested lists of Python ints."""
    return [[int(x) for x in row] for row in np.asarray(A).reshape(np.asarray(A).shape[0], -1)]


def _clmul_mod(a, b, modulus):
    """Carry-less product of a and b reduced by the GF(2) polynomial ``modulus``."""
    deg = modulus.bit_length() - 1
    out = 0
    while b:
        if b & 1:
            out ^= a
        b >>= 1
        a <<= 1
        if a >> deg & 1:
            a ^= modulus
    return out


@functools.lru_cache(maxsize=None)
def gf2k_tables(modulus):
    """(exp, log) tables of GF(2^k) = GF(2)[x]/(modulus) from a generator found by search.

    Pure Python (common practice: polynomial arithmetic over GF(2) reduced by the
    modulus), independent of gfla and galois.
    """
    deg = modulus.bit_length() - 1
    group = (1 << deg) - 1
    for g in range(2, 1 << deg):
        exp = [1] * (2 * group)
        x = 1
        ok = True
        for i in range(1, group):
            x = _clmul_mod(x, g, modulus)
            if x == 1:
                ok = False
                break
            exp[i] = x
        if not ok:
            continue
        for i in range(group, 2 * group):
            exp[i] = exp[i - group]
        log = [0] * (1 << deg)
        for i in range(group):
            log[exp[i]] = i
        return exp, log
    raise ValueError("no generator: modulus is not irreducible")


def _gf2k_mul(tables, a, b):
    if a == 0 or b == 0:
        return 0
    exp, log = tables
    return exp[log[a] + log[b]]


def ref_matmul(F, A, B):
    """A @ B over F without gfla: Python ints modulo n / p, or table-driven GF(2^k)
    arithmetic (``gf2k_tables``). Returns nested lists of Python ints."""
    # Never let numpy pick a dtype for nested lists of Python ints: values above 2^63
    # would silently become float64.
    a = _int_rows(A)
    b = _int_rows(B)
    cols = list(zip(*b)) if b else []
    if is_extension(F):
        tables = gf2k_tables(int(F.modulus))
        out = []
        for row in a:
            out_row = []
            for col in cols:
                acc = 0
                for x, y in zip(row, col):
                    acc ^= _gf2k_mul(tables, x, y)
                out_row.append(acc)
            out.append(out_row)
        return out
    n = int(F.characteristic)
    return [[sum(x * y for x, y in zip(row, col)) % n for col in cols] for row in a]


def ref_mul(F, a, b):
    """Scalar product in F without gfla."""
    if is_extension(F):
        return _gf2k_mul(gf2k_tables(int(F.modulus)), int(a), int(b))
    return (int(a) * int(b)) % int(F.characteristic)


def ref_neg(F, a):
    """Scalar negation in F without gfla."""
    if is_extension(F):
        return int(a)
    return (-int(a)) % int(F.characteristic)


def ref_is_zero_matrix(rows):
    return all(int(x) == 0 for row in rows for x in row)


def ref_is_identity(rows):
    return all(int(x) == (1 if i == j else 0) for i, row in enumerate(rows) for j, x in enumerate(row))


def companion_matrix(F, coeffs):
    """Companion matrix of the monic polynomial ``coeffs`` (highest degree first).

    For c(x) = x^n + a_{n-1} x^{n-1} + ... + a_0 this is the n x n matrix with ones on
    the subdiagonal and last column (-a_0, ..., -a_{n-1}); its characteristic and
    minimal polynomial are both c(x) (common practice).
    """
    coeffs = [int(c) for c in coeffs]
    if coeffs[0] != 1:
        raise ValueError("polynomial must be monic")
    n = len(coeffs) - 1
    C = np.zeros((n, n), dtype=F.dtype)
    for i in range(1, n):
        C[i, i - 1] = 1
    low_first = coeffs[::-1]  # a_0, a_1, ..., a_{n-1}, 1
    for i in range(n):
        C[i, n - 1] = ref_neg(F, low_first[i])
    return C


def scalar_matrix(F, c, n):
    S = np.zeros((n, n), dtype=F.dtype)
    for i in range(n):
        S[i, i] = int(c)
    return S


def matrix_polynomial(F, coeffs, A):
    """p(A) by Horner's rule with gfla's ``F.matmul`` and ``F.add`` (common practice)."""
    n = np.asarray(A).shape[0]
    P = F.zeros((n, n))
    for c in coeffs:
        P = F.add(F.matmul(P, A), scalar_matrix(F, c, n))
    return P


@pytest.fixture(scope="session")
def helpers():
    """Namespace of the helpers above, for tests and hypothesis tests alike."""

    class _Helpers:
        pass

    h = _Helpers()
    for name in (
        "is_extension",
        "gf2k_tables",
        "galois_field_of",
        "to_int_rows",
        "ref_matmul",
        "ref_mul",
        "ref_neg",
        "ref_is_zero_matrix",
        "ref_is_identity",
        "companion_matrix",
        "scalar_matrix",
        "matrix_polynomial",
    ):
        setattr(h, name, globals()[name])
    h.VECTOR_DIR = VECTOR_DIR
    return h
