"""Tests of the gfla command line (gfla.cli).

Every command is run once on good input and its numbers are checked outside gfla:
against FIPS 197 (the AES MixColumns matrix and its inverse), against galois (GF(p) and
GF(2^k) arithmetic, ranks, nullspaces, characteristic polynomials, polynomial
factorisation), against sympy (integer determinants, factorisation of orders) and against
handbook formulas named beside each check. Then every kind of bad input is fed in and the
exit code and the one-line stderr are checked.

Note on galois: ``galois.GF(2**8)`` uses the Conway polynomial x^8+x^4+x^3+x^2+1 (0x11d)
by default (seen with galois 0.4: ``galois.GF(2**8).irreducible_poly``), so every GF(2^8)
reference below passes ``irreducible_poly=0x11b`` explicitly, and the CLI is given
``--modulus 0x11b``.
"""

import json
import os
import shutil
import subprocess
import sys

import galois
import numpy as np
import pytest
import sympy
from click.testing import CliRunner

import gfla
from gfla.cli.main import cli

# GF(2^8) with the AES polynomial x^8+x^4+x^3+x+1 (FIPS 197, section 4.2), built by galois.
GF256 = galois.GF(2**8, irreducible_poly=0x11B)
AES = ["--field", "GF(2^8)", "--modulus", "0x11b"]

# FIPS 197, section 5.1.3 (MixColumns) and section 5.3.3 (InvMixColumns).
MIX_COLUMNS = "02 03 01 01; 01 02 03 01; 01 01 02 03; 03 01 01 02"
INV_MIX_COLUMNS = [[0x0E, 0x0B, 0x0D, 0x09], [0x09, 0x0E, 0x0B, 0x0D],
                   [0x0D, 0x09, 0x0E, 0x0B], [0x0B, 0x0D, 0x09, 0x0E]]


@pytest.fixture(autouse=True)
def _no_debug(monkeypatch):
    monkeypatch.delenv("GFLA_DEBUG", raising=False)


def run(*args, input=None, env=None):
    return CliRunner().invoke(cli, [str(a) for a in args], input=input, env=env)


def ok(*args, input=None):
    result = run(*args, input=input)
    assert result.exit_code == 0, (result.exit_code, result.output)
    assert result.stderr == ""
    return result.stdout


def ok_json(*args, input=None):
    out = ok(*args, "--json", input=input)
    assert out.count("\n") == 1  # exactly one JSON object, on one line
    return json.loads(out)


def assert_input_error(result, *fragments):
    """Exit code 2, exactly one line on stderr starting 'error: ', no traceback."""
    assert result.exit_code == 2, (result.exit_code, result.output)
    lines = result.stderr.splitlines()
    assert len(lines) == 1, result.stderr
    assert lines[0].startswith("error: "), lines[0]
    assert "Traceback" not in result.output
    assert result.stdout == ""
    for fragment in fragments:
        assert fragment in lines[0], (fragment, lines[0])
    return lines[0]


def gf(order, rows):
    return galois.GF(order)(np.array(rows, dtype=np.int64))


# =========================================================================== good input

def test_info_gf256_aes_modulus():
    data = ok_json("info", "GF(2^8)", "--modulus", "0x11b")
    info = data["info"]
    assert data["field"] == "GF(2^8)" and data["modulus"] == 0x11B
    assert info["order"] == 256 and info["characteristic"] == 2
    assert info["modulus"] == 0x11B
    # galois: x^8+x^4+x^3+x+1 is irreducible but not primitive.
    poly = galois.Poly.Int(0x11B, field=galois.GF(2))
    assert poly.is_irreducible() and not poly.is_primitive()
    assert info["primitive"] is False
    # The generator must have multiplicative order 255 (galois).
    assert GF256(info["generator"]).multiplicative_order() == 255
    text = ok("info", "GF(2^8)", "--modulus", "0x11b")
    assert "0x11b" in text and "x^8 + x^4 + x^3 + x + 1" in text


