"""gfla against reference libraries on random matrices.

galois is the reference for GF(p) and GF(2^k) (inv, det, rank, rref, nullspace, matmul;
charpoly through det(tI - A) at n + 1 points, since galois's own characteristic_poly
expands cofactors); sympy for Z/n and for charpoly over small GF(p); Python-int
Gaussian elimination (common practice) where galois would fall back to object arrays
(GF(2^61-1)) or has no ring arithmetic (Z/2^64). Each field family gets 200 random
matrices per elementary operation, sizes 1..40, from seeded numpy Generators; a share
of them is built singular / rank-deficient on purpose.
"""

import math
import zlib

import galois
import numpy as np
import pytest
import sympy

import gfla
from gfla.errors import SingularMatrixError

FIELD_FAMILIES = [
    ("GF(7)", None),
    ("GF(65521)", None),
    ("GF(2147483647)", None),
    ("GF(2)", None),
    ("GF(2^8)", 0x11B),
    ("GF(2^16)", None),
    ("GF(2^4)", None),
]
FAMILY_IDS = [spec if mod is None else f"{spec}-{mod:#x}" for spec, mod in FIELD_FAMILIES]
CASES = 200


def _rng(*key):
    return np.random.default_rng(zlib.crc32(repr(key).encode()))


def _setup(helpers, spec, modulus):
    F = gfla.field(spec, modulus=modulus)
    if modulus is not None:
        assert F.modulus == modulus
    G = helpers.galois_field_of(F)
    assert G.order == F.size
    return F, G


def _size(rng):
    """Sizes 1..40, weighted towards small ones to keep the run short."""
    bucket = rng.random()
    if bucket < 0.6:
        return int(rng.integers(1, 9))
    if bucket < 0.9:
        return int(rng.integers(9, 21))
    return int(rng.integers(21, 41))


def _entries(F, rng, shape):
    order = int(F.size)
    if rng.random() < 0.1:
        # Extremes of the range: 0, 1, order-1 only.
        values = np.array([0, 1, order - 1], dtype=np.int64)
        return values[rng.integers(0, 3, size=shape)].astype(F.dtype)
    return rng.integers(0, order, size=shape, dtype=np.int64).astype(F.dtype)


def _matrix(F, G, rng, m, n, deficient_share=0.3):
    """Random m x n matrix; with probability ``deficient_share`` of rank < min(m, n)."""
    if rng.random() < deficient_share and min(m, n) >= 1:
        r = int(rng.integers(0, min(m, n)))
        B = G(_entries(F, rng, (m, r)).astype(np.int64))
        C = G(_entries(F, rng, (r, n)).astype(np.int64))
        return np.asarray(B @ C).astype(F.dtype)
    return _entries(F, rng, (m, n))


def _g(G, A):
    return G(np.asarray(A).astype(np.int64))


# ------------------------------------------------------------------------ inverse


@pytest.mark.parametrize("spec,modulus", FIELD_FAMILIES, ids=FAMILY_IDS)
def test_inv_against_galois(helpers, spec, modulus):
    # galois: np.linalg.inv on FieldArray (raises LinAlgError when singular).
    F, G = _setup(helpers, spec, modulus)
    rng = _rng(spec, "inv")
    singular_seen = 0
    for case in range(CASES):
        n = _size(rng)
        A = _matrix(F, G, rng, n, n)
        GA = _g(G, A)
        try:
            expected = np.asarray(np.linalg.inv(GA)).astype(np.int64)
        except np.linalg.LinAlgError:
            singular_seen += 1
            with pytest.raises(SingularMatrixError) as info:
                F.inv(A)
            v = info.value.kernel_vector
            assert v is not None and len(v) == n and any(int(x) != 0 for x in v)
            assert not np.any(np.asarray(GA @ G(np.array(v, dtype=np.int64))))  # A v = 0
            continue
        assert np.array_equal(np.asarray(F.inv(A)).astype(np.int64), expected), (spec, case, n)
        if case % 8 == 0 and n <= 12:
            for method in ("gauss-jordan", "cayley-hamilton"):
                got = np.asarray(F.inv(A, method=method)).astype(np.int64)
                assert np.array_equal(got, expected), (spec, case, method)
    assert singular_seen >= 20  # the singular branch was exercised


