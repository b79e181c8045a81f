"""Field construction, spec parsing, validation, and the ring-specific algorithms."""

import numpy as np
import pytest

import gfla
from gfla.io.spec import parse_field_spec, parse_int_expr


# ---------------------------------------------------------------- spec text
@pytest.mark.parametrize("text, expected", [
    ("GF(7)", ("prime", (7,))),
    ("GF(2^61-1)", ("prime", ((1 << 61) - 1,))),
    ("gf( 65521 )", ("prime", (65521,))),
    ("GF(2)", ("binary", ())),
    ("GF(2^1)", ("binary", ())),
    ("GF(2^8)", ("extension", (8,))),
    ("GF(256)", ("extension", (8,))),
    ("Z/12", ("ring", (12,))),
    ("Z/2^64", ("ring", (1 << 64,))),
    ("Z/(3*2^30+1)", ("ring", (3 * 2 ** 30 + 1,))),
])
def test_parse_field_spec(text, expected):
    assert parse_field_spec(text) == expected


@pytest.mark.parametrize("text", ["GF(2^17)", "GF(x)", "F(7)", "GF()", "Z/", "GF(2^8", ""])
def test_parse_field_spec_rejects(text):
    with pytest.raises(gfla.InputError):
        gfla.field(text)


def test_int_expressions():
    assert parse_int_expr("2^61-1") == 2305843009213693951
    assert parse_int_expr("2**8") == 256
    assert parse_int_expr("(2^3+1)*3") == 27
    assert parse_int_expr("0x11b") == 283
    with pytest.raises(gfla.InputError):
        parse_int_expr("2^^3")


def test_composite_prime_refused_naming_a_factor():
    with pytest.raises(gfla.InputError, match="not prime.*divisible by 3"):
        gfla.field("GF(21)")
    # 2^61 + 1 = 3 * 768614336404564651 (it is divisible by 3 since 2^61 = 2 mod 3:
    # common practice)
    with pytest.raises(gfla.InputError, match="not prime"):
        gfla.field("GF(2^61+1)")
    with pytest.raises(gfla.InputError, match="2\\^63"):
        gfla.field("GF(2^63+29)")


def test_largest_prime_below_2_63_accepted():
    # 2^63 - 25 is the largest prime below 2^63 (galois.prev_prime(2**63); from galois)
    import galois
    p = galois.prev_prime(2 ** 63)
    assert p == 2 ** 63 - 25
    F = gfla.field(f"GF({p})")
    assert F.size == p


def test_default_moduli_are_the_smallest_primitive_polynomials():
    # Source: galois.primitive_poly(2, k, method="min") (galois).
    import galois
    from gfla.fields.extension import DEFAULT_MODULI
    for k, m in DEFAULT_MODULI.items():
        assert int(galois.primitive_poly(2, k, method="min")) == m


def test_reducible_modulus_refused_with_factor():
    # x^8 + 1 = (x + 1)^8 over GF(2) (Frobenius: common practice)
    with pytest.raises(gfla.InputError, match="reducible.*0x3"):
        gfla.field("GF(2^8)", modulus=0x101)
    with pytest.raises(gfla.InputError, match="degree"):
        gfla.field("GF(2^8)", modulus=0x1b)


def test_non_primitive_modulus_uses_a_generator():
    # 0x11b (FIPS 197) is irreducible but not primitive: x has order 51 and 0x03
    # generates the multiplicative group (galois reports primitive_element x + 1).
    F = gfla.field("GF(2^8)", modulus=0x11b)
    info = F.info()
    assert info["primitive"] is False and info["generator"] == 3
    # FIPS 197 section 4.2: {57} . {83} = {c1}
    assert F.mul(np.array([0x57]), np.array([0x83]))[0] == 0xC1
    # FIPS 197 section 4.2.1 (xtime example): {57} . {13} = {fe}
    assert F.mul(np.array([0x57]), np.array([0x13]))[0] == 0xFE


def test_modulus_on_other_families_refused():
    with pytest.raises(gfla.InputError, match="modulus"):
        gfla.field("GF(7)", modulus=0x11b)


# ---------------------------------------------------------------- validation
def test_entry_outside_field_names_row_and_column():
    F = gfla.field("GF(7)")
    with pytest.raises(gfla.InputError, match="row 2, column 1: 9"):
        F.det([[1, 2], [9, 3]])
    with pytest.raises(gfla.InputError, match="row 1, column 2: -1"):
        F.rank(np.array([[1, -1]]))