def test_info_prime_field_generator_is_primitive_root():
    data = ok_json("info", "--field", "GF(2^61-1)")
    p = 2**61 - 1
    assert data["info"]["order"] == p and data["info"]["characteristic"] == p
    # sympy: g is a primitive root mod p exactly when its order is p - 1.
    assert sympy.n_order(data["info"]["generator"], p) == p - 1


def test_mul_gf256_against_galois():
    A = "02 03; 01 02"
    B = "01 00; 0e 01"
    data = ok_json("mul", *AES, "--hex", A, B)
    expected = GF256([[2, 3], [1, 2]]) @ GF256([[1, 0], [0x0E, 1]])  # galois
    assert data["product"] == expected.tolist()
    assert data["field"] == "GF(2^8)"


def test_mul_chain_and_files_over_z2_64(tmp_path):
    # Z/2^64 entries above 2^63 survive text and .npy (Python-int reference, mod 2^64).
    n = 2**64
    left = [[n - 1, 2], [3, n - 5]]
    right = [[7, n - 2], [1, 1]]
    a, b = tmp_path / "a.npy", tmp_path / "b.txt"
    np.save(a, np.array(left, dtype=np.uint64))
    b.write_text("\n".join(" ".join(str(v) for v in row) for row in right))
    data = ok_json("mul", "--field", "Z/2^64", "-i", a, "-i", b)
    expected = [[sum(left[i][k] * right[k][j] for k in range(2)) % n for j in range(2)]
                for i in range(2)]
    assert data["product"] == expected
    # three factors, left to right: A B A
    data = ok_json("mul", "--field", "GF(7)", "1 2; 3 4", "0 1; 1 0", "1 2; 3 4")
    ref = gf(7, [[1, 2], [3, 4]]) @ gf(7, [[0, 1], [1, 0]]) @ gf(7, [[1, 2], [3, 4]])
    assert data["product"] == ref.tolist()


def test_inv_mixcolumns_is_fips197_inverse():
    out = ok("inv", *AES, "--hex", MIX_COLUMNS)
    # FIPS 197, section 5.3.3: InvMixColumns uses 0e 0b 0d 09 (circulant).
    assert out == "\n".join(" ".join(f"{v:02x}" for v in row) for row in INV_MIX_COLUMNS) + "\n"
    data = ok_json("inv", *AES, "--hex", "--verify", MIX_COLUMNS)
    assert data["inverse"] == INV_MIX_COLUMNS and data["verified"] is True


@pytest.mark.parametrize("method", ["gauss-jordan", "cayley-hamilton"])
def test_inv_times_matrix_is_identity_galois(method):
    rows = [[5, 17, 0, 200], [1, 1, 1, 1], [99, 3, 250, 7], [0, 64, 128, 255]]
    text = "; ".join(" ".join(str(v) for v in r) for r in rows)
    data = ok_json("inv", *AES, "--method", method, text)
    A = GF256(rows)
    X = GF256(data["inverse"])
    assert np.array_equal(X @ A, GF256(np.eye(4, dtype=int)))  # galois
    assert np.array_equal(X, np.linalg.inv(A))  # galois


def test_inv_over_z_n_by_hensel():
    # A^{-1} mod 2^64 for an integer matrix with odd determinant; check with Python ints.
    n = 2**64
    rows = [[3, 1], [2, 1]]  # det 1
    data = ok_json("inv", "--field", "Z/2^64", "--method", "hensel", "3 1; 2 1")
    X = data["inverse"]
    prod = [[sum(X[i][k] * rows[k][j] for k in range(2)) % n for j in range(2)] for i in range(2)]
    assert prod == [[1, 0], [0, 1]]


def test_det_gf7_against_sympy():
    rows = [[1, 2, 3], [4, 5, 6], [0, 1, 5]]
    out = ok("det", "--field", "GF(7)", "1 2 3; 4 5 6; 0 1 5")
    # sympy integer determinant, reduced mod 7.
    assert int(sympy.Matrix(rows).det()) % 7 != 0
    assert int(out) == int(sympy.Matrix(rows).det()) % 7
    data = ok_json("det", "--field", "GF(7)", "1 2 3; 4 5 6; 0 1 5")
    assert data == {"field": "GF(7)", "det": int(sympy.Matrix(rows).det()) % 7}


