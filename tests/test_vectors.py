"""Known-answer tests: published vectors (FIPS 197), handbook formulas and tables.

The vectors live in ``vectors/*.json``; every check below names its source in a comment.
"""

import itertools
import json
import math
import random

import galois
import numpy as np
import pytest
import sympy

import gfla


def _load(helpers, name):
    with open(helpers.VECTOR_DIR / name) as fh:
        return json.load(fh)


def _aes_field():
    return gfla.field("GF(2^8)", modulus=0x11B)


def _bits(byte):
    """Byte -> column (b0, ..., b7), b0 least significant (FIPS 197 section 3.2)."""
    return [(int(byte) >> i) & 1 for i in range(8)]


# --------------------------------------------------------------------------- files


def test_every_vector_file_names_a_source_and_is_listed(helpers):
    # The project's rule: every known answer names its publication or says "from memory".
    files = sorted(helpers.VECTOR_DIR.glob("*.json"))
    assert files, "no vector files found"
    readme = (helpers.VECTOR_DIR / "README.md").read_text()
    for path in files:
        doc = json.loads(path.read_text())
        assert isinstance(doc.get("source"), str) and doc["source"].strip(), path.name
        assert path.name in readme, f"{path.name} missing from vectors/README.md"


# ------------------------------------------------------------------ FIPS 197 MixColumns


def test_mixcolumns_times_invmixcolumns_is_identity(helpers):
    # FIPS 197 section 5.1.3 eq. (5.6) and section 5.3.3 eq. (5.10).
    vec = _load(helpers, "fips197_mixcolumns.json")
    F = gfla.field(vec["field"], modulus=vec["modulus"])
    assert F.modulus == 0x11B
    M = np.array(vec["mix_columns"], dtype=F.dtype)
    Minv = np.array(vec["inv_mix_columns"], dtype=F.dtype)
    identity = np.eye(4, dtype=np.int64)
    assert np.array_equal(F.matmul(M, Minv), identity)
    assert np.array_equal(F.matmul(Minv, M), identity)
    # galois: the same product computed by the reference library.
    G = galois.GF(2**8, irreducible_poly=0x11B)
    assert np.array_equal(np.asarray(G(vec["mix_columns"]) @ G(vec["inv_mix_columns"])), identity)


@pytest.mark.parametrize("method", ["auto", "gauss-jordan", "cayley-hamilton"])
def test_inverse_of_mixcolumns_is_invmixcolumns(helpers, method):
    # FIPS 197 section 5.3.3 eq. (5.10): InvMixColumns is the inverse of MixColumns.
    vec = _load(helpers, "fips197_mixcolumns.json")
    F = _aes_field()
    M = np.array(vec["mix_columns"], dtype=F.dtype)
    Minv = np.array(vec["inv_mix_columns"], dtype=F.dtype)
    assert np.array_equal(F.inv(M, method=method), Minv)
    assert np.array_equal(F.inv(Minv, method=method), M)
    assert np.array_equal(F.inv(M, method=method, verify=True), Minv)


def test_mixcolumns_det_and_charpoly(helpers):
    # galois: determinant and characteristic polynomial of the FIPS 197 matrix.
    vec = _load(helpers, "fips197_mixcolumns.json")
    F = _aes_field()
    G = galois.GF(2**8, irreducible_poly=0x11B)
    M = np.array(vec["mix_columns"], dtype=F.dtype)
    assert F.det(M) == int(np.linalg.det(G(vec["mix_columns"])))
    expected = [int(c) for c in G(vec["mix_columns"]).characteristic_poly().coeffs]
    for method in ("auto", "hessenberg", "berkowitz"):
        assert F.charpoly(M, method=method) == expected
    # det(M) det(M^-1) = 1 (common practice).
    Minv = np.array(vec["inv_mix_columns"], dtype=F.dtype)
    assert int(G(F.det(M)) * G(F.det(Minv))) == 1