# ------------------------------------------------------------------------ det, rank


@pytest.mark.parametrize("spec,modulus", FIELD_FAMILIES, ids=FAMILY_IDS)
def test_det_against_galois(helpers, spec, modulus):
    # galois: np.linalg.det on FieldArray.
    F, G = _setup(helpers, spec, modulus)
    rng = _rng(spec, "det")
    zero_seen = 0
    for case in range(CASES):
        n = _size(rng)
        A = _matrix(F, G, rng, n, n)
        expected = int(np.linalg.det(_g(G, A)))
        got = F.det(A)
        assert isinstance(got, int)
        assert got == expected, (spec, case, n)
        zero_seen += expected == 0
    assert zero_seen >= 20


@pytest.mark.parametrize("spec,modulus", FIELD_FAMILIES, ids=FAMILY_IDS)
def test_rank_against_galois(helpers, spec, modulus):
    # galois: np.linalg.matrix_rank on FieldArray; rectangular shapes included.
    F, G = _setup(helpers, spec, modulus)
    rng = _rng(spec, "rank")
    for case in range(CASES):
        m, n = _size(rng), _size(rng)
        A = _matrix(F, G, rng, m, n)
        expected = int(np.linalg.matrix_rank(_g(G, A)))
        assert F.rank(A) == expected, (spec, case, m, n)


@pytest.mark.parametrize("spec,modulus", FIELD_FAMILIES, ids=FAMILY_IDS)
def test_rref_against_galois(helpers, spec, modulus):
    # galois: FieldArray.row_reduce(); the reduced row echelon form is unique.
    F, G = _setup(helpers, spec, modulus)
    rng = _rng(spec, "rref")
    for case in range(CASES):
        m, n = _size(rng), _size(rng)
        A = _matrix(F, G, rng, m, n)
        expected = np.asarray(_g(G, A).row_reduce()).astype(np.int64)
        R, pivots = F.rref(A)
        assert np.array_equal(np.asarray(R).astype(np.int64), expected), (spec, case, m, n)
        expected_pivots = tuple(int(np.flatnonzero(row)[0]) for row in expected if row.any())
        assert tuple(int(p) for p in pivots) == expected_pivots


# ----------------------------------------------------------------------- nullspace


@pytest.mark.parametrize("spec,modulus", FIELD_FAMILIES, ids=FAMILY_IDS)
def test_nullspace_against_galois(helpers, spec, modulus):
    # galois: FieldArray.null_space() gives the kernel dimension k; gfla's basis must have
    # k rows, lie in the kernel and have rank k, hence span the same space as galois's.
    F, G = _setup(helpers, spec, modulus)
    rng = _rng(spec, "nullspace")
    nontrivial = 0
    for case in range(CASES):
        m, n = _size(rng), _size(rng)
        A = _matrix(F, G, rng, m, n, deficient_share=0.5)
        GA = _g(G, A)
        reference = GA.null_space()
        k = reference.shape[0]
        N = np.asarray(F.nullspace(A))
        assert N.shape == (k, n), (spec, case, m, n, N.shape, k)
        if k == 0:
            continue
        nontrivial += 1
        GN = _g(G, N)
        assert not np.any(np.asarray(GA @ GN.T)), (spec, case)  # A @ basis^T == 0
        assert int(np.linalg.matrix_rank(GN)) == k
    assert nontrivial >= 50


# ------------------------------------------------------------------------- matmul