def test_det_mixcolumns_hex_output():
    out = ok("det", *AES, "--hex", MIX_COLUMNS)
    expected = int(np.linalg.det(GF256([[2, 3, 1, 1], [1, 2, 3, 1], [1, 1, 2, 3], [3, 1, 1, 2]])))
    assert out.strip() == f"0x{expected:02x}"  # galois determinant


def test_rank_gf2_against_galois():
    rows = [[1, 1, 0], [0, 1, 1], [1, 0, 1]]
    out = ok("rank", "--field", "GF(2)", "1 1 0; 0 1 1; 1 0 1")
    assert int(out) == int(np.linalg.matrix_rank(gf(2, rows))) == 2  # galois


def test_nullspace_gf7_against_galois():
    rows = [[1, 2, 3], [2, 4, 6]]
    data = ok_json("nullspace", "--field", "GF(7)", "1 2 3; 2 4 6")
    basis = data["nullspace"]
    A = gf(7, rows)
    ref = A.null_space()  # galois
    assert data["dimension"] == len(basis) == ref.shape[0] == 2
    assert np.all(A @ gf(7, basis).T == 0)
    assert int(np.linalg.matrix_rank(gf(7, basis))) == 2
    text = ok("nullspace", "--field", "GF(7)", "1 2 3; 2 4 6")
    assert "dimension 2" in text


def test_nullspace_of_invertible_is_zero():
    data = ok_json("nullspace", "--field", "GF(7)", "1 2; 3 4")
    assert data["nullspace"] == [] and data["dimension"] == 0


def test_solve_gf7_against_galois():
    data = ok_json("solve", "--field", "GF(7)", "1 2 3; 2 4 6", "--rhs", "1 2")
    A = gf(7, [[1, 2, 3], [2, 4, 6]])
    assert data["consistent"] is True
    x = galois.GF(7)(data["solution"])
    assert np.array_equal(A @ x, galois.GF(7)([1, 2]))  # galois
    assert len(data["nullspace"]) == 2
    assert np.all(A @ gf(7, data["nullspace"]).T == 0)
    text = ok("solve", "--field", "GF(7)", "1 2 3; 2 4 6", "--rhs", "1; 2")
    assert "consistent: yes" in text and "nullspace (dimension 2)" in text


def test_solve_inconsistent_is_reported_not_refused():
    # x + 2y + 3z = 1 and 2x + 4y + 6z = 3 contradict each other over GF(7) (2*1 != 3).
    data = ok_json("solve", "--field", "GF(7)", "1 2 3; 2 4 6", "--rhs", "1 3")
    assert data["consistent"] is False and data["solution"] is None
    assert "consistent: no" in ok("solve", "--field", "GF(7)", "1 2 3; 2 4 6", "-b", "1 3")


@pytest.mark.parametrize("method", ["hessenberg", "berkowitz", "auto"])
def test_charpoly_gf256_against_galois(method):
    rows = [[2, 3, 1, 1], [1, 2, 3, 1], [1, 1, 2, 3], [3, 1, 1, 2]]
    data = ok_json("charpoly", *AES, "--hex", "--method", method, MIX_COLUMNS)
    ref = GF256(rows).characteristic_poly()  # galois
    assert data["charpoly"] == [int(c) for c in ref.coeffs]


def test_charpoly_csanky_large_characteristic_against_galois():
    rows = [[1, 2, 0], [0, 1, 2], [2, 0, 1]]
    data = ok_json("charpoly", "--field", "GF(101)", "--method", "csanky", "1 2 0; 0 1 2; 2 0 1")
    assert data["charpoly"] == [int(c) for c in gf(101, rows).characteristic_poly().coeffs]
    text = ok("charpoly", "--field", "GF(7)", "1 2; 3 4")
    # det(xI - A) = x^2 - 5x - 2 = x^2 + 2x + 5 over GF(7) (2x2 formula: x^2 - tr x + det).
    assert "charpoly: x^2 + 2*x + 5" in text


