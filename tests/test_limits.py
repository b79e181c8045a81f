"""Sizes are checked before allocation (gfla.limits and its callers).

Every refusal is checked for its estimate in the message, and the same size is run
again with a limit exactly at the estimate, where it must work. The limit comes from
GFLA_MEMORY_LIMIT, so nothing here depends on the memory of the machine running it.
Expected byte counts are computed here with plain Python ints (rows * columns * bytes
per entry * number of arrays), never taken from gfla.
"""

import ast
import json
import os
import pathlib
import pickle
import subprocess
import sys
import tracemalloc

import numpy as np
import pytest
from click.testing import CliRunner

import gfla
from gfla import limits
from gfla.errors import InputError
from gfla.io.matrix_text import load_matrix_file, load_vector_file

ROOT = pathlib.Path(__file__).resolve().parent.parent


@pytest.fixture(autouse=True)
def _clean_env(monkeypatch):
    monkeypatch.delenv("GFLA_DEBUG", raising=False)
    monkeypatch.delenv(limits.ENV_VARIABLE, raising=False)


def set_limit(monkeypatch, nbytes):
    monkeypatch.setenv(limits.ENV_VARIABLE, str(nbytes))


def refused(fn, *args, **kwargs):
    with pytest.raises(InputError) as info:
        fn(*args, **kwargs)
    message = str(info.value)
    assert "\n" not in message
    return message


def estimate_in(message, nbytes):
    """The message states the estimate (decimal units) and the units it uses."""
    assert f"needs {limits.format_bytes(nbytes)}" in message, message
    assert "= 10^" in message, message


# --------------------------------------------------------------------------- the helper

def test_format_bytes_uses_decimal_units():
    # plain Python ints: 200000^2 * 8 = 3.2e11 bytes = 320 GB (1 GB = 10^9 bytes)
    assert 200000 ** 2 * 8 == 320 * 10 ** 9
    assert limits.format_bytes(200000 ** 2 * 8) == "320 GB"
    assert limits.format_bytes(10 ** 12 * 8) == "8 TB"
    assert limits.format_bytes(999) == "999 bytes"
    assert limits.format_bytes(1000) == "1 kB"
    assert limits.format_bytes(1536) == "1.54 kB"
    assert limits.format_bytes(999_700_000) == "1 GB"     # rounds up into the next unit
    assert limits.format_bytes(24_644_898_816) == "24.6 GB"


def test_limit_text_units():
    assert limits.parse_size("1000000") == 10 ** 6
    assert limits.parse_size("500M") == 500 * 10 ** 6
    assert limits.parse_size("2G") == 2 * 10 ** 9
    assert limits.parse_size("1.5T") == 15 * 10 ** 11
    assert limits.parse_size("512Mi") == 512 * 2 ** 20
    assert limits.parse_size("2GiB") == 2 * 2 ** 30
    with pytest.raises(InputError, match="GFLA_MEMORY_LIMIT"):
        limits.parse_size("lots")


def test_available_memory_env_override_and_machine_figure(monkeypatch):
    set_limit(monkeypatch, "3G")
    assert limits.available_memory() == (3 * 10 ** 9, "GFLA_MEMORY_LIMIT=3G")
    monkeypatch.delenv(limits.ENV_VARIABLE)
    value, source = limits.available_memory()
    if os.path.exists("/proc/meminfo"):
        # MemAvailable is written in KiB ("kB") by the kernel (proc(5))
        with open("/proc/meminfo") as fh:
            kib = next(int(line.split()[1]) for line in fh if line.startswith("MemAvailable:"))
        # the smallest of the figures read, MemAvailable among them (read a moment
        # apart, so allow 10% drift)
        assert 0 < value <= kib * 1024 * 1.1
        assert source


