"""Tests of the batch job (gfla.jobs.batch) and of ``gfla batch run`` (cli/batch.py).

* every operation: the batch result of each record equals the one-by-one API call;
* engines: in-process, worker processes and a Dask LocalCluster on 127.0.0.1 give
  byte-identical outputs;
* crashes: a run killed with SIGKILL at random points and resumed has every input id
  exactly once and output equal to a clean run (3 trials here, 24 under -m slow);
* bad input: truncated last line, invalid JSON, unknown op, mixed sizes in a .npy, a
  sidecar that does not match: clear messages, and every valid record still answered;
* known answers from FIPS 197 through the batch runner, each recomputed with galois.
"""

import json
import os
import pathlib
import random
import subprocess
import sys
import time

import galois
import numpy as np
import pytest

import crashkit
import gfla
from gfla.jobs.batch import run

VECTORS = pathlib.Path(__file__).resolve().parent.parent / "vectors" / "batch"
GF256 = galois.GF(2**8, irreducible_poly=0x11B)  # FIPS 197 section 4.2 modulus


def _write_jsonl(path, records, raw_lines=()):
    with open(path, "w") as fh:
        for rec in records:
            fh.write(json.dumps(rec) + "\n")
        for line in raw_lines:
            fh.write(line)
    return path


def _read_jsonl(path):
    with open(path) as fh:
        return [json.loads(line) for line in fh]


def _cli(*args, timeout=300):
    """``gfla batch ARGS`` in a subprocess (for the crash tests and import checks)."""
    return subprocess.run([sys.executable, "-m", "gfla.cli.batch", *map(str, args)],
                          capture_output=True, text=True, timeout=timeout)


class _Result:
    def __init__(self, returncode, stdout, stderr):
        self.returncode, self.stdout, self.stderr = returncode, stdout, stderr


def _cli_here(*args):
    """``gfla batch ARGS`` in this process (click's runner), exit code and streams."""
    from click.testing import CliRunner

    from gfla.cli.batch import batch
    r = CliRunner().invoke(batch, [str(a) for a in args])
    if r.exception is not None and not isinstance(r.exception, SystemExit):
        raise r.exception
    return _Result(r.exit_code, r.stdout, r.stderr)


# --------------------------------------------------------------------------- every op

def _random_matrix(rng, F, m, n):
    return rng.integers(0, min(F.size, 1 << 63), size=(m, n), dtype=np.int64)


def _expected(F, rec):
    """The record's answer from one direct API call: ("result", value) or
    ("error", kind, certificate)."""
    A = np.array(rec["matrix"], dtype=object).astype(F.dtype)
    op = rec["op"]
    try:
        if op == "inv":
            value = F.inv(A).tolist()
        elif op == "det":
            value = int(F.det(A))
        elif op == "rank":
            value = int(F.rank(A))
        elif op == "charpoly":
            value = [int(c) for c in F.charpoly(A)]
        elif op == "minpoly":
            value = [int(c) for c in F.minpoly(A)]
        elif op == "order":
            value = int(F.order(A))
        elif op == "power":
            value = F.power(A, int(rec["exponent"])).tolist()
        elif op == "mul":
            value = F.matmul(A, np.array(rec["right"], dtype=object).astype(F.dtype)).tolist()
        elif op == "nullspace":
            value = F.nullspace(A).tolist()
        elif op == "solve":
            s = F.solve(A, np.array(rec["rhs"], dtype=object).astype(F.dtype))
            value = {"consistent": bool(s.consistent),
                     "solution": s.particular.tolist() if s.consistent else None,
                     "nullspace": s.nullspace.tolist()}
        else:
            raise AssertionError(op)
    except gfla.MathError as exc:
        return ("error", type(exc).__name__, exc.certificate())
    return ("result", value)


def _check_against_api(records, out_path):
    lines = _read_jsonl(out_path)
    assert [line["id"] for line in lines] == [r["id"] for r in records]
    for rec, line in zip(records, lines):
        F = gfla.field(rec["field"], modulus=rec.get("modulus"))
        want = _expected(F, rec)
        assert line["op"] == rec["op"]
        if want[0] == "result":
            assert "error" not in line, (rec, line)
            assert line["result"] == want[1], (rec, line)
        else:
            assert line["error"]["kind"] == want[1], (rec, line)
            assert line["error"]["certificate"] == json.loads(json.dumps(want[2]))


FIELDS_FOR_OPS = [("GF(2)", None), ("GF(7)", None), ("GF(65521)", None),
                  ("GF(2^8)", 0x11B), ("GF(2^16)", None), ("Z/12", None), ("Z/2^64", None)]


