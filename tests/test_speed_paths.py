"""Tests of the fast paths (issue "Speed"): limb and float64 products, Strassen-Winograd,
GF(2) M4RM and its Strassen levels, bit-sliced GF(2^k) products, the block-recursive
elimination (PLE, triangular solves, Schur-complement inversion) and the Krylov
characteristic polynomial.

Each fast path is checked against gfla's simple reference path (Gauss-Jordan kernels,
the Hessenberg kernel, log/exp tables) at sizes on both sides of its cutoffs, and
against outside references: Python integers (exact products), galois (products,
inverses, determinants, ranks, reduced echelon forms over GF(65521), GF(2^8), GF(2)),
sympy (prime search near the limb boundaries, characteristic polynomials). Cutoffs are
lowered with monkeypatch where the real ones are too large for a test. No timing is
asserted.
"""

import galois
import numpy as np
import pytest
import sympy

import gfla
from gfla.kernels import binary, extension
from gfla.linalg import blocked, charpoly, multiply


# ------------------------------------------------------------------- references
def int_product(A, B, n=None):
    """A B with Python integers, reduced mod n when given (exact; common practice)."""
    P = np.asarray(A).astype(object).dot(np.asarray(B).astype(object))
    return P if n is None else P % n


def gf2_product(A, B):
    """Product over GF(2) as an integer product mod 2 (float64 is exact: sums <= k)."""
    return (np.rint(A.astype(np.float64) @ B.astype(np.float64)).astype(np.int64) % 2
            ).astype(np.uint8)


def galois_of(F):
    if F.modulus is not None and F.size != F.characteristic:
        return galois.GF(int(F.size), irreducible_poly=int(F.modulus))
    return galois.GF(int(F.size))


def _ints(G):
    """A galois array as int64."""
    return np.asarray(G).astype(np.int64)


def low_rank(F, m, n, r, seed):
    """An m x n matrix of rank at most r (a product m x r by r x n)."""
    X = F.random((m, r), seed=seed).astype(np.uint64)
    Y = F.random((r, n), seed=seed + 1).astype(np.uint64)
    return F._matmul(X, Y)


# ------------------------------------------------------------- limbs, float64
def _plan_boundaries(k):
    """For inner dimension k: the largest bit length each limb scheme is chosen for."""
    last = {}
    for nbits in range(2, 65):
        L, _, _ = multiply.limb_plan(nbits, k)
        last[L] = nbits
    return last


@pytest.mark.parametrize("k", [7, 300, 1024])
def test_limb_schemes_at_the_top_of_each_range(k):
    # Python integers (exact), at the largest prime below 2^b for the largest b of each
    # scheme (sympy.prevprime) and at the two largest moduli of Z/n, 2^64 and the
    # largest prime below it; all-top entries maximise every leaf product.
    rng = np.random.default_rng(k)
    moduli = set()
    for L, nbits in _plan_boundaries(k).items():
        moduli.add(int(sympy.prevprime(1 << nbits)))
        if nbits < 64:
            moduli.add(int(sympy.nextprime(1 << nbits)))  # the next scheme's bottom
    moduli |= {1 << 64, (1 << 64) - 59}  # 2^64 - 59: largest prime below 2^64
    for n in sorted(moduli):
        for fill in ("top", "random"):
            if fill == "top":
                A = np.full((3, k), (n - 1) % (1 << 64), dtype=np.uint64)
                B = np.full((k, 5), (n - 1) % (1 << 64), dtype=np.uint64)
            else:
                hi = min(n, 1 << 64) - 1
                A = rng.integers(0, hi, (4, k), dtype=np.uint64, endpoint=True)
                B = rng.integers(0, hi, (k, 6), dtype=np.uint64, endpoint=True)
            got = multiply.modular_matmul(A, B, n)
            assert (got.astype(object) == int_product(A, B, n)).all(), (n, k, fill)


def test_karatsuba_schemes_interpolate_exactly():
    # The interpolation matrix of each scheme maps the leaf products of two random limb
    # vectors to the coefficients of the schoolbook limb product (Python integers).
    rng = np.random.default_rng(1)
    for L, (sub, M, _) in multiply.SCHEMES.items():
        a = [int(x) for x in rng.integers(0, 1 << 20, L)]
        b = [int(x) for x in rng.integers(0, 1 << 20, L)]
        leaves = [sum(a[t] for t in range(L) if sub[s, t]) *
                  sum(b[t] for t in range(L) if sub[s, t]) for s in range(sub.shape[0])]
        coeffs = [sum(int(M[d, s]) * leaves[s] for s in range(len(leaves)))
                  for d in range(M.shape[0])]
        school = [sum(a[i] * b[d - i] for i in range(L) if 0 <= d - i < L)
                  for d in range(2 * L - 1)]
        assert coeffs == school, L


