"""Tests of the batched kernels (gfla.kernels.batch) through gfla.linalg.batched.

Every batched result is compared with the per-matrix API (F.inv, F.det, F.rank,
F.solve, F.nullspace) on random stacks that include singular and rank-deficient
matrices, and checked against references outside gfla: galois for determinants and
ranks over GF(p) and GF(2^k), and products computed with Python integers or galois
(tests/conftest.py ``ref_matmul``) for A X = I, A v = 0 and A x = b.
"""

import galois
import numpy as np
import pytest

import gfla
from gfla.linalg import batched

from conftest import galois_field_of, ref_matmul

# (spec, modulus): GF(2) (modular context n = 2), small and large primes, and GF(2^k)
# with the AES modulus (FIPS 197 section 4.2) and the default for k = 16.
FIELDS = [("GF(2)", None), ("GF(7)", None), ("GF(65521)", None), ("GF(2^61-1)", None),
          ("GF(2^8)", 0x11B), ("GF(2^16)", None)]
SIZES = [1, 2, 3, 4, 7, 16]


def _field(spec, modulus):
    return gfla.field(spec, modulus=modulus)


def _stack(F, N, m, n, seed):
    """Random matrices, about a third made deficient (a row equal to the sum of two
    others, a zero column, or all zero)."""
    rng = np.random.default_rng(seed)
    A = rng.integers(0, F.size, size=(N, m, n), dtype=np.uint64).astype(F.dtype)
    for k in range(N):
        kind = k % 6
        if kind == 1 and m >= 3:
            A[k, 2] = F.add(A[k, 0], A[k, 1])
        elif kind == 3 and n >= 2:
            A[k, :, n - 1] = 0
        elif kind == 5 and k % 12 == 5:
            A[k] = 0
    return A


def _is_zero(rows):
    return all(int(x) == 0 for row in rows for x in row)


def _galois_det(F, A):
    G = galois_field_of(F)
    return int(np.linalg.det(G(np.asarray(A, dtype=np.int64))))


def _galois_rank(F, A):
    G = galois_field_of(F)
    return int(np.linalg.matrix_rank(G(np.asarray(A, dtype=np.int64))))


@pytest.mark.parametrize("spec,modulus", FIELDS)
def test_inverse_det_rank_match_per_matrix_api(spec, modulus):
    F = _field(spec, modulus)
    for n in SIZES:
        N = 12 if n <= 8 else 4
        A = _stack(F, N, n, n, seed=100 + n)
        inv = batched.inv(F, A)
        det = batched.det(F, A)
        rank = batched.rank(F, A)
        assert inv.inverse.shape == (N, n, n) and det.shape == (N,) and rank.shape == (N,)
        for k in range(N):
            d_ref = _galois_det(F, A[k])  # galois: an outside reference
            assert int(det[k]) == d_ref == F.det(A[k])
            assert int(rank[k]) == _galois_rank(F, A[k]) == F.rank(A[k])
            assert bool(inv.singular[k]) == (d_ref == 0)
            if d_ref:
                assert np.array_equal(inv.inverse[k], F.inv(A[k]))
                prod = ref_matmul(F, A[k], inv.inverse[k])
                assert prod == np.eye(n, dtype=np.int64).tolist()
                assert not inv.kernel_vectors[k].any()
            else:
                v = inv.kernel_vectors[k]
                assert v.any()
                assert _is_zero(ref_matmul(F, A[k], v.reshape(-1, 1)))
                # Documented: the first basis vector of the nullspace from the RREF.
                assert np.array_equal(v, F.nullspace(A[k])[0])
                err = batched.singular_error(F, inv, k)
                assert isinstance(err, gfla.SingularMatrixError)
                assert err.certificate()["kernel_vector"] == [int(x) for x in v]
                assert not inv.inverse[k].any()


def test_size_32_and_singular_fraction_over_gf2():
    # Over GF(2) a uniformly random 4 x 4 matrix is singular with probability
    # 1 - (1/2)(3/4)(7/8)(15/16) = 0.69, from the order of GL(n, q),
    # prod (q^n - q^i) (common practice); a third of this stack is made deficient on
    # top of that. The point: a stack where most matrices are singular.
    F = _field("GF(2)", None)
    A = _stack(F, 400, 4, 4, seed=7)
    inv = batched.inv(F, A)
    dets = [_galois_det(F, a) for a in A]
    assert inv.singular.tolist() == [d == 0 for d in dets]
    assert 0.5 < inv.singular.mean() < 0.9
    F8 = _field("GF(2^8)", 0x11B)
    B = _stack(F8, 6, 32, 32, seed=8)
    r = batched.inv(F8, B)
    for k in range(6):
        assert int(batched.det(F8, B[k:k + 1])[0]) == _galois_det(F8, B[k])
        if not r.singular[k]:
            assert np.array_equal(r.inverse[k], F8.inv(B[k]))