def test_charpoly_krylov_method_on_the_command_line():
    # det(xI - A) for A = [[1,2,3],[4,5,6],[7,8,10]]: trace 16, sum of principal 2x2
    # minors (5-8) + (10-21) + (50-48) = -12, det -3 (3x3 formula, common practice), so
    # x^3 - 16x^2 - 12x + 3 = x^3 + 6x^2 + 10x + 3 over GF(11).
    data = ok_json("charpoly", "--field", "GF(11)", "--method", "krylov",
                   "1 2 3; 4 5 6; 7 8 10")
    assert data["charpoly"] == [1, 6, 10, 3]
    assert_input_error(run("charpoly", "--field", "Z/12", "--method", "krylov", "1 2; 3 4"))


def _poly_at_matrix(field, coeffs, A):
    """Horner's rule with galois matrices (common practice)."""
    n = A.shape[0]
    P = field(np.zeros((n, n), dtype=int))
    for c in coeffs:
        P = P @ A + field(int(c)) * field(np.eye(n, dtype=int))
    return P


@pytest.mark.parametrize("order, rows", [
    (5, [[2, 0, 0], [0, 2, 0], [0, 0, 3]]),
    (7, [[1, 1, 0], [0, 1, 0], [0, 0, 1]]),
    (256, [[2, 3], [1, 1]]),
])
def test_minpoly_against_galois(order, rows):
    args = AES if order == 256 else ["--field", f"GF({order})"]
    text = "; ".join(" ".join(str(v) for v in r) for r in rows)
    data = ok_json("minpoly", *args, text)
    field = GF256 if order == 256 else galois.GF(order)
    A = field(np.array(rows))
    m = galois.Poly(data["minpoly"], field=field)
    assert data["minpoly"][0] == 1
    # m(A) = 0, m divides the characteristic polynomial, and no m / f with f an
    # irreducible factor of m annihilates A (galois arithmetic and factorisation).
    assert np.all(_poly_at_matrix(field, m.coeffs, A) == 0)
    assert A.characteristic_poly() % m == galois.Poly([0], field=field)
    for f in m.factors()[0]:
        smaller = m // f
        assert not np.all(_poly_at_matrix(field, smaller.coeffs, A) == 0)


def test_minpoly_text_of_scalar_matrix():
    # The minimal polynomial of c I is x - c (handbook): over GF(5), x - 2 = x + 3.
    assert "minpoly: x + 3" in ok("minpoly", "--field", "GF(5)", "2 0; 0 2")