def test_available_memory_takes_the_smallest_figure(monkeypatch):
    monkeypatch.setattr(limits, "_CACHE_SECONDS", 0)      # re-read the figures each call
    monkeypatch.setattr(limits, "_cache", [float("-inf"), None])
    monkeypatch.setattr(limits, "_meminfo_available", lambda: 8 * 10 ** 9)
    monkeypatch.setattr(limits, "_cgroup_room", lambda: 2 * 10 ** 9)
    monkeypatch.setattr(limits, "_address_space_room", lambda: None)
    assert limits.available_memory() == (2 * 10 ** 9, "room under the cgroup memory limit")
    monkeypatch.setattr(limits, "_address_space_room", lambda: 10 ** 9)
    assert limits.available_memory() == (10 ** 9, "address-space limit, ulimit -v")
    for name in ("_meminfo_available", "_sysconf_available", "_cgroup_room",
                 "_address_space_room"):
        monkeypatch.setattr(limits, name, lambda: None)
    assert limits.available_memory() == (None, "unknown")
    assert limits.check_matrices("x", 1, (10 ** 6, 10 ** 6), 8) == 8 * 10 ** 12


@pytest.mark.skipif(sys.platform != "linux", reason="ulimit -v through bash")
def test_address_space_limit_is_read():
    # ulimit -v is in KiB (bash(1)): 4000000 KiB = 4,096,000,000 bytes
    code = "from gfla import limits; print(limits.available_memory()[0])"
    out = subprocess.run(["bash", "-c", f"ulimit -v 4000000; exec '{sys.executable}' -c "
                          f"'{code}'"], capture_output=True, text=True, cwd=ROOT,
                         env={k: v for k, v in os.environ.items()
                              if k != limits.ENV_VARIABLE}, timeout=60)
    assert out.returncode == 0, out.stderr
    assert int(out.stdout) <= 4000000 * 1024


def test_check_memory_message_and_boundary(monkeypatch):
    set_limit(monkeypatch, 24 * 10 ** 9)
    need = 200000 * 200000 * 8            # one 200000 x 200000 matrix of 8-byte entries
    message = refused(limits.check_matrices, "n = 200000 over GF(2^61-1)", 1,
                      (200000, 200000), 8)
    assert message == ("n = 200000 over GF(2^61-1) needs 320 GB (one matrix of "
                       "200000 x 200000 entries, 8 bytes each), more than the 24 GB of "
                       "memory available (GFLA_MEMORY_LIMIT=24000000000); "
                       "decimal units, 1 GB = 10^9 bytes")
    set_limit(monkeypatch, need)          # exactly the estimate: allowed
    assert limits.check_matrices("x", 1, (200000, 200000), 8) == need
    set_limit(monkeypatch, need - 1)
    estimate_in(refused(limits.check_matrices, "x", 1, (200000, 200000), 8), need)


def test_tiny_estimates_are_never_refused(monkeypatch):
    set_limit(monkeypatch, 1)
    assert limits.check_matrices("x", 1, (16, 16), 8) == 2048     # ALWAYS_FITS bytes
    estimate_in(refused(limits.check_matrices, "x", 1, (16, 16), 8 + 1), 16 * 16 * 9)
    F = gfla.field("GF(7)")
    assert F.inv(np.eye(4, dtype=np.int64)).tolist() == np.eye(4, dtype=int).tolist()


def test_packed_bits_round_rows_up_to_words():
    # a 1000 x 100 bit-packed matrix: 1000 rows of ceil(100 / 64) = 2 words of 8 bytes
    w = limits.Workspace("packed").add(1, (1000, 100), 0.125)
    assert w.nbytes == 1000 * 2 * 8
    assert "1 bit each (packed)" in w.describe()


def test_bad_limit_text_is_an_input_error(monkeypatch):
    monkeypatch.setenv(limits.ENV_VARIABLE, "plenty")
    with pytest.raises(InputError, match="is not a size"):
        limits.check_matrices("x", 1, (200, 200), 8)


# --------------------------------------------------------------------------- fields