def test_every_op_equals_one_by_one_api_calls(tmp_path):
    rng = np.random.default_rng(11)
    records = []
    for spec, modulus in FIELDS_FOR_OPS:
        F = gfla.field(spec, modulus=modulus)
        for i in range(60):
            n = int(rng.integers(1, 6))
            op = ["inv", "det", "rank", "solve", "nullspace", "charpoly", "minpoly",
                  "power", "mul", "order"][i % 10]
            if op == "order" and (n > 2 or F.size > 1 << 16):
                op = "inv"
            m = n if op in ("inv", "det", "charpoly", "minpoly", "power", "order") \
                else int(rng.integers(1, 6))
            A = _random_matrix(rng, F, m, n)
            if i % 4 == 1 and m >= 2:
                A[1] = A[0]  # rank deficient (singular when square)
            rec = {"id": f"{spec}-{i}", "field": spec, "op": op, "matrix": A.tolist()}
            if modulus is not None:
                rec["modulus"] = hex(modulus)
            if op == "solve":
                rec["rhs"] = _random_matrix(rng, F, 1, m)[0].tolist()
            if op == "mul":
                rec["right"] = _random_matrix(rng, F, n, int(rng.integers(1, 4))).tolist()
            if op == "power":
                rec["exponent"] = int(rng.integers(-3, 40))
            if i % 7 == 3 and F.size <= 1 << 16:  # entries as hex strings
                rec["matrix"] = [[format(int(x), "x") for x in row] for row in A]
            records.append(rec)
    top = (1 << 64) - 1  # entries above 2^63 - 1 (uint64 only)
    for k, op in enumerate(["det", "inv", "rank", "charpoly", "solve"]):
        rec = {"id": f"wide-{k}", "field": "Z/2^64", "op": op,
               "matrix": [[top, 1], [top - k, 3]]}
        if op == "solve":
            rec["rhs"] = [top, 5]
        records.append(rec)
    records.append({"id": "p61", "field": "GF(2^61-1)", "op": "inv",
                    "matrix": [[(1 << 61) - 2, 1], [5, (1 << 61) - 3]]})
    inp = _write_jsonl(tmp_path / "in.jsonl", records)
    summary = run(inp, tmp_path / "out.jsonl", chunk_size=97)
    assert summary.records == len(records)
    for rec in records:  # the reference reads the hex strings back itself
        if isinstance(rec["matrix"][0][0], str):
            rec["matrix"] = [[int(x, 16) for x in row] for row in rec["matrix"]]
    _check_against_api(records, tmp_path / "out.jsonl")
    assert summary.failed == sum("error" in line for line in _read_jsonl(tmp_path / "out.jsonl"))
    assert summary.exit_code == (1 if summary.failed else 0)


def test_mixing_job_ops_when_available(tmp_path):
    mixing = pytest.importorskip("gfla.jobs.mixing")
    F = gfla.field("GF(2^8)", modulus=0x11B)
    mix = [[2, 3, 1, 1], [1, 2, 3, 1], [1, 1, 2, 3], [3, 1, 1, 2]]  # FIPS 197 eq. (5.6)
    bad = [[1, 1, 0, 0], [0, 1, 1, 0], [0, 0, 1, 1], [1, 0, 0, 1]]
    records = [{"id": f"x{k}", "field": "GF(2^8)", "modulus": "0x11b", "op": op, "matrix": M}
               for k, (op, M) in enumerate([("mds", mix), ("mds", bad),
                                            ("branch_number", mix)])]
    inp = _write_jsonl(tmp_path / "mix.jsonl", records)
    run(inp, tmp_path / "mix.out.jsonl")
    lines = _read_jsonl(tmp_path / "mix.out.jsonl")
    # MixColumns is MDS, branch number 5 (J. Daemen, V. Rijmen, "The Design of
    # Rijndael", Springer 2002, the wide trail chapter; the section number from memory).
    # The circulant of 1 1 0 0 has a zero entry, a singular 1 x 1 minor (common practice).
    assert lines[0]["result"]["value"] is True
    assert lines[1]["result"]["value"] is False
    assert lines[1]["result"]["value"] == mixing.is_mds(F, bad, counts=False)["value"]
    assert lines[2]["result"]["differential"]["value"] == 5
    assert lines[2]["result"]["linear"]["value"] == 5


# --------------------------------------------------------------------------- bulk

def _save_bulk(path, stack, **sidecar):
    np.save(path, stack)
    with open(str(path)[:-4] + ".json", "w") as fh:
        json.dump(sidecar, fh)
    return path


