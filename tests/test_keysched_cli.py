"""``gfla keysched``: output, exit codes, one-line errors, and the help examples.

Sources: the Simon32/64 key and round keys are from Beaulieu et al., "The SIMON and
SPECK Families of Lightweight Block Ciphers", 2013 (from memory; the library test
checks them against the paper's test vector through a Simon32/64 encryption).
"""

import json
import re
import shlex
import subprocess
import sys

import numpy as np
import pytest
from click.testing import CliRunner

from gfla.cli.keysched import keysched

SIMON_KEY = "1918 1110 0908 0100"


def run(args, input=None):
    return CliRunner().invoke(keysched, args, input=input, prog_name="gfla keysched")


def one_line_error(result, code):
    assert result.exit_code == code, (result.exit_code, result.stdout, result.stderr)
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("error: "), result.stderr
    assert "Traceback" not in result.stderr + result.stdout
    return lines[0]


def test_rounds_text_and_json():
    r = run(["rounds", "simon32-64", "--key", SIMON_KEY, "-r", "4"])
    assert r.exit_code == 0, r.stderr
    assert r.stdout.split("\n")[:5] == ["round 0: 0x0100", "round 1: 0x0908",
                                        "round 2: 0x1110", "round 3: 0x1918",
                                        "round 4: 0x71c3"]
    r = run(["rounds", "simon32-64", "--key", "0x1918111009080100", "-r", "2^60",
             "--only", "--states", "--json"])
    assert r.exit_code == 0, r.stderr
    d = json.loads(r.stdout)
    assert d["round_keys"][0]["round"] == 1 << 60
    assert d["round_keys"][0]["state"][-4:] == d["round_keys"][0]["round_key"][-4:]
    r2 = run(["rounds", "simon32-64", "--key", "0x1918111009080100", "-r",
              "2^60-1..2^60", "--json"])
    assert json.loads(r2.stdout)["round_keys"][1] == {
        "round": 1 << 60, "round_key": d["round_keys"][0]["round_key"]}


def test_analyze_json_and_text():
    r = run(["analyze", "simon32-64", "--json", "--up-to", "8"])
    assert r.exit_code == 0, r.stderr
    d = json.loads(r.stdout)
    assert d["state_bits"] == 64 and d["invertible"] is True
    assert d["period_linear"]["exact"] is True
    assert [f["rounds"] for f in d["fixed_spaces"]] == list(range(1, 9))
    r = run(["analyze", "wrenlock-80"])
    assert r.exit_code == 0, r.stderr
    for label in ("state bits:", "rank:", "minpoly:", "period, linear:",
                  "period, schedule:", "weak keys:"):
        assert label in r.stdout


def test_recover_unique_and_space():
    known = "0 0..15 0x0100\n1 0..15 0x0908\n2 0..15 0x1110\n3 0..15 0x1918\n"
    r = run(["recover", "simon32-64", "--known", "-", "--json"], input=known)
    assert r.exit_code == 0, r.stderr
    assert json.loads(r.stdout)["key"] == "0x1918111009080100"
    r = run(["recover", "simon32-64", "--round", "4", "--round-key", "0x71c3"])
    assert r.exit_code == 0
    assert "dimension 48" in r.stdout


def test_recover_inconsistent_known_bits(tmp_path):
    f = tmp_path / "leak.txt"
    f.write_text("# leaked bits\n0 0..15 0x0100\n1 0..15 0x0908\n2 0..15 0x1110\n"
                 "3 0..15 0x1918\n4 0..15 0x71c2\n")
    r = run(["recover", "simon32-64", "--known", str(f)])
    assert r.exit_code == 1
    assert r.stderr.startswith("refused: no master key has these round-key bits")
    assert "conflicting_equations:" in r.stderr
    r = run(["recover", "simon32-64", "--known", str(f), "--json"])
    assert r.exit_code == 1
    d = json.loads(r.stdout)
    assert d["kind"] == "InconsistentKnownBitsError"
    eqs = d["certificate"]["conflicting_equations"]
    assert any(e["round"] == 4 for e in eqs) and all("line" in e for e in eqs)


def test_non_affine_refused_exit_1(tmp_path):
    spec = tmp_path / "sbox.toml"
    spec.write_text('[state]\nwords = 2\nwidth = 4\n[[step]]\nop = "sbox"\nwords = ["w0"]\n'
                    "table = [12, 5, 6, 11, 9, 0, 10, 13, 3, 14, 15, 8, 4, 7, 1, 2]\n")
    r = run(["analyze", str(spec)])
    assert r.exit_code == 1
    assert r.stderr.startswith("refused: ") and "not affine" in r.stderr
    for key in ("x:", "y:", "f(0):", "f(x^y):"):
        assert key in r.stderr
    r = run(["analyze", str(spec), "--json"])
    d = json.loads(r.stdout)
    assert r.exit_code == 1 and d["kind"] == "NonAffineScheduleError"
    assert int(d["certificate"]["difference"], 16) != 0


SPEC = """[state]
words = 4
width = 4
[[step]]
op = "permute"
from = ["w1", "w2", "w3", "w0"]
[[step]]
op = "rotate"
word = "w0"
left = 1
"""