@pytest.mark.parametrize("spec,modulus", FIELD_FAMILIES, ids=FAMILY_IDS)
def test_matmul_against_galois(helpers, spec, modulus):
    # galois: FieldArray @ FieldArray.
    F, G = _setup(helpers, spec, modulus)
    rng = _rng(spec, "matmul")
    for case in range(CASES):
        m, k, n = _size(rng), _size(rng), _size(rng)
        A = _entries(F, rng, (m, k))
        B = _entries(F, rng, (k, n))
        expected = np.asarray(_g(G, A) @ _g(G, B)).astype(np.int64)
        got = np.asarray(F.matmul(A, B))
        assert got.shape == (m, n)
        assert np.array_equal(got.astype(np.int64), expected), (spec, case, m, k, n)


# ------------------------------------------------------------------------ charpoly


def _reference_charpoly_check(F, G, A, n, got):
    """True if ``got`` is det(xI - A).

    When the field has more than n elements: got is monic of degree n and
    got(t) = det(tI - A) (galois np.linalg.det) at n + 1 distinct points t, which pins
    down a degree-n polynomial (common practice). Otherwise (GF(2), GF(7) with n >= 7):
    sympy Matrix.charpoly over the integers, reduced mod p.
    """
    if len(got) != n + 1 or got[0] != 1:
        return False
    if int(F.size) > n:
        poly = galois.Poly(got, field=G)
        GA = _g(G, A)
        eye = G(np.eye(n, dtype=np.int64))
        for t in range(n + 1):
            if int(poly(G(t))) != int(np.linalg.det(G(t) * eye - GA)):
                return False
        return True
    p = int(F.size)
    assert p == int(F.characteristic)  # prime field
    x = sympy.Symbol("x")
    expected = [int(c) % p for c in sympy.Matrix(A.astype(np.int64).tolist()).charpoly(x).all_coeffs()]
    return got == expected


@pytest.mark.parametrize("spec,modulus", FIELD_FAMILIES, ids=FAMILY_IDS)
def test_charpoly_against_reference(helpers, spec, modulus):
    # galois det(tI - A) at n + 1 points, or sympy charpoly mod p (see the helper above),
    # for every method. galois FieldArray.characteristic_poly() is not used on the random
    # matrices: it expands cofactors (n! work) and fails on 1 x 1 input (galois 0.4.11).
    # Csanky divides by 1..n and must raise MethodNotApplicableError when the
    # characteristic is at most n (ARCHITECTURE.md, numerical notes).
    F, G = _setup(helpers, spec, modulus)
    rng = _rng(spec, "charpoly")
    refused = 0
    for case in range(30):
        n = int(rng.integers(1, 13))
        A = _matrix(F, G, rng, n, n)
        results = {}
        for method in ("auto", "hessenberg", "berkowitz", "csanky"):
            if method == "csanky" and int(F.characteristic) <= n:
                with pytest.raises(gfla.MethodNotApplicableError):
                    F.charpoly(A, method=method)
                refused += 1
                continue
            results[method] = [int(c) for c in F.charpoly(A, method=method)]
        first = results["auto"]
        assert all(r == first for r in results.values()), (spec, case, results)
        assert _reference_charpoly_check(F, G, A, n, first), (spec, case, n, first)
    if int(F.characteristic) <= 12:
        assert refused > 0


@pytest.mark.parametrize("spec,modulus", [("GF(2^8)", 0x11B)])
def test_charpoly_against_galois_small(helpers, spec, modulus):
    # galois: FieldArray.characteristic_poly() directly, on sizes 2..5 where its cofactor
    # expansion is cheap (one family only: its first call compiles for ~10 s).
    F, G = _setup(helpers, spec, modulus)
    rng = _rng(spec, "galois charpoly")
    for case in range(10):
        n = int(rng.integers(2, 6))
        A = _matrix(F, G, rng, n, n)
        expected = [int(c) for c in _g(G, A).characteristic_poly().coeffs]
        for method in ("auto", "hessenberg", "berkowitz"):
            assert [int(c) for c in F.charpoly(A, method=method)] == expected, (spec, case, method)