@pytest.mark.parametrize("spec,modulus", FIELDS)
def test_solve_and_nullspace_match_per_matrix_api(spec, modulus):
    F = _field(spec, modulus)
    rng = np.random.default_rng(5)
    for m, n in [(1, 1), (3, 3), (4, 4), (2, 5), (5, 3), (8, 8)]:
        N = 12
        A = _stack(F, N, m, n, seed=m * 31 + n)
        B = rng.integers(0, F.size, size=(N, m), dtype=np.uint64).astype(F.dtype)
        # Half of the right-hand sides are A times a vector, so consistent for sure.
        for k in range(0, N, 2):
            x0 = rng.integers(0, F.size, size=(n, 1), dtype=np.uint64).astype(F.dtype)
            B[k] = np.array(ref_matmul(F, A[k], x0), dtype=F.dtype).ravel()
        s = batched.solve(F, A, B)
        basis, nullity = batched.nullspace(F, A)
        for k in range(N):
            api = F.solve(A[k], B[k])
            r = _galois_rank(F, A[k])
            assert bool(s.consistent[k]) == bool(api.consistent)
            if k % 2 == 0:
                assert s.consistent[k]
            assert int(s.nullity[k]) == n - r == len(api.nullspace) == int(nullity[k])
            rows = s.nullspace[k, :s.nullity[k]]
            assert np.array_equal(rows, basis[k, :nullity[k]])
            assert not s.nullspace[k, s.nullity[k]:].any()
            if len(rows):
                assert _is_zero(ref_matmul(F, A[k], rows.T))
                assert _galois_rank(F, rows) == len(rows)  # a basis: independent rows
                assert np.array_equal(rows, api.nullspace)
            if s.consistent[k]:
                x = s.particular[k]
                assert np.array_equal(np.array(ref_matmul(F, A[k], x.reshape(-1, 1)),
                                               dtype=np.int64).ravel(),
                                      B[k].astype(np.int64))
                assert np.array_equal(x, api.particular)
            else:
                assert not s.particular[k].any()


def test_residue_rings_go_through_the_per_matrix_path():
    for spec in ("Z/12", "Z/2^64", "Z/9"):
        F = _field(spec, None)
        rng = np.random.default_rng(3)
        A = rng.integers(0, min(F.size, 1 << 62), size=(20, 3, 3), dtype=np.uint64)
        A[::4, 0] = 0
        r = batched.inv(F, A)
        d = batched.det(F, A)
        for k in range(len(A)):
            assert int(d[k]) == F.det(A[k])
            try:
                X = F.inv(A[k])
            except gfla.SingularMatrixError as exc:
                assert r.singular[k]
                err = batched.singular_error(F, r, k)
                assert err.certificate() == exc.certificate()
                assert err.prime is not None and F.size % err.prime == 0
            else:
                assert not r.singular[k]
                assert np.array_equal(r.inverse[k], X)
        s = batched.solve(F, A, A[:, :, 0].copy())
        for k in range(len(A)):
            api = F.solve(A[k], A[k, :, 0])
            assert bool(s.consistent[k]) == bool(api.consistent)
            if api.consistent:
                assert np.array_equal(s.particular[k], api.particular)


def test_matrices_above_32_go_through_the_per_matrix_path():
    F = _field("GF(2^8)", 0x11B)
    A = _stack(F, 3, 33, 33, seed=12)
    assert not batched.uses_kernels(F, (33, 33)) and batched.uses_kernels(F, (32, 32))
    r = batched.inv(F, A)
    d = batched.det(F, A)
    for k in range(3):
        assert int(d[k]) == _galois_det(F, A[k])
        assert bool(r.singular[k]) == (int(d[k]) == 0)
        if not r.singular[k]:
            assert np.array_equal(r.inverse[k], F.inv(A[k]))
        else:
            assert _is_zero(ref_matmul(F, A[k], r.kernel_vectors[k].reshape(-1, 1)))


def test_validation_of_stacks():
    F = _field("GF(7)", None)
    with pytest.raises(gfla.InputError, match="outside GF"):
        batched.inv(F, np.full((2, 2, 2), 7))
    with pytest.raises(gfla.InputError, match="3-D"):
        batched.det(F, np.eye(2, dtype=np.int64))
    with pytest.raises(gfla.InputError, match="square"):
        batched.inv(F, np.zeros((3, 2, 4), dtype=np.int64))
    with pytest.raises(gfla.InputError, match="right-hand sides"):
        batched.solve(F, np.zeros((3, 2, 2), dtype=np.int64), np.zeros((3, 3), dtype=np.int64))
    empty = batched.inv(F, np.zeros((0, 3, 3), dtype=np.int64))
    assert empty.inverse.shape == (0, 3, 3) and empty.singular.shape == (0,)
    assert batched.rank(F, np.zeros((0, 2, 5), dtype=np.int64)).shape == (0,)


def test_aes_mixcolumns_inverse_in_a_stack():
    # FIPS 197 section 5.1.3 eq. (5.6) and section 5.3.3 eq. (5.10): the two matrices are
    # each other's inverse over GF(2^8) with modulus 0x11b.
    F = _field("GF(2^8)", 0x11B)
    mix = [[2, 3, 1, 1], [1, 2, 3, 1], [1, 1, 2, 3], [3, 1, 1, 2]]
    inv_mix = [[14, 11, 13, 9], [9, 14, 11, 13], [13, 9, 14, 11], [11, 13, 9, 14]]
    r = batched.inv(F, np.array([mix, inv_mix] * 100))
    assert not r.singular.any()
    assert r.inverse[0].tolist() == inv_mix and r.inverse[1].tolist() == mix
    assert (r.inverse[::2] == np.array(inv_mix)).all()
    G = galois.GF(2**8, irreducible_poly=0x11B)
    assert np.array_equal(np.linalg.inv(G(mix)), G(inv_mix))
