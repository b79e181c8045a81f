"""Tests of the erasure-coding job (gfla.jobs.erasure): generators, decoding matrices,
region kernels and shard files.

References outside the project, named beside each check:

* galois (general-purpose finite-field library): field arithmetic, matrix products and
  the multiplication used by the exhaustive rank checks;
* Vandermonde determinant det[a_i^j] = prod_{i<j} (a_j - a_i) (any linear algebra
  handbook);
* Cauchy determinant det[1/(x_i + y_j)] = prod_{i<j} (x_j - x_i)(y_j - y_i) /
  prod_{i,j} (x_i + y_j) (any linear algebra handbook; in characteristic 2 minus is plus);
* the MDS property of an (n, k) code: every k x k submatrix of the generator is
  invertible (common practice);
* SHA-256 from Python's hashlib (FIPS 180-4 implementation of the standard library).

galois.GF(2**8) defaults to x^8+x^4+x^3+x^2+1 (0x11d, galois 0.4), which is also gfla's
default; the tests pass the polynomial to galois explicitly anyway.
"""

import hashlib
import itertools
import os
import shutil
import signal
import subprocess
import sys
import tracemalloc

import galois
import numpy as np
import pytest

import gfla
from gfla.errors import InputError
from gfla.jobs.erasure import (ErasureCode, RegionMatrix, TooFewShardsError,
                               VerificationError, cauchy_matrix, decode_file, decoding_table,
                               encode_file, erasure_code, load_manifest, pattern_count,
                               repair_shards, vandermonde_matrix, verify_shards)
from gfla.jobs.erasure.regions import TableRegionMatrix

# GF(2^8) with the default modulus and with the AES polynomial x^8+x^4+x^3+x+1
# (FIPS 197, section 4.2), GF(2^16) with the default modulus. (Every distinct galois
# field costs seconds of JIT compilation, so the list is kept short.)
FIELD_CASES = [("GF(2^8)", 0x11D), ("GF(2^8)", 0x11B), ("GF(2^16)", 0x1002D)]


def _gf(size, modulus):
    return galois.GF(size, irreducible_poly=modulus)


def _field_and_reference(spec, modulus):
    F = gfla.field(spec, modulus=modulus)
    return F, _gf(int(F.size), int(F.modulus))


def _full_rank_batch(GF, mats):
    """True where each k x k matrix of the stack is invertible.

    Gaussian elimination written here on galois FieldArrays (galois does every product
    and inverse), batched over the stack with numpy indexing.
    """
    A = GF(np.asarray(mats, dtype=np.int64))
    batch, k, _ = A.shape
    ok = np.ones(batch, dtype=bool)
    idx = np.arange(batch)
    for c in range(k):
        candidates = np.asarray(A[:, c:, c]) != 0
        ok &= candidates.any(axis=1)
        p = c + np.argmax(candidates, axis=1)
        row_c = A[idx, c].copy()
        A[idx, c] = A[idx, p]
        A[idx, p] = row_c
        pivot = np.asarray(A[idx, c, c]).copy()
        pivot[pivot == 0] = 1
        A[idx, c] = A[idx, c] * (GF(pivot) ** -1)[:, None]
        factors = A[:, :, c].copy()
        factors[:, c] = 0
        A = A - factors[:, :, None] * A[:, c][:, None, :]
    return ok


def _subsets(n, k, limit, rng):
    total = 1
    for j in range(k):
        total = total * (n - j) // (j + 1)
    if total <= limit:
        return [list(s) for s in itertools.combinations(range(n), k)], True
    return [sorted(rng.choice(n, size=k, replace=False).tolist()) for _ in range(limit)], False


# --------------------------------------------------------------------------- generators

@pytest.mark.parametrize("construction", ["vandermonde", "cauchy"])
@pytest.mark.parametrize("spec,modulus,k,m", [
    ("GF(2^4)", None, 8, 8), ("GF(2^4)", None, 4, 12), ("GF(2^4)", None, 12, 4),
    ("GF(2^4)", None, 15, 1), ("GF(2^4)", None, 1, 15),
    ("GF(2^8)", 0x11D, 10, 4), ("GF(2^8)", 0x11B, 10, 4), ("GF(2^8)", 0x11D, 5, 5),
    ("GF(2^8)", 0x11B, 6, 3), ("GF(2^16)", None, 4, 4), ("GF(2^16)", None, 3, 5),
])
def test_mds_property_exhaustive(construction, spec, modulus, k, m):
    # MDS property (common practice): every k x k submatrix of the generator is
    # invertible; checked for every choice of k rows by elimination on galois arrays.
    # GF(2^4) with k + m = 16 is the field-size limit, all C(16, 8) = 12870 row sets.
    F = gfla.field(spec, modulus=modulus)
    GF = _gf(int(F.size), int(F.modulus))
    code = ErasureCode(F, k, m, construction)
    G = code.generator
    assert G.shape == (k + m, k)
    assert np.array_equal(G[:k], np.eye(k, dtype=np.int64))  # systematic
    rows = list(itertools.combinations(range(k + m), k))
    ok = _full_rank_batch(GF, G[np.array(rows)])
    assert ok.all(), [rows[i] for i in np.flatnonzero(~ok)[:5]]