@pytest.mark.parametrize("edit,expect", [
    (('op = "rotate"', 'op = "twist"'),
     r"spec\.toml:8: step\[1\]\.op: unknown operation 'twist'"),
    (("width = 4", "width = 4\nbits = 15"), r"spec\.toml:4: state\.bits: the word widths add up to 16"),
    (('from = ["w1", "w2", "w3", "w0"]', 'from = ["w1", "w2", "w3", "w3"]'),
     r"spec\.toml:6: step\[0\]\.from: is not a permutation"),
    (("left = 1", "left = 1\nspin = 2"), r"spec\.toml:11: step\[1\]\.spin: unknown key"),
])
def test_bad_spec_exit_2(tmp_path, edit, expect):
    spec = tmp_path / "spec.toml"
    spec.write_text(SPEC.replace(*edit))
    line = one_line_error(run(["analyze", str(spec)]), 2)
    assert re.search(expect, line), line


def test_bad_inputs_exit_2(tmp_path):
    # a key of the wrong length
    line = one_line_error(run(["rounds", "simon32-64", "--key", "0x1" + "0" * 16, "-r", "3"]), 2)
    assert "wrong length" in line
    line = one_line_error(run(["recover", "simon32-64", "--round", "1",
                               "--round-key", "0x10000"]), 2)
    assert "wrong length" in line and "a round key has 16 bits" in line
    # a known-bits file with a bit out of range
    f = tmp_path / "k.txt"
    f.write_text("0 3 1\n2 16 0\n")
    line = one_line_error(run(["recover", "simon32-64", "--known", str(f)]), 2)
    assert f"{f}:2: bit 16 is out of range" in line
    # other input problems
    one_line_error(run(["rounds", "no-such-spec", "--key", "0x1", "-r", "1"]), 2)
    one_line_error(run(["rounds", "simon32-64", "--key", "xyz", "-r", "1"]), 2)
    one_line_error(run(["rounds", "simon32-64", "--key", "0x1", "-r", "5..2"]), 2)
    one_line_error(run(["rounds", "simon32-64", "--key", "0x1", "-r", "2^20"]), 2)
    one_line_error(run(["recover", "simon32-64", "--round", "1"]), 2)
    bad = tmp_path / "m.npy"
    np.save(bad, np.array([[1, 2], [0, 1]]))
    one_line_error(run(["analyze", str(bad)]), 2)


def test_raw_matrix_and_callable(tmp_path, monkeypatch):
    m = tmp_path / "rot.txt"
    n = 12
    rows = [[1 if j == (i - 5) % n else 0 for j in range(n)] for i in range(n)]
    m.write_text("\n".join(" ".join(map(str, r)) for r in rows))
    r = run(["analyze", str(m), "--json", "--up-to", "0"])
    assert r.exit_code == 0, r.stderr
    # rotation of 12 bits by 5: order 12 / gcd(5, 12) = 12 (common practice)
    assert json.loads(r.stdout)["period_linear"]["value"] == 12
    (tmp_path / "mysched.py").write_text(
        "def step(x):\n    return ((x << 3) | (x >> 13)) & 0xFFFF\n")
    monkeypatch.chdir(tmp_path)
    r = run(["analyze", "mysched:step", "--state-bits", "16", "--json", "--up-to", "0"])
    assert r.exit_code == 0, r.stderr
    assert json.loads(r.stdout)["period_linear"]["value"] == 16
    line = one_line_error(run(["analyze", "mysched:step"]), 2)
    assert "--state-bits" in line


def test_example_command():
    r = run(["example"])
    assert r.exit_code == 0 and "simon32-64" in r.stdout.split()
    r = run(["example", "wrenlock-80"])
    assert r.exit_code == 0 and "[state]" in r.stdout


def _help_examples(command):
    r = run([command, "--help"] if command else ["--help"])
    assert r.exit_code == 0
    assert "Examples:" in r.stdout
    block = r.stdout.split("Examples:", 1)[1].split("\n\n", 1)[0]
    out, pending = [], ""
    for line in block.splitlines():
        text = line.strip()
        if not text:
            continue
        pending = (pending + " " + text).strip() if pending else text
        if pending.endswith("|"):
            continue
        out.append(pending)
        pending = ""
    return out


@pytest.mark.parametrize("command", [None, "rounds", "analyze", "recover", "example"])
def test_help_examples_run(command, tmp_path):
    examples = _help_examples(command)
    assert examples
    for text in examples:
        stdin = None
        if "|" in text:
            producer, text = text.split("|", 1)
            stdin = subprocess.run(producer, shell=True, capture_output=True,
                                   text=True).stdout
        text = text.split(">")[0]
        args = shlex.split(text)
        assert args[:2] == ["gfla", "keysched"], text
        r = run(args[2:], input=stdin)
        assert r.exit_code == 0, (text, r.stderr)


def test_gfla_help_does_not_import_numpy():
    code = ("import sys, gfla.cli.keysched; "
            "print('numpy' in sys.modules, 'gfla.jobs.keysched' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert out.stdout.split() == ["False", "False"], out.stderr


def test_huge_round_numbers_are_input_errors_not_internal_ones():
    # 2^65536 has 19729 decimal digits, past Python's default limit of 4300 for
    # int-to-text conversion (Python documentation, sys.set_int_max_str_digits): the
    # message names the number by its size instead of failing to print it.
    r = run(["rounds", "simon32-64", "--key", SIMON_KEY, "-r", "2^65536"])
    assert "a 65537-bit integer" in one_line_error(r, 2)