@pytest.mark.parametrize("shape", [(33, 47, 29), (64, 64, 64), (65, 130, 17), (40, 9, 300)])
def test_strassen_winograd_over_float64_is_exact(shape):
    # Python integers; cutoffs 4 and 16 force several levels with odd-size peeling, and
    # the bound forces the level count down where entries grow too much.
    m, k, n = shape
    rng = np.random.default_rng(m * k * n)
    for bound in (65520, (1 << 20) - 1, 1 << 24):
        A = rng.integers(0, bound + 1, (m, k)).astype(np.float64)
        B = rng.integers(0, bound + 1, (k, n)).astype(np.float64)
        if k * bound * bound >= 1 << 53:
            continue
        expected = int_product(A.astype(np.int64), B.astype(np.int64))
        for cutoff in (4, 16):
            got = multiply.int_product(A, B, bound, bound, cutoff=cutoff)
            assert (got.astype(np.int64).astype(object) == expected).all(), (shape, bound)


@pytest.mark.parametrize("spec", ["GF(65521)", "GF(2147483647)", "GF(2305843009213693951)"])
def test_modular_products_through_strassen_against_galois(monkeypatch, spec):
    # galois matmul; the Strassen cutoff lowered to 16 so the product recurses.
    monkeypatch.setattr(multiply, "STRASSEN_FLOAT_CUTOFF", 16)
    F = gfla.field(spec)
    G = galois_of(F)
    for shape in ((37, 70, 41), (64, 64, 64)):
        A = F.random(shape[:2], seed=1)
        B = F.random(shape[1:], seed=2)
        expected = np.asarray(G(A.astype(np.int64)) @ G(B.astype(np.int64)))
        assert np.array_equal(F.matmul(A, B).astype(np.int64), expected.astype(np.int64))


# -------------------------------------------------------------------------- GF(2)
@pytest.mark.parametrize("shape", [(130, 300, 200), (257, 129, 190), (1100, 70, 130),
                                   (64, 2200, 64), (3, 5, 7)])