@pytest.mark.parametrize("construction", ["vandermonde", "cauchy"])
@pytest.mark.parametrize("k,m", [(16, 240), (128, 128), (250, 6)])
def test_mds_at_field_size_sampled(construction, k, m):
    # k + m = 256 = |GF(2^8)|: the largest code; random k-row subsets must be invertible
    # (MDS property, common practice), elimination on galois arrays.
    F = gfla.field("GF(2^8)")
    GF = _gf(256, 0x11D)
    code = ErasureCode(F, k, m, construction)
    rng = np.random.default_rng(k * 7 + m)
    count = {16: 60, 128: 4, 250: 2}[k]
    rows, _ = _subsets(k + m, k, count, rng)
    assert _full_rank_batch(GF, code.generator[np.array(rows)]).all()
    with pytest.raises(InputError, match="only 256 elements"):
        ErasureCode(F, k, m + 1, construction)


def test_vandermonde_determinant_formula():
    # Vandermonde determinant det[a_i^j] = prod_{i<j} (a_j - a_i) (any linear algebra
    # handbook), products by galois, determinants by gfla, for every 4-row subset; and
    # det(G[S]) = det(V[S]) / det(V[:k]) since G = V (V[:k])^-1.
    for spec, modulus in (("GF(2^8)", 0x11D), ("GF(2^8)", 0x11B), ("GF(2^16)", None)):
        F = gfla.field(spec, modulus=modulus)
        GF = _gf(int(F.size), int(F.modulus))
        k, m = 4, 5
        points = list(range(k + m))
        V = vandermonde_matrix(F, points, k)
        assert np.array_equal(np.asarray(GF(points)[:, None] ** np.arange(k)[None, :]), V)
        G = ErasureCode(F, k, m, "vandermonde").generator
        top = GF(1)
        for i, j in itertools.combinations(range(k), 2):
            top *= GF(points[j]) - GF(points[i])
        for S in itertools.combinations(range(k + m), k):
            expected = GF(1)
            for i, j in itertools.combinations(S, 2):
                expected *= GF(points[j]) - GF(points[i])
            assert F.det(V[list(S)]) == int(expected), (spec, S)
            assert F.det(G[list(S)]) == int(expected / top), (spec, S)


def test_cauchy_determinant_formula():
    # Cauchy determinant det[1/(x_i + y_j)] = prod_{i<j}(x_j - x_i)(y_j - y_i) /
    # prod_{i,j}(x_i + y_j) (any linear algebra handbook), every square submatrix of the
    # parity block, arithmetic by galois, determinants by gfla.
    for spec, modulus in (("GF(2^8)", 0x11D), ("GF(2^8)", 0x11B), ("GF(2^16)", None)):
        F = gfla.field(spec, modulus=modulus)
        GF = _gf(int(F.size), int(F.modulus))
        k, m = 5, 4
        xs, ys = list(range(k, k + m)), list(range(k))
        C = cauchy_matrix(F, xs, ys)
        assert np.array_equal(np.asarray(GF(1) / (GF(xs)[:, None] + GF(ys)[None, :])), C)
        G = ErasureCode(F, k, m, "cauchy").generator
        assert np.array_equal(G[k:], C)
        for size in range(1, min(k, m) + 1):
            for I in itertools.combinations(range(m), size):
                for J in itertools.combinations(range(k), size):
                    num = GF(1)
                    for a, b in itertools.combinations(I, 2):
                        num *= GF(xs[b]) - GF(xs[a])
                    for a, b in itertools.combinations(J, 2):
                        num *= GF(ys[b]) - GF(ys[a])
                    den = GF(1)
                    for a in I:
                        for b in J:
                            den *= GF(xs[a]) + GF(ys[b])
                    got = F.det(C[np.ix_(I, J)])
                    assert got == int(num / den), (spec, I, J)
                    # The k x k submatrix of [I; C] keeping data rows outside J and
                    # parity rows I has the same determinant (expand along the identity
                    # rows; characteristic 2, so no sign).
                    S = sorted([d for d in range(k) if d not in J] + [k + i for i in I])
                    assert F.det(G[S]) == got