def test_bulk_inverse_det_rank_solve_charpoly(tmp_path):
    F = gfla.field("GF(2^8)", modulus=0x11B)
    rng = np.random.default_rng(2)
    A = rng.integers(0, 256, size=(300, 4, 4)).astype(np.uint8)
    A[::9, 3] = A[::9, 1]
    A[7, 0, 0] = 0  # keep one value path where nothing is special
    for op in ("inv", "det", "rank", "charpoly"):
        inp = _save_bulk(tmp_path / f"{op}.npy", A, field="GF(2^8)", modulus="0x11b", op=op,
                         count=300, shape=[4, 4], dtype="uint8")
        s = run(inp, tmp_path / f"{op}_out", chunk_size=64)
        R = np.load(tmp_path / f"{op}_out.npy")
        errors = {e["index"]: e for e in _read_jsonl(tmp_path / f"{op}_out.errors.jsonl")}
        side = json.loads((tmp_path / f"{op}_out.json").read_text())
        assert side["count"] == 300 and side["failed"] == len(errors) == s.failed
        for k in range(300):
            if op == "inv":
                try:
                    X = F.inv(A[k])
                except gfla.SingularMatrixError as exc:
                    assert errors[k]["error"]["certificate"] == exc.certificate()
                    assert not R[k].any()
                else:
                    assert k not in errors and np.array_equal(R[k], X)
            elif op == "det":
                assert int(R[k]) == F.det(A[k])
            elif op == "rank":
                assert int(R[k]) == F.rank(A[k])
            else:
                assert R[k].tolist() == F.charpoly(A[k])
    B = rng.integers(0, 256, size=(300, 4)).astype(np.uint8)
    np.save(tmp_path / "rhs.npy", B)
    inp = _save_bulk(tmp_path / "solve.npy", A, field="GF(2^8)", modulus="0x11b", op="solve",
                     rhs="rhs.npy")
    run(inp, tmp_path / "solve_out.npy")
    R = np.load(tmp_path / "solve_out.npy")
    errors = {e["index"]: e for e in _read_jsonl(tmp_path / "solve_out.errors.jsonl")}
    for k in range(300):
        sol = F.solve(A[k], B[k])
        if sol.consistent:
            assert np.array_equal(R[k], sol.particular)
        else:
            cert = errors[k]["error"]["certificate"]["left_vector"]
            y = GF256(cert)
            # y A = 0 and y b != 0, recomputed with galois.
            assert not (y @ GF256(A[k].astype(np.int64))).any()
            assert int(y @ GF256(B[k].astype(np.int64))) != 0


def test_bulk_out_of_range_entries_fail_only_their_matrix(tmp_path):
    A = np.ones((10, 2, 2), dtype=np.int64)
    A[:, 0, 1] = 0
    A[4, 1, 0] = 9
    inp = _save_bulk(tmp_path / "s.npy", A, field="GF(7)", op="det")
    s = run(inp, tmp_path / "r.npy")
    R = np.load(tmp_path / "r.npy")
    errors = _read_jsonl(tmp_path / "r.errors.jsonl")
    assert s.failed == 1 and errors[0]["index"] == 4
    assert "row 2, column 1" in errors[0]["error"]["message"]
    assert R.tolist() == [1] * 4 + [0] + [1] * 5


def test_bulk_fortran_order_and_chunk_edges(tmp_path):
    A = np.random.default_rng(8).integers(0, 65521, size=(257, 3, 3))
    c = _save_bulk(tmp_path / "c.npy", A, field="GF(65521)", op="det")
    f = _save_bulk(tmp_path / "f.npy", np.asfortranarray(A), field="GF(65521)", op="det")
    run(c, tmp_path / "rc.npy", chunk_size=256)  # one full chunk and one of a single matrix
    run(f, tmp_path / "rf.npy", chunk_size=100)
    F = gfla.field("GF(65521)")
    want = [F.det(a) for a in A]
    assert np.load(tmp_path / "rc.npy").tolist() == want == np.load(tmp_path / "rf.npy").tolist()


# --------------------------------------------------------------------------- engines

def _engine_input(tmp_path):
    rng = np.random.default_rng(4)
    records = []
    for i in range(900):
        spec = ["GF(2^8)", "GF(7)", "GF(2)"][i % 3]
        F = gfla.field(spec)
        n = 1 + i % 5
        A = _random_matrix(rng, F, n, n)
        op = ["inv", "det", "rank", "charpoly", "solve"][i % 5]
        rec = {"id": i, "field": spec, "op": op, "matrix": A.tolist()}
        if op == "solve":
            rec["rhs"] = _random_matrix(rng, F, 1, n)[0].tolist()
        records.append(rec)
    return _write_jsonl(tmp_path / "engines.jsonl", records, ['{"id": "broken", "op"\n'])