@pytest.mark.parametrize("p", [7, 65521])
def test_charpoly_against_sympy(p):
    # sympy: Matrix.charpoly over the integers, coefficients reduced mod p.
    F = gfla.field(f"GF({p})")
    rng = _rng(p, "sympy charpoly")
    x = sympy.Symbol("x")
    for case in range(25):
        n = int(rng.integers(1, 9))
        A = rng.integers(0, p, size=(n, n), dtype=np.int64)
        expected = [int(c) % p for c in sympy.Matrix(A.tolist()).charpoly(x).all_coeffs()]
        for method in ("hessenberg", "berkowitz"):
            assert [int(c) for c in F.charpoly(A, method=method)] == expected, (p, case, method)


# ------------------------------------------------------------------------- minpoly


def _monic_poly(G, rng, degree):
    return [1] + [int(c) for c in rng.integers(0, G.order, size=degree)]


def _poly_mul(G, a, b):
    """Product of coefficient lists (highest degree first) with galois scalar arithmetic."""
    out = G(np.zeros(len(a) + len(b) - 1, dtype=np.int64))
    for i, x in enumerate(a):
        out[i:i + len(b)] += G(x) * G(np.array(b, dtype=np.int64))
    return [int(c) for c in out]


def _block_diagonal_of_companions(helpers, F, polys):
    blocks = [helpers.companion_matrix(F, q) for q in polys]
    n = sum(b.shape[0] for b in blocks)
    D = np.zeros((n, n), dtype=np.int64)
    at = 0
    for b in blocks:
        k = b.shape[0]
        D[at:at + k, at:at + k] = b
        at += k
    return D


def _random_invertible_galois(G, rng, n):
    while True:
        P = G(rng.integers(0, G.order, size=(n, n), dtype=np.int64))
        if np.linalg.matrix_rank(P) == n:
            return P


@pytest.mark.parametrize("spec,modulus", FIELD_FAMILIES, ids=FAMILY_IDS)
def test_minpoly_of_similar_block_companions(helpers, spec, modulus):
    # Common practice: blockdiag(C(q_1), ..., C(q_r)) has minimal polynomial
    # lcm(q_1, ..., q_r), and similarity P D P^-1 (P random invertible, galois) keeps it.
    # The blocks are chosen so the lcm is known for any f, g: lcm(f, f, f) = f,
    # lcm(f, fg, g) = fg, lcm(f^2 g, f, g) = f^2 g. Repeated blocks make the matrices
    # derogatory, which random matrices almost never are.
    F, G = _setup(helpers, spec, modulus)
    rng = _rng(spec, "minpoly blocks")
    for case in range(30):
        f = _monic_poly(G, rng, int(rng.integers(1, 4)))
        g = _monic_poly(G, rng, int(rng.integers(1, 4)))
        fg = _poly_mul(G, f, g)
        kind = case % 3
        if kind == 0:
            polys, expected = [f, f, f], f
        elif kind == 1:
            polys, expected = [f, fg, g, f], fg
        else:
            ffg = _poly_mul(G, f, fg)
            polys, expected = [ffg, f, g], ffg
        D = G(_block_diagonal_of_companions(helpers, F, polys))
        P = _random_invertible_galois(G, rng, D.shape[0])
        A = np.asarray(P @ D @ np.linalg.inv(P)).astype(F.dtype)
        assert [int(c) for c in F.minpoly(A)] == expected, (spec, case, polys)


def _galois_powers(G, GA, count):
    """[I, A, ..., A^(count-1)] by repeated galois products."""
    n = GA.shape[0]
    powers = [G(np.eye(n, dtype=np.int64))]
    for _ in range(count - 1):
        powers.append(powers[-1] @ GA)
    return powers


