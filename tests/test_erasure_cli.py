"""Tests of ``gfla erasure`` (cli/erasure.py), invoked through click's CliRunner.

Numbers are checked outside gfla: the generators are rebuilt here with galois from
their textbook definitions (systematic Vandermonde G = V (V[:k])^-1, after Plank's
Reed-Solomon tutorial; Cauchy C[i, j] = 1 / (x_i + y_j), after Bloemer et al.) and every
decoding row is checked by the identity ``row @ G[read] = G[lost]`` with galois
products; file contents against the original bytes and hashlib's SHA-256. Then every
kind of bad input from the issue is fed in: one line on stderr, exit code 2 (bad input)
or 1 (refusal), nothing written.
"""

import hashlib
import io
import json
import os
import shutil
import subprocess
import sys

import galois
import numpy as np
import pytest
from click.testing import CliRunner

from crashkit import snapshot
from gfla.cli.erasure import _Progress, erasure

GF256 = galois.GF(2**8, irreducible_poly=0x11D)  # gfla's default GF(2^8) modulus


@pytest.fixture(autouse=True)
def _no_debug(monkeypatch):
    monkeypatch.delenv("GFLA_DEBUG", raising=False)


def run(*args):
    return CliRunner().invoke(erasure, [str(a) for a in args])


def ok(*args):
    result = run(*args)
    assert result.exit_code == 0, (result.exit_code, result.output)
    assert result.stderr == ""
    return result.stdout


def refused(code, *args):
    """Run, expect exit ``code`` and exactly one stderr line starting with 'error: '."""
    result = run(*args)
    assert result.exit_code == code, (result.exit_code, result.output)
    lines = result.stderr.splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), result.stderr
    assert "Traceback" not in result.output
    return result


def reference_generator(k, m, construction):
    """The systematic generator built with galois from its definition."""
    if construction == "vandermonde":
        points = GF256(np.arange(k + m))
        V = points[:, None] ** np.arange(k)[None, :]
        return V @ np.linalg.inv(V[:k])
    xs, ys = GF256(np.arange(k, k + m)), GF256(np.arange(k))
    return np.vstack([GF256(np.eye(k, dtype=np.int64)), GF256(1) / (xs[:, None] + ys[None, :])])


def check_plan(G, record):
    # Decoding identity (common practice): each decoding row times the generator rows
    # of the shards read gives the generator row of the shard it rebuilds.
    read, rebuild = record["read"], record["rebuild"]
    M = GF256(np.array(record["decoding_matrix"], dtype=np.int64).reshape(len(rebuild), -1))
    assert len(read) == G.shape[1]
    if rebuild:
        assert np.array_equal(M @ G[read], G[rebuild])


# --------------------------------------------------------------------------- help

@pytest.mark.parametrize("command", [None, "matrix", "table", "encode", "verify", "decode",
                                     "repair"])
def test_help_has_a_runnable_example(command):
    out = ok(*([command] if command else []), "--help")
    assert "Examples:" in out
    assert f"gfla erasure {command or ''}".strip() in out