FIELD_CASES = [("GF(2^61-1)", 8), ("GF(7)", 8), ("GF(2^8)", 8), ("GF(2)", 1), ("Z/2^64", 8),
               ("Z/15", 8)]


@pytest.mark.parametrize("spec,entry", FIELD_CASES)
@pytest.mark.parametrize("op", ["inv", "det", "rank", "charpoly", "power", "solve"])
def test_operation_workspace_refused_then_works_at_the_limit(monkeypatch, spec, entry, op):
    F = gfla.field(spec)
    n = 40
    A = F.random((n, n), invertible=True, seed=7)
    count, bytes_each = F._workspace(op)
    assert bytes_each in (entry, 8)
    need = count * n * n * bytes_each            # plain Python ints
    assert need > 0

    def call():
        if op == "power":
            return F.power(A, 5)
        if op == "solve":
            return F.solve(A, A[:, 0].copy())
        return getattr(F, op)(A)

    set_limit(monkeypatch, need - 1)
    message = refused(call)
    estimate_in(message, need)
    assert f"{n} x {n}" in message and F.spec in message
    set_limit(monkeypatch, need)
    call()                                       # just at the limit: runs


def test_inverse_message_names_the_matrices(monkeypatch):
    F = gfla.field("GF(2^61-1)")
    set_limit(monkeypatch, "1M")
    count, _ = F._workspace("inv")
    message = refused(F.inv, np.eye(200, dtype=np.int64))
    # count x 200 x 200 x 8 bytes, e.g. 5 x 320 kB = 1.6 MB
    assert f"needs {limits.format_bytes(count * 200 * 200 * 8)} ({count} matrices of " \
           "200 x 200 entries, 8 bytes each)" in message
    assert "GFLA_MEMORY_LIMIT=1M" in message


def test_product_of_thin_factors_is_checked_on_its_product(monkeypatch):
    # (n x 1)(1 x n): the factors are 2n entries, the product n^2
    F = gfla.field("GF(7)")
    n = 3000
    A = np.ones((n, 1), dtype=np.int64)
    B = np.ones((1, n), dtype=np.int64)
    c_out, b_out = F._workspace("matmul_out")
    c_in, b_in = F._workspace("matmul_in")
    need = c_out * n * n * b_out + c_in * 2 * n * b_in
    set_limit(monkeypatch, need - 1)
    message = refused(F.matmul, A, B)
    estimate_in(message, need)
    assert f"product of a {n} x 1 and a 1 x {n} matrix" in message
    set_limit(monkeypatch, need)
    assert F.matmul(A, B).shape == (n, n)


def test_identity_zeros_random_are_checked(monkeypatch):
    F = gfla.field("GF(2^8)")
    set_limit(monkeypatch, "1M")
    # identity: the internal uint64 matrix and the returned int64 one
    estimate_in(refused(F.identity, 300), 2 * 300 * 300 * 8)
    estimate_in(refused(F.zeros, (400, 400)), 400 * 400 * 8)
    count, _ = F._workspace("random")
    estimate_in(refused(F.random, (300, 300), seed=1), count * 300 * 300 * 8)
    set_limit(monkeypatch, 2 * 300 * 300 * 8)
    assert F.identity(300).shape == (300, 300)


def test_asarray_copies_are_checked(monkeypatch):
    # the validated copy (uint64, or uint8 for GF(2)) and the returned one
    A = np.ones((500, 500), dtype=np.int64)
    for spec, need in (("GF(7)", 500 * 500 * (8 + 8)), ("GF(2)", 500 * 500 * (1 + 1))):
        F = gfla.field(spec)
        set_limit(monkeypatch, need - 1)
        message = refused(F.asarray, A)
        estimate_in(message, need)
        assert "validating the 500 x 500 matrix" in message
        set_limit(monkeypatch, need)
        assert F.asarray(A).shape == (500, 500)


