"""Property tests (hypothesis) of the field protocol, family by family.

Identities are checked with reference arithmetic that does not go through gfla:
Python ints modulo p or n, galois for GF(2^k) (see ``tests/conftest.py``). The one
exception is the Cayley-Hamilton evaluation, which by design uses ``F.matmul`` and
``F.add`` (Horner's rule) on the polynomial gfla returned.
"""

import math

import numpy as np
import pytest
import sympy
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import gfla
from gfla.errors import NotAUnitError, SingularMatrixError

FIELDS = [
    ("GF(3)", None),
    ("GF(7)", None),
    ("GF(65521)", None),
    ("GF(2147483647)", None),
    ("GF(2305843009213693951)", None),  # 2^61 - 1
    ("GF(9223372036854775783)", None),  # largest prime below 2^63
    ("GF(2)", None),
    ("GF(2^2)", None),
    ("GF(2^8)", 0x11B),
    ("GF(2^16)", None),
]
RINGS = [
    ("Z/12", None),
    ("Z/360", None),
    ("Z/65536", None),
    ("Z/18446744073709551616", None),  # 2^64
    ("Z/12157665459056928801", None),  # 3^40, above 2^63
    ("Z/18446743979220271189", None),  # (2^32 - 5)(2^32 - 17), above 2^63
    ("Z/18446744073709551557", None),  # largest prime below 2^64, as a ring
]
ALL = FIELDS + RINGS


def _ids(families):
    return [spec if mod is None else f"{spec}-{mod:#x}" for spec, mod in families]


PROPERTY = settings(
    max_examples=30,
    deadline=None,
    database=None,
    suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large],
)


def _field(spec, modulus):
    return gfla.field(spec, modulus=modulus)


