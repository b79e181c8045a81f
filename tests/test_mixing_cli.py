"""Tests of ``gfla mixing`` (cli/mixing.py), run through click's CliRunner.

Results are checked against FIPS 197 and galois; every kind of bad input must give exit
code 2 and exactly one line on stderr; a failed --require gives exit code 1.
"""

import json
import shlex

import galois
import numpy as np
import pytest
from click.testing import CliRunner

from gfla.cli.mixing import mixing

AES = ["--field", "GF(2^8)", "--modulus", "0x11b"]
# FIPS 197, section 5.1.3 (MixColumns) and section 5.3.3 (InvMixColumns).
MIX_COLUMNS = "02 03 01 01; 01 02 03 01; 01 01 02 03; 03 01 01 02"
INV_MIX_COLUMNS = [[0x0E, 0x0B, 0x0D, 0x09], [0x09, 0x0E, 0x0B, 0x0D],
                   [0x0D, 0x09, 0x0E, 0x0B], [0x0B, 0x0D, 0x09, 0x0E]]
GF16 = galois.GF(2**4, irreducible_poly=galois.Poly.Int(0x13, field=galois.GF(2)))


@pytest.fixture(autouse=True)
def _no_debug(monkeypatch):
    monkeypatch.delenv("GFLA_DEBUG", raising=False)


def run(*args):
    return CliRunner().invoke(mixing, [str(a) for a in args])


def ok(*args):
    result = run(*args)
    assert result.exit_code == 0, (result.exit_code, result.output)
    return result


def one_line_error(result, code):
    assert result.exit_code == code, (result.exit_code, result.output)
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("error: ")
    assert "Traceback" not in result.output
    return lines[0]


def test_analyze_aes_text():
    out = ok("analyze", *AES, "--hex", MIX_COLUMNS, "--bp-runs", "1").stdout
    assert "mds: yes (all 69 square submatrices nonsingular)" in out
    assert "branch number: differential 5, linear 5" in out    # Daemen and Rijmen, 9.3
    assert "0e 0b 0d 09" in out                                # FIPS 197, 5.3.3
    assert "naive 152" in out


def test_analyze_aes_json_with_program():
    result = ok("analyze", *AES, "--hex", "--circulant", "02,03,01,01", "--show-program",
                "--bp-runs", "1", "--skip", "order", "--json")
    assert result.stdout.count("\n") == 1
    d = json.loads(result.stdout)
    for key in ("invertible", "inverse", "involutory", "orthogonal", "order", "charpoly",
                "minpoly", "mds", "branch_number", "bit_matrix", "xor_count"):
        assert key in d
    assert d["inverse"] == INV_MIX_COLUMNS                     # FIPS 197, 5.3.3
    assert d["mds"]["value"] is True
    xc = d["xor_count"]
    assert xc["verified"] is True and xc["optimized"] <= 100
    # run the printed program on every unit vector with numpy: it must give the matrix
    bits = np.array(d["bit_matrix"]["matrix"], dtype=np.uint8)
    prog = xc["program"]
    vals = list(np.eye(32, dtype=np.uint8))
    for a, b in prog["xors"]:
        vals.append(vals[a] ^ vals[b])
    assert (np.array([vals[s] for s in prog["outputs"]]) == bits).all()


def test_require_mds_fails_with_certificate():
    # circ(1,2,1,4) over GF(2^4): rows 0, 2 and columns 0, 2 hold [[1, 1], [1, 1]].
    result = run("analyze", "--field", "GF(2^4)", "--modulus", "0x13", "--circulant",
                 "1,2,1,4", "--skip", "xor", "--require", "mds")
    line = one_line_error(result, 1)
    assert "requirement failed: mds" in line
    assert "mds: no" in result.stdout
    d = json.loads(run("analyze", "--field", "GF(2^4)", "--modulus", "0x13",
                       "--circulant", "1,2,1,4", "--skip", "xor", "--json").stdout)
    cert = d["mds"]["singular_submatrix"]
    M = GF16(d["matrix"])
    assert int(np.linalg.det(M[np.ix_(cert["rows"], cert["columns"])])) == 0   # galois


def test_require_passes_and_involutory():
    ok("analyze", *AES, "--hex", MIX_COLUMNS, "--skip", "xor", "--require", "mds",
       "--require", "invertible")
    # MixColumns is not involutory (MixColumns^2 != I; FIPS 197, 5.3.3 gives a different
    # inverse)
    result = run("analyze", *AES, "--hex", MIX_COLUMNS, "--skip", "xor", "--require",
                 "involutory")
    assert "involutory" in one_line_error(result, 1)


def test_companion_power_and_binary_cells(tmp_path):
    # LED (Guo, Peyrin, Poschmann, Robshaw, CHES 2011): Serial(4,1,2,2)^4 is MDS over
    # GF(2^4) with x^4 + x + 1 (from memory).
    d = json.loads(ok("analyze", "--field", "GF(2^4)", "--modulus", "0x13", "--companion",
                      "1,2,2,1,4", "--power", "4", "--skip", "xor", "--require", "mds",
                      "--json").stdout)
    assert d["matrix"][0] == [4, 1, 2, 2]
    bits = np.array(d["bit_matrix"]["matrix"])
    path = tmp_path / "led_bits.txt"
    path.write_text("\n".join(" ".join(map(str, row)) for row in bits))
    b = json.loads(ok("analyze", "--field", "GF(2)", "--cell-size", "4", "-i", path,
                      "--skip", "xor", "--skip", "order", "--json").stdout)
    assert b["mds"]["value"] is True
    assert b["branch_number"]["differential"]["value"] == 5
    assert b["branch_number"]["linear"]["value"] == 5