def test_local_engine_with_worker_processes_equals_in_process(tmp_path):
    inp = _engine_input(tmp_path)
    one = run(inp, tmp_path / "one.jsonl", chunk_size=50)
    two = run(inp, tmp_path / "two.jsonl", workers=2, chunk_size=50)
    assert (tmp_path / "one.jsonl").read_bytes() == (tmp_path / "two.jsonl").read_bytes()
    assert (one.records, one.failed, one.kinds) == (two.records, two.failed, two.kinds)


def test_dask_engine_equals_local_engine(tmp_path):
    distributed = pytest.importorskip("distributed")
    inp = _engine_input(tmp_path)
    run(inp, tmp_path / "local.jsonl", chunk_size=60)
    # Without an address the engine starts its own LocalCluster on 127.0.0.1.
    s = run(inp, tmp_path / "dask.jsonl", engine="dask", workers=2, chunk_size=60)
    assert s.engine == "dask"
    assert (tmp_path / "local.jsonl").read_bytes() == (tmp_path / "dask.jsonl").read_bytes()
    A = np.random.default_rng(9).integers(0, 256, size=(500, 3, 3)).astype(np.uint8)
    npy = _save_bulk(tmp_path / "st.npy", A, field="GF(2^8)", op="inv")
    run(npy, tmp_path / "st_local.npy", chunk_size=100)
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, host="127.0.0.1",
                                  dashboard_address=None, processes=True) as cluster:
        run(npy, tmp_path / "st_dask.npy", engine="dask", scheduler=cluster.scheduler_address,
            chunk_size=100)
    assert np.array_equal(np.load(tmp_path / "st_local.npy"), np.load(tmp_path / "st_dask.npy"))
    assert ((tmp_path / "st_local.errors.jsonl").read_bytes()
            == (tmp_path / "st_dask.errors.jsonl").read_bytes())


