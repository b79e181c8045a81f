"""Tests of the bit-packed GF(2) kernels (gfla.kernels.binary).

Every kernel is checked two ways:
- against a plain reference written here (integer matrix product mod 2,
  Gauss-Jordan mod 2 one column at a time on unpacked 0/1 arrays), and
- against the general-purpose library galois (galois.GF2), named in a comment
  beside each such check.
"""

import galois
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from gfla.kernels import binary

SIZES = [1, 63, 64, 65, 127, 128, 200]
SHAPES = [(1, 1), (1, 200), (200, 1), (63, 65), (65, 63), (64, 128), (127, 64), (130, 257)]


# ---------------------------------------------------------------- references

def reference_matmul(A, B):
    """Product over GF(2): integer product reduced mod 2.

    The integer product is formed in float64, which is exact here: every sum
    is at most the inner dimension, far below 2^53.
    """
    assert A.shape[1] < 2**53
    product = np.rint(A.astype(np.float64) @ B.astype(np.float64)).astype(np.int64)
    return (product % 2).astype(np.uint8)


def reference_rref(A):
    """Gauss-Jordan mod 2, one pivot column at a time, on a 0/1 array."""
    R = np.array(A, dtype=np.uint8)
    m, n = R.shape
    pivots = []
    r = 0
    for c in range(n):
        if r == m:
            break
        below = np.flatnonzero(R[r:, c])
        if below.size == 0:
            continue
        h = r + below[0]
        if h != r:
            R[[r, h]] = R[[h, r]]
        others = np.flatnonzero(R[:, c])
        others = others[others != r]
        R[others] ^= R[r]
        pivots.append(c)
        r += 1
    return R, pivots


def random_bits(rng, m, n):
    return rng.integers(0, 2, size=(m, n), dtype=np.uint8)


def random_of_rank(rng, m, n, r):
    """A 0/1 matrix of rank at most r (a product m x r by r x n)."""
    return reference_matmul(random_bits(rng, m, r), random_bits(rng, r, n))


def random_invertible(rng, n):
    """L U with unit triangular L, U, rows permuted: invertible by construction."""
    L = np.tril(random_bits(rng, n, n), -1) | np.eye(n, dtype=np.uint8)
    U = np.triu(random_bits(rng, n, n), 1) | np.eye(n, dtype=np.uint8)
    return reference_matmul(L, U)[rng.permutation(n)]


def assert_padding_zero(P, ncols):
    """Bits at column positions >= ncols in the last word are 0."""
    w = P.shape[-1]
    assert w == (ncols + 63) // 64
    if ncols % 64 and P.size:
        assert not np.any(P[..., -1] >> np.uint64(ncols % 64))