@pytest.mark.parametrize("args,needle", [
    (["analyze", *AES, "1 2 3; 4 5 6"], "square"),
    (["analyze", *AES, "1 2; 3 256"], "outside"),
    (["analyze", "--field", "GF(2^8)", "--modulus", "0x11c", "1 2; 3 4"], "reducible"),
    (["analyze", "--field", "GF(2)", "--cell-size", "3", "1 0 0 0; 0 1 0 0; 0 0 1 0; 0 0 0 1"],
     "does not divide"),
    (["analyze", *AES, "--cell-size", "4", "1 2; 3 4"], "cell"),
    (["analyze", "--field", "GF(7)", "1 0; 0 1"], "GF(2^k)"),
    (["analyze", *AES, "--circulant", "1,2", "--hadamard", "1,2"], "one constructor"),
    (["analyze", *AES, "--circulant", "1,2", "1 2; 3 4"], "not several"),
    (["analyze", *AES, "--companion", "2,1,1"], "monic"),
    (["analyze", *AES, "--cauchy", "1,2", "2,3"], "x[1] + y[0] = 0"),
    (["analyze", *AES, "--hadamard", "1,2,3"], "power of two"),
    (["analyze", *AES, "--hex", "--circulant", "1,zz"], "hexadecimal"),
    (["analyze", *AES], "no matrix"),
    (["analyze", *AES, "--skip", "everything", "1 2; 3 4"], "everything"),
    (["search", *AES, "--family", "hadamard", "-n", "3", "--entries", "1,2"], "power of two"),
    (["search", *AES, "--family", "circulant", "-n", "12", "--entries", "1,2"], "sizes"),
    (["search", *AES, "--family", "cauchy", "--entries", "1,2,3"], "2n"),
    (["search", *AES, "--family", "circulant", "--entries", "1,2", "--require",
      "invertible", "--branch-number", "3"], "replaces"),
    (["search", *AES, "--family", "circulant", "--entries", "1,300"], "outside"),
])
def test_bad_input_exits_2_with_one_line(args, needle):
    line = one_line_error(run(*args), 2)
    assert needle in line, line


def test_search_writes_jsonl(tmp_path):
    path = tmp_path / "best.jsonl"
    result = ok("search", "--field", "GF(2^4)", "--modulus", "0x13", "--family",
                "circulant", "--hex", "--entries", "1,2,4,8,9", "--keep", "3", "-o", path,
                "--no-progress")
    assert "625 candidates" not in result.stderr
    assert "written to" in result.stdout
    lines = path.read_text().splitlines()
    assert len(lines) == 3
    for line in lines:
        item = json.loads(line)
        M = GF16(item["matrix"])
        # MDS recomputed with galois: every square submatrix of the 4 x 4 is nonsingular
        for s in range(1, 5):
            import itertools
            for r in itertools.combinations(range(4), s):
                for c in itertools.combinations(range(4), s):
                    assert int(np.linalg.det(M[np.ix_(r, c)])) != 0
        assert item["xor_count"]["optimized"] == len(item["program"]["xors"])


def test_search_json_and_estimate():
    d = json.loads(ok("search", "--field", "GF(2^4)", "--modulus", "0x13", "--family",
                      "hadamard", "--entries", "1,2,3,4,5,6", "--keep", "2", "--json",
                      "--no-progress").stdout)
    assert d["search"]["candidates"] == 6 ** 4
    assert len(d["search"]["best"]) == 2
    e = json.loads(ok("search", "--field", "GF(2^8)", "--family", "circulant",
                      "--estimate-only", "--json").stdout)
    assert e["estimate"]["candidates"] == 255 ** 4
    with_progress = ok("search", "--field", "GF(2^4)", "--modulus", "0x13", "--family",
                       "companion", "--entries", "1,2,4", "--keep", "1")
    assert with_progress.stderr.startswith("estimate: 81 candidates")


def test_search_nothing_found_exits_1():
    # circ(1,1,1,1) is the only candidate and it is singular (common practice: equal
    # rows), so no MDS matrix exists in this family.
    result = run("search", "--field", "GF(2^4)", "--family", "circulant", "--entries", "1",
                 "--no-progress")
    assert "no candidate" in one_line_error(result, 1)


def _help_examples(*command):
    text = ok(*command, "--help").stdout
    assert "Examples:" in text
    return [line.strip() for line in text.splitlines()
            if line.strip().startswith("gfla mixing ")]


def test_help_examples_run(tmp_path, monkeypatch):
    # every example printed in a help text is run and must succeed
    monkeypatch.chdir(tmp_path)
    examples = _help_examples() + _help_examples("analyze") + _help_examples("search")
    assert len(examples) >= 7
    for example in examples:
        args = shlex.split(example)[2:]
        if args[0] == "analyze" and "--skip" not in args:
            args += ["--bp-runs", "1", "--skip", "order"]
        if args[0] == "search":
            args += ["--no-progress"]
        result = run(*args)
        assert result.exit_code == 0, (example, result.output)