def test_non_square_and_empty_and_ragged():
    F = gfla.field("GF(7)")
    with pytest.raises(gfla.InputError, match="square"):
        F.inv([[1, 2, 3], [4, 5, 6]])
    with pytest.raises(gfla.InputError, match="empty"):
        F.rank(np.zeros((0, 3), dtype=np.int64))
    with pytest.raises(gfla.InputError, match="ragged"):
        F.rank([[1, 2], [3]])
    with pytest.raises(gfla.InputError, match="integer"):
        F.rank([[1.5, 2]])


def test_z2_64_accepts_full_range_python_ints():
    R = gfla.field("Z/2^64")
    top = (1 << 64) - 1
    A = R.asarray([[top, 1], [0, 1]])
    assert A.dtype == np.uint64 and int(A[0, 0]) == top
    assert R.det([[top, 1], [0, 1]]) == top
    with pytest.raises(gfla.InputError):
        R.asarray([[1 << 64]])


# ---------------------------------------------------------------- rings
def _python_det(A, n):
    import sympy
    return int(sympy.Matrix(A).det()) % n


@pytest.mark.parametrize("n", [12, 2 ** 16, 3 ** 5, 2 ** 64, 2 ** 63 + 1, 30030])
def test_ring_inverse_methods_agree(n):
    R = gfla.field(f"Z/{n}")
    rng = np.random.default_rng(n % 1000)
    for size in (1, 2, 5, 9):
        A = R.random(size, invertible=True, seed=rng)
        X = R.inv(A)
        assert np.array_equal(R.matmul(A, X), R.identity(size))
        assert np.array_equal(R.inv(A, method="cayley-hamilton"), X)
        if len(R.factorization()) == 1:
            assert np.array_equal(R.inv(A, method="hensel"), X)
        # det against sympy's exact integer determinant (sympy)
        assert R.det(A) == _python_det(A.astype(object).tolist(), n)


def test_ring_singular_names_the_prime_and_a_kernel_vector():
    R = gfla.field("Z/12")
    A = np.array([[1, 2], [3, 0]])  # det = -6: divisible by 2 and 3
    with pytest.raises(gfla.SingularMatrixError) as info:
        R.inv(A)
    err = info.value
    assert err.prime in (2, 3) and (-6) % err.prime == 0
    v = np.array(err.kernel_vector)
    assert not ((A @ v) % 12).any() and (v % 12).any()


def test_ring_solve_and_nullspace():
    R = gfla.field("Z/12")
    A = np.array([[2, 4, 6], [0, 3, 9]])
    N = R.nullspace(A)
    assert all(not ((A @ v) % 12).any() for v in N)
    # brute force over all 12^3 vectors: the kernel is exactly the span of N
    # (common practice: a generating set spans the module)
    import itertools
    kernel = {v for v in itertools.product(range(12), repeat=3)
              if not ((A @ np.array(v)) % 12).any()}
    span = {(0, 0, 0)}
    frontier = [(0, 0, 0)]
    while frontier:
        x = frontier.pop()
        for g in N:
            y = tuple(int(t) for t in (np.array(x) + g) % 12)
            if y not in span:
                span.add(y)
                frontier.append(y)
    assert span == kernel
    b = np.array([2, 3])
    sol = R.solve(A, b)
    assert sol.consistent and np.array_equal((A @ sol.particular) % 12, b)
    sol = R.solve(A, np.array([1, 0]))  # 2x + 4y + 6z is even: no solution
    assert not sol.consistent and sol.particular is None


def test_ring_rank_is_mccoy_rank():
    R = gfla.field("Z/12")
    # rank 2 modulo 3, rank 1 modulo 2: McCoy rank is the least (McCoy 1948)
    A = np.array([[1, 0], [0, 2]])
    assert R.rank(A) == 1
    assert R.rank(np.eye(3, dtype=int)) == 3


def test_ring_minpoly_annihilates_and_is_least_degree():
    R = gfla.field("Z/8")
    A = np.array([[2, 0], [0, 2]])
    mp = R.minpoly(A)
    assert mp == [1, 6]  # x - 2
    assert not R.poly_eval_matrix(mp, A).any()


def test_csanky_refused_where_it_divides_by_zero():
    F = gfla.field("GF(2^8)")
    with pytest.raises(gfla.MethodNotApplicableError):
        F.charpoly(np.eye(2, dtype=int), method="csanky")
    R = gfla.field("Z/15")
    with pytest.raises(gfla.MethodNotApplicableError):
        R.charpoly(np.eye(3, dtype=int), method="csanky")
    assert R.charpoly([[1, 2], [3, 4]], method="csanky") == R.charpoly([[1, 2], [3, 4]])
    with pytest.raises(gfla.MethodNotApplicableError):
        R.charpoly([[1, 2], [3, 4]], method="hessenberg")