def test_parity_equals_galois_matmul():
    # Parity = G[k:] @ data computed by galois on random inputs, every field case and
    # construction, lengths that are not multiples of 8 bytes.
    rng = np.random.default_rng(11)
    for spec, modulus in FIELD_CASES:
        F, GF = _field_and_reference(spec, modulus)
        for construction in ("vandermonde", "cauchy"):
            for _ in range(4):
                k = int(rng.integers(1, 13))
                m = int(rng.integers(1, 9))
                code = ErasureCode(F, k, m, construction)
                symbols = int(rng.integers(1, 700))
                if code.symbol_bytes == 1:
                    data = rng.integers(0, 256, size=(k, symbols), dtype=np.uint8)
                    reference = np.asarray(GF(code.parity_matrix) @ GF(data.astype(np.int64)))
                    got = code.encode(data)
                else:
                    words = rng.integers(0, 1 << 16, size=(k, symbols)).astype("<u2")
                    data = words.view(np.uint8)
                    reference = np.asarray(GF(code.parity_matrix) @ GF(words.astype(np.int64)))
                    got = code.encode(data).view("<u2")
                assert np.array_equal(got, reference), (spec, modulus, construction, k, m)


def test_region_matrix_shapes_against_galois():
    # RegionMatrix.apply vs galois matmul: row counts around the group size of 4, zero
    # rows, permuted input rows, blocks that do not divide the length.
    rng = np.random.default_rng(5)
    for spec, modulus in (FIELD_CASES[1], FIELD_CASES[2]):
        F, GF = _field_and_reference(spec, modulus)
        q = int(F.size)
        for rows in (1, 2, 3, 4, 5, 8, 9):
            cols = int(rng.integers(1, 7))
            M = rng.integers(0, q, size=(rows, cols))
            M[rng.random(M.shape) < 0.2] = 0
            words = int(rng.integers(1, 90))
            src = rng.integers(0, 256, size=(cols + 3, 8 * words), dtype=np.uint8)
            order = rng.permutation(cols + 3)[:cols]
            region = RegionMatrix(F, M)
            dst = region.output_buffer(words)
            region.apply(np.ascontiguousarray(src.view(np.uint64)), order, dst, block=7)
            if q == 256:
                ref = np.asarray(GF(M) @ GF(src[order].astype(np.int64)))
                got = dst.view(np.uint8)[:rows]
            else:
                ref = np.asarray(GF(M) @ GF(src.view("<u2")[order].astype(np.int64)))
                got = dst.view("<u2")[:rows]
            assert np.array_equal(got, ref), (spec, rows, cols)


def test_table_method_against_galois():
    # The comparison kernel (packed product tables) vs galois matmul, GF(2^8) only.
    rng = np.random.default_rng(9)
    for modulus in (0x11D, 0x11B):
        F, GF = _field_and_reference("GF(2^8)", modulus)
        for rows in (1, 4, 8, 11):
            M = rng.integers(0, 256, size=(rows, 6))
            src = rng.integers(0, 256, size=(6, 1000), dtype=np.uint8)
            tables = TableRegionMatrix(F, M)
            dst = np.empty((tables.padded_rows, 1000), dtype=np.uint8)
            tables.apply(src, np.arange(6), dst, block=333)
            assert np.array_equal(dst[:rows], np.asarray(GF(M) @ GF(src.astype(np.int64))))


# --------------------------------------------------------------------------- decoding