def test_elementwise_broadcast_to_a_larger_result(monkeypatch):
    F = gfla.field("GF(7)")
    col = np.ones((1000, 1), dtype=np.int64)
    row = np.ones((1, 1000), dtype=np.int64)
    set_limit(monkeypatch, 4 * 1000 * 1000 * 8 - 1)
    estimate_in(refused(F.add, col, row), 4 * 1000 * 1000 * 8)
    set_limit(monkeypatch, 4 * 1000 * 1000 * 8)
    assert F.add(col, row).shape == (1000, 1000)


# --------------------------------------------------------------------------- .npy files

def write_header_only(path, shape, dtype="<i8", extra=b""):
    """A .npy file holding only a header that declares ``shape`` (and ``extra`` bytes)."""
    with open(path, "wb") as fh:
        np.lib.format.write_array_header_1_0(
            fh, {"descr": dtype, "fortran_order": False, "shape": shape})
        fh.write(extra)


def test_npy_header_declaring_a_huge_matrix_is_refused_unallocated(tmp_path, monkeypatch):
    path = tmp_path / "huge.npy"
    write_header_only(path, (10 ** 6, 10 ** 6))
    assert path.stat().st_size < 200
    set_limit(monkeypatch, "1T")
    tracemalloc.start()
    try:
        message = refused(load_matrix_file, path)
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    # 10^6 * 10^6 entries * 8 bytes = 8 * 10^12 bytes = 8 TB
    assert peak < 10 ** 6
    estimate_in(message, 8 * 10 ** 12)
    assert message.startswith(str(path)) and "(1000000, 1000000)" in message
    assert "8 bytes each" in message


def test_npy_header_longer_than_the_file_is_refused(tmp_path, monkeypatch):
    path = tmp_path / "short.npy"
    write_header_only(path, (1000, 1000), extra=b"\0" * 64)
    set_limit(monkeypatch, "1G")
    message = refused(load_matrix_file, path)
    # 1000 * 1000 * 8 = 8 MB declared, 64 bytes present
    assert "truncated" in message and "8 MB" in message and "64 bytes" in message


def test_npy_just_under_the_limit_loads(tmp_path, monkeypatch):
    path = tmp_path / "ok.npy"
    A = np.arange(100 * 100, dtype=np.int64).reshape(100, 100) % 7
    np.save(path, A)
    set_limit(monkeypatch, 100 * 100 * 8)
    assert np.array_equal(load_matrix_file(path), A)
    set_limit(monkeypatch, 100 * 100 * 8 - 1)
    estimate_in(refused(load_matrix_file, path), 100 * 100 * 8)
    v = tmp_path / "v.npy"
    np.save(v, np.arange(1000, dtype=np.int64))
    set_limit(monkeypatch, 7999)
    estimate_in(refused(load_vector_file, v), 8000)


def pickle_bomb(tmp_path, name="evil.npy"):
    """A .npy whose header claims object dtype and whose body is a pickle that creates
    a marker file when unpickled."""
    marker = tmp_path / f"{name}.unpickled"

    class Payload:
        def __reduce__(self):
            return (open, (str(marker), "w"))

    path = tmp_path / name
    with open(path, "wb") as fh:
        np.lib.format.write_array_header_1_0(
            fh, {"descr": "|O", "fortran_order": False, "shape": (1, 1)})
        pickle.dump(Payload(), fh)
    return path, marker


def test_pickled_npy_is_refused_without_unpickling(tmp_path):
    path, marker = pickle_bomb(tmp_path)
    assert "object dtype" in refused(load_matrix_file, path)
    assert "object dtype" in refused(load_vector_file, path)
    assert not marker.exists()
    # the same payload, unpickled on purpose, would have created it
    with open(path, "rb") as fh:
        np.lib.format.read_magic(fh)
        np.lib.format.read_array_header_1_0(fh)
        pickle.load(fh).close()
    assert marker.exists()