def test_dask_engine_without_the_extra_is_a_clear_input_error(tmp_path, monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # import fails as if absent
    inp = _write_jsonl(tmp_path / "a.jsonl", [{"id": 1, "field": "GF(7)", "op": "det",
                                               "matrix": [[1]]}])
    with pytest.raises(gfla.InputError, match=r"pip install 'gfla\[dask\]'"):
        run(inp, tmp_path / "b.jsonl", engine="dask")
    r = _cli_here("run", inp, "--out", tmp_path / "b.jsonl", "--engine", "dask")
    assert r.returncode == 2 and r.stderr.count("\n") == 1 and "dask" in r.stderr
    assert not (tmp_path / "b.jsonl").exists()


def test_dask_engine_unreachable_scheduler_is_an_input_error(tmp_path, monkeypatch):
    pytest.importorskip("distributed")
    from gfla.jobs.batch import engine
    monkeypatch.setattr(engine, "SCHEDULER_TIMEOUT", 1)
    inp = _write_jsonl(tmp_path / "a.jsonl", [{"id": 1, "field": "GF(7)", "op": "det",
                                               "matrix": [[1]]}])
    with pytest.raises(gfla.InputError, match="cannot reach the dask scheduler"):
        run(inp, tmp_path / "b.jsonl", engine="dask", scheduler="tcp://127.0.0.1:9")
    assert not (tmp_path / "b.jsonl").exists()  # nothing written: a plain rerun works
    with pytest.raises(gfla.InputError, match="dask engine only"):
        run(inp, tmp_path / "b.jsonl", scheduler="tcp://127.0.0.1:9")


# --------------------------------------------------------------------------- crashes

def _crash_records():
    rng = np.random.default_rng(21)
    records = []
    for i in range(600):
        spec = ["GF(2^8)", "GF(65521)"][i % 2]
        F = gfla.field(spec)
        op = ["inv", "charpoly", "det", "rank"][i % 4]
        n = 3 + i % 4
        A = _random_matrix(rng, F, n, n)
        if i % 10 == 0:
            A[1] = A[0]
        records.append({"id": f"c{i}", "field": spec, "op": op, "matrix": A.tolist()})
    return records


def _start(args, resume=False):
    cmd = [sys.executable, "-m", "gfla.cli.batch", *map(str, args)]
    if resume:
        cmd.append("--resume")
    return crashkit.start(cmd)


CRASH_CHUNK = 10


@pytest.fixture(scope="module")
def crash_case(tmp_path_factory):
    base = tmp_path_factory.mktemp("crash")
    records = _crash_records()
    inp = _write_jsonl(base / "in.jsonl", records,
                       ['not json at all\n', '{"id": "last", "field": "GF(7)", "op": "de'])
    out = base / "clean.jsonl"
    p = _start(["run", inp, "--out", out, "--chunk-size", CRASH_CHUNK, "-q"])
    crashkit.wait_chunks(p, str(out) + ".journal", 1)
    t0 = time.perf_counter()
    assert p.wait() == 1
    chunks = -(-(len(records) + 2) // CRASH_CHUNK)
    per_chunk = (time.perf_counter() - t0) / chunks
    ids = [r["id"] for r in records] + [None, "last"]
    return base, inp, out.read_bytes(), (chunks, per_chunk), ids


def _kill_and_resume(inp, out, timing, rng, kills, extra=(), anywhere=False):
    """Start the run and SIGKILL it at a random point: once the journal holds a random
    number of chunks, plus a random part of one chunk's time (or, with ``anywhere``, at
    a random time from the start, start-up included). Resume, killing again
    ``kills - 1`` times at later points; then let a final resume finish. Returns the
    final result and the journal's chunk count at each kill (a 'done' counts 2)."""
    chunks, per_chunk = timing
    args = ["run", inp, "--out", out, "--chunk-size", CRASH_CHUNK, "-q", *extra]
    journal = str(out) + ".journal"
    seen = []
    for attempt in range(kills):
        p = _start(args, resume=attempt > 0)
        if anywhere and attempt == 0:
            time.sleep(rng.uniform(0.0, 1.5 + chunks * per_chunk))
        else:
            low = max(1, crashkit.journal_chunks(journal) + 1)
            crashkit.wait_chunks(p, journal, rng.randint(low, max(low, chunks - 2)))
            time.sleep(rng.uniform(0.0, per_chunk))
        crashkit.kill(p)
        seen.append(crashkit.journal_chunks(journal))
    return _cli(*args, "--resume"), seen


def _check_resumed(out, clean, ids):
    data = pathlib.Path(out).read_bytes()
    lines = [json.loads(line) for line in data.decode().splitlines()]
    got = [line["id"] for line in lines]
    assert got == ids  # each id exactly once, in input order
    assert data == clean


@pytest.mark.parametrize("trial", range(3))
def test_kill_9_then_resume_each_id_once(crash_case, tmp_path, trial):
    base, inp, clean, timing, ids = crash_case
    rng = random.Random(1000 + trial)
    r, seen = _kill_and_resume(inp, tmp_path / "out.jsonl", timing, rng, kills=1)
    assert r.returncode == 1, r.stderr
    _check_resumed(tmp_path / "out.jsonl", clean, ids)
    # killed after at least one committed chunk; on a fast machine the kill may land
    # after the last chunk (timing-dependent), which the resume must also survive
    assert 1 <= seen[0]


@pytest.mark.slow
@pytest.mark.parametrize("trial", range(24))
def test_kill_9_at_random_points_many_trials(crash_case, tmp_path, trial):
    base, inp, clean, timing, ids = crash_case
    rng = random.Random(trial)
    extra = ("--workers", "2") if trial % 3 == 2 else ()
    r, seen = _kill_and_resume(inp, tmp_path / "out.jsonl", timing, rng,
                               kills=1 + trial % 3, extra=extra, anywhere=trial % 4 == 3)
    assert r.returncode == 1, r.stderr
    _check_resumed(tmp_path / "out.jsonl", clean, ids)


def test_kill_9_then_resume_bulk(tmp_path):
    rng = np.random.default_rng(6)
    A = rng.integers(0, 256, size=(6000, 4, 4)).astype(np.uint8)
    A[::50, 3] = A[::50, 0]
    inp = _save_bulk(tmp_path / "st.npy", A, field="GF(2^8)", op="inv")
    clean = run(inp, tmp_path / "clean.npy", chunk_size=40)
    for trial in range(1):
        out = tmp_path / f"r{trial}.npy"
        args = ["run", inp, "--out", out, "--chunk-size", "40", "-q"]
        p = _start(args)
        time.sleep(random.Random(trial).uniform(1.0, 2.5))
        crashkit.kill(p)
        r = _cli(*args, "--resume")
        assert r.returncode == 1, r.stderr
        assert np.array_equal(np.load(out), np.load(tmp_path / "clean.npy"))
        errs = _read_jsonl(tmp_path / f"r{trial}.errors.jsonl")
        assert [e["index"] for e in errs] == sorted({e["index"] for e in errs})
        assert ((tmp_path / f"r{trial}.errors.jsonl").read_bytes()
                == (tmp_path / "clean.errors.jsonl").read_bytes())
        assert len(errs) == clean.failed


def test_resume_rules(tmp_path):
    recs = [{"id": i, "field": "GF(7)", "op": "det", "matrix": [[i % 7]]} for i in range(50)]
    inp = _write_jsonl(tmp_path / "in.jsonl", recs)
    out = tmp_path / "out.jsonl"
    # An unfinished run (journal without its 'done' entry, outputs still under their
    # working names) is not silently overwritten.
    run(inp, out, chunk_size=10)
    partial = pathlib.Path(str(out) + ".partial")
    journal = pathlib.Path(str(out) + ".journal")
    lines = journal.read_bytes().splitlines(keepends=True)

    def unfinish(journal_bytes, outputs):
        journal.write_bytes(journal_bytes)
        for name in outputs:
            os.replace(name, str(name) + ".partial")

    unfinish(b"".join(lines[:3]) + lines[3][:10], [out])  # a torn entry
    r = _cli_here("run", inp, "--out", out, "-q")
    assert r.returncode == 2 and "--resume" in r.stderr and r.stderr.count("\n") == 1
    r = _cli_here("run", inp, "--out", out, "-q", "--resume")
    assert r.returncode == 0, r.stderr
    assert [line["id"] for line in _read_jsonl(out)] == list(range(50))
    assert not partial.exists()
    # Resuming a finished run does nothing and says so; a new run does not overwrite it.
    r = _cli_here("run", inp, "--out", out, "--resume")
    assert r.returncode == 0 and "nothing to do" in r.stderr
    r = _cli_here("run", inp, "--out", out, "-q")
    assert r.returncode == 2 and "already exists" in r.stderr
    # A changed input cannot be resumed into the old output.
    unfinish(b"".join(lines[:3]), [out])
    _write_jsonl(inp, recs[:40])
    r = _cli_here("run", inp, "--out", out, "-q", "--resume")
    assert r.returncode == 2 and "another input" in r.stderr
    # Same .npy bytes, another op in the sidecar: refused too.
    A = np.ones((30, 2, 2), dtype=np.uint8)
    npy = _save_bulk(tmp_path / "s.npy", A, field="GF(7)", op="det")
    run(npy, tmp_path / "r.npy", chunk_size=10)
    bj = tmp_path / "r.npy.journal"
    bj.write_bytes(b"".join(bj.read_bytes().splitlines(keepends=True)[:2]))
    for name in ("r.npy", "r.errors.jsonl"):
        os.replace(tmp_path / name, tmp_path / (name + ".partial"))
    os.remove(tmp_path / "r.json")
    (tmp_path / "s.json").write_text('{"field": "GF(7)", "op": "rank"}')
    r = _cli_here("run", npy, "--out", tmp_path / "r.npy", "-q", "--resume")
    assert r.returncode == 2 and "another sidecar (op differs)" in r.stderr


# --------------------------------------------------------------------------- bad input

def test_bad_lines_become_error_lines_and_valid_records_are_kept(tmp_path):
    good = [{"id": f"g{i}", "field": "GF(7)", "op": "det", "matrix": [[i % 7, 1], [2, 3]]}
            for i in range(30)]
    raw = [
        '{"id": "j1", "field": "GF(7)", "op": "det", "matrix": [[1, 2], [3, 4]],,}\n',
        '\n',
        '{"id": "u1", "field": "GF(7)", "op": "transpose", "matrix": [[1]]}\n',
        '{"id": "s1", "field": "GF(7)", "op": "inv", "matrix": [[1, 2, 3]]}\n',
        '{"id": "r1", "field": "GF(7)", "op": "det", "matrix": [[1, 2], [3]]}\n',
        '{"id": "e1", "field": "GF(7)", "op": "det", "matrix": [[7]]}\n',
        '{"id": "h1", "field": "GF(2^8)", "op": "det", "matrix": [["zz"]]}\n',
        '{"id": "b1", "field": "GF(7)", "op": "det", "matrix": [[true]]}\n',
        '{"id": "f1", "field": "GF(9)", "op": "det", "matrix": [[1]]}\n',
        '{"id": "n1", "field": "GF(7)", "op": "solve", "matrix": [[1]]}\n',
        '[1, 2, 3]\n',
        '{"field": "GF(7)", "op": "det", "matrix": [[1]]}\n',
        '{"id": "t1", "field": "GF(7)", "op": "det", "matrix": [[1, 2], [3',  # truncated
    ]
    inp = _write_jsonl(tmp_path / "in.jsonl", good[:15], raw[:6])
    with open(inp, "a") as fh:
        for rec in good[15:]:
            fh.write(json.dumps(rec) + "\n")
        fh.writelines(raw[6:])
    r = _cli_here("run", inp, "--out", tmp_path / "out.jsonl")
    assert r.returncode == 1
    assert "failed" in r.stderr
    lines = _read_jsonl(tmp_path / "out.jsonl")
    F = gfla.field("GF(7)")
    results = {line["id"]: line for line in lines if "result" in line}
    assert sorted(results) == sorted(g["id"] for g in good)  # nothing lost
    for g in good:
        assert results[g["id"]]["result"] == F.det(g["matrix"])
    errors = [line for line in lines if "error" in line]
    assert len(lines) == len(good) + len(raw) - 1  # the blank line gives no output
    by_id = {e["id"]: e["error"]["message"] for e in errors}
    assert "not valid JSON" in by_id["j1"]
    assert "unknown op 'transpose'" in by_id["u1"]
    assert "square" in by_id["s1"]
    assert "row 2 has 1 entries" in by_id["r1"]
    assert "outside GF(7)" in by_id["e1"]
    assert "hexadecimal" in by_id["h1"]
    assert "true is not an integer" in by_id["b1"]
    assert "GF(9)" in by_id["f1"]
    assert "needs 'rhs'" in by_id["n1"]
    assert "not valid JSON" in by_id["t1"]  # the truncated last line keeps its id
    nulls = [e for e in errors if e["id"] is None]
    assert {e["error"]["message"] for e in nulls} == {
        "line 41 is not a JSON object", "record has no 'id'"}
    assert all(isinstance(e["line"], int) for e in errors)


def test_mixed_sizes_in_npy_and_mismatched_sidecars_are_refused(tmp_path):
    mixed = np.empty(2, dtype=object)
    mixed[0] = np.zeros((2, 2), dtype=np.int64)
    mixed[1] = np.zeros((3, 3), dtype=np.int64)
    np.save(tmp_path / "mixed.npy", mixed, allow_pickle=True)
    (tmp_path / "mixed.json").write_text('{"field": "GF(7)", "op": "inv"}')
    r = _cli_here("run", tmp_path / "mixed.npy", "--out", tmp_path / "o.npy")
    assert r.returncode == 2 and r.stderr.count("\n") == 1
    assert "Python objects" in r.stderr and "different sizes" in r.stderr
    A = np.zeros((5, 3, 3), dtype=np.uint8)
    cases = [({"field": "GF(7)", "op": "inv", "count": 6}, "count 6 in the sidecar, 5"),
             ({"field": "GF(7)", "op": "inv", "shape": [4, 4]}, "shape [4, 4] in the sidecar"),
             ({"field": "GF(7)", "op": "inv", "dtype": "int64"}, "dtype 'int64' in the sidecar"),
             ({"op": "inv"}, "names no 'field'"),
             ({"field": "GF(7)", "op": "minpoly"}, "not available for .npy"),
             ({"field": "GF(7)", "op": "solve"}, "needs 'rhs'"),
             ({"field": "GF(6)", "op": "inv"}, "not prime")]
    for k, (sidecar, message) in enumerate(cases):
        inp = _save_bulk(tmp_path / f"c{k}.npy", A, **sidecar)
        r = _cli_here("run", inp, "--out", tmp_path / f"o{k}.npy")
        assert r.returncode == 2, (sidecar, r.stderr)
        assert r.stderr.count("\n") == 1 and message in r.stderr, (sidecar, r.stderr)
        assert "Traceback" not in r.stderr
    np.save(tmp_path / "nosidecar.npy", A)
    r = _cli_here("run", tmp_path / "nosidecar.npy", "--out", tmp_path / "o.npy")
    assert r.returncode == 2 and "needs a sidecar" in r.stderr
    np.save(tmp_path / "rect.npy", np.zeros((5, 2, 3), dtype=np.uint8))
    (tmp_path / "rect.json").write_text('{"field": "GF(7)", "op": "det"}')
    r = _cli_here("run", tmp_path / "rect.npy", "--out", tmp_path / "o.npy")
    assert r.returncode == 2 and "square" in r.stderr


def test_unreadable_inputs_exit_2(tmp_path):
    r = _cli_here("run", tmp_path / "missing.jsonl", "--out", tmp_path / "o.jsonl")
    assert r.returncode == 2 and r.stderr == f"error: {tmp_path / 'missing.jsonl'}: no such file\n"
    (tmp_path / "bin.dat").write_bytes(b"\x00\x01\x02garbage")
    r = _cli_here("run", tmp_path / "bin.dat", "--out", tmp_path / "o.jsonl")
    assert r.returncode == 2 and "neither JSON Lines" in r.stderr
    r = _cli_here("run", tmp_path, "--out", tmp_path / "o.jsonl")
    assert r.returncode == 2 and "directory" in r.stderr
    r = _cli_here("run", tmp_path / "missing.jsonl")
    assert r.returncode == 2 and "--out" in r.stderr


# --------------------------------------------------------------------------- CLI

def test_cli_summary_json_exit_0_and_help():
    r = _cli_here("run", "--help")
    assert r.returncode == 0 and "gfla batch run records.jsonl --out results.jsonl" in r.stdout
    r = _cli_here("--help")
    assert r.returncode == 0 and "printf" in r.stdout


def test_cli_json_summary_and_progress_callback(tmp_path):
    recs = [{"id": i, "field": "GF(2^8)", "op": "rank", "matrix": [[i % 256, 1], [0, 1]]}
            for i in range(500)]
    inp = _write_jsonl(tmp_path / "in.jsonl", recs)
    r = _cli_here("run", inp, "--out", tmp_path / "out.jsonl", "--json", "--chunk-size", "100")
    assert r.returncode == 0, r.stderr
    summary = json.loads(r.stdout)
    assert summary["records"] == 500 and summary["failed"] == 0
    seen = []
    run(inp, tmp_path / "out2.jsonl", chunk_size=100,
        progress=lambda done, total, records: seen.append((done, total, records)))
    assert seen[0][0] == 0 and seen[-1][0] == seen[-1][1] == os.path.getsize(inp)
    assert [s[2] for s in seen] == [0, 100, 200, 300, 400, 500]


def test_cli_module_imports_no_numerical_code():
    code = ("import sys, gfla.cli.batch; "
            "print(sorted(m for m in ('numpy', 'numba', 'gfla.jobs.batch') if m in sys.modules))")
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert r.stdout.strip() == "[]", r.stdout + r.stderr


# --------------------------------------------------------------------------- known answers

def test_fips197_known_answers_through_the_batch_runner(tmp_path):
    inp = VECTORS / "fips197_known_answers.jsonl"
    s = run(inp, tmp_path / "ka.jsonl")
    assert s.exit_code == 0
    got = _read_jsonl(tmp_path / "ka.jsonl")
    want = _read_jsonl(VECTORS / "fips197_known_answers.expected.jsonl")
    assert got == want
    expect = {w["id"]: w["result"] for w in want}
    # Each expected value recomputed with galois, independently of gfla.
    mix = GF256([[2, 3, 1, 1], [1, 2, 3, 1], [1, 1, 2, 3], [3, 1, 1, 2]])
    assert np.array_equal(np.linalg.inv(mix), GF256(expect["fips197-inv-mixcolumns"]))
    assert np.array_equal(np.linalg.inv(GF256(expect["fips197-inv-mixcolumns"])), mix)
    column = GF256([[0xD4], [0xBF], [0x5D], [0x30]])  # FIPS 197 Appendix B, round 1
    assert (mix @ column).tolist() == expect["fips197-appendix-b-mixcolumns"]
    assert expect["fips197-appendix-b-mixcolumns"] == [[0x04], [0x66], [0x81], [0xE5]]
    assert expect["fips197-appendix-b-solve"]["solution"] == [0xD4, 0xBF, 0x5D, 0x30]
    assert int(GF256(0x57) * GF256(0x83)) == expect["fips197-4.2-product"][0][0] == 0xC1
    assert int(GF256(0x57) * GF256(0x13)) == expect["fips197-4.2.1-product"][0][0] == 0xFE
    GF2 = galois.GF(2)
    affine = [json.loads(line) for line in inp.read_text().splitlines()][6]["matrix"]
    assert np.linalg.inv(GF2(affine)).tolist() == expect["fips197-5.1.1-affine-inverse"]
    assert int(np.linalg.matrix_rank(mix)) == expect["fips197-mixcolumns-rank"]


def test_fips197_bulk_known_answers(tmp_path):
    s = run(VECTORS / "fips197_mixcolumns_stack.npy", tmp_path / "ka.npy")
    assert s.exit_code == 0
    got = np.load(tmp_path / "ka.npy")
    want = np.load(VECTORS / "fips197_mixcolumns_stack.expected.npy")
    assert got.dtype == np.uint8 and np.array_equal(got, want)
    # FIPS 197 section 5.3.3: InvMixColumns is the inverse of MixColumns (galois).
    stack = np.load(VECTORS / "fips197_mixcolumns_stack.npy").astype(np.int64)
    assert np.array_equal(np.linalg.inv(GF256(stack[0])), GF256(want[0].astype(np.int64)))


def test_example_files_run(tmp_path):
    s = run(VECTORS / "example_records.jsonl", tmp_path / "ex.jsonl")
    lines = _read_jsonl(tmp_path / "ex.jsonl")
    assert len(lines) == 14 and s.failed == 3
    assert {line["id"] for line in lines if "error" in line} == {"disk-2", "bad-range", "bad-op"}
    s = run(VECTORS / "example_stack.npy", tmp_path / "exs.npy")
    assert s.records == 32