# ---------------------------------------------------------------- orders
def test_cyclic_order_with_unfactored_part_gives_divisor_and_multiple():
    from gfla.linalg.numtheory import cyclic_order
    # a toy cyclic group: integers mod 101 (order 100 = 4 * 25); g = 10 has order 4
    # since 10^2 = 100 = -1 (common practice). Pretend 25 could not be factored.
    def is_one(e):
        return pow(10, e, 101) == 1
    assert cyclic_order(100, {2: 2}, [25], is_one) == (4, 4)
    # g = 2 is a primitive root mod 101: the 25-part stays unknown, so only bounds.
    def is_one2(e):
        return pow(2, e, 101) == 1
    assert cyclic_order(100, {2: 2}, [25], is_one2) == (4, 100)


def test_order_unavailable_reports_bounds(monkeypatch):
    from gfla.linalg import numtheory
    F = gfla.field("GF(2)")
    # companion matrix of x^5 + x^2 + 1 (primitive: order 31, Lidl & Niederreiter)
    C = np.zeros((5, 5), dtype=int)
    C[1:, :-1] = np.eye(4, dtype=int)
    C[:, -1] = [1, 0, 1, 0, 0]
    assert F.order(C) == 31

    def no_factoring(q, d, timeout=None):
        return {}, [q ** d - 1]
    monkeypatch.setattr(numtheory, "factor_q_power_minus_one", no_factoring)
    # 31 is prime: the unfactored part is the whole group order, and x^(31/31) != 1
    with pytest.raises(gfla.OrderUnavailableError) as info:
        F.order(C)
    assert info.value.divisor == 1 and info.value.multiple == 31


def test_power_large_exponents_and_negative():
    F = gfla.field("GF(65521)")
    A = F.random(4, invertible=True, seed=3)
    e = 2 ** 256 + 12345
    o = F.order(A)
    assert np.array_equal(F.power(A, e), F.power(A, e % o))
    assert np.array_equal(F.matmul(F.power(A, -3), F.power(A, 3)), F.identity(4))
    assert np.array_equal(F.power(A, 0), F.identity(4))


def test_random_is_seeded_and_invertible():
    for spec in ("GF(2)", "GF(2^8)", "Z/2^64", "GF(7)"):
        F = gfla.field(spec)
        A = F.random(6, invertible=True, seed=42)
        assert np.array_equal(A, F.random(6, invertible=True, seed=42))
        assert F.rank(A) == 6


def test_inverse_verify_and_singular_certificate():
    F = gfla.field("GF(2^8)", modulus=0x11b)
    A = np.array([[1, 2, 3], [2, 4, 6], [0, 1, 1]])
    # row 2 = 2 * row 1 over GF(2^8)? 2*2 = 4, 2*3 = 6 (no carries): yes (common practice)
    with pytest.raises(gfla.SingularMatrixError) as info:
        F.inv(A, verify=True)
    v = np.array(info.value.kernel_vector)
    assert v.any() and not F.matmul(A, v.reshape(-1, 1)).any()
    B = F.random(12, invertible=True, seed=1)
    assert np.array_equal(F.matmul(B, F.inv(B, verify=True)), F.identity(12))


def test_known_irreducible_moduli_are_irreducible():
    # galois (Poly.is_irreducible) is the reference for the shortcut list.
    import galois
    from gfla.fields.extension import KNOWN_IRREDUCIBLE
    for m in KNOWN_IRREDUCIBLE:
        assert galois.Poly.Int(m, field=galois.GF(2)).is_irreducible()


def test_inconsistent_system_carries_a_left_certificate():
    # y A = 0 and y b != 0 proves there is no solution (common practice).
    for spec in ("GF(7)", "GF(2)", "GF(2^8)"):
        F = gfla.field(spec)
        A = np.array([[1, 1], [1, 1], [0, 1]])
        b = np.array([1, 0, 1])
        sol = F.solve(A, b)
        assert not sol.consistent and sol.particular is None
        y = sol.left_vector.reshape(1, -1)
        assert not F.matmul(y, A).any()
        assert F.matmul(y, b.reshape(-1, 1)).any()


def test_huge_entry_is_named_by_its_size():
    # 10^5000 has 5001 digits, past Python's default int-to-text limit of 4300
    # (Python documentation, sys.set_int_max_str_digits); 10^5000 < 2^16610.
    from gfla.errors import InputError, int_text
    with pytest.raises(InputError, match="a 16610-bit integer is outside GF"):
        gfla.field("GF(7)").det([[10 ** 5000]])
    assert int_text(-(2 ** 200)) == "-a 201-bit integer" and int_text(12345) == "12345"