def test_pickled_npy_stack_is_refused_without_unpickling(tmp_path):
    from gfla.jobs.batch.bulk import open_bulk
    path, marker = pickle_bomb(tmp_path, "stack.npy")
    (tmp_path / "stack.json").write_text(json.dumps({"field": "GF(7)", "op": "det"}))
    assert "Python objects" in refused(open_bulk, path)
    assert not marker.exists()


def test_pickled_npy_on_the_cli_exits_2_without_unpickling(tmp_path):
    path, marker = pickle_bomb(tmp_path)
    r = run_cli("det", "--field", "GF(7)", "-i", path)
    assert r.returncode == 2 and r.stdout == ""
    assert r.stderr.count("\n") == 1 and "object dtype" in r.stderr
    assert not marker.exists()


def test_every_numpy_load_refuses_pickles():
    # every np.load / numpy.load call in gfla/ and cli/ passes allow_pickle=False
    calls = []
    for folder in ("gfla", "cli"):
        for path in (ROOT / folder).rglob("*.py"):
            tree = ast.parse(path.read_text(), str(path))
            for node in ast.walk(tree):
                if (isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute)
                        and node.func.attr == "load" and isinstance(node.func.value, ast.Name)
                        and node.func.value.id in ("np", "numpy")):
                    kw = {k.arg: k.value for k in node.keywords}
                    ok = (isinstance(kw.get("allow_pickle"), ast.Constant)
                          and kw["allow_pickle"].value is False)
                    calls.append((f"{path.relative_to(ROOT)}:{node.lineno}", ok))
    assert len(calls) >= 2            # limits.load_npy (matrix_text, bulk), engine (resume)
    assert [c for c, ok in calls if not ok] == []


# --------------------------------------------------------------------------- batch stacks

def write_stack(tmp_path, N, n, op="inv", field="GF(2^8)", **sidecar):
    stack = np.zeros((N, n, n), dtype=np.int64)
    stack[:] = np.eye(n, dtype=np.int64)
    path = tmp_path / "stack.npy"
    np.save(path, stack)
    (tmp_path / "stack.json").write_text(json.dumps({"field": field, "op": op, **sidecar}))
    return path


def test_bulk_chunk_workspace_arithmetic(tmp_path):
    from gfla.jobs.batch.bulk import chunk_workspace, open_bulk
    path = write_stack(tmp_path, 100, 4)
    bulk = open_bulk(path)
    # inline: a chunk of 100 matrices of 4 x 4: int64 rows read (8), a uint64 copy (8),
    # 16 result entries each as uint64 (8) and uint8 (GF(2^8) results)
    per_matrix = 16 * 8 + 16 * 8 + 16 * (8 + 1)
    assert chunk_workspace(bulk, 1000).nbytes == 100 * per_matrix
    # 2 workers: 4 chunks read ahead by the reader, 2 chunks being computed
    w = chunk_workspace(bulk, 10, workers=2)
    assert w.nbytes == 10 * ((4 + 2) * 16 * 8 + 2 * 16 * 8 + 2 * 16 * 9)


def test_bulk_chunks_refused_with_estimate(tmp_path, monkeypatch):
    from gfla.jobs.batch import engine
    path = write_stack(tmp_path, 100, 4)
    need = 100 * (16 * 8 + 16 * 8 + 16 * 9)
    set_limit(monkeypatch, need - 1)
    message = refused(engine.run, path, tmp_path / "out.npy")
    estimate_in(message, need)
    assert "chunks of 100 matrices of 4 x 4" in message
    assert not (tmp_path / "out.npy").exists()          # refused before writing
    set_limit(monkeypatch, need)
    summary = engine.run(path, tmp_path / "out.npy")
    assert summary.records == 100 and summary.failed == 0