def test_import_stays_light():
    # gfla --help must stay fast: importing the group loads no numpy, numba or galois.
    code = ("import sys, gfla.cli.erasure; "
            "print(sorted(m for m in ('numpy', 'numba', 'galois', 'gfla.jobs') "
            "if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True).stdout
    assert out.strip() == "[]"


# --------------------------------------------------------------------------- matrix

@pytest.mark.parametrize("construction", ["vandermonde", "cauchy"])
def test_matrix_json_against_galois(construction):
    k, m = 10, 4
    G = reference_generator(k, m, construction)
    for lost in ("2,5,11", "0,1,2,3", "10,11,12,13", "13", "4,9"):
        payload = json.loads(ok("matrix", "-k", k, "-m", m, "--construction", construction,
                                "--lost", lost, "--json"))
        assert payload["lost"] == sorted(int(x) for x in lost.split(","))
        survivors = [i for i in range(14) if i not in payload["lost"]]
        assert payload["read"] == survivors[:10]
        assert payload["rebuild"] == payload["lost_data"] + payload["lost_parity"]
        assert payload["field"] == "GF(2^8)" and payload["modulus"] == 0x11D
        check_plan(G, payload)


def test_matrix_text_matches_json():
    text = ok("matrix", "-k", 10, "-m", 4, "--lost", "2,5,11")
    payload = json.loads(ok("matrix", "-k", 10, "-m", 4, "--lost", "2,5,11", "--json"))
    rows = [line for line in text.splitlines() if line.strip().startswith(("data", "parity"))]
    assert [int(r.split(":")[0].split()[-1]) for r in rows] == [2, 5, 11]
    parsed = [[int(v, 16) for v in r.split(":")[1].split()] for r in rows]
    assert parsed == payload["decoding_matrix"]
    assert "read: 0 1 3 4 6 7 8 9 10 12" in text


def test_matrix_too_many_lost():
    result = refused(1, "matrix", "-k", 10, "-m", 4, "--lost", "0,2,5,11,13")
    assert "1 more missing" in result.stderr and "5 of 14 shards lost" in result.stderr
    result = run("matrix", "-k", 10, "-m", 4, "--lost", "0,1,2,3,4,5", "--json")
    assert result.exit_code == 1
    payload = json.loads(result.stdout)
    assert payload["kind"] == "TooFewShardsError"
    assert payload["certificate"]["short"] == 2 and payload["certificate"]["intact"] == 8


@pytest.mark.parametrize("args", [
    ("-k", 10, "-m", 4, "--lost", "2,x"),
    ("-k", 10, "-m", 4, "--lost", "14"),
    ("-k", 10, "-m", 4, "--lost", "3,3"),
    ("-k", 0, "-m", 4, "--lost", "1"),
    ("-k", 200, "-m", 57, "--lost", "1"),
    ("-k", 4, "-m", 2, "--lost", "1", "--field", "GF(2^4)"),
    ("-k", 4, "-m", 2, "--lost", "1", "--modulus", "zz"),
    ("-k", 4, "-m", 2, "--lost", "1", "--modulus", "0x100"),
    ("-k", 4, "-m", 2, "--lost", "1", "--construction", "other"),
    ("-m", 2, "--lost", "1"),
])
def test_matrix_bad_input(args):
    refused(2, "matrix", *args)


def test_matrix_gf16():
    # G = V T with T = (V[:k])^-1 invertible, so row @ G[read] = G[t] is equivalent to
    # row @ V[read] = V[t]: checked on the Vandermonde matrix itself (galois powers and
    # products), which needs no galois inverse.
    payload = json.loads(ok("matrix", "-k", 3, "-m", 3, "--field", "GF(2^16)", "--lost",
                            "0,4", "--json"))
    GF = galois.GF(2**16, irreducible_poly=0x1002D)
    V = GF(np.arange(6))[:, None] ** np.arange(3)[None, :]
    M = GF(np.array(payload["decoding_matrix"]))
    assert payload["rebuild"] == [0, 4] and payload["read"] == [1, 2, 3]
    assert np.array_equal(M @ V[payload["read"]], V[payload["rebuild"]])


# --------------------------------------------------------------------------- table

def test_table_file(tmp_path):
    out = tmp_path / "rs.jsonl"
    summary = ok("table", "-k", 10, "-m", 4, "--max-lost", 4, "--out", out)
    assert "1470 erasure patterns" in summary
    lines = out.read_text().splitlines()
    header = json.loads(lines[0])
    assert header["patterns"] == 1470 == len(lines) - 1  # 14 + 91 + 364 + 1001
    records = [json.loads(line) for line in lines[1:]]
    assert sum(1 for r in records if len(r["lost"]) == 4) == 1001  # C(14, 4)
    assert len({tuple(r["lost"]) for r in records}) == 1470
    G = reference_generator(10, 4, "vandermonde")
    for record in records[::37]:
        check_plan(G, record)
    before = snapshot(tmp_path)
    refused(2, "table", "-k", 10, "-m", 4, "--max-lost", 2, "--out", out)
    refused(2, "table", "-k", 10, "-m", 4, "--max-lost", 5, "--out", tmp_path / "x.jsonl")
    refused(2, "table", "-k", 10, "-m", 4, "--max-lost", 0, "--out", tmp_path / "x.jsonl")
    refused(2, "table", "-k", 10, "-m", 4, "--max-lost", 1, "--out", tmp_path / "no" / "x")
    assert snapshot(tmp_path) == before


def test_table_stdout_and_json():
    out = ok("table", "-k", 4, "-m", 2, "--max-lost", 2, "--construction", "cauchy",
             "--out", "-")
    lines = out.splitlines()
    assert len(lines) == 1 + 6 + 15
    G = reference_generator(4, 2, "cauchy")
    for line in lines[1:]:
        check_plan(G, json.loads(line))


# --------------------------------------------------------------------------- files

def _write(path, data):
    with open(path, "wb") as fh:
        fh.write(data)


def _read(path):
    with open(path, "rb") as fh:
        return fh.read()


def test_encode_verify_decode_repair(tmp_path):
    original = np.random.default_rng(4).integers(0, 256, size=50_001, dtype=np.uint8).tobytes()
    _write(tmp_path / "ledger.tar", original)
    out = ok("encode", tmp_path / "ledger.tar", "-k", 10, "-m", 4, "--out", tmp_path / "set",
             "--chunk-size", "1K")
    assert "any 10 rebuild the file" in out
    assert hashlib.sha256(original).hexdigest() in out
    names = sorted(os.listdir(tmp_path / "set"))
    assert names == ["manifest.json"] + [f"shard-{i:02d}.bin" for i in range(14)]
    manifest = json.loads(_read(tmp_path / "set" / "manifest.json"))
    # The manifest's checksums are the SHA-256 of the files (hashlib).
    for entry in manifest["shards"]:
        assert entry["sha256"] == hashlib.sha256(_read(tmp_path / "set" / entry["file"])).hexdigest()
    assert manifest["code"]["data_shards"] == 10 and manifest["code"]["parity_shards"] == 4
    assert manifest["original"]["length"] == len(original)
    # Parity = G[10:] @ data shards, by galois.
    S = manifest["shard_size"]
    padded = np.frombuffer(original + bytes(10 * S - len(original)), dtype=np.uint8)
    data = GF256(padded.reshape(10, S).astype(np.int64))
    parity = reference_generator(10, 4, "vandermonde")[10:] @ data
    for p in range(4):
        assert _read(tmp_path / "set" / f"shard-{10 + p:02d}.bin") == \
            np.asarray(parity[p]).astype(np.uint8).tobytes()

    assert "all 14 shards intact" in ok("verify", tmp_path / "set")
    # Damage: two shards gone, one truncated, one replaced by a shard of another file.
    _write(tmp_path / "other.tar", bytes(reversed(original)))
    ok("encode", tmp_path / "other.tar", "-k", 10, "-m", 4, "--out", tmp_path / "other", "-q")
    os.unlink(tmp_path / "set" / "shard-01.bin")
    os.unlink(tmp_path / "set" / "shard-12.bin")
    os.truncate(tmp_path / "set" / "shard-04.bin", 100)
    shutil.copy(tmp_path / "other" / "shard-07.bin", tmp_path / "set" / "shard-07.bin")
    result = refused(1, "verify", tmp_path / "set")
    assert "missing 1, 12" in result.stderr and "corrupt 4, 7" in result.stderr
    assert "recoverable" in result.stderr
    assert "truncated: 100 of" in result.stdout and "checksum mismatch" in result.stdout
    report = json.loads(run("verify", tmp_path / "set", "--json").stdout)["verify"]
    assert report["missing"] == [1, 12] and report["corrupt"] == [4, 7]

    out = ok("decode", tmp_path / "set", "--out", tmp_path / "back.tar", "--chunk-size", 4096)
    assert _read(tmp_path / "back.tar") == original
    assert hashlib.sha256(original).hexdigest() in out
    payload = json.loads(ok("decode", tmp_path / "set", "--out", tmp_path / "back2.tar",
                            "--json", "-q"))["decode"]
    assert payload["rebuilt"] == [1, 4, 7] and payload["read"] == [0, 2, 3, 5, 6, 8, 9, 10, 11, 13]
    assert _read(tmp_path / "back2.tar") == original

    out = ok("repair", tmp_path / "set")
    assert "repaired shards 1 4 7 12" in out
    assert sorted(os.listdir(tmp_path / "set")) == sorted(
        names + ["shard-04.bin.damaged", "shard-07.bin.damaged"])
    assert "all 14 shards intact" in ok("verify", tmp_path / "set")
    assert "nothing to repair" in ok("repair", tmp_path / "set")


def test_gf16_cauchy_round_trip(tmp_path):
    original = os.urandom(12_345)
    _write(tmp_path / "scan.img", original)
    payload = json.loads(ok("encode", tmp_path / "scan.img", "-k", 6, "-m", 3, "--field",
                            "GF(2^16)", "--construction", "cauchy", "--out", tmp_path / "s",
                            "--json"))["encode"]["manifest"]
    assert payload["code"]["symbol_bytes"] == 2 and payload["shard_size"] % 2 == 0
    for index in (0, 3, 8):
        os.unlink(tmp_path / "s" / payload["shards"][index]["file"])
    ok("decode", tmp_path / "s", "--out", tmp_path / "back.img")
    assert _read(tmp_path / "back.img") == original


# --------------------------------------------------------------------------- bad input

@pytest.fixture
def shard_set(tmp_path):
    _write(tmp_path / "in.bin", bytes(range(256)) * 40)
    ok("encode", tmp_path / "in.bin", "-k", 5, "-m", 2, "--out", tmp_path / "set")
    return tmp_path


def _reseal(path, edit):
    from gfla.jobs.erasure.manifest import canonical_digest, manifest_text

    body = json.loads(_read(path))
    edit(body)
    body.pop("manifest_sha256")
    body["manifest_sha256"] = canonical_digest(body)
    _write(path, manifest_text(body).encode())


def _all_commands_refuse(code, root, directory, message):
    before = snapshot(root)
    for args in (("verify", directory), ("decode", directory, "--out", root / "out.bin"),
                 ("repair", directory)):
        result = refused(code, *args)
        assert message in result.stderr, (args, result.stderr)
    assert snapshot(root) == before
    assert not os.path.exists(root / "out.bin")


def test_directory_missing(shard_set):
    _all_commands_refuse(2, shard_set, shard_set / "nowhere", "no such directory")


def test_manifest_malformed(shard_set):
    _write(shard_set / "set" / "manifest.json", b"{ not json")
    _all_commands_refuse(2, shard_set, shard_set / "set", "not valid JSON")
    _write(shard_set / "set" / "manifest.json", b"[1, 2, 3]")
    _all_commands_refuse(2, shard_set, shard_set / "set", "JSON object")
    os.unlink(shard_set / "set" / "manifest.json")
    _all_commands_refuse(2, shard_set, shard_set / "set", "no manifest.json")


def test_manifest_edited(shard_set):
    path = shard_set / "set" / "manifest.json"
    _write(path, _read(path).replace(b'"length": 10240', b'"length": 10241'))
    _all_commands_refuse(2, shard_set, shard_set / "set", "edited or damaged")


def test_manifest_for_another_code(shard_set):
    # Resealed with other code parameters: the recorded generator no longer matches.
    _reseal(shard_set / "set" / "manifest.json",
            lambda b: b["code"].update(construction="cauchy"))
    _all_commands_refuse(2, shard_set, shard_set / "set", "recorded generator")


def test_manifest_of_another_file(shard_set):
    _write(shard_set / "b.bin", bytes(range(255, -1, -1)) * 40)
    ok("encode", shard_set / "b.bin", "-k", 5, "-m", 2, "--out", shard_set / "b")
    shutil.copy(shard_set / "b" / "manifest.json", shard_set / "set" / "manifest.json")
    _all_commands_refuse(1, shard_set, shard_set / "set", "0 of 7 shards intact")


def test_manifest_path_escape_and_symlink(shard_set):
    path = shard_set / "set" / "manifest.json"
    original = _read(path)
    _reseal(path, lambda b: b["shards"][1].update(file="../in.bin"))
    _all_commands_refuse(2, shard_set, shard_set / "set", "not a plain name")
    _write(path, original)
    os.unlink(shard_set / "set" / "shard-02.bin")
    os.symlink(shard_set / "in.bin", shard_set / "set" / "shard-02.bin")
    _all_commands_refuse(2, shard_set, shard_set / "set", "symbolic link")


def test_truncated_shard_and_too_many_lost(shard_set):
    directory = shard_set / "set"
    os.truncate(directory / "shard-03.bin", 7)
    result = refused(1, "verify", directory)
    assert "corrupt 3" in result.stderr and "recoverable" in result.stderr
    os.unlink(directory / "shard-00.bin")
    os.unlink(directory / "shard-06.bin")
    before = snapshot(shard_set)
    for args in (("decode", directory, "--out", shard_set / "out.bin"), ("repair", directory)):
        result = refused(1, *args)
        assert "4 of 7 shards intact, 5 needed, 1 more missing" in result.stderr
        assert "missing 0, 6" in result.stderr and "corrupt 3" in result.stderr
    assert snapshot(shard_set) == before
    assert "NOT recoverable" in refused(1, "verify", directory).stderr


def test_shard_from_another_file(shard_set):
    _write(shard_set / "b.bin", bytes(range(255, -1, -1)) * 40)
    ok("encode", shard_set / "b.bin", "-k", 5, "-m", 2, "--out", shard_set / "b")
    shutil.copy(shard_set / "b" / "shard-05.bin", shard_set / "set" / "shard-05.bin")
    result = refused(1, "verify", shard_set / "set")
    assert "corrupt 5" in result.stderr
    for index in (0, 1):
        shutil.copy(shard_set / "b" / f"shard-0{index}.bin",
                    shard_set / "set" / f"shard-0{index}.bin")
    before = snapshot(shard_set)
    result = refused(1, "decode", shard_set / "set", "--out", shard_set / "out.bin")
    assert "corrupt 0, 1, 5" in result.stderr
    assert snapshot(shard_set) == before


def test_encode_and_decode_bad_paths(shard_set):
    before = snapshot(shard_set)
    refused(2, "encode", shard_set / "missing.bin", "-k", 3, "-m", 2, "--out", shard_set / "x")
    refused(2, "encode", shard_set / "set", "-k", 3, "-m", 2, "--out", shard_set / "x")
    refused(2, "encode", shard_set / "in.bin", "-k", 3, "-m", 2, "--out", shard_set / "set")
    refused(2, "encode", shard_set / "in.bin", "-k", 3, "-m", 2, "--out", shard_set / "in.bin")
    refused(2, "encode", shard_set / "in.bin", "-k", 3, "-m", 2, "--out",
            shard_set / "no" / "where")
    refused(2, "encode", shard_set / "in.bin", "-k", 3, "-m", 2, "--out", shard_set / "x",
            "--chunk-size", "lots")
    refused(2, "decode", shard_set / "set", "--out", shard_set / "in.bin")
    refused(2, "decode", shard_set / "set", "--out", shard_set / "set" / "shard-00.bin")
    refused(2, "decode", shard_set / "set", "--out", shard_set / "no" / "out.bin")
    assert snapshot(shard_set) == before
    assert not any(n.startswith(".") for n in os.listdir(shard_set))


def test_progress_renderer():
    # The bar is drawn only when enabled (a terminal and no --quiet); CliRunner's
    # stderr is not a terminal, which the runs above rely on for a one-line stderr.
    bar = _Progress(quiet=False)
    assert not bar.enabled
    bar.enabled, bar.stream = True, io.StringIO()
    bar("encoding", 0, 100)
    bar("encoding", 100, 100)
    bar("checking shards", 50, 100)
    bar.finish()
    text = bar.stream.getvalue()
    assert "encoding" in text and "100.0%" in text and " 50.0%" in text
    assert text.endswith("\n") and text.count("\n") == 2
    quiet = _Progress(quiet=True)
    assert not quiet.enabled