def test_decoding_plans_against_galois():
    # For random patterns of up to m lost shards: inverse @ G[read] = I and every
    # decoding row reproduces the generator row of its lost shard, row @ G[read] = G[t]
    # (products by galois); the plan rebuilds random data byte-exactly.
    rng = np.random.default_rng(3)
    for spec, modulus in (FIELD_CASES[0], FIELD_CASES[2]):
        F, GF = _field_and_reference(spec, modulus)
        for construction in ("vandermonde", "cauchy"):
            code = ErasureCode(F, 7, 4, construction)
            G = GF(code.generator)
            data = rng.integers(0, 256, size=(7, 96), dtype=np.uint8)
            shards = np.vstack([data, code.encode(data)])
            for _ in range(25):
                lost = sorted(rng.choice(code.n, size=int(rng.integers(0, 5)), replace=False))
                plan = code.decoding_plan(lost)
                read = list(plan.read)
                assert len(read) == 7 and not set(read) & set(lost)
                assert read == [i for i in range(code.n) if i not in lost][:7]
                assert np.array_equal(np.asarray(GF(plan.inverse) @ G[read]), np.eye(7))
                if plan.targets:
                    assert np.array_equal(np.asarray(GF(plan.matrix) @ G[read]),
                                          np.asarray(G[list(plan.targets)]))
                    rebuilt = code.rebuild(plan, shards[read])
                    assert np.array_equal(rebuilt, shards[list(plan.targets)])
                assert plan.lost_data == tuple(t for t in lost if t < 7)
                assert plan.lost_parity == tuple(t for t in lost if t >= 7)


def test_too_many_lost_refused():
    code = erasure_code("GF(2^8)", 10, 4)
    with pytest.raises(TooFewShardsError) as info:
        code.decoding_plan([0, 3, 5, 11, 13])
    err = info.value
    assert "1 more missing" in str(err)
    assert err.certificate() == {"lost": [0, 3, 5, 11, 13], "intact": 9, "needed": 10,
                                 "short": 1}


@pytest.mark.parametrize("call,match", [
    (lambda: erasure_code("GF(2^8)", 0, 4), "at least 1"),
    (lambda: erasure_code("GF(2^8)", 4, -1), "at least 0"),
    (lambda: erasure_code("GF(2^8)", 200, 57), "only 256 elements"),
    (lambda: erasure_code("GF(2^8)", 4, 2, "reed"), "construction must be one of"),
    (lambda: erasure_code("GF(2^8)", 2.5, 2), "must be an integer"),
    (lambda: erasure_code("GF(7)", 2, 2), "GF\\(2\\^w\\)"),
    (lambda: erasure_code("GF(2^16)", 4000, 5000), "entries"),
    (lambda: erasure_code("GF(2^8)", 4, 2).decoding_plan([1, 1]), "listed twice"),
    (lambda: erasure_code("GF(2^8)", 4, 2).decoding_plan([6]), "does not exist"),
    (lambda: decoding_table(erasure_code("GF(2^8)", 4, 2), 3), "exceeds m"),
    (lambda: RegionMatrix(gfla.field("GF(2^4)"), [[1]]), "GF\\(2\\^8\\) or GF\\(2\\^16\\)"),
])
def test_code_input_errors(call, match):
    # Bad parameters are InputError (CLI exit 2) naming the rule (DEVELOPERS.md, errors).
    with pytest.raises(InputError, match=match):
        call()


def test_decoding_table_enumerates_every_pattern():
    # Number of patterns = sum_{j=1..L} C(n, j) (binomial count, common practice); every
    # entry equals the single-pattern plan.
    code = erasure_code("GF(2^8)", 10, 4, "cauchy")
    plans = list(decoding_table(code, 4))
    assert len(plans) == pattern_count(14, 4) == 14 + 91 + 364 + 1001
    seen = [p.lost for p in plans]
    assert len(set(seen)) == len(seen)
    assert sum(1 for p in plans if len(p.lost) == 4) == 1001
    for p in plans[::97]:
        again = code.decoding_plan(p.lost)
        assert again.read == p.read and np.array_equal(again.matrix, p.matrix)


# --------------------------------------------------------------------------- files

_DAMAGES = ("delete", "truncate", "flip", "extend", "foreign")


def _write(path, data):
    with open(path, "wb") as fh:
        fh.write(data)


def _read(path):
    with open(path, "rb") as fh:
        return fh.read()


def _damage(path, how, rng, foreign):
    size = os.path.getsize(path)
    if how in ("truncate", "flip") and size == 0:
        how = "delete"
    if how == "delete":
        os.unlink(path)
    elif how == "truncate":
        os.truncate(path, int(rng.integers(0, size)))
    elif how == "flip":
        data = bytearray(_read(path))
        data[int(rng.integers(0, size))] ^= 1 << int(rng.integers(0, 8))
        _write(path, bytes(data))
    elif how == "extend":
        with open(path, "ab") as fh:
            fh.write(b"\0")
    else:  # a shard of the same size from another file encoded with the same code
        _write(path, foreign)


def _restore(directory, backup):
    for name in os.listdir(directory):
        if name.endswith(".damaged") or ".damaged." in name:
            os.unlink(os.path.join(directory, name))
    for name, data in backup.items():
        path = os.path.join(directory, name)
        if not os.path.exists(path) or _read(path) != data:
            _write(path, data)