def test_bulk_matrix_size_refused_by_the_field_workspace(tmp_path, monkeypatch):
    from gfla.jobs.batch.bulk import open_bulk
    path = write_stack(tmp_path, 2, 100, op="det", field="GF(2^61-1)")
    F = gfla.field("GF(2^61-1)")
    count, b = F._workspace("det")
    set_limit(monkeypatch, count * 100 * 100 * b - 1)
    message = refused(open_bulk, path)
    estimate_in(message, count * 100 * 100 * b)
    assert "op 'det' on one 100 x 100 matrix" in message


def test_bulk_stack_header_longer_than_the_file(tmp_path):
    from gfla.jobs.batch.bulk import open_bulk
    path = tmp_path / "stack.npy"
    write_header_only(path, (10 ** 6, 1000, 1000))
    (tmp_path / "stack.json").write_text(json.dumps({"field": "GF(7)", "op": "det"}))
    message = refused(open_bulk, path)
    # 10^6 * 1000 * 1000 entries * 8 bytes = 8 * 10^12 bytes declared, none present
    assert str(path) in message and "truncated .npy file" in message
    assert "(8 TB)" in message and "holds 0 bytes" in message


# --------------------------------------------------------------------------- erasure

def test_erasure_shard_count_beyond_the_field_names_the_limit():
    from gfla.jobs.erasure import ErasureCode
    F = gfla.field("GF(2^8)")
    for construction in ("vandermonde", "cauchy"):
        message = refused(ErasureCode, F, 250, 10, construction)
        # GF(2^8) has 2^8 = 256 elements: k + m <= 256, so k <= 246 with m = 10
        assert "k + m = 260" in message and "k + m <= 256" in message
        assert "k <= 246" in message and construction in message
    assert ErasureCode(F, 246, 10, "cauchy").generator.shape == (256, 246)


def test_erasure_generator_memory_refused(monkeypatch):
    from gfla.jobs.erasure import ErasureCode
    F = gfla.field("GF(2^16)")
    k, m = 300, 100
    count, b = F._workspace("inv")
    # the generator and V: 2 x (k + m) x k int64; the inverse of V[:k]: count x k x k
    need = 2 * (k + m) * k * 8 + count * k * k * b
    set_limit(monkeypatch, need - 1)
    message = refused(ErasureCode, F, k, m, "vandermonde")
    estimate_in(message, need)
    assert "k = 300, m = 100" in message
    cauchy_need = 2 * (k + m) * k * 8
    set_limit(monkeypatch, cauchy_need)
    assert ErasureCode(F, k, m, "cauchy").generator.shape == (400, 300)


def test_erasure_shard_buffers_refused(tmp_path, monkeypatch):
    from gfla.jobs.erasure import ErasureCode
    from gfla.jobs.erasure.shards import chunk_bytes, encode_file
    src = tmp_path / "data.bin"
    src.write_bytes(bytes(range(256)) * 4000)        # 1,024,000 bytes
    code = ErasureCode(gfla.field("GF(2^8)"), 4, 2)
    # shard size 1024000 / 4 = 256000 bytes; a chunk of 1 MiB is cut to the shard size.
    # Buffers: k = 4 data rows and the m = 2 parity rows padded to the region kernel's
    # group of 4 (kernels/erasure.py ROWS_PER_GROUP), 8 rows of 256000 bytes.
    need = 8 * 256000
    set_limit(monkeypatch, need - 1)
    message = refused(encode_file, src, tmp_path / "shards", code, chunk_size=1 << 20)
    estimate_in(message, need)
    assert "buffers of 256000 bytes for each of 8 shards" in message
    assert not (tmp_path / "shards").exists()
    set_limit(monkeypatch, need)
    assert chunk_bytes(1 << 20, 256000, 8) == 256000
    encode_file(src, tmp_path / "shards", code, chunk_size=1 << 20)
    assert len(list((tmp_path / "shards").iterdir())) == 6 + 1      # shards + manifest