def test_mixcolumns_order():
    # Order computed by gfla; cross-checked by repeated multiplication in galois and by
    # the order criterion A^o = I, A^(o/r) != I for every prime r | o (common practice).
    vec_M = [[2, 3, 1, 1], [1, 2, 3, 1], [1, 1, 2, 3], [3, 1, 1, 2]]  # FIPS 197 eq. (5.6)
    F = _aes_field()
    M = np.array(vec_M, dtype=F.dtype)
    order = F.order(M)
    assert isinstance(order, int) and order >= 1
    G = galois.GF(2**8, irreducible_poly=0x11B)
    GM = G(vec_M)
    GI = G(np.eye(4, dtype=np.int64))
    P = GM.copy()
    e = 1
    while not np.array_equal(P, GI):  # galois: first exponent giving the identity
        P = P @ GM
        e += 1
        assert e <= 10_000
    assert order == e
    identity = np.eye(4, dtype=np.int64)
    assert np.array_equal(F.power(M, order), identity)
    for r in sympy.factorint(order):
        assert not np.array_equal(F.power(M, order // r), identity)
    # InvMixColumns is M^(order-1) and M^-1 (FIPS 197 section 5.3.3).
    Minv = np.array([[14, 11, 13, 9], [9, 14, 11, 13], [13, 9, 14, 11], [11, 13, 9, 14]])
    assert np.array_equal(F.power(M, order - 1), Minv)
    assert np.array_equal(F.power(M, -1), Minv)


def test_fips197_field_products(helpers):
    # FIPS 197 sections 4.1, 4.2, 4.2.1 worked examples (from memory), checked in galois too.
    vec = _load(helpers, "fips197_field_products.json")
    F = gfla.field(vec["field"], modulus=vec["modulus"])
    G = galois.GF(2**8, irreducible_poly=vec["modulus"])
    for a, b, c in vec["products"]:
        got = F.mul(np.array([a], dtype=F.dtype), np.array([b], dtype=F.dtype))
        assert int(np.asarray(got).ravel()[0]) == c, (a, b)
        assert int(G(a) * G(b)) == c
        if b != 0:
            assert int(G(F.inv_element(b)) * G(b)) == 1
    for a, b, c in vec["sums"]:
        got = F.add(np.array([a], dtype=F.dtype), np.array([b], dtype=F.dtype))
        assert int(np.asarray(got).ravel()[0]) == c
        assert int(G(a) + G(b)) == c


# ------------------------------------------------------------- FIPS 197 S-box affine map


def test_affine_matrix_inverse(helpers):
    # FIPS 197 section 5.1.1 eq. (5.2) and section 5.3.2: the inverse affine matrix with
    # constant {05} (inverse matrix from memory, recomputed here).
    vec = _load(helpers, "fips197_sbox_affine.json")
    F2 = gfla.field("GF(2)")
    A = np.array(vec["affine_matrix"], dtype=F2.dtype)
    Ainv = np.array(vec["inverse_affine_matrix"], dtype=F2.dtype)
    assert F2.rank(A) == 8
    assert F2.det(A) == 1
    assert np.array_equal(F2.inv(A), Ainv)
    assert np.array_equal(F2.inv(Ainv), A)
    assert np.array_equal(F2.matmul(A, Ainv), np.eye(8, dtype=np.int64))
    # Inverting y = A x + c gives x = A^-1 y + A^-1 c, so the inverse constant is A^-1 c.
    c = np.array(_bits(vec["affine_constant"]), dtype=F2.dtype).reshape(8, 1)
    d = np.asarray(F2.matmul(Ainv, c)).ravel()
    assert [int(x) for x in d] == _bits(vec["inverse_affine_constant"])
    # Equation (5.1) written out: b'_i = b_i + b_{i+4} + b_{i+5} + b_{i+6} + b_{i+7}.
    for i in range(8):
        assert [vec["affine_matrix"][i][j] for j in range(8)] == [
            1 if (j - i) % 8 in (0, 4, 5, 6, 7) else 0 for j in range(8)
        ]


def _sbox_with_gfla(A_rows, c):
    """S(a) = A * a^-1 + c with gfla: inverse in GF(2^8), affine map over GF(2)."""
    F = _aes_field()
    F2 = gfla.field("GF(2)")
    inverses = [0] + [int(F.inv_element(a)) for a in range(1, 256)]
    X = np.array([_bits(v) for v in inverses], dtype=F2.dtype).T  # 8 x 256 bit columns
    A = np.array(A_rows, dtype=F2.dtype)
    C = np.tile(np.array(_bits(c), dtype=F2.dtype).reshape(8, 1), (1, 256))
    Y = np.asarray(F2.add(F2.matmul(A, X), C))
    return [sum(int(Y[i, a]) << i for i in range(8)) for a in range(256)]


def _sbox_with_galois():
    """S(a) by galois inversion and eq. (5.1) of FIPS 197 written bitwise."""
    G = galois.GF(2**8, irreducible_poly=0x11B)
    out = []
    for a in range(256):
        b = 0 if a == 0 else int(G(a) ** -1)
        bits = _bits(b)
        cbits = _bits(0x63)
        s = 0
        for i in range(8):
            bit = bits[i] ^ bits[(i + 4) % 8] ^ bits[(i + 5) % 8] ^ bits[(i + 6) % 8] ^ bits[(i + 7) % 8]
            s |= (bit ^ cbits[i]) << i
        out.append(s)
    return out


def test_sbox_values_from_inverse_and_affine(helpers):
    vec = _load(helpers, "fips197_sbox_affine.json")
    sbox = _sbox_with_gfla(vec["affine_matrix"], vec["affine_constant"])
    # FIPS 197 section 5.1.1: S({00}) = {63}, S({53}) = {ed}.
    for a, s in vec["sbox_values"]["pairs"]:
        assert sbox[a] == s, (hex(a), hex(sbox[a]), hex(s))
    # galois: the whole table recomputed independently.
    assert sbox == _sbox_with_galois()
    # The S-box is a permutation (FIPS 197 section 5.3.2 defines its inverse).
    assert sorted(sbox) == list(range(256))
    # No fixed points and no opposite fixed points (from memory: Daemen & Rijmen,
    # The Design of Rijndael, on the choice of the constant {63}).
    assert all(sbox[a] != a and sbox[a] != a ^ 0xFF for a in range(256))


def test_inverse_sbox_undoes_sbox(helpers):
    # FIPS 197 section 5.3.2: InvSubBytes = inverse affine map (constant {05}), then invert.
    vec = _load(helpers, "fips197_sbox_affine.json")
    sbox = _sbox_with_gfla(vec["affine_matrix"], vec["affine_constant"])
    F = _aes_field()
    F2 = gfla.field("GF(2)")
    Y = np.array([_bits(s) for s in sbox], dtype=F2.dtype).T
    Ainv = np.array(vec["inverse_affine_matrix"], dtype=F2.dtype)
    D = np.tile(np.array(_bits(vec["inverse_affine_constant"]), dtype=F2.dtype).reshape(8, 1), (1, 256))
    X = np.asarray(F2.add(F2.matmul(Ainv, Y), D))
    pre = [sum(int(X[i, a]) << i for i in range(8)) for a in range(256)]
    back = [0 if v == 0 else int(F.inv_element(v)) for v in pre]
    assert back == list(range(256))


# ------------------------------------------------------------------------ |GL(n, q)|


def _field_of_order(q):
    return gfla.field(f"GF({q})") if sympy.isprime(q) else gfla.field(f"GF(2^{q.bit_length() - 1})")


def _gl_order(n, q):
    # Lidl & Niederreiter, Finite Fields: |GL(n, q)| = prod_{i<n} (q^n - q^i).
    return math.prod(q**n - q**i for i in range(n))


@pytest.mark.parametrize("n,q", [(2, 2), (3, 2), (2, 3), (2, 4), (2, 5), (4, 2)])
def test_gl_order_by_exhaustive_count(n, q):
    # Lidl & Niederreiter, Finite Fields: every n x n matrix is enumerated; those with
    # nonzero det (and, separately, rank n) are counted.
    F = _field_of_order(q)
    assert F.size == q
    count_det = 0
    count_rank = 0
    for entries in itertools.product(range(q), repeat=n * n):
        A = np.array(entries, dtype=F.dtype).reshape(n, n)
        d = F.det(A)
        r = F.rank(A)
        assert (d != 0) == (r == n), (A.tolist(), d, r)
        count_det += d != 0
        count_rank += r == n
    assert count_det == _gl_order(n, q)
    assert count_rank == _gl_order(n, q)


@pytest.mark.parametrize(
    "spec,modulus",
    [("GF(2)", None), ("GF(3)", None), ("GF(7)", None), ("GF(65521)", None),
     ("GF(2305843009213693951)", None), ("GF(2^8)", 0x11B), ("GF(2^16)", None),
     ("Z/12", None), ("Z/18446744073709551616", None)],
)
def test_random_invertible_is_invertible(spec, modulus):
    # Common practice: a matrix is in GL(n) iff its det is a unit.
    F = gfla.field(spec, modulus=modulus)
    for n in list(range(1, 13)) + [20, 33]:
        for seed in range(4):
            A = np.asarray(F.random((n, n), invertible=True, seed=1000 * n + seed))
            assert A.shape == (n, n)
            assert int(A.min()) >= 0 and int(A.max()) < int(F.size)
            d = F.det(A)
            if F.is_field:
                assert d != 0 and F.rank(A) == n
            else:
                assert math.gcd(int(d), int(F.size)) == 1


@pytest.mark.parametrize("n,q,draws", [(2, 2, 300), (2, 3, 1500)])
def test_random_invertible_covers_gl(n, q, draws):
    # Lidl & Niederreiter, Finite Fields: |GL(2,2)| = 6, |GL(2,3)| = 48. A uniform
    # sampler reaches every element; with these draws each count has mean >= 31, and a
    # count below a third of the mean would be a sign of bias.
    F = _field_of_order(q)
    counts = {}
    for seed in range(draws):
        A = np.asarray(F.random((n, n), invertible=True, seed=seed))
        counts[tuple(int(x) for x in A.ravel())] = counts.get(tuple(int(x) for x in A.ravel()), 0) + 1
    total = _gl_order(n, q)
    assert len(counts) == total
    mean = draws / total
    assert min(counts.values()) > mean / 3 and max(counts.values()) < mean * 3


# ----------------------------------------------------------------------- Vandermonde


def _vandermonde_case(spec, modulus, n, seed):
    F = gfla.field(spec, modulus=modulus)
    rnd = random.Random(seed)
    points = rnd.sample(range(int(F.size)), n)
    if _is_extension(F):
        G = galois.GF(int(F.size), irreducible_poly=int(F.modulus))
        V = [[int(G(x) ** j) for j in range(n)] for x in points]
        expected = G(1)
        for i in range(n):
            for j in range(i + 1, n):
                expected = expected * (G(points[j]) - G(points[i]))
        return F, points, V, int(expected)
    p = int(F.size)
    V = [[pow(x, j, p) for j in range(n)] for x in points]
    expected = 1
    for i in range(n):
        for j in range(i + 1, n):
            expected = expected * (points[j] - points[i]) % p
    return F, points, V, expected


def _is_extension(F):
    return F.is_field and F.size != F.characteristic


@pytest.mark.parametrize(
    "spec,modulus",
    [("GF(7)", None), ("GF(65521)", None), ("GF(2147483647)", None),
     ("GF(2305843009213693951)", None), ("GF(2^8)", 0x11B), ("GF(2^16)", None)],
)
def test_vandermonde_determinant(spec, modulus):
    # Common practice (any linear algebra text): det[x_i^j] = prod_{i<j} (x_j - x_i).
    max_n = 7 if spec == "GF(7)" else 24
    for n in range(1, max_n + 1):
        F, points, V, expected = _vandermonde_case(spec, modulus, n, seed=n)
        A = np.array(V, dtype=F.dtype)
        assert F.det(A) == expected, (spec, n)
        assert F.rank(A) == n
    # A repeated point makes two rows equal: det 0, rank n-1.
    F, points, V, _ = _vandermonde_case(spec, modulus, 6, seed=99)
    V[5] = V[2]
    A = np.array(V, dtype=F.dtype)
    assert F.det(A) == 0
    assert F.rank(A) == 5


# --------------------------------------------------------------- companion matrices


CHARPOLY_FAMILIES = [
    ("GF(2)", None), ("GF(7)", None), ("GF(65521)", None), ("GF(2305843009213693951)", None),
    ("GF(9223372036854775783)", None), ("GF(2^8)", 0x11B), ("GF(2^16)", None),
    ("Z/12", None), ("Z/18446744073709551616", None),
]


@pytest.mark.parametrize("spec,modulus", CHARPOLY_FAMILIES)
@pytest.mark.parametrize("method", ["auto", "hessenberg", "berkowitz", "csanky"])
def test_companion_charpoly(helpers, spec, modulus, method):
    # Common practice (any linear algebra text): the characteristic polynomial of the
    # companion matrix of a monic c(x) is c(x). Csanky divides by 1..n, so it must be
    # refused when the characteristic is at most n (ARCHITECTURE.md, numerical notes).
    F = gfla.field(spec, modulus=modulus)
    rnd = random.Random(f"{spec} {method}")
    for n in range(1, 13):
        coeffs = [1] + [rnd.randrange(int(F.size)) for _ in range(n)]
        C = helpers.companion_matrix(F, coeffs)
        if not F.is_field and method in ("hessenberg", "csanky"):
            # Over Z/n these need division; a refusal is allowed, a wrong answer is not.
            try:
                got = F.charpoly(C, method=method)
            except gfla.MethodNotApplicableError:
                continue
        elif method == "csanky" and int(F.characteristic) <= n:
            with pytest.raises(gfla.MethodNotApplicableError):
                F.charpoly(C, method=method)
            continue
        else:
            got = F.charpoly(C, method=method)
        assert [int(c) for c in got] == coeffs, (spec, method, n)


@pytest.mark.parametrize("spec,modulus", [fm for fm in CHARPOLY_FAMILIES if fm[0].startswith("GF")])
def test_companion_minpoly(helpers, spec, modulus):
    # Common practice: a companion matrix is nonderogatory, so minpoly = charpoly = c(x).
    F = gfla.field(spec, modulus=modulus)
    rnd = random.Random(f"minpoly {spec}")
    for n in range(1, 11):
        coeffs = [1] + [rnd.randrange(int(F.size)) for _ in range(n)]
        C = helpers.companion_matrix(F, coeffs)
        assert [int(c) for c in F.minpoly(C)] == coeffs


# ------------------------------------------------------- primitive polynomials, GF(2)


def test_primitive_polynomial_table_with_galois(helpers):
    # From memory; galois Poly.is_primitive() is the reference.
    vec = _load(helpers, "primitive_polynomials_gf2.json")
    GF2 = galois.GF(2)
    degrees = []
    for entry in vec["polynomials"]:
        assert entry["integer"] == sum(1 << e for e in entry["exponents"])
        poly = galois.Poly.Int(entry["integer"], field=GF2)
        assert poly.degree == entry["degree"]
        assert poly.is_primitive(), entry["polynomial"]
        degrees.append(entry["degree"])
    assert degrees == list(range(2, 17))
    for entry in vec["irreducible_not_primitive"]:
        poly = galois.Poly.Int(entry["integer"], field=GF2)
        assert poly.is_irreducible() and not poly.is_primitive()


def _poly_coeffs_from_int(value):
    """Integer (bit i = coeff of x^i) -> coefficient list, highest degree first."""
    return [(value >> i) & 1 for i in range(value.bit_length() - 1, -1, -1)]


def _order_of_x_mod(value):
    """Multiplicative order of x modulo the GF(2) polynomial ``value`` (Python ints)."""
    deg = value.bit_length() - 1
    r = 2  # x
    e = 1
    while r != 1:
        r <<= 1
        if r >> deg & 1:
            r ^= value
        e += 1
        assert e <= 2**deg
    return e


def test_companion_of_primitive_polynomial_has_full_order(helpers):
    # Lidl & Niederreiter, Finite Fields: the companion matrix of a primitive polynomial
    # of degree k over GF(2) has order 2^k - 1 (it acts as multiplication by a generator).
    vec = _load(helpers, "primitive_polynomials_gf2.json")
    F2 = gfla.field("GF(2)")
    for entry in vec["polynomials"]:
        k = entry["degree"]
        C = helpers.companion_matrix(F2, _poly_coeffs_from_int(entry["integer"]))
        identity = np.eye(k, dtype=np.int64)
        assert F2.order(C) == 2**k - 1, entry["polynomial"]
        assert np.array_equal(F2.power(C, 2**k - 1), identity)
        for r in sympy.factorint(2**k - 1):
            assert not np.array_equal(F2.power(C, (2**k - 1) // r), identity)
        if k <= 8:
            # Repeated multiplication, one step at a time.
            P = C.copy()
            e = 1
            while not np.array_equal(P, identity):
                P = F2.matmul(P, C)
                e += 1
                assert e <= 2**k
            assert e == 2**k - 1


def test_companion_of_aes_modulus_order(helpers):
    # FIPS 197 section 4.2: 0x11b is irreducible; the order of x modulo it is recomputed
    # with Python-int polynomial arithmetic (from memory it is 51, so x is not primitive).
    vec = _load(helpers, "primitive_polynomials_gf2.json")
    F2 = gfla.field("GF(2)")
    entry = vec["irreducible_not_primitive"][0]
    C = helpers.companion_matrix(F2, _poly_coeffs_from_int(entry["integer"]))
    expected = _order_of_x_mod(entry["integer"])
    assert expected == 51  # from memory, confirmed by the computation above
    assert F2.order(C) == expected
    assert [int(c) for c in F2.charpoly(C)] == _poly_coeffs_from_int(entry["integer"])