@pytest.mark.parametrize("spec,modulus", FIELD_FAMILIES, ids=FAMILY_IDS)
def test_minpoly_annihilates_and_is_minimal(helpers, spec, modulus):
    # Common practice: the minimal polynomial is the unique monic m of least degree d with
    # m(A) = 0; d is least iff I, A, ..., A^(d-1) are linearly independent. Powers,
    # m(A) and the rank are computed with galois; m also divides charpoly(A).
    F, G = _setup(helpers, spec, modulus)
    rng = _rng(spec, "minpoly random")
    for case in range(30):
        n = int(rng.integers(1, 11))
        A = _matrix(F, G, rng, n, n, deficient_share=0.5)
        expected = None
        if case % 3 == 0:
            # c I + E_{0,n-1}: minimal polynomial (x - c)^2 for n >= 2, x - c for n = 1
            # (common practice), far below the degree of the characteristic polynomial.
            c = int(rng.integers(0, G.order))
            A = np.zeros((n, n), dtype=F.dtype)
            for i in range(n):
                A[i, i] = c
            if n >= 2:
                A[0, n - 1] = 1
            root = galois.Poly([1, int(-G(c))], field=G)
            expected = root**2 if n >= 2 else root
        GA = _g(G, A)
        coeffs = [int(c) for c in F.minpoly(A)]
        m = galois.Poly(coeffs, field=G)
        if expected is not None:
            assert m == expected, (spec, case, str(m), str(expected))
        d = len(coeffs) - 1
        assert coeffs[0] == 1 and 1 <= d <= n
        powers = _galois_powers(G, GA, d + 1)
        value = G(np.zeros((n, n), dtype=np.int64))
        for power, c in zip(powers, reversed(coeffs)):
            value = value + G(c) * power
        assert not np.any(np.asarray(value)), (spec, case)  # m(A) = 0
        stacked = G(np.stack([np.asarray(P).ravel() for P in powers[:d]]))
        assert int(np.linalg.matrix_rank(stacked)) == d, (spec, case)  # nothing smaller
        # m divides the characteristic polynomial (gfla's, itself checked against galois
        # and sympy above).
        chi = galois.Poly([int(c) for c in F.charpoly(A)], field=G)
        assert chi % m == galois.Poly([0], field=G)


# --------------------------------------------------- GF(2^61-1): Python-int reference


def _py_rref(A, p):
    """Gauss-Jordan over GF(p) with Python ints (common practice): (R, pivots, det)."""
    R = [[int(x) % p for x in row] for row in A]
    m = len(R)
    n = len(R[0]) if m else 0
    pivots = []
    det = 1
    row = 0
    for col in range(n):
        pivot = next((i for i in range(row, m) if R[i][col]), None)
        if pivot is None:
            det = 0
            continue
        if pivot != row:
            R[row], R[pivot] = R[pivot], R[row]
            det = -det
        det = det * R[row][col] % p
        inv = pow(R[row][col], -1, p)
        R[row] = [x * inv % p for x in R[row]]
        for i in range(m):
            if i != row and R[i][col]:
                factor = R[i][col]
                R[i] = [(x - factor * y) % p for x, y in zip(R[i], R[row])]
        pivots.append(col)
        row += 1
        if row == m:
            break
    if m != n or len(pivots) < n:
        det = 0
    return R, tuple(pivots), det % p


def _py_matmul(A, B, n):
    A = [[int(x) for x in row] for row in A]
    B = [[int(x) for x in row] for row in B]
    cols = list(zip(*B))
    return [[sum(x * y for x, y in zip(row, col)) % n for col in cols] for row in A]