def test_erasure_cli_exit_2_one_line(tmp_path):
    from gfla.cli.main import cli
    r = CliRunner().invoke(cli, ["erasure", "matrix", "-k", "250", "-m", "10", "--lost", "1"])
    assert r.exit_code == 2 and r.stdout == ""
    assert r.stderr.count("\n") == 1 and "k + m <= 256" in r.stderr


# --------------------------------------------------------------------------- keysched

def test_keysched_state_too_large_to_probe(monkeypatch):
    from gfla.jobs.keysched.schedule import from_callable

    def rotate(x):
        return ((x << 1) | (x >> 4095)) & ((1 << 4096) - 1)

    # 7 arrays of 4097 x 4096 bytes (probes, images, matrix; see schedule.py)
    need = 7 * 4097 * 4096
    set_limit(monkeypatch, need - 1)
    message = refused(from_callable, rotate, state_bits=4096, name="rotate")
    estimate_in(message, need)
    assert message.startswith("rotate: linearising a 4096-bit state")


def test_keysched_analysis_checked_then_runs(monkeypatch):
    from gfla.jobs.keysched.analysis import analyze
    from gfla.jobs.keysched.schedule import from_callable

    def rotate(x):
        return ((x << 1) | (x >> 63)) & ((1 << 64) - 1)

    sched = from_callable(rotate, state_bits=64, name="rotate64")
    need = 17 * 64 * 64
    set_limit(monkeypatch, need - 1)
    estimate_in(refused(analyze, sched, up_to=2, factor_seconds=1), need)
    set_limit(monkeypatch, 10 ** 9)
    # x -> rotl(x, 1) on 64 bits has order 64 (common practice: a cyclic shift of n
    # positions by one returns after n steps)
    assert analyze(sched, up_to=2, factor_seconds=1)["period_linear"]["value"] == 64


def test_keysched_cli_analysis_refused_before_probing(tmp_path):
    from gfla.cli.main import cli
    module = tmp_path / "wide.py"
    module.write_text("calls = []\n"
                      "def step(x):\n"
                      "    calls.append(1)\n"
                      "    return x\n")
    # 17 matrices of 3000 x 3000 bytes = 153 MB (see analysis.py)
    need = 17 * 3000 * 3000
    r = CliRunner().invoke(cli, ["keysched", "analyze", f"{module}:step", "--state-bits",
                                 "3000"], env={limits.ENV_VARIABLE: str(need - 1)})
    assert r.exit_code == 2 and r.stdout == ""
    assert r.stderr.count("\n") == 1 and f"needs {limits.format_bytes(need)}" in r.stderr
    assert "analysis of the 3000-bit schedule" in r.stderr


# --------------------------------------------------------------------------- mixing

def test_mixing_constructors_checked(monkeypatch):
    from gfla.jobs.mixing.constructors import circulant, vandermonde
    F = gfla.field("GF(2^8)")
    row = list(range(1, 201))
    set_limit(monkeypatch, 4 * 200 * 200 * 8 - 1)
    message = refused(circulant, F, row)
    estimate_in(message, 4 * 200 * 200 * 8)
    assert "circulant matrix of 200 x 200" in message
    set_limit(monkeypatch, 4 * 200 * 200 * 8)
    assert circulant(F, row).shape == (200, 200)
    set_limit(monkeypatch, 3 * 200 * 200 * 8 - 1)
    estimate_in(refused(vandermonde, F, row), 3 * 200 * 200 * 8)


def test_mixing_subset_tables_checked(monkeypatch):
    from gfla.jobs.mixing import engine
    n = 16
    need = (1 << n) * n * 9 + n * (1 << (n - 1)) * 4
    set_limit(monkeypatch, need - 1)
    engine.subset_tables.cache_clear()
    estimate_in(refused(engine.subset_tables, n), need)
    set_limit(monkeypatch, need)
    masks = engine.subset_tables(n)[0]
    assert len(masks) == 1 << n
    engine.subset_tables.cache_clear()


# --------------------------------------------------------------------------- CLI