def _elements(F):
    q = int(F.size)
    edges = sorted({0, 1, q - 1, max(q - 2, 0), q // 2})
    return st.one_of(st.integers(0, q - 1), st.sampled_from(edges))


def _draw_matrix(data, F, m, n, allow_dependent=True):
    flat = data.draw(st.lists(_elements(F), min_size=m * n, max_size=m * n), label="entries")
    rows = [flat[i * n:(i + 1) * n] for i in range(m)]
    if allow_dependent and m >= 2 and data.draw(st.booleans(), label="dependent row"):
        # Last row := first row, so the singular / rank-deficient branches are reached
        # in large fields and rings too.
        rows[-1] = list(rows[0])
    return np.array(rows, dtype=F.dtype).reshape(m, n)


def _identity_rows(n):
    return [[int(i == j) for j in range(n)] for i in range(n)]


def _rows(A):
    return [[int(x) for x in row] for row in np.asarray(A)]


def _is_unit(F, d):
    if F.is_field:
        return int(d) != 0
    return math.gcd(int(d), int(F.size)) == 1


def _ref_det_sign(F, d, n):
    """(-1)^n d, the constant term of the characteristic polynomial (common practice)."""
    return int(d) if n % 2 == 0 else _ref_neg(F, d)


def _ref_neg(F, d):
    if F.is_field and F.size != F.characteristic:
        return int(d)
    return (-int(d)) % int(F.characteristic)


# ------------------------------------------------------------------------- inverse


@pytest.mark.parametrize("spec,modulus", ALL, ids=_ids(ALL))
@PROPERTY
@given(data=st.data())
def test_inverse_or_certificate(helpers, spec, modulus, data):
    # Common practice: A A^-1 = A^-1 A = I iff det(A) is a unit; otherwise a kernel
    # vector certifies singularity (errors.py contract), checked with Python ints/galois.
    F = _field(spec, modulus)
    n = data.draw(st.integers(1, 12), label="n")
    A = _draw_matrix(data, F, n, n)
    d = F.det(A)
    try:
        X = F.inv(A)
    except SingularMatrixError as err:
        assert not _is_unit(F, d), (d, _rows(A))
        v = err.kernel_vector
        assert v is not None and len(v) == n
        assert helpers.ref_is_zero_matrix(helpers.ref_matmul(F, A, np.array(v, dtype=object).reshape(n, 1)))
        if F.is_field:
            assert any(int(x) for x in v)
        else:
            # A v = 0 with v != 0 mod n proves A is not invertible; the prime divides
            # both n and det (DEVELOPERS.md, errors).
            p = int(err.prime)
            assert sympy.isprime(p) and int(F.size) % p == 0 and int(d) % p == 0
            assert any(int(x) % int(F.size) for x in v)
        return
    assert _is_unit(F, d), (d, _rows(A))
    assert np.asarray(X).shape == (n, n)
    assert helpers.ref_is_identity(helpers.ref_matmul(F, A, X))
    assert helpers.ref_is_identity(helpers.ref_matmul(F, X, A))


@pytest.mark.parametrize("spec,modulus", ALL, ids=_ids(ALL))
@PROPERTY
@given(data=st.data())
def test_inv_element(helpers, spec, modulus, data):
    # Common practice: a a^-1 = 1 for units; NotAUnitError with gcd > 1 otherwise.
    F = _field(spec, modulus)
    a = data.draw(_elements(F), label="a")
    unit = a != 0 if F.is_field else math.gcd(a, int(F.size)) == 1
    if not unit:
        with pytest.raises(NotAUnitError):
            F.inv_element(a)
        return
    b = F.inv_element(a)
    assert 0 <= int(b) < int(F.size)
    assert helpers.ref_mul(F, a, b) == 1


# ----------------------------------------------------------------------------- det


@pytest.mark.parametrize("spec,modulus", ALL, ids=_ids(ALL))
@PROPERTY
@given(data=st.data())
def test_det_is_multiplicative(helpers, spec, modulus, data):
    # Common practice: det(AB) = det(A) det(B), det(A^T) = det(A) over commutative rings.
    F = _field(spec, modulus)
    n = data.draw(st.integers(1, 12), label="n")
    A = _draw_matrix(data, F, n, n)
    B = _draw_matrix(data, F, n, n)
    AB = np.array(helpers.ref_matmul(F, A, B), dtype=F.dtype)
    assert F.det(AB) == helpers.ref_mul(F, F.det(A), F.det(B))
    assert F.det(np.ascontiguousarray(A.T)) == F.det(A)
    assert F.det(F.identity(n)) == 1


# ------------------------------------------------------------------ Cayley-Hamilton


def _charpoly_methods(F, n):
    if not F.is_field:
        return ["auto", "berkowitz"]
    methods = ["auto", "hessenberg", "berkowitz"]
    if int(F.characteristic) > n:
        methods.append("csanky")
    return methods


@pytest.mark.parametrize("spec,modulus", ALL, ids=_ids(ALL))
@PROPERTY
@given(data=st.data())
def test_cayley_hamilton(helpers, spec, modulus, data):
    # Cayley-Hamilton: charpoly(A)(A) = 0, evaluated by Horner with F.matmul / F.add.
    # The charpoly is monic of degree n with constant term (-1)^n det(A) (common practice).
    F = _field(spec, modulus)
    n = data.draw(st.integers(1, 12), label="n")
    A = _draw_matrix(data, F, n, n)
    results = []
    for method in _charpoly_methods(F, n):
        cp = [int(c) for c in F.charpoly(A, method=method)]
        assert len(cp) == n + 1 and cp[0] == 1, (method, cp)
        assert all(0 <= c < int(F.size) for c in cp)
        assert cp[-1] == _ref_det_sign(F, F.det(A), n), method
        P = np.asarray(helpers.matrix_polynomial(F, cp, A))
        assert not P.any(), (method, _rows(A))
        results.append(cp)
    assert all(r == results[0] for r in results)


# ------------------------------------------------------------ rank, nullity, solve


@pytest.mark.parametrize("spec,modulus", FIELDS, ids=_ids(FIELDS))
@PROPERTY
@given(data=st.data())
def test_rank_plus_nullity(helpers, spec, modulus, data):
    # Rank-nullity theorem (common practice), with the basis checked by Python ints/galois.
    F = _field(spec, modulus)
    m = data.draw(st.integers(1, 12), label="m")
    n = data.draw(st.integers(1, 12), label="n")
    A = _draw_matrix(data, F, m, n)
    r = F.rank(A)
    N = np.asarray(F.nullspace(A))
    assert 0 <= r <= min(m, n)
    assert N.shape == (n - r, n)
    if N.shape[0]:
        assert helpers.ref_is_zero_matrix(helpers.ref_matmul(F, A, N.T))
        assert F.rank(N) == n - r
    assert F.rank(np.ascontiguousarray(A.T)) == r  # row rank = column rank
    R, pivots = F.rref(A)
    assert len(pivots) == r
    assert list(pivots) == sorted(pivots)


@pytest.mark.parametrize("spec,modulus", FIELDS, ids=_ids(FIELDS))
@PROPERTY
@given(data=st.data())
def test_solve(helpers, spec, modulus, data):
    # Common practice: for b = A x0 the system is consistent and A x = b for the returned
    # particular solution; every returned null vector satisfies A v = 0.
    F = _field(spec, modulus)
    m = data.draw(st.integers(1, 12), label="m")
    n = data.draw(st.integers(1, 12), label="n")
    A = _draw_matrix(data, F, m, n)
    x0 = _draw_matrix(data, F, n, 1, allow_dependent=False)
    b_rows = helpers.ref_matmul(F, A, x0)
    b = np.array([row[0] for row in b_rows], dtype=F.dtype)
    sol = F.solve(A, b)
    assert sol.consistent
    x = np.asarray(sol.particular).reshape(n, 1)
    assert helpers.ref_matmul(F, A, x) == b_rows
    N = np.asarray(sol.nullspace)
    assert N.shape == (n - F.rank(A), n)
    if N.shape[0]:
        assert helpers.ref_is_zero_matrix(helpers.ref_matmul(F, A, N.T))
    # An arbitrary right-hand side: consistent iff appending b does not raise the rank.
    c = _draw_matrix(data, F, m, 1, allow_dependent=False)
    sol2 = F.solve(A, c.reshape(m))
    augmented = np.hstack([A, c])
    assert sol2.consistent == (F.rank(augmented) == F.rank(A))
    if sol2.consistent:
        y = np.asarray(sol2.particular).reshape(n, 1)
        assert helpers.ref_matmul(F, A, y) == _rows(c)


# --------------------------------------------------------------------------- power


def _ref_power(helpers, F, A, e):
    n = A.shape[0]
    P = _identity_rows(n)
    for _ in range(e):
        P = helpers.ref_matmul(F, P, A)
    return P


@pytest.mark.parametrize("spec,modulus", ALL, ids=_ids(ALL))
@PROPERTY
@given(data=st.data())
def test_power_small_exponents(helpers, spec, modulus, data):
    # Common practice: A^e is the e-fold product; A^-e A^e = I when A is invertible.
    F = _field(spec, modulus)
    n = data.draw(st.integers(1, 10), label="n")
    e = data.draw(st.integers(0, 9), label="e")
    A = _draw_matrix(data, F, n, n)
    expected = _ref_power(helpers, F, A, e)
    assert _rows(F.power(A, e)) == expected
    if _is_unit(F, F.det(A)) and e > 0:
        assert helpers.ref_is_identity(helpers.ref_matmul(F, F.power(A, -e), np.array(expected, dtype=object)))


@pytest.mark.parametrize("spec,modulus", ALL, ids=_ids(ALL))
@PROPERTY
@given(data=st.data())
def test_power_huge_exponents(helpers, spec, modulus, data):
    # Common practice: A^(2^256) = (A^(2^255))^2 and A^(2^256 + 3) = A^(2^256) A^3.
    F = _field(spec, modulus)
    n = data.draw(st.integers(1, 6), label="n")
    A = _draw_matrix(data, F, n, n)
    half = F.power(A, 2**255)
    full = F.power(A, 2**256)
    assert _rows(full) == helpers.ref_matmul(F, half, half)
    assert _rows(F.power(A, 2**256 + 3)) == helpers.ref_matmul(F, full, _ref_power(helpers, F, A, 3))
    if _is_unit(F, F.det(A)):
        assert helpers.ref_is_identity(helpers.ref_matmul(F, F.power(A, -(2**256)), full))


# --------------------------------------------------- top of the range vs Python ints


TOP = [
    ("GF(2305843009213693951)", None),
    ("GF(9223372036854775783)", None),
    ("Z/18446744073709551616", None),
    ("Z/18446744073709551557", None),
]


def _top_elements(F):
    q = int(F.size)
    return st.one_of(st.integers(q - 2**20, q - 1), st.integers(0, q - 1), st.sampled_from([0, 1, q - 1]))


@pytest.mark.parametrize("spec,modulus", TOP, ids=_ids(TOP))
@PROPERTY
@given(data=st.data())
def test_elementwise_near_top_against_python_ints(spec, modulus, data):
    # Python-int arithmetic modulo q is the reference (common practice).
    F = _field(spec, modulus)
    q = int(F.size)
    k = data.draw(st.integers(1, 64), label="length")
    a = data.draw(st.lists(_top_elements(F), min_size=k, max_size=k), label="a")
    b = data.draw(st.lists(_top_elements(F), min_size=k, max_size=k), label="b")
    A = np.array(a, dtype=F.dtype)
    B = np.array(b, dtype=F.dtype)
    assert [int(x) for x in F.add(A, B)] == [(x + y) % q for x, y in zip(a, b)]
    assert [int(x) for x in F.sub(A, B)] == [(x - y) % q for x, y in zip(a, b)]
    assert [int(x) for x in F.mul(A, B)] == [(x * y) % q for x, y in zip(a, b)]
    assert [int(x) for x in F.neg(A)] == [(-x) % q for x in a]


@pytest.mark.parametrize("spec,modulus", TOP, ids=_ids(TOP))
@PROPERTY
@given(data=st.data())
def test_matmul_near_top_against_python_ints(spec, modulus, data):
    # Python-int matrix product modulo q (common practice).
    F = _field(spec, modulus)
    q = int(F.size)
    m = data.draw(st.integers(1, 12), label="m")
    k = data.draw(st.integers(1, 12), label="k")
    n = data.draw(st.integers(1, 12), label="n")
    a = data.draw(st.lists(_top_elements(F), min_size=m * k, max_size=m * k), label="a")
    b = data.draw(st.lists(_top_elements(F), min_size=k * n, max_size=k * n), label="b")
    A = np.array(a, dtype=F.dtype).reshape(m, k)
    B = np.array(b, dtype=F.dtype).reshape(k, n)
    expected = [[sum(a[i * k + t] * b[t * n + j] for t in range(k)) % q for j in range(n)] for i in range(m)]
    assert _rows(F.matmul(A, B)) == expected


@pytest.mark.parametrize("spec,modulus", TOP, ids=_ids(TOP))
@pytest.mark.parametrize("inner", [64, 257])
def test_matmul_all_top_entries(spec, modulus, inner):
    # Every entry q - 1: the worst case for delayed reduction. Python ints as reference.
    F = _field(spec, modulus)
    q = int(F.size)
    A = np.full((3, inner), q - 1, dtype=F.dtype)
    B = np.full((inner, 2), q - 1, dtype=F.dtype)
    expected = (inner * (q - 1) * (q - 1)) % q
    assert _rows(F.matmul(A, B)) == [[expected] * 2] * 3