ROUND_TRIP_SETS = [
    # (field, construction, k, m, file size, chunk bytes, patterns)
    ("GF(2^8)", "vandermonde", 10, 4, 0, 16, 12),
    ("GF(2^8)", "vandermonde", 10, 4, 1, 16, 14),
    ("GF(2^8)", "cauchy", 10, 4, 1237, 24, 40),
    ("GF(2^8)", "vandermonde", 3, 2, 1000, 8, 26),
    ("GF(2^8)", "cauchy", 5, 3, 4099, 64, 30),
    ("GF(2^8)", "vandermonde", 1, 2, 77, 16, 12),
    ("GF(2^16)", "vandermonde", 4, 3, 1001, 16, 30),
    ("GF(2^16)", "cauchy", 6, 4, 3333, 40, 30),
    ("GF(2^8)", "cauchy", 20, 6, 20000, 128, 20),
]


@pytest.mark.parametrize("spec,construction,k,m,size,chunk,patterns", ROUND_TRIP_SETS)
def test_file_round_trips(tmp_path, spec, construction, k, m, size, chunk, patterns):
    # Round trips (byte-exact against the original bytes and hashlib's SHA-256): random
    # patterns of up to m lost or corrupted shards, file sizes 0, 1, not a multiple of
    # k, many chunks; then m + 1 damaged shards are refused with nothing written.
    # 214 patterns over all parameter sets.
    rng = np.random.default_rng(size * 31 + k)
    code = erasure_code(spec, k, m, construction)
    original = rng.integers(0, 256, size=size, dtype=np.uint8).tobytes()
    other = rng.integers(0, 256, size=size, dtype=np.uint8).tobytes()
    _write(tmp_path / "in.bin", original)
    _write(tmp_path / "other.bin", other)
    result = encode_file(tmp_path / "in.bin", tmp_path / "set", code, chunk_size=chunk)
    encode_file(tmp_path / "other.bin", tmp_path / "other", code, chunk_size=chunk)
    body = result["manifest"]
    assert body["original"]["sha256"] == hashlib.sha256(original).hexdigest()
    assert body["original"]["length"] == size
    shard_size = body["shard_size"]
    assert shard_size * k >= size and shard_size % code.symbol_bytes == 0
    assert shard_size < code.symbol_bytes + -(-size // k) or size == 0
    directory = tmp_path / "set"
    names = [entry["file"] for entry in body["shards"]]
    backup = {name: _read(directory / name) for name in names}
    # Systematic: data shard d is bytes d*S .. of the file, zero padded.
    padded = original + bytes(k * shard_size - size)
    for d in range(k):
        assert backup[names[d]] == padded[d * shard_size:(d + 1) * shard_size]
    for name in names:
        assert hashlib.sha256(backup[name]).hexdigest() == \
            next(e["sha256"] for e in body["shards"] if e["file"] == name)
    foreign = {name: _read(tmp_path / "other" / name) for name in names}
    for trial in range(patterns):
        count = int(rng.integers(0, m + 1))
        hit = sorted(rng.choice(code.n, size=count, replace=False).tolist())
        hows = {i: _DAMAGES[int(rng.integers(0, len(_DAMAGES)))] for i in hit}
        # Padding-only shards can coincide with the other file's: then damage differently.
        hows = {i: ("extend" if h == "foreign" and foreign[names[i]] == backup[names[i]]
                    else h) for i, h in hows.items()}
        for i, how in hows.items():
            _damage(directory / names[i], how, rng, foreign[names[i]])
        summary = verify_shards(directory)
        assert sorted(summary["missing"] + summary["corrupt"]) == hit, (trial, hows)
        out = tmp_path / f"out-{trial}.bin"
        decoded = decode_file(directory, out, chunk_size=chunk)
        assert _read(out) == original, (trial, hows)
        assert decoded["sha256"] == hashlib.sha256(original).hexdigest()
        os.unlink(out)
        if trial % 3 == 0:
            repaired = repair_shards(directory, chunk_size=chunk)
            assert repaired["repaired"] == hit
            for name in names:
                assert _read(directory / name) == backup[name], (trial, name)
        _restore(directory, backup)

    # m + 1 damaged shards: refused, naming them; no output file, no partial file.
    hit = sorted(rng.choice(code.n, size=m + 1, replace=False).tolist())
    for i in hit:
        _damage(directory / names[i], "delete" if i % 2 else "flip", rng, None)
    before = sorted(os.listdir(tmp_path))
    with pytest.raises(TooFewShardsError) as info:
        decode_file(directory, tmp_path / "never.bin", chunk_size=chunk)
    cert = info.value.certificate()
    assert sorted(cert["missing"] + cert["corrupt"]) == hit
    assert cert["short"] == 1 and cert["needed"] == k
    with pytest.raises(TooFewShardsError):
        repair_shards(directory, chunk_size=chunk)
    assert sorted(os.listdir(tmp_path)) == before
    assert not any(".gfla-partial-" in n for n in os.listdir(directory))


def test_encode_streams_with_bounded_memory(tmp_path):
    # 8 MiB input, 16 KiB chunks: the traced peak (numpy buffers are traced) stays far
    # below the input size (bounded memory, common practice for streaming).
    data = np.random.default_rng(1).integers(0, 256, size=8 << 20, dtype=np.uint8)
    _write(tmp_path / "big.bin", data.tobytes())
    del data
    code = erasure_code("GF(2^8)", 10, 4)
    encode_file(tmp_path / "big.bin", tmp_path / "tiny-warmup", code, chunk_size=16 << 10)
    shutil.rmtree(tmp_path / "tiny-warmup")
    tracemalloc.start()
    try:
        encode_file(tmp_path / "big.bin", tmp_path / "set", code, chunk_size=16 << 10)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    assert peak < 3 << 20, peak
    assert _read(tmp_path / "set" / "shard-03.bin")[:5] == _read(tmp_path / "big.bin")[
        3 * load_manifest(tmp_path / "set").shard_size:][:5]


def _interrupt_at(phase, after_calls=1):
    calls = {"n": 0}

    def progress(name, done, total):
        if name == phase:
            calls["n"] += 1
            if calls["n"] > after_calls:
                raise KeyboardInterrupt

    return progress


def test_interrupted_runs_leave_no_final_name(tmp_path):
    # An interrupt in the middle of encode, decode or repair publishes nothing and
    # leaves no temporary file behind (common practice: write, fsync, rename).
    code = erasure_code("GF(2^8)", 4, 2)
    original = bytes(range(256)) * 20
    _write(tmp_path / "in.bin", original)
    for phase in ("hashing input", "encoding", "checking shards"):
        with pytest.raises(KeyboardInterrupt):
            encode_file(tmp_path / "in.bin", tmp_path / "set", code, chunk_size=64,
                        progress=_interrupt_at(phase, 0 if phase == "hashing input" else 2))
        assert sorted(os.listdir(tmp_path)) == ["in.bin"], phase
    encode_file(tmp_path / "in.bin", tmp_path / "set", code, chunk_size=64)
    directory = tmp_path / "set"
    for phase in ("verifying shards", "decoding", "checking output"):
        with pytest.raises(KeyboardInterrupt):
            decode_file(directory, tmp_path / "out.bin", chunk_size=64,
                        progress=_interrupt_at(phase, 1))
        assert sorted(os.listdir(tmp_path)) == ["in.bin", "set"], phase
    os.unlink(directory / "shard-01.bin")
    _write(directory / "shard-04.bin", b"x" * os.path.getsize(directory / "shard-05.bin"))
    before = {n: _read(directory / n) for n in os.listdir(directory)}
    with pytest.raises(KeyboardInterrupt):
        repair_shards(directory, chunk_size=64, progress=_interrupt_at("rebuilding", 2))
    assert {n: _read(directory / n) for n in os.listdir(directory)} == before


_KILLER = r"""
import os, signal, sys
from gfla.jobs.erasure import erasure_code, encode_file, decode_file
def progress(phase, done, total):
    if phase == sys.argv[1] and done > 0:
        os.kill(os.getpid(), signal.SIGKILL)
code = erasure_code("GF(2^8)", 4, 2)
if sys.argv[1] == "checking output":
    decode_file(sys.argv[2], sys.argv[3], chunk_size=64, progress=progress)
else:
    encode_file(sys.argv[2], sys.argv[3], code, chunk_size=64, progress=progress)
"""


def test_killed_runs_leave_no_final_name(tmp_path):
    # A process killed outright (SIGKILL) after writing everything but before the
    # rename: the final name does not exist (only a hidden partial entry may remain).
    _write(tmp_path / "in.bin", os.urandom(5000))
    script = tmp_path / "killer.py"
    script.write_text(_KILLER)
    run = subprocess.run([sys.executable, str(script), "checking shards",
                          str(tmp_path / "in.bin"), str(tmp_path / "set")], timeout=120)
    assert run.returncode == -signal.SIGKILL
    assert not os.path.exists(tmp_path / "set")
    encode_file(tmp_path / "in.bin", tmp_path / "set", erasure_code("GF(2^8)", 4, 2))
    run = subprocess.run([sys.executable, str(script), "checking output",
                          str(tmp_path / "set"), str(tmp_path / "out.bin")], timeout=120)
    assert run.returncode == -signal.SIGKILL
    assert not os.path.exists(tmp_path / "out.bin")
    leftovers = [n for n in os.listdir(tmp_path) if n.startswith(".")]
    assert leftovers and all(".gfla-partial-" in n for n in leftovers)


def test_never_overwrites(tmp_path):
    # Issue requirement: never overwrite an input or an existing file.
    code = erasure_code("GF(2^8)", 3, 2)
    _write(tmp_path / "in.bin", b"invented payload " * 50)
    encode_file(tmp_path / "in.bin", tmp_path / "set", code)
    with pytest.raises(InputError, match="not empty"):
        encode_file(tmp_path / "in.bin", tmp_path / "set", code)
    shard = tmp_path / "set" / "shard-00.bin"
    kept = _read(shard)
    with pytest.raises(InputError, match="already exists"):
        decode_file(tmp_path / "set", shard)
    with pytest.raises(InputError, match="already exists"):
        decode_file(tmp_path / "set", tmp_path / "in.bin")
    assert _read(shard) == kept and _read(tmp_path / "in.bin") == b"invented payload " * 50
    # An existing empty directory is a valid destination (replaced in one step).
    os.mkdir(tmp_path / "empty")
    encode_file(tmp_path / "in.bin", tmp_path / "empty", code)
    assert len(os.listdir(tmp_path / "empty")) == 6


def _rewrite_manifest(directory, edit, reseal=True):
    import json

    from gfla.jobs.erasure.manifest import canonical_digest, manifest_text

    path = os.path.join(directory, "manifest.json")
    with open(path) as fh:
        body = json.load(fh)
    edit(body)
    if reseal:
        body.pop("manifest_sha256", None)
        body["manifest_sha256"] = canonical_digest(body)
    with open(path, "w") as fh:
        fh.write(manifest_text(body))


@pytest.mark.parametrize("edit,match", [
    (lambda b: b["shards"][2].update(file="../escape.bin"), "not a plain name"),
    (lambda b: b["shards"][2].update(file="/etc/passwd"), "not a plain name"),
    (lambda b: b["shards"][2].update(file="sub/dir.bin"), "not a plain name"),
    (lambda b: b["shards"][2].update(file=".hidden"), "not a plain name"),
    (lambda b: b["shards"][3].update(file=b["shards"][2]["file"]), "named twice"),
    (lambda b: b["code"].update(data_shards=4), "generator"),
    (lambda b: b["code"].update(construction="cauchy"), "generator"),
    (lambda b: b["code"].update(field="GF(2^4)"), "not one of"),
    (lambda b: b["code"].update(parity_shards=300), "only 256 elements"),
    (lambda b: b.update(shard_size=b["shard_size"] + 1), "does not fit"),
    (lambda b: b["original"].update(length=-1), "negative"),
    (lambda b: b["shards"].pop(), "shard entries"),
    (lambda b: b.update(format_version=9), "not supported"),
    (lambda b: b.update(format="something-else"), "not a gfla erasure manifest"),
])
def test_manifest_refusals(tmp_path, edit, match):
    # Issue requirement: a manifest naming a path outside its directory, or describing
    # another code, or inconsistent, is refused (InputError) and nothing is written.
    code = erasure_code("GF(2^8)", 3, 2)
    _write(tmp_path / "in.bin", b"0123456789" * 30)
    encode_file(tmp_path / "in.bin", tmp_path / "set", code)
    _rewrite_manifest(tmp_path / "set", edit)
    with pytest.raises(InputError, match=match):
        verify_shards(tmp_path / "set")
    with pytest.raises(InputError, match=match):
        decode_file(tmp_path / "set", tmp_path / "out.bin")
    assert not os.path.exists(tmp_path / "out.bin")
    assert not os.path.exists(tmp_path / "escape.bin")


def test_manifest_edit_and_symlink_refused(tmp_path):
    # Issue requirement: edited manifests, symbolic links, malformed JSON, missing DIR.
    code = erasure_code("GF(2^8)", 3, 2)
    _write(tmp_path / "in.bin", b"abcdefghij" * 30)
    encode_file(tmp_path / "in.bin", tmp_path / "set", code)
    # Edited without resealing: the self-checksum catches it.
    _rewrite_manifest(tmp_path / "set", lambda b: b["original"].update(length=299),
                      reseal=False)
    with pytest.raises(InputError, match="edited or damaged"):
        verify_shards(tmp_path / "set")
    shutil.rmtree(tmp_path / "set")
    encode_file(tmp_path / "in.bin", tmp_path / "set", code)
    # A shard replaced by a symbolic link (here to a copy of the right bytes) is refused.
    target = tmp_path / "elsewhere.bin"
    shutil.copy(tmp_path / "set" / "shard-01.bin", target)
    os.unlink(tmp_path / "set" / "shard-01.bin")
    os.symlink(target, tmp_path / "set" / "shard-01.bin")
    for call in (lambda: verify_shards(tmp_path / "set"),
                 lambda: decode_file(tmp_path / "set", tmp_path / "out.bin"),
                 lambda: repair_shards(tmp_path / "set")):
        with pytest.raises(InputError, match="symbolic link"):
            call()
    assert not os.path.exists(tmp_path / "out.bin")
    # Malformed JSON.
    _write(tmp_path / "set" / "manifest.json", b'{"format": "gfla-erasure-set",')
    with pytest.raises(InputError, match="not valid JSON"):
        verify_shards(tmp_path / "set")
    with pytest.raises(InputError, match="no such directory"):
        verify_shards(tmp_path / "nowhere")


def test_manifest_of_another_file_refused(tmp_path):
    # The manifest of another encoding (same code, other content) placed beside these
    # shards: every shard fails its checksum, decode refuses (exit 1 class) and writes
    # nothing.
    code = erasure_code("GF(2^8)", 3, 2)
    _write(tmp_path / "a.bin", b"A" * 300)
    _write(tmp_path / "b.bin", b"B" * 300)
    encode_file(tmp_path / "a.bin", tmp_path / "a", code)
    encode_file(tmp_path / "b.bin", tmp_path / "b", code)
    shutil.copy(tmp_path / "b" / "manifest.json", tmp_path / "a" / "manifest.json")
    summary = verify_shards(tmp_path / "a")
    assert summary["corrupt"] == [0, 1, 2, 3, 4] and not summary["recoverable"]
    with pytest.raises(TooFewShardsError, match="0 of 5 shards intact"):
        decode_file(tmp_path / "a", tmp_path / "out.bin")
    assert not os.path.exists(tmp_path / "out.bin")


def test_rebuilt_mismatch_is_refused(tmp_path):
    # If the data read does not produce the recorded checksums (here: a shard changed
    # after the manifest's checksum was resealed to match it), nothing is published.
    code = erasure_code("GF(2^8)", 3, 2)
    _write(tmp_path / "in.bin", bytes(range(200)))
    encode_file(tmp_path / "in.bin", tmp_path / "set", code)
    path = tmp_path / "set" / "shard-04.bin"
    bad = bytearray(_read(path))
    bad[0] ^= 0xFF
    _write(path, bytes(bad))
    _rewrite_manifest(tmp_path / "set", lambda b: b["shards"][4].update(
        sha256=hashlib.sha256(bytes(bad)).hexdigest()))
    os.unlink(tmp_path / "set" / "shard-00.bin")
    os.unlink(tmp_path / "set" / "shard-03.bin")  # so the bad parity shard 4 is read
    with pytest.raises(VerificationError, match="does not match"):
        decode_file(tmp_path / "set", tmp_path / "out.bin")
    assert sorted(os.listdir(tmp_path)) == ["in.bin", "set"]


def test_demo_section_rebuilds_the_invented_archive():
    from gfla.jobs.erasure.demo import FAILURES, demo_section, format_text, invented_archive

    d = demo_section(json_mode=True)
    import json

    json.dumps(d)
    assert d["disks"] == 14 and d["code"]["data_shards"] == 10
    assert sorted(d["verify"]["missing"] + d["verify"]["corrupt"]) == sorted(FAILURES)
    # hashlib SHA-256 of the invented archive, recomputed here.
    assert d["archive"]["sha256"] == hashlib.sha256(invented_archive()).hexdigest()
    assert d["rebuilt"]["sha256"] == d["archive"]["sha256"]
    assert d["rebuilt"]["matches_original"] and d["repair"]["all_intact_after"]
    assert len(d["decoding_matrix_all"]["matrix"]) == 4
    text = format_text(demo_section(json_mode=False))
    assert "rebuilt file equals the original: yes" in text