def run_cli(*args, limit=None):
    env = dict(os.environ)
    env.pop("GFLA_DEBUG", None)
    env.pop(limits.ENV_VARIABLE, None)
    if limit is not None:
        env[limits.ENV_VARIABLE] = str(limit)
    code = "import sys; from gfla.cli.main import main; sys.argv[0] = 'gfla'; main()"
    return subprocess.run([sys.executable, "-c", code, *map(str, args)], env=env,
                          capture_output=True, text=True, cwd=ROOT, timeout=300)


def test_cli_inverse_refused_exit_2_one_line(tmp_path):
    F = gfla.field("GF(2^61-1)")
    path = tmp_path / "a.npy"
    np.save(path, F.random((60, 60), invertible=True, seed=1))
    count, b = F._workspace("inv")
    need = count * 60 * 60 * b
    r = run_cli("inv", "--field", "GF(2^61-1)", "-i", path, limit=need - 1)
    assert r.returncode == 2 and r.stdout == ""
    assert r.stderr.count("\n") == 1 and "Traceback" not in r.stderr
    assert f"needs {limits.format_bytes(need)}" in r.stderr
    r = run_cli("inv", "--field", "GF(2^61-1)", "-i", path, limit=need)
    assert r.returncode == 0, r.stderr


def test_cli_npy_header_refused_exit_2(tmp_path):
    path = tmp_path / "huge.npy"
    write_header_only(path, (10 ** 6, 10 ** 6))
    r = run_cli("rank", "--field", "GF(2)", "-i", path, limit="1T")
    assert r.returncode == 2 and r.stderr.count("\n") == 1
    assert "needs 8 TB" in r.stderr and "1 TB = 10^12 bytes" in r.stderr


def test_npy_with_a_python2_style_header_loads_without_a_warning(tmp_path):
    # A header with "2L" dimensions, as Python 2's numpy wrote them: numpy re-parses it
    # and emits a UserWarning (numpy.lib.format); gfla reads it and prints nothing but
    # the result. det [[1, 2], [3, 4]] = -2 = 5 mod 7 (2 x 2 formula, common practice).
    import struct
    header = b"{'descr': '<i8', 'fortran_order': False, 'shape': (2L, 2L), }"
    header += b" " * (64 - 10 - len(header) - 1) + b"\n"
    path = tmp_path / "py2.npy"
    path.write_bytes(b"\x93NUMPY\x01\x00" + struct.pack("<H", len(header)) + header
                     + struct.pack("<4q", 1, 2, 3, 4))
    r = run_cli("det", "--field", "GF(7)", "-i", path)
    assert r.returncode == 0 and r.stdout.strip() == "5" and r.stderr == "", r.stderr


def test_cli_product_of_text_matrices_refused(monkeypatch):
    from gfla.cli.main import cli
    n = 400
    column = "; ".join("1" for _ in range(n))
    row = " ".join("1" for _ in range(n))
    # the printed 400 x 400 product over GF(7): per entry 16 bytes of list slots and
    # 1 digit + 1 separator
    need = n * n * (16 + 2)
    r = CliRunner().invoke(cli, ["mul", "--field", "GF(7)", column, row],
                           env={limits.ENV_VARIABLE: str(need - 1)})
    assert r.exit_code == 2 and r.stdout == ""
    assert r.stderr.count("\n") == 1 and f"needs {limits.format_bytes(need)}" in r.stderr
    assert "printing the 400 x 400 product" in r.stderr
    F = gfla.field("GF(7)")
    c_out, b_out = F._workspace("matmul_out")
    fits = max(need, c_out * n * n * b_out + 2 * n * 8 * F._workspace("matmul_in")[0])
    r = CliRunner().invoke(cli, ["mul", "--field", "GF(7)", column, row],
                           env={limits.ENV_VARIABLE: str(fits)})
    assert r.exit_code == 0, r.output
    assert r.stdout.splitlines()[0].split() == ["1"] * n