def matrix_cases(rng):
    """(name, matrix) pairs: full rank, rank-deficient and zero, many shapes."""
    cases = []
    for n in SIZES:
        cases.append(("random %dx%d" % (n, n), random_bits(rng, n, n)))
        cases.append(("rank<=%d %dx%d" % (n // 2, n, n), random_of_rank(rng, n, n, max(n // 2, 1))))
    for m, n in SHAPES:
        cases.append(("random %dx%d" % (m, n), random_bits(rng, m, n)))
        cases.append(("rank<=3 %dx%d" % (m, n), random_of_rank(rng, m, n, 3)))
    cases.append(("zero 65x130", np.zeros((65, 130), np.uint8)))
    cases.append(("zero 1x1", np.zeros((1, 1), np.uint8)))
    cases.append(("identity 128", np.eye(128, dtype=np.uint8)))
    return cases


CASES = matrix_cases(np.random.default_rng(20240611))
CASE_IDS = [name for name, _ in CASES]


# ---------------------------------------------------------------- pack / unpack

def test_pack_layout():
    # Layout of the storage contract: entry (i, j) is bit j % 64 of word j // 64.
    A = np.zeros((2, 130), np.uint8)
    A[0, 0] = 1
    A[0, 65] = 1
    A[1, 63] = 1
    A[1, 129] = 1
    P = binary.pack(A)
    assert P.dtype == np.uint64 and P.shape == (2, 3)
    assert P[0].tolist() == [1, 2, 0]
    assert P[1].tolist() == [1 << 63, 0, 2]


@pytest.mark.parametrize("m, n", [(0, 5), (3, 0), (1, 1), (5, 63), (5, 64), (5, 65), (3, 1000)])
def test_pack_unpack_roundtrip(m, n):
    A = random_bits(np.random.default_rng(n), m, n)
    P = binary.pack(A)
    assert P.shape == (m, binary.word_count(n))
    assert_padding_zero(P, n)
    assert np.array_equal(binary.unpack(P, n), A)
    # Reference: bit j of row i read back with plain integer arithmetic.
    for i in range(m):
        for j in range(0, n, 7):
            assert (int(P[i, j // 64]) >> (j % 64)) & 1 == A[i, j]


# ---------------------------------------------------------------- products

MATMUL_SHAPES = [
    (1, 1, 1), (3, 7, 5), (5, 9, 70), (63, 63, 63), (64, 64, 64), (65, 65, 65),
    (127, 71, 128), (128, 128, 127), (200, 200, 200), (17, 1001, 33),
    # k not a multiple of 8 (last Gray-code table only partly filled)
    (9, 1, 9), (9, 13, 9), (40, 129, 70),
    # more than one column block of the output (block of 32 words = 2048 columns)
    (3, 70, 2049), (5, 65, 4100),
]


@pytest.mark.parametrize("m, k, n", MATMUL_SHAPES)
def test_matmul(m, k, n):
    rng = np.random.default_rng(m * 10007 + k * 101 + n)
    A = random_bits(rng, m, k)
    B = random_bits(rng, k, n)
    PA, PB = binary.pack(A), binary.pack(B)
    expected = reference_matmul(A, B)
    C = np.full((m, binary.word_count(n)), np.uint64(2**64 - 1))  # garbage: must be cleared
    binary.matmul(PA, PB, C)
    assert_padding_zero(C, n)
    assert np.array_equal(binary.unpack(C, n), expected)
    D = np.full_like(C, np.uint64(12345))
    binary.matmul_naive(PA, PB, D)
    assert np.array_equal(D, C)
    if m * k * n <= 200**3:
        # galois: product in GF(2)
        assert np.array_equal(np.asarray(galois.GF2(A) @ galois.GF2(B)), expected)


def test_matmul_1000_against_galois():
    rng = np.random.default_rng(1000)
    A = random_bits(rng, 1000, 1000)
    B = random_of_rank(rng, 1000, 1000, 500)
    C = np.empty((1000, 16), np.uint64)
    binary.matmul(binary.pack(A), binary.pack(B), C)
    assert_padding_zero(C, 1000)
    # galois: product in GF(2)
    assert np.array_equal(binary.unpack(C, 1000), np.asarray(galois.GF2(A) @ galois.GF2(B)))
    assert np.array_equal(binary.unpack(C, 1000), reference_matmul(A, B))


def test_matmul_zero_and_identity():
    rng = np.random.default_rng(7)
    A = random_bits(rng, 65, 130)
    PA = binary.pack(A)
    C = np.empty((65, 3), np.uint64)
    binary.matmul(PA, binary.pack(np.eye(130, dtype=np.uint8)), C)
    assert np.array_equal(C, PA)
    binary.matmul(PA, binary.pack(np.zeros((130, 130), np.uint8)), C)
    assert not C.any()


def test_matmul_rejects_bad_shapes():
    A = np.zeros((4, 2), np.uint64)      # 4 x (65..128)
    B = np.zeros((100, 1), np.uint64)    # 100 x (1..64)
    with pytest.raises(ValueError):
        binary.matmul(A, np.zeros((60, 1), np.uint64), np.zeros((4, 1), np.uint64))
    with pytest.raises(ValueError):
        binary.matmul(A, B, np.zeros((4, 2), np.uint64))
    with pytest.raises(ValueError):
        binary.matmul_naive(A, np.zeros((60, 1), np.uint64), np.zeros((4, 1), np.uint64))


@pytest.mark.parametrize("m, n", [(1, 1), (63, 64), (64, 65), (65, 127), (128, 128), (200, 1000)])
def test_matvec(m, n):
    rng = np.random.default_rng(m + 3 * n)
    A = random_bits(rng, m, n)
    x = random_bits(rng, 1, n)
    y = np.full(binary.word_count(m), np.uint64(2**64 - 1))
    binary.matvec(binary.pack(A), binary.pack(x)[0], y)
    assert_padding_zero(y, m)
    expected = reference_matmul(A, x.T)[:, 0]
    assert np.array_equal(binary.unpack(y[None, :], m)[0], expected)
    # galois: matrix-vector product in GF(2)
    assert np.array_equal(np.asarray(galois.GF2(A) @ galois.GF2(x[0])), expected)


# ---------------------------------------------------------------- elimination

@pytest.mark.parametrize("name, A", CASES, ids=CASE_IDS)
def test_rref_rank_nullspace(name, A):
    m, n = A.shape
    R_ref, pivots_ref = reference_rref(A)
    P = binary.pack(A)
    pivots = binary.rref(P, n)
    assert pivots.dtype == np.int64
    assert pivots.tolist() == pivots_ref
    assert_padding_zero(P, n)
    assert np.array_equal(binary.unpack(P, n), R_ref)
    # galois: reduced row echelon form and rank over GF(2)
    G = galois.GF2(A)
    assert np.array_equal(binary.unpack(P, n), np.asarray(G.row_reduce()))
    assert len(pivots) == np.linalg.matrix_rank(G)

    Q = binary.pack(A)
    assert binary.rank(Q, n) == len(pivots_ref)

    N = binary.nullspace(P, pivots, n)
    assert N.shape == (n - len(pivots), binary.word_count(n))
    assert_padding_zero(N, n)
    Nu = binary.unpack(N, n)
    assert not reference_matmul(A, Nu.T).any()
    # A basis: as many independent rows as the nullity.
    assert len(reference_rref(Nu)[1]) == n - len(pivots)
    # galois: the kernel {x : A x = 0}; same row space as our basis
    K = np.asarray(G.null_space())
    if K.shape[0]:
        assert np.array_equal(reference_rref(Nu)[0], reference_rref(K)[0])
    else:
        assert Nu.shape[0] == 0


@pytest.mark.parametrize("n", [1000])
def test_rref_1000(n):
    rng = np.random.default_rng(n)
    A = random_of_rank(rng, n, n + 37, 900)
    P = binary.pack(A)
    pivots = binary.rref(P, n + 37)
    R_ref, pivots_ref = reference_rref(A)
    assert pivots.tolist() == pivots_ref
    assert np.array_equal(binary.unpack(P, n + 37), R_ref)
    # galois: reduced row echelon form over GF(2)
    assert np.array_equal(binary.unpack(P, n + 37), np.asarray(galois.GF2(A).row_reduce()))
    assert binary.rank(binary.pack(A), n + 37) == 900 == len(pivots)
    N = binary.nullspace(P, pivots, n + 37)
    assert N.shape[0] == n + 37 - 900
    assert not reference_matmul(A, binary.unpack(N, n + 37).T).any()


def test_rref_pivot_block_crossing_words():
    # Pivots scattered across word boundaries and inside 32-column windows.
    n = 200
    cols = [0, 5, 31, 32, 33, 63, 64, 65, 70, 127, 128, 130, 199]
    A = np.zeros((len(cols) + 3, n), np.uint8)
    rng = np.random.default_rng(5)
    for i, c in enumerate(cols):
        A[i, c] = 1
        A[i, c + 1:] = random_bits(rng, 1, n - c - 1)
    A[len(cols):] = reference_matmul(random_bits(rng, 3, len(cols)), A[: len(cols)])
    A = A[rng.permutation(A.shape[0])]
    P = binary.pack(A)
    pivots = binary.rref(P, n)
    R_ref, pivots_ref = reference_rref(A)
    assert pivots.tolist() == pivots_ref == cols
    assert np.array_equal(binary.unpack(P, n), R_ref)


def test_rref_ncols_narrower_than_storage():
    # Pivots only among the first ncols columns; later columns carried along.
    rng = np.random.default_rng(11)
    A = random_bits(rng, 50, 130)
    A[:, :40] = random_of_rank(rng, 50, 40, 10)
    P = binary.pack(A)
    pivots = binary.rref(P, 40)
    assert len(pivots) == 10 and pivots.max() < 40
    R = binary.unpack(P, 130)
    assert np.array_equal(R[:, :40], reference_rref(A[:, :40])[0])
    # Same row operations on every column: the rows still span the row space of A.
    assert len(reference_rref(np.vstack([R, A]))[1]) == len(reference_rref(A)[1])


@settings(max_examples=40, deadline=None)
@given(
    m=st.integers(1, 140),
    n=st.integers(1, 140),
    r=st.integers(1, 140),
    seed=st.integers(0, 2**32 - 1),
)
def test_rref_matmul_property(m, n, r, seed):
    rng = np.random.default_rng(seed)
    A = random_of_rank(rng, m, n, r)
    B = random_bits(rng, n, r)
    C = np.empty((m, binary.word_count(r)), np.uint64)
    binary.matmul(binary.pack(A), binary.pack(B), C)
    assert np.array_equal(binary.unpack(C, r), reference_matmul(A, B))
    P = binary.pack(A)
    pivots = binary.rref(P, n)
    R_ref, pivots_ref = reference_rref(A)
    assert pivots.tolist() == pivots_ref
    assert np.array_equal(binary.unpack(P, n), R_ref)


# ---------------------------------------------------------------- inverse

@pytest.mark.parametrize("n", SIZES + [1000])
def test_inverse(n):
    rng = np.random.default_rng(n + 1)
    A = random_invertible(rng, n)
    P = binary.pack(A)
    before = P.copy()
    out = np.full_like(P, np.uint64(2**64 - 1))
    assert binary.inverse(P, n, out)
    assert np.array_equal(P, before)
    assert_padding_zero(out, n)
    X = binary.unpack(out, n)
    identity = np.eye(n, dtype=np.uint8)
    assert np.array_equal(reference_matmul(A, X), identity)
    assert np.array_equal(reference_matmul(X, A), identity)
    if n <= 200:
        # galois: inverse over GF(2)
        assert np.array_equal(X, np.asarray(np.linalg.inv(galois.GF2(A))))


@pytest.mark.parametrize("n", [2, 63, 64, 65, 127, 128])
def test_inverse_uniform_random(n):
    # Uniform random matrices: retry until one is invertible (probability ~0.29 each).
    rng = np.random.default_rng(n + 2)
    while True:
        A = random_bits(rng, n, n)
        if len(reference_rref(A)[1]) == n:
            break
    out = np.empty((n, binary.word_count(n)), np.uint64)
    assert binary.inverse(binary.pack(A), n, out)
    # galois: inverse over GF(2)
    assert np.array_equal(binary.unpack(out, n), np.asarray(np.linalg.inv(galois.GF2(A))))


@pytest.mark.parametrize("n", [1, 63, 64, 65, 128, 200])
def test_inverse_singular(n):
    rng = np.random.default_rng(n + 3)
    w = binary.word_count(n)
    out = np.empty((n, w), np.uint64)
    assert not binary.inverse(np.zeros((n, w), np.uint64), n, out)
    if n > 1:
        A = random_invertible(rng, n)
        A[n - 1] = A[0] ^ A[n // 2] if n > 2 else A[0]
        assert len(reference_rref(A)[1]) < n
        # galois: rank over GF(2) confirms the matrix is singular
        assert np.linalg.matrix_rank(galois.GF2(A)) < n
        assert not binary.inverse(binary.pack(A), n, out)


def test_inverse_one_by_one():
    out = np.empty((1, 1), np.uint64)
    assert binary.inverse(np.array([[1]], np.uint64), 1, out)
    assert out.tolist() == [[1]]


# ---------------------------------------------------------------- batched rank

@pytest.mark.parametrize("count, m, n", [(200, 4, 4), (50, 8, 70), (6, 70, 65), (3, 130, 200)])
def test_rank_batch(count, m, n):
    rng = np.random.default_rng(count + m + n)
    stack = np.empty((count, m, n), np.uint8)
    for s in range(count):
        stack[s] = random_of_rank(rng, m, n, int(rng.integers(1, min(m, n) + 1)))
    stack[0] = 0
    P3 = np.stack([binary.pack(M) for M in stack])
    ranks = binary.rank_batch(P3, n)
    assert ranks.dtype == np.int64 and ranks.shape == (count,)
    expected = [len(reference_rref(M)[1]) for M in stack]
    assert ranks.tolist() == expected
    assert ranks[0] == 0
    # galois: rank over GF(2), on a sample of the stack
    for s in range(0, count, max(1, count // 5)):
        assert ranks[s] == np.linalg.matrix_rank(galois.GF2(stack[s]))


# ------------------------------------------- block-elimination base kernels

@pytest.mark.parametrize("m, k, n", [(1100, 130, 70), (300, 64, 2100), (5, 3, 1)])
def test_matmul_parallel_bands(m, k, n):
    # reference product mod 2; bands of rows on 1, 2 and 3 threads' worth of chunks
    rng = np.random.default_rng(m + k + n)
    A = random_bits(rng, m, k)
    B = random_bits(rng, k, n)
    for chunks in (1, 2, 3):
        C = np.empty((m, binary.word_count(n)), np.uint64)
        binary.matmul_parallel(binary.pack(A), binary.pack(B), C, chunks)
        assert np.array_equal(binary.unpack(C, n), reference_matmul(A, B))
        assert_padding_zero(C, n)


@pytest.mark.parametrize("m, nbits", [(70, 64), (130, 40), (3, 64), (64, 1)])
def test_ple_base_on_a_block(m, nbits):
    # The block sits at row 5, word 1 of a larger matrix: columns outside it and rows
    # outside it are untouched; P L E of the block equals the block (reference product
    # mod 2), E's pivots are the reference rref's pivots (column rank profile).
    rng = np.random.default_rng(m * nbits)
    block = random_of_rank(rng, m, nbits, max(1, min(m, nbits) // 2)) if m > 4 \
        else random_bits(rng, m, nbits)
    root = random_bits(rng, m + 9, 64 * 3)
    root[5:5 + m, 64:64 + nbits] = block
    if nbits < 64:
        root[5:5 + m, 64 + nbits:128] = 0  # a block ends on a word boundary or at the end
    P = binary.pack(root)
    before = P.copy()
    perm = np.empty(m, np.int64)
    piv = np.empty(min(m, nbits), np.int64)
    r = binary.ple_base(P, 5, 1, m, nbits, perm, piv)
    assert list(piv[:r]) == reference_rref(block)[1]
    rows = np.s_[5:5 + m]
    assert np.array_equal(np.delete(P, rows, axis=0), np.delete(before, rows, axis=0))
    assert np.array_equal(P[5:5 + m, [0, 2]], before[5:5 + m, [0, 2]])
    out = binary.unpack(P[5:5 + m, 1:2], nbits)
    E = np.zeros((r, nbits), np.uint8)
    L = np.zeros((m, r), np.uint8)
    for i in range(r):
        E[i, piv[i]:] = out[i, piv[i]:]
        L[i, i] = 1
    for k in range(r):
        L[k + 1:, k] = out[k + 1:, piv[k]]
    assert np.array_equal(reference_matmul(L, E), block[perm])


def test_triangular_solves_and_column_moves():
    # L^-1 B and U^-1 B checked by multiplying back (reference product mod 2);
    # gather then scatter of scattered columns restores them.
    rng = np.random.default_rng(11)
    r, w = 90, 150
    L = np.tril(random_bits(rng, r, r), -1) | np.eye(r, dtype=np.uint8)
    U = np.triu(random_bits(rng, r, r), 1) | np.eye(r, dtype=np.uint8)
    B = random_bits(rng, r, w)
    for T, solve in ((L, binary.trsm_lower_unit), (U, binary.trsm_upper_unit)):
        junk = T ^ (random_bits(rng, r, r) & (np.triu(np.ones((r, r), np.uint8), 1)
                                              if solve is binary.trsm_lower_unit
                                              else np.tril(np.ones((r, r), np.uint8), -1)))
        X = binary.pack(B)
        solve(binary.pack(junk), 0, 0, r, X, 0, 0, X.shape[1])
        assert np.array_equal(reference_matmul(T, binary.unpack(X, w)), B)
    cols = np.array(sorted(rng.choice(w, 77, replace=False)), np.int64)
    P = binary.pack(B)
    G = np.empty((r, binary.word_count(len(cols))), np.uint64)
    binary.gather_columns(P, 0, r, cols, G)
    assert np.array_equal(binary.unpack(G, len(cols)), B[:, cols])
    Z = np.zeros_like(P)
    binary.scatter_columns(G, cols, Z, 0)
    expected = np.zeros_like(B)
    expected[:, cols] = B[:, cols]
    assert np.array_equal(binary.unpack(Z, w), expected)