def test_gf_2_61_minus_1_against_python_ints():
    # Python-int Gaussian elimination and products (common practice); galois would use
    # object arrays here.
    p = 2**61 - 1
    F = gfla.field(f"GF({p})")
    rng = _rng(p, "python ints")
    for case in range(40):
        m = int(rng.integers(1, 21))
        n = m if case % 2 == 0 else int(rng.integers(1, 21))
        A = [[int(x) for x in rng.integers(0, p, size=n, dtype=np.int64)] for _ in range(m)]
        if case % 4 == 1 and m >= 2:
            A[-1] = [(3 * x + y) % p for x, y in zip(A[0], A[1 % m])]  # a dependent row
        if case % 7 == 3:
            A = [[p - 1 if (i + j) % 2 else p - 2 for j in range(n)] for i in range(m)]
        An = np.array(A, dtype=np.int64)
        R, pivots, det = _py_rref(A, p)
        assert F.rank(An) == len(pivots)
        Rg, pivots_g = F.rref(An)
        assert [[int(x) for x in row] for row in np.asarray(Rg)] == R
        assert tuple(int(x) for x in pivots_g) == pivots
        N = np.asarray(F.nullspace(An))
        assert N.shape == (n - len(pivots), n)
        if N.shape[0]:
            assert all(v == 0 for row in _py_matmul(A, N.T.tolist(), p) for v in row)
            assert len(_py_rref(N.tolist(), p)[1]) == N.shape[0]
        if m == n:
            assert F.det(An) == det
            if det:
                X = np.asarray(F.inv(An))
                assert _py_matmul(A, X.tolist(), p) == [[int(i == j) for j in range(n)] for i in range(n)]
            else:
                with pytest.raises(SingularMatrixError):
                    F.inv(An)
        B = [[int(x) for x in rng.integers(0, p, size=4, dtype=np.int64)] for _ in range(n)]
        got = np.asarray(F.matmul(An, np.array(B, dtype=np.int64)))
        assert [[int(x) for x in row] for row in got] == _py_matmul(A, B, p)


# ------------------------------------------------------------------------------ Z/n


def _bareiss_det(A):
    """Exact integer determinant by fraction-free Bareiss elimination (common practice)."""
    M = [[int(x) for x in row] for row in A]
    n = len(M)
    sign = 1
    previous = 1
    for k in range(n - 1):
        if M[k][k] == 0:
            swap = next((i for i in range(k + 1, n) if M[i][k] != 0), None)
            if swap is None:
                return 0
            M[k], M[swap] = M[swap], M[k]
            sign = -sign
        for i in range(k + 1, n):
            for j in range(k + 1, n):
                M[i][j] = (M[i][j] * M[k][k] - M[i][k] * M[k][j]) // previous
        previous = M[k][k]
    return sign * M[n - 1][n - 1]