def test_order_against_galois_and_sympy():
    rows = [[2, 3], [1, 1]]
    data = ok_json("order", *AES, "--hex", "02 03; 01 01")
    k = data["order"]
    A = GF256(rows)
    I = GF256(np.eye(2, dtype=int))
    assert np.array_equal(np.linalg.matrix_power(A, k), I)  # galois
    for q in sympy.factorint(k):  # sympy factorisation
        assert not np.array_equal(np.linalg.matrix_power(A, k // q), I)
    # A unipotent Jordan block [[1,1],[0,1]] over GF(p) has order p (handbook).
    assert int(ok("order", "--field", "GF(7)", "1 1; 0 1")) == 7


def test_power_jordan_block_formula():
    # [[1,1],[0,1]]^e = [[1,e],[0,1]] (handbook formula), reduced mod 7.
    for text, e in [("2^100", 2**100), ("2^64-1", 2**64 - 1), ("1000", 1000)]:
        data = ok_json("power", "--field", "GF(7)", "-e", text, "1 1; 0 1")
        assert data["power"] == [[1, e % 7], [0, 1]]
        assert data["exponent"] == e


def test_power_negative_is_inverse_fips197():
    data = ok_json("power", *AES, "--hex", "-e", "-1", MIX_COLUMNS)
    assert data["power"] == INV_MIX_COLUMNS  # FIPS 197, section 5.3.3
    out = ok("power", *AES, "--hex", "-e", "3", "02 03; 01 01")
    expected = np.linalg.matrix_power(GF256([[2, 3], [1, 1]]), 3)  # galois
    assert out.split() == [f"{int(v):02x}" for v in expected.flatten()]


def test_matrix_from_stdin_and_text_file(tmp_path):
    assert ok("det", "--field", "GF(7)", "-i", "-", input="1 2\n3 4\n").strip() == "5"
    path = tmp_path / "m.txt"
    path.write_text("# MixColumns, FIPS 197 5.1.3\n" + MIX_COLUMNS.replace(";", "\n"))
    assert ok_json("inv", *AES, "--hex", "-i", path)["inverse"] == INV_MIX_COLUMNS


def _check_square_analysis(field, matrix_rows, analysis):
    """Recompute the demo's reported facts with galois."""
    A = field(np.array(matrix_rows))
    n = A.shape[0]
    assert np.array_equal(field(np.array(analysis["inverse"])) @ A, field(np.eye(n, dtype=int)))
    assert analysis["det"] == int(np.linalg.det(A))
    assert analysis["rank"] == int(np.linalg.matrix_rank(A))
    assert analysis["charpoly"] == [int(c) for c in A.characteristic_poly().coeffs]
    assert np.all(_poly_at_matrix(field, analysis["minpoly"], A) == 0)
    k = analysis["order"]
    assert np.array_equal(np.linalg.matrix_power(A, k), field(np.eye(n, dtype=int)))
    for q in sympy.factorint(k):
        assert not np.array_equal(np.linalg.matrix_power(A, k // q), field(np.eye(n, dtype=int)))


def test_demo_runs_and_its_numbers_recompute_with_galois():
    text = ok("demo")
    assert "invented" in text and "Wrenlock" in text and "Hollowfen" in text
    assert "rebuilt payload equals the stored one: yes" in text
    data = ok_json("demo")
    names = [s["name"] for s in data["demo"]]
    assert names[:2] == ["mixing", "archive"]
    assert {"erasure", "mds", "keysched"} <= set(names)
    for section in data["demo"][:2]:
        assert section["field"] == "GF(2^8)" and section["modulus"] == 0x11B
        matrices = {m["label"]: m["matrix"] for m in section["matrices"]}
        subject = next(rows for label, rows in matrices.items()
                       if label.startswith(section["subject"]))
        _check_square_analysis(GF256, subject, section["analysis"])
    only = ok_json("demo", "--section", "archive")
    assert [s["name"] for s in only["demo"]] == ["archive"]


CORE_COMMANDS = ["info", "mul", "inv", "det", "rank", "solve", "nullspace", "charpoly",
                 "minpoly", "order", "power", "demo"]
# The job groups test their own examples (tests/test_<job>_cli.py); bench is run by CI.
JOB_COMMANDS = ["bench", "erasure", "keysched", "mixing", "batch"]


def test_help_of_every_command_has_an_example():
    assert set(CORE_COMMANDS) <= set(cli.commands)
    assert set(cli.commands) <= set(CORE_COMMANDS) | set(JOB_COMMANDS)
    for name in cli.commands:
        out = ok(name, "--help")
        assert "Examples:" in out and f"gfla {name} " in out.split("Examples:")[1]


def test_help_examples_run():
    """Run each example line of each core command's help text (shell quoting removed)."""
    import shlex

    for name in CORE_COMMANDS:
        help_text = ok(name, "--help")
        block = help_text.split("Examples:")[1].split("Options:")[0]
        for line in block.strip().splitlines():
            argv = shlex.split(line.strip())
            assert argv[0] == "gfla"
            result = run(*argv[1:])
            assert result.exit_code == 0, (line, result.output)


# =========================================================================== refusals (exit 1)

def test_singular_inverse_gives_a_kernel_vector():
    result = run("inv", "--field", "GF(7)", "1 2; 2 4")
    assert result.exit_code == 1
    assert result.stdout == ""
    assert result.stderr.startswith("refused: ")
    assert "kernel_vector" in result.stderr and "Traceback" not in result.output
    data = json.loads(run("inv", "--field", "GF(7)", "1 2; 2 4", "--json").stdout)
    v = data["certificate"]["kernel_vector"]
    assert data["kind"] == "SingularMatrixError" and data["field"] == "GF(7)"
    # Python-int check that A v = 0 mod 7 with v != 0.
    assert any(v) and [(1 * v[0] + 2 * v[1]) % 7, (2 * v[0] + 4 * v[1]) % 7] == [0, 0]


def test_singular_over_z_n_names_a_prime():
    # det = 6 shares the factor 2 and 3 with 12.
    result = run("inv", "--field", "Z/12", "2 0; 0 3", "--json")
    assert result.exit_code == 1
    data = json.loads(result.stdout)
    cert = data["certificate"]
    p = cert["prime_dividing_det"]
    assert sympy.isprime(p) and 12 % p == 0 and 6 % p == 0
    # A nonzero v with A v = 0 mod 12 proves A is not invertible (Python-int check).
    v = cert["kernel_vector"]
    assert [(2 * v[0]) % 12, (3 * v[1]) % 12] == [0, 0]
    assert any(x % 12 for x in v)


def test_order_and_negative_power_of_singular_are_refused():
    for args in (["order", "--field", "GF(7)", "1 2; 2 4"],
                 ["power", "--field", "GF(7)", "-e", "-1", "1 2; 2 4"]):
        result = run(*args)
        assert result.exit_code == 1, result.output
        assert result.stderr.startswith("refused: ") and "Traceback" not in result.output


# =========================================================================== bad input (exit 2)

def test_malformed_text():
    line = assert_input_error(run("det", "--field", "GF(7)", "1 2; x1 4"))
    assert "row 2, column 1: 'x1' is not an integer" in line
    assert_input_error(run("rank", "--field", "GF(7)", "1 2 3; 4 5"),
                       "row 2 has 2 entries, row 1 has 3")
    assert_input_error(run("inv", *AES, "--hex", "02 zz; 01 01"), "not a hexadecimal number")


def test_entry_outside_the_field():
    assert_input_error(run("det", "--field", "GF(7)", "1 2; 3 7"), "row 2, column 2", "7")
    assert_input_error(run("inv", *AES, "--hex", "02 100; 01 01"), "row 1, column 2")
    assert_input_error(run("det", "--field", "Z/2^64", str(2**64)), "row 1, column 1")


@pytest.mark.parametrize("command", ["inv", "det", "charpoly", "minpoly", "order"])
def test_non_square_where_square_is_needed(command):
    assert_input_error(run(command, "--field", "GF(7)", "1 2 3; 4 5 6"), "square")


def test_non_square_power_and_mismatched_product():
    assert_input_error(run("power", "--field", "GF(7)", "-e", "2", "1 2 3; 4 5 6"), "square")
    assert_input_error(run("mul", "--field", "GF(7)", "1 2 3; 4 5 6", "1 2; 3 4"))


def test_empty_input():
    assert_input_error(run("det", "--field", "GF(7)", ""), "empty matrix")
    assert_input_error(run("det", "--field", "GF(7)", "-i", "-", input=""), "empty matrix")
    assert_input_error(run("det", "--field", "GF(7)"), "no matrix given")
    assert_input_error(run("solve", "--field", "GF(7)", "1 2; 3 4", "--rhs", " "), "empty vector")


def test_composite_p_and_bad_specs():
    assert_input_error(run("det", "--field", "GF(15)", "1"), "15", "not prime")
    assert_input_error(run("info", "GF(2^61)"))
    assert_input_error(run("info", "Q(7)"), "not understood")


def test_reducible_modulus():
    # x^8 + 1 = (x + 1)^8 over GF(2) (Frobenius), so 0x101 is reducible.
    assert galois.Poly.Int(0x101, field=galois.GF(2)).is_irreducible() is False  # galois
    line = assert_input_error(run("inv", "--field", "GF(2^8)", "--modulus", "0x101", "1"))
    assert "reducible" in line or "irreducible" in line
    assert_input_error(run("info", "GF(2^8)", "--modulus", "zz"), "--modulus")


def test_missing_file():
    assert_input_error(run("det", "--field", "GF(7)", "-i", "/nonexistent/m.txt"), "no such file")
    assert_input_error(run("det", "--field", "GF(7)", "-i", "/nonexistent/m.npy"), "no such file")


def test_npy_with_object_dtype(tmp_path):
    path = tmp_path / "objects.npy"
    np.save(path, np.array([[1, 2], [3, "x"]], dtype=object), allow_pickle=True)
    assert_input_error(run("det", "--field", "GF(7)", "-i", path), "object dtype")


def test_npy_entry_outside_the_field(tmp_path):
    path = tmp_path / "m.npy"
    np.save(path, np.array([[1, 2], [3, 9]], dtype=np.int64))
    assert_input_error(run("det", "--field", "GF(7)", "-i", path), "row 2, column 2")


def test_usage_errors_are_one_line():
    assert_input_error(run("det", "1 2; 3 4"), "--field")
    assert_input_error(run("inv", "--field", "GF(7)", "--method", "magic", "1"), "--method")
    assert_input_error(run("det", "--field", "GF(7)", "1", "-i", "x.txt"), "not both")
    assert_input_error(run("mul", "--field", "GF(7)", "1 2; 3 4"), "at least two")
    assert_input_error(run("power", "--field", "GF(7)", "-e", "two", "1"), "exponent")
    assert_input_error(run("power", "--field", "GF(7)", "-e", "2^(10^9)", "1"), "exponent")
    assert_input_error(run("nosuchcommand"))
    assert_input_error(run("solve", "--field", "GF(7)", "1 2; 3 4", "--rhs", "1 2 3"))


def test_method_not_applicable_is_input_error():
    # Csanky divides by 1..n: refused when the characteristic (7) does not exceed n = 8.
    rows = "; ".join(" ".join("1" if i == j else "0" for j in range(8)) for i in range(8))
    assert_input_error(run("charpoly", "--field", "GF(7)", "--method", "csanky", rows))


# =========================================================================== internal errors

def test_internal_error_is_exit_3_without_traceback(monkeypatch):
    F = gfla.field("GF(7)")

    def broken(self, A):
        raise RuntimeError("simulated bug")

    monkeypatch.setattr(type(F), "det", broken)
    result = run("det", "--field", "GF(7)", "1 2; 3 4")
    assert result.exit_code == 3
    assert result.stderr.startswith("internal error: RuntimeError: simulated bug")
    assert len(result.stderr.splitlines()) == 1 and "Traceback" not in result.output
    # With GFLA_DEBUG=1 the exception is not swallowed (CliRunner records it).
    debug = run("det", "--field", "GF(7)", "1 2; 3 4", env={"GFLA_DEBUG": "1"})
    assert isinstance(debug.exception, RuntimeError)


# =========================================================================== installed script

def test_console_script_help_and_lazy_imports():
    script = shutil.which("gfla", path=os.path.dirname(sys.executable)) or shutil.which("gfla")
    argv = [script] if script else [sys.executable, "-c",
                                    "from gfla.cli.main import main; main()"]
    done = subprocess.run(argv + ["--help"], capture_output=True, text=True, timeout=60)
    assert done.returncode == 0 and "Usage: gfla" in done.stdout and done.stderr == ""
    # Importing the CLI must not import numpy, numba or galois (they load on use).
    probe = ("import sys, gfla.cli.main; "
             "print(sorted(m for m in ('numpy', 'numba', 'galois') if m in sys.modules))")
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True,
                          timeout=60)
    assert done.returncode == 0 and done.stdout.strip() == "[]", done.stdout + done.stderr