def test_binary_product_strassen_and_m4rm(shape):
    # integer product mod 2 (reference above); cutoffs 64 and 100 make Strassen levels
    # with word-aligned splits and peeled remainders; 1100 rows cross the 1024-row
    # block of M4RM, 2200 columns the 32-word column block.
    m, k, n = shape
    rng = np.random.default_rng(m + k + n)
    A = rng.integers(0, 2, (m, k), dtype=np.uint8)
    B = rng.integers(0, 2, (k, n), dtype=np.uint8)
    expected = gf2_product(A, B)
    for cutoff in (None, 64, 100):
        C = multiply.binary_product(binary.pack(A), binary.pack(B), cutoff)
        assert np.array_equal(binary.unpack(C, n), expected), (shape, cutoff)
    C = np.empty((m, (n + 63) // 64), dtype=np.uint64)
    binary.matmul_parallel(binary.pack(A), binary.pack(B), C, 2)
    assert np.array_equal(binary.unpack(C, n), expected)


def test_binary_product_against_galois():
    # galois.GF2 matrix product.
    rng = np.random.default_rng(5)
    A = rng.integers(0, 2, (150, 140), dtype=np.uint8)
    B = rng.integers(0, 2, (140, 170), dtype=np.uint8)
    F = gfla.field("GF(2)")
    expected = np.asarray(galois.GF2(A) @ galois.GF2(B)).astype(np.uint8)
    assert np.array_equal(F.matmul(A, B), expected)


# ------------------------------------------------------------------------ GF(2^k)
def test_bitslice_roundtrip():
    # unslice(bitslice(A)) == A, and plane t holds bit t (common practice: the
    # polynomial-basis coordinates of each element).
    rng = np.random.default_rng(3)
    for k in (2, 8, 11, 16):
        for m, c in ((1, 1), (3, 70), (9, 129)):
            A = rng.integers(0, 1 << k, (m, c), dtype=np.uint64)
            P = np.empty((k, m, (c + 63) // 64), dtype=np.uint64)
            extension.bitslice(A, k, P)
            for t in range(k):
                plane = binary.unpack(P[t], c)
                assert np.array_equal(plane, ((A >> np.uint64(t)) & np.uint64(1)).astype(np.uint8))
            back = np.empty_like(A)
            extension.unslice(P, c, back)
            assert np.array_equal(back, A)


@pytest.mark.parametrize("spec,modulus", [("GF(2^8)", 0x11B), ("GF(2^3)", None),
                                          ("GF(2^5)", None), ("GF(2^16)", None)])
def test_extension_methods_against_galois(monkeypatch, spec, modulus):
    # galois matmul, for the table, bit-slicing (with and without Karatsuba on the
    # planes) and float64 methods, and for the automatic choice on both sides of the
    # bit-slicing cutoff (47 and 48 rows and columns).
    F = gfla.field(spec, modulus=modulus)
    G = galois_of(F)
    rng = np.random.default_rng(F.k)
    for m, k, n in ((47, 60, 47), (48, 60, 48), (70, 9, 65), (130, 129, 3)):
        A = rng.integers(0, F.size, (m, k), dtype=np.uint64)
        B = rng.integers(0, F.size, (k, n), dtype=np.uint64)
        expected = np.asarray(G(A.astype(np.int64)) @ G(B.astype(np.int64))).astype(np.uint64)
        for method in ("auto", "table", "bitslice", "float"):
            got = multiply.extension_matmul(F, A, B, method)
            assert np.array_equal(got, expected), (spec, m, k, n, method)
        monkeypatch.setattr(multiply, "EXTENSION_KARATSUBA_MIN", 1)
        for depth in (1, 8):
            monkeypatch.setattr(multiply, "EXTENSION_KARATSUBA_DEPTH", depth)
            got = multiply.extension_matmul(F, A, B, "bitslice")
            assert np.array_equal(got, expected), (spec, m, k, n, "karatsuba", depth)
        monkeypatch.undo()


# ---------------------------------------------------------- block-recursive PLE
# Shapes on both sides of the recursion base (16 columns dense, 64 GF(2)), the
# triangular-solve base (48; 64 for GF(2)), BLOCKED_MIN (64), odd and
# non-power-of-two, wide and tall; ranks full and deficient.
SHAPES = [(17, 17, None), (49, 49, None), (63, 63, None), (65, 65, None), (97, 97, None),
          (130, 97, 60),
          (97, 250, None), (150, 150, 149), (200, 200, 60), (70, 300, 5), (129, 129, 0)]
BLOCK_FIELDS = [
    ("GF(65521)", None),                 # float64 backend
    ("GF(4194301)", None),               # largest prime below 2^22: float64 up to n ~ 256
    ("GF(8388593)", None),               # largest prime below 2^23: uint64 backend above ~64
    ("GF(2147483647)", None),            # 2 limbs
    ("GF(9223372036854775783)", None),   # largest prime below 2^63: 3 limbs
    ("GF(7)", None),
    ("GF(2^8)", 0x11B),
    ("GF(2^4)", None),
    ("GF(2)", None),                     # bit-packed
]


def _square_cases(F, n, seed):
    """Random, permutation (singular leading blocks), block anti-diagonal, singular."""
    rng = np.random.default_rng(seed)
    perm = np.eye(n, dtype=np.uint64)[rng.permutation(n)]
    anti = np.zeros((n, n), dtype=np.uint64)
    h = n // 2
    anti[:h, n - h:] = F.random(h, invertible=True, seed=seed).astype(np.uint64)
    anti[h:, :n - h] = F.random(n - h, invertible=True, seed=seed + 1).astype(np.uint64)
    return {"random": F.random(n, seed=seed).astype(np.uint64), "permutation": perm,
            "anti-diagonal": anti, "singular": low_rank(F, n, n, n - 2, seed)}


def _internal(F, U):
    return U.astype(np.uint8) if F.spec == "GF(2)" else U.astype(np.uint64)


@pytest.mark.parametrize("spec,modulus", BLOCK_FIELDS)
def test_ple_rref_rank_det_inverse_against_gauss_jordan(spec, modulus):
    # gfla's reference path: Gauss-Jordan kernels (dense.rref, binary M4RI).
    F = gfla.field(spec, modulus=modulus)
    for idx, (m, n, r) in enumerate(SHAPES):
        if F.spec == "GF(2)" and m < 60:
            continue
        if r is None:
            U = F.random((m, n), seed=idx).astype(np.uint64)
        elif r == 0:
            U = np.zeros((m, n), dtype=np.uint64)
        else:
            U = low_rank(F, m, n, r, idx)
        U = _internal(F, U)
        R_ref = U.copy()
        piv_ref, det_ref = F._rref_gauss_jordan(R_ref)
        R, piv, d = blocked.rref(F, U)
        assert list(piv) == list(piv_ref), (spec, m, n, r)
        assert np.array_equal(R.astype(np.uint64), R_ref.astype(np.uint64)), (spec, m, n, r)
        assert blocked.rank(F, U) == len(piv_ref)
        assert blocked.rank_auto(F, U) == len(piv_ref)
        if m == n and F.spec != "GF(2)":
            assert blocked.det(F, U) == (det_ref if len(piv_ref) == n else 0)
    for n in (97, 130):
        for kind, U in _square_cases(F, n, n).items():
            U = _internal(F, U)
            Xr = F._inverse_gauss_jordan(U)
            for inv in (blocked.inverse, blocked.inverse_auto,
                        lambda F_, U_: blocked.schur_inverse(F_, U_, base=16)):
                X = inv(F, U)
                assert (X is None) == (Xr is None), (spec, n, kind)
                if X is not None:
                    assert np.array_equal(X.astype(np.uint64), Xr.astype(np.uint64))
            if F.spec != "GF(2)":
                d_ref = F._det_gauss_jordan(U)
                assert blocked.schur_det(F, U, base=16) == d_ref, (spec, n, kind)
                assert blocked.det_auto(F, U) == d_ref


@pytest.mark.parametrize("spec,modulus", [("GF(65521)", None), ("GF(2^8)", 0x11B),
                                          ("GF(2)", None)])
def test_public_api_above_the_cutoffs_against_galois(spec, modulus):
    # galois: np.linalg.inv, np.linalg.det, np.linalg.matrix_rank, FieldArray.row_reduce;
    # the nullspace checked by multiplying back with galois; sizes above BLOCKED_MIN
    # (GF(2): M4RI there, and the block path called directly).
    F = gfla.field(spec, modulus=modulus)
    G = galois_of(F)
    for n, rank in ((130, None), (131, 100)):
        A = F.random(n, seed=n) if rank is None else F._out(low_rank(F, n, n, rank, n))
        GA = G(A.astype(np.int64))
        assert F.rank(A) == int(np.linalg.matrix_rank(GA))
        assert F.det(A) == int(np.linalg.det(GA))
        R, piv = F.rref(A)
        assert np.array_equal(R.astype(np.int64), _ints(GA.row_reduce()))
        if rank is None and F.det(A):
            assert np.array_equal(F.inv(A).astype(np.int64), _ints(np.linalg.inv(GA)))
        N = F.nullspace(A)
        assert N.shape[0] == n - int(np.linalg.matrix_rank(GA))
        if N.shape[0]:
            assert not np.asarray(GA @ G(N.astype(np.int64)).T).any()
    if F.spec == "GF(2)":
        A = F.random(200, seed=4)
        GA = G(A.astype(np.int64))
        R, piv, _ = blocked.rref(F, A)
        assert np.array_equal(R.astype(np.int64), _ints(GA.row_reduce()))
        if np.linalg.det(GA):
            assert np.array_equal(blocked.inverse(F, A).astype(np.int64),
                                  np.asarray(np.linalg.inv(GA)).astype(np.int64))


def test_solve_above_the_cutoff():
    # Solutions checked by multiplying back with Python integers (exact); the system
    # sizes straddle BLOCKED_MIN, one consistent and one inconsistent right-hand side.
    F = gfla.field("GF(65521)")
    for n in (95, 97, 140):
        A = F._out(low_rank(F, n, n, n - 3, n))
        x = F.random((n, 1), seed=1)[:, 0]
        b = F._out(F._matmul(A.astype(np.uint64), x.reshape(-1, 1).astype(np.uint64)))[:, 0]
        sol = F.solve(A, b)
        assert sol.consistent
        assert (int_product(A, sol.particular.reshape(-1, 1), 65521)[:, 0]
                == b.astype(object)).all()
        assert sol.nullspace.shape[0] == 3
        assert not int_product(A, sol.nullspace.T, 65521).any()
        bad = b.copy()
        bad[0] = (int(bad[0]) + 1) % 65521
        if not F.solve(A, bad).consistent:
            continue
        # rank n - 3: some perturbation must leave the column space; try the others
        assert any(not F.solve(A, np.roll(bad, s)).consistent for s in range(1, 5))


# -------------------------------------------------------------- Krylov charpoly
def _structured(F, n, kind, seed):
    rng = np.random.default_rng(seed)
    if kind == "random":
        return F.random(n, seed=seed).astype(np.uint64)
    if kind == "scalar":
        return np.eye(n, dtype=np.uint64) * np.uint64(min(3, F.size - 1))
    if kind == "nilpotent":
        return np.triu(F.random(n, seed=seed).astype(np.uint64), 1)
    if kind == "repeated blocks":
        b = n // 4
        B = F.random(b, seed=seed).astype(np.uint64)
        U = np.zeros((n, n), dtype=np.uint64)
        for i in range(4):
            U[i * b:(i + 1) * b, i * b:(i + 1) * b] = B
        U[4 * b:, 4 * b:] = F.random(n - 4 * b, seed=seed + 1).astype(np.uint64)
        P = np.eye(n, dtype=np.uint64)[rng.permutation(n)]
        return F._matmul(F._matmul(P, U), P.T.copy())
    raise ValueError(kind)


@pytest.mark.parametrize("spec,modulus", [("GF(65521)", None), ("GF(2)", None), ("GF(3)", None),
                                          ("GF(2^8)", 0x11B), ("GF(2305843009213693951)", None)])
def test_krylov_charpoly_against_hessenberg(spec, modulus):
    # gfla's reference, the Hessenberg kernel; n = 130 is above KRYLOV_MIN (the auto
    # choice for the small fields), the structured matrices are derogatory (several
    # Krylov rounds).
    F = gfla.field(spec, modulus=modulus)
    n = 130
    assert n >= charpoly.KRYLOV_MIN
    for i, kind in enumerate(("random", "scalar", "nilpotent", "repeated blocks")):
        U = _internal(F, _structured(F, n, kind, i))
        expected = F._hessenberg(U)
        assert charpoly._krylov(F, U) == expected, (spec, kind)
    A = F.random(n, seed=9)
    assert F.charpoly(A) == F.charpoly(A, method="hessenberg")


def test_krylov_charpoly_against_sympy_and_companion():
    # sympy Matrix.charpoly over the integers reduced mod p, at small n with the Krylov
    # method forced; and the companion matrix of a chosen polynomial, whose
    # characteristic polynomial is that polynomial (common practice).
    p = 65521
    F = gfla.field(f"GF({p})")
    x = sympy.Symbol("x")
    for n in (17, 23):
        A = F.random(n, seed=n)
        coeffs = sympy.Matrix(A.astype(np.int64).tolist()).charpoly(x).all_coeffs()
        expected = [int(c) % p for c in coeffs]
        assert F.charpoly(A, method="krylov") == expected
    rng = np.random.default_rng(2)
    coeffs = [1] + [int(c) for c in rng.integers(0, p, 150)]
    n = len(coeffs) - 1
    C = np.zeros((n, n), dtype=np.int64)
    C[np.arange(1, n), np.arange(n - 1)] = 1
    C[:, -1] = [(-c) % p for c in coeffs[::-1][:n]]
    assert F.charpoly(C) == coeffs


def test_krylov_refused_over_rings():
    R = gfla.field("Z/12")
    with pytest.raises(gfla.MethodNotApplicableError):
        R.charpoly(np.eye(3, dtype=np.int64), method="krylov")


# ------------------------------------------------------------------- BLAS threads
def test_blas_single_thread_restores_the_setting():
    # The context manager leaves numpy's BLAS thread count as it found it (and products
    # inside it are unchanged: numpy's own product outside the context).
    funcs = multiply._openblas_threads()
    X = np.arange(64 * 64, dtype=np.float64).reshape(64, 64) % 7
    outside = X @ X
    before = int(funcs[0]()) if funcs else None
    with multiply.blas_single_thread():
        inside = X @ X
        if funcs:
            assert int(funcs[0]()) == 1
    if funcs:
        assert int(funcs[0]()) == before
    assert np.array_equal(inside, outside)


def test_prime_matmul_fast_entry_path():
    # Python integers (exact). The one-pass validation and float64 conversion of
    # PrimeField.matmul gives the general path's results and errors: int64, uint64 and
    # non-contiguous inputs agree, an entry out of range is named by row and column.
    F = gfla.field("GF(65521)")
    A = F.random((40, 70), seed=1)
    B = F.random((70, 30), seed=2)
    expected = int_product(A, B, 65521)
    for X, Y in ((A, B), (A.astype(np.uint64), B), (np.asfortranarray(A), B[:, ::1]),
                 (A.tolist(), B)):
        C = F.matmul(X, Y)
        assert C.dtype == np.int64 and (C.astype(object) == expected).all()
    bad = A.copy()
    bad[2, 5] = 65521
    with pytest.raises(gfla.InputError, match="row 3, column 6"):
        F.matmul(bad, B)
    bad[2, 5] = -1
    with pytest.raises(gfla.InputError, match="row 3, column 6"):
        F.matmul(bad, B)
    with pytest.raises(gfla.InputError, match="cannot multiply"):
        F.matmul(A, A)