def _ring_matrix(F, rng, n, modulus):
    if rng.random() < 0.15:
        values = [0, 1, modulus - 1, modulus // 2]
        return np.array([[values[int(i)] for i in rng.integers(0, 4, size=n)] for _ in range(n)], dtype=F.dtype)
    if modulus <= 2**63:
        return rng.integers(0, modulus, size=(n, n), dtype=np.int64).astype(F.dtype)
    return rng.integers(0, 2**64, size=(n, n), dtype=np.uint64, endpoint=False).astype(F.dtype)


def _check_singular_certificate(F, A, modulus, det, info):
    # DEVELOPERS.md contract: prime divides det (and n); kernel_vector v has A v = 0 mod n
    # with v != 0 mod n. (errors.py asks v != 0 mod prime, which cannot hold in general:
    # over Z/12 every kernel vector of diag(2, 1) is a multiple of (6, 0).)
    err = info.value
    assert err.prime is not None and sympy.isprime(int(err.prime))
    assert modulus % int(err.prime) == 0 and det % int(err.prime) == 0
    assert err.kernel_vector is not None
    v = [[int(x)] for x in err.kernel_vector]
    assert len(v) == len(A)
    assert all(row[0] == 0 for row in _py_matmul(A, v, modulus))
    assert any(int(x) % modulus for x in err.kernel_vector)


@pytest.mark.parametrize("modulus", [12, 2**16])
def test_zn_det_against_sympy(modulus):
    # sympy: Matrix.det() (exact over the integers) reduced mod n.
    F = gfla.field(f"Z/{modulus}")
    rng = _rng(modulus, "zn det")
    for case in range(CASES):
        n = int(rng.integers(1, 8))
        A = _ring_matrix(F, rng, n, modulus)
        expected = int(sympy.Matrix(A.astype(np.int64).tolist()).det()) % modulus
        assert F.det(A) == expected, (modulus, case, A.tolist())


@pytest.mark.parametrize("modulus", [12, 2**16])
def test_zn_inverse_against_sympy(modulus):
    # sympy: Matrix.inv_mod(n) for unit determinants; SingularMatrixError otherwise.
    F = gfla.field(f"Z/{modulus}")
    rng = _rng(modulus, "zn inv")
    refused = 0
    composite_kinds = len(sympy.factorint(modulus)) > 1
    for case in range(CASES):
        n = int(rng.integers(1, 7))
        A = _ring_matrix(F, rng, n, modulus)
        rows = A.astype(np.int64).tolist()
        det = int(sympy.Matrix(rows).det()) % modulus
        if math.gcd(det, modulus) != 1:
            refused += 1
            with pytest.raises(SingularMatrixError) as info:
                F.inv(A)
            _check_singular_certificate(F, rows, modulus, det, info)
            continue
        expected = [[int(x) for x in row] for row in sympy.Matrix(rows).inv_mod(modulus).tolist()]
        got = [[int(x) for x in row] for row in np.asarray(F.inv(A))]
        assert got == expected, (modulus, case, rows)
        if case % 4 == 0:
            required = ["cayley-hamilton", "crt" if composite_kinds else "hensel"]
            for method in required:
                assert [[int(x) for x in row] for row in np.asarray(F.inv(A, method=method))] == expected
            for method in ("gauss-jordan", "hensel" if composite_kinds else "crt"):
                # Not required on this modulus: refusing (an InputError, e.g.
                # MethodNotApplicableError) is allowed, a wrong inverse is not.
                try:
                    other = np.asarray(F.inv(A, method=method))
                except gfla.InputError:
                    continue
                assert [[int(x) for x in row] for row in other] == expected, (modulus, method)
    assert refused >= 20


def test_z_2_64_against_python_ints():
    # Python-int exact arithmetic: Bareiss det reduced mod 2^64 and A X = I mod 2^64.
    modulus = 2**64
    F = gfla.field("Z/18446744073709551616")
    assert F.size == modulus
    rng = _rng(modulus, "z 2^64")
    refused = 0
    for case in range(120):
        n = int(rng.integers(1, 9))
        A = _ring_matrix(F, rng, n, modulus)
        rows = [[int(x) for x in row] for row in A]
        det = _bareiss_det(rows) % modulus
        assert F.det(A) == det, (case, rows)
        if det % 2 == 0:
            refused += 1
            with pytest.raises(SingularMatrixError) as info:
                F.inv(A)
            _check_singular_certificate(F, rows, modulus, det, info)
            assert int(info.value.prime) == 2
            continue
        identity = [[int(i == j) for j in range(n)] for i in range(n)]
        X = [[int(x) for x in row] for row in np.asarray(F.inv(A))]
        assert all(0 <= x < modulus for row in X for x in row)
        assert _py_matmul(rows, X, modulus) == identity, (case, rows)
        if case % 4 == 0:
            for method in ("cayley-hamilton", "hensel"):
                Y = [[int(x) for x in row] for row in np.asarray(F.inv(A, method=method))]
                assert Y == X, method
    assert refused >= 20


@pytest.mark.parametrize("modulus", [12, 2**16, 2**64])
def test_zn_charpoly_against_sympy(modulus):
    # sympy: Matrix.charpoly over the integers, coefficients reduced mod n (Berkowitz
    # needs no division, so it is exact over any commutative ring).
    F = gfla.field(f"Z/{modulus}")
    rng = _rng(modulus, "zn charpoly")
    x = sympy.Symbol("x")
    for case in range(25):
        n = int(rng.integers(1, 7))
        A = _ring_matrix(F, rng, n, modulus)
        rows = [[int(v) for v in row] for row in A]
        expected = [int(c) % modulus for c in sympy.Matrix(rows).charpoly(x).all_coeffs()]
        for method in ("auto", "berkowitz"):
            assert [int(c) for c in F.charpoly(A, method=method)] == expected, (modulus, case)
