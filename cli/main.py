"""The ``gfla`` command: one small function per operation.

Each command reads its input (text or a file), builds the field with ``gfla.field``,
calls one gfla method and prints the result as text or as one JSON object. The numerical
parts of gfla are imported inside the commands so that ``gfla --help`` stays fast.
"""

import click

from . import demo as demo_report
from .common import (
    GflaGroup,
    base_payload,
    emit_json,
    field_options,
    format_element,
    format_matrix,
    format_polynomial,
    format_vector,
    gfla_command,
    load_field,
    matrix_input,
    output_options,
    parse_exponent,
    read_matrix,
    read_vector,
)

__all__ = ["cli", "main"]

CONTEXT = {"help_option_names": ["-h", "--help"], "max_content_width": 100}
INVERSE_METHODS = ["auto", "gauss-jordan", "cayley-hamilton", "hensel", "crt"]
CHARPOLY_METHODS = ["auto", "hessenberg", "berkowitz", "csanky", "krylov"]


@click.group(cls=GflaGroup, context_settings=CONTEXT)
@click.version_option(package_name="gfla", prog_name="gfla", message="%(prog)s %(version)s")
def cli():
    """Exact linear algebra over finite fields and residue rings.

    Fields and rings: GF(p) for a prime p, GF(2), GF(2^k) for 2 <= k <= 16 (modulus
    chosen with --modulus), and Z/n. A matrix is given as text, rows split by ';' or
    newlines, entries by blanks or commas (decimal, or hex with 0x; --hex reads bare
    hex), or with -i FILE (.npy or text). Entries are 0 .. size-1; matrix
    text that starts with '-' must follow '--'.

    \b
    Examples:
      gfla info 'GF(2^8)'
      gfla inv --field 'GF(2^8)' --hex '02 03; 01 01'
      gfla det --field 'GF(7)' '1 2; 3 4'
      gfla demo

    \b
    Exit codes: 0 done; 1 mathematical refusal (printed with a certificate);
    2 bad input or usage; 3 internal error (GFLA_DEBUG=1 shows the traceback).
    """


def main():
    """Console-script entry point."""
    cli.main(prog_name="gfla")


def _matrix(field, text, path, hex_text, name="matrix"):
    return field.asarray(read_matrix(text, path, hex_text, what=name), name=name)


# --------------------------------------------------------------------------- info

@cli.command()
@click.argument("spec", metavar="[SPEC]", required=False)
@field_options(required=False)
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of text.")
@gfla_command
def info(spec, field_spec, modulus, as_json):
    """Order, characteristic, modulus, generator.

    Facts about a field or ring. SPEC may be given as the argument or with --field.

    \b
    Examples:
      gfla info 'GF(2^8)'
      gfla info 'GF(2^8)' --modulus 0x11d --json
      gfla info 'Z/2^64'
    """
    if spec is not None and field_spec is not None and spec != field_spec:
        raise click.UsageError("give the field once: as SPEC or with --field, not both")
    spec = spec if spec is not None else field_spec
    if spec is None:
        raise click.UsageError("no field given (e.g. gfla info 'GF(2^8)')")
    F = load_field(spec, modulus)
    facts = dict(F.info())
    if as_json:
        payload = base_payload(F)
        payload["info"] = facts
        emit_json(payload)
        return
    for label, value in _info_lines(F, facts):
        click.echo(f"{label} {value}")


def _info_value(key, value):
    if isinstance(value, bool):
        return "yes" if value else "no"
    if value is None:
        return "none"
    if key == "factorization" and isinstance(value, (list, tuple)):
        return " * ".join(f"{p}^{e}" if e != 1 else str(p) for p, e in value)
    return str(value)


def _info_lines(F, facts):
    """(label, text) lines for ``gfla info``, aligned."""
    lines = [("field", F.spec)]
    if "is_field" in facts:
        lines.append(("kind", "field" if facts["is_field"] else "residue ring (not a field)"))
    for key in ("order", "characteristic", "degree"):
        if facts.get(key) is not None:
            lines.append((key, str(facts[key])))
    if facts.get("modulus") is not None:
        text = f"0x{int(facts['modulus']):x}"
        if facts.get("modulus_poly"):
            text += f" = {facts['modulus_poly']}"
        lines.append(("modulus", text))
    if facts.get("primitive") is not None:
        lines.append(("modulus is primitive", _info_value("primitive", facts["primitive"])))
    if "generator" in facts:
        value = facts["generator"]
        if value is None:
            cyclic = facts.get("unit_group_cyclic")
            shown = "none (the unit group is not cyclic)" if cyclic is False else "none"
        elif getattr(F, "modulus", None) is not None:
            shown = f"{format_element(value, F, True)} ({int(value)})"
        else:
            shown = str(int(value))
        lines.append(("generator", shown))
    known = {"field", "is_field", "order", "characteristic", "degree", "modulus",
             "modulus_poly", "primitive", "generator"}
    for key, value in facts.items():
        if key not in known:
            lines.append((key.replace("_", " "), _info_value(key, value)))
    width = max(len(label) for label, _ in lines) + 1
    return [((label + ":").ljust(width), value) for label, value in lines]


# --------------------------------------------------------------------------- mul

@cli.command()
@field_options()
@click.argument("matrices", metavar="[A B ...]", nargs=-1)
@click.option("-i", "--input", "input_paths", metavar="FILE", multiple=True,
              help="Read a factor from FILE (.npy or text); give -i once per factor, "
                   "left to right; '-' reads stdin (once).")
@output_options
@gfla_command
def mul(field_spec, modulus, matrices, input_paths, hex_text, as_json):
    """Product of matrices, left to right.

    Two or more factors, all given as text arguments or all with -i.

    \b
    Examples:
      gfla mul --field 'GF(7)' '1 2; 3 4' '5 6; 0 1'
      gfla mul --field 'GF(2^8)' --hex '02 03; 01 02' '01 00; 0e 01' --json
    """
    if matrices and input_paths:
        raise click.UsageError("give all factors as text or all with -i FILE, not a mix")
    sources = [(text, None) for text in matrices] + [(None, path) for path in input_paths]
    if len(sources) < 2:
        raise click.UsageError(
            f"multiplication needs at least two matrices, got {len(sources)}")
    F = load_field(field_spec, modulus)
    names = (["left matrix", "right matrix"] if len(sources) == 2
             else [f"matrix {k}" for k in range(1, len(sources) + 1)])
    factors = [_matrix(F, text, path, hex_text, name)
               for (text, path), name in zip(sources, names)]
    _check_product_output(F, factors, hex_text, as_json)
    product = factors[0]
    for factor in factors[1:]:
        product = F.matmul(product, factor)
    if as_json:
        emit_json({**base_payload(F), "product": product})
    else:
        click.echo(format_matrix(product, F, hex_text))


def _check_product_output(F, factors, hex_text, as_json):
    """Before multiplying: the printed product must fit in memory (gfla.limits); the
    product's own work arrays are checked by F.matmul."""
    from gfla.limits import check_text_output

    rows, cols = factors[0].shape[0], factors[-1].shape[1]
    if all(a.shape[1] == b.shape[0] for a, b in zip(factors, factors[1:])):
        digits = len(format(F.size - 1, "x" if hex_text else "d"))
        check_text_output(f"printing the {rows} x {cols} product"
                          f"{' as JSON' if as_json else ''}", rows * cols, digits)


# --------------------------------------------------------------------------- inv

@cli.command()
@field_options()
@matrix_input
@click.option("--method", type=click.Choice(INVERSE_METHODS), default="auto", show_default=True,
              help="Algorithm: Gauss-Jordan elimination, Cayley-Hamilton (from the "
                   "characteristic polynomial), or on Z/n Hensel lifting and CRT.")
@click.option("--verify", is_flag=True,
              help="Have gfla check that the inverse times the matrix is the identity.")
@output_options
@gfla_command
def inv(field_spec, modulus, matrix_text, input_path, method, verify, hex_text, as_json):
    """Inverse of a square matrix.

    A singular matrix is refused (exit code 1) with a kernel vector v, A v = 0, as the
    certificate; over Z/n also a prime dividing both n and the determinant.

    \b
    Examples:
      gfla inv --field 'GF(2^8)' --hex '02 03; 01 01'
      gfla inv --field 'Z/2^64' --method hensel --verify '3 1; 2 1'
    """
    F = load_field(field_spec, modulus)
    A = _matrix(F, matrix_text, input_path, hex_text)
    inverse = F.inv(A, method=method, verify=verify)
    if as_json:
        payload = {**base_payload(F), "inverse": inverse, "method": method}
        if verify:
            payload["verified"] = True
        emit_json(payload)
        return
    click.echo(format_matrix(inverse, F, hex_text))
    if verify:
        click.echo("# verified: inverse times matrix is the identity")


# --------------------------------------------------------------------------- det, rank

@cli.command()
@field_options()
@matrix_input
@output_options
@gfla_command
def det(field_spec, modulus, matrix_text, input_path, hex_text, as_json):
    """Determinant of a square matrix.

    \b
    Examples:
      gfla det --field 'GF(7)' '1 2; 3 4'
      gfla det --field 'GF(2^8)' --hex '02 03 01 01; 01 02 03 01; 01 01 02 03; 03 01 01 02'
    """
    F = load_field(field_spec, modulus)
    value = F.det(_matrix(F, matrix_text, input_path, hex_text))
    if as_json:
        emit_json({**base_payload(F), "det": int(value)})
    else:
        click.echo(format_element(value, F, hex_text))


@cli.command()
@field_options()
@matrix_input
@output_options
@gfla_command
def rank(field_spec, modulus, matrix_text, input_path, hex_text, as_json):
    """Rank of a matrix (any shape).

    \b
    Examples:
      gfla rank --field 'GF(2)' '1 1 0; 0 1 1; 1 0 1'
      gfla rank --field 'GF(5)' '1 2 3; 2 4 1' --json
    """
    F = load_field(field_spec, modulus)
    value = F.rank(_matrix(F, matrix_text, input_path, hex_text))
    if as_json:
        emit_json({**base_payload(F), "rank": int(value)})
    else:
        click.echo(int(value))


# --------------------------------------------------------------------------- nullspace, solve

def _basis_lines(basis, F, hex_text):
    rows = basis.tolist() if hasattr(basis, "tolist") else list(basis)
    if not rows:
        return []
    return [format_matrix(rows, F, hex_text, indent="  ")]


@cli.command()
@field_options()
@matrix_input
@output_options
@gfla_command
def nullspace(field_spec, modulus, matrix_text, input_path, hex_text, as_json):
    """Basis of the nullspace {x : A x = 0}.

    One basis vector per row (over Z/n: a generating set of the kernel module).

    \b
    Examples:
      gfla nullspace --field 'GF(2)' '1 1 0; 0 1 1; 1 0 1'
      gfla nullspace --field 'GF(7)' '1 2 3; 2 4 6' --json
    """
    F = load_field(field_spec, modulus)
    basis = F.nullspace(_matrix(F, matrix_text, input_path, hex_text))
    dimension = len(basis)
    if as_json:
        emit_json({**base_payload(F), "nullspace": basis, "dimension": dimension})
        return
    if dimension == 0:
        click.echo("# nullspace: {0} (dimension 0)")
        return
    click.echo(f"# nullspace basis, dimension {dimension} (each row v has A v = 0)")
    click.echo(format_matrix(basis, F, hex_text))


@cli.command()
@field_options()
@matrix_input
@click.option("-b", "--rhs", "rhs_text", metavar="VECTOR",
              help="Right-hand side b of A x = b, e.g. '1 2 3' or '1; 2; 3'.")
@click.option("--rhs-file", "rhs_path", metavar="FILE",
              help="Read the right-hand side from FILE (.npy or text).")
@output_options
@gfla_command
def solve(field_spec, modulus, matrix_text, input_path, rhs_text, rhs_path, hex_text, as_json):
    """Solve A x = b (solution and nullspace).

    Prints whether the system is consistent, one particular solution and a basis of
    the nullspace of A. Every solution is the particular one plus a combination of the nullspace rows. An
    inconsistent system is reported (consistent: no), not refused.

    \b
    Examples:
      gfla solve --field 'GF(7)' '1 2; 3 4' --rhs '5 6'
      gfla solve --field 'GF(2)' '1 1 0; 0 1 1' --rhs '1 0' --json
    """
    F = load_field(field_spec, modulus)
    A = _matrix(F, matrix_text, input_path, hex_text)
    b = read_vector(rhs_text, rhs_path, hex_text, what="right-hand side (--rhs)")
    solution = F.solve(A, b)
    consistent = bool(solution.consistent)
    particular = solution.particular if consistent else None
    basis = solution.nullspace
    left = solution.left_vector
    if as_json:
        payload = {**base_payload(F), "consistent": consistent, "solution": particular,
                   "nullspace": basis}
        if left is not None:
            payload["certificate"] = {"left_vector": left}
        emit_json(payload)
        return
    click.echo(f"consistent: {'yes' if consistent else 'no'}")
    if not consistent:
        if left is not None:
            click.echo("certificate: y A = 0 and y b != 0 for y = "
                       + format_vector(left, F, hex_text))
        return
    click.echo(f"solution: {format_vector(particular, F, hex_text)}")
    dimension = len(basis)
    click.echo(f"nullspace (dimension {dimension}):" + ("" if dimension else " {0}"))
    for line in _basis_lines(basis, F, hex_text):
        click.echo(line)


# --------------------------------------------------------------------------- polynomials

def _print_polynomial(name, coefficients, F, hex_text):
    click.echo(f"{name}: {format_polynomial(coefficients, F, hex_text)}")
    click.echo(f"coefficients (highest degree first): {format_vector(coefficients, F, hex_text)}")


@cli.command()
@field_options()
@matrix_input
@click.option("--method", type=click.Choice(CHARPOLY_METHODS), default="auto", show_default=True,
              help="Hessenberg reduction, Berkowitz (division-free, also on Z/n), Csanky "
                   "(power sums: needs a characteristic larger than n), or Krylov "
                   "(fields; auto picks it for large n).")
@output_options
@gfla_command
def charpoly(field_spec, modulus, matrix_text, input_path, method, hex_text, as_json):
    """Characteristic polynomial det(xI - A).

    \b
    Examples:
      gfla charpoly --field 'GF(7)' '1 2; 3 4'
      gfla charpoly --field 'GF(101)' --method csanky '1 2 0; 0 1 2; 2 0 1' --json
    """
    F = load_field(field_spec, modulus)
    coefficients = [int(c) for c in F.charpoly(_matrix(F, matrix_text, input_path, hex_text),
                                               method=method)]
    if as_json:
        emit_json({**base_payload(F), "charpoly": coefficients, "method": method})
    else:
        _print_polynomial("charpoly", coefficients, F, hex_text)


@cli.command()
@field_options()
@matrix_input
@output_options
@gfla_command
def minpoly(field_spec, modulus, matrix_text, input_path, hex_text, as_json):
    """Minimal polynomial of a square matrix.

    The monic polynomial p of least degree with p(A) = 0.

    \b
    Examples:
      gfla minpoly --field 'GF(5)' '2 0 0; 0 2 0; 0 0 3'
      gfla minpoly --field 'GF(2^8)' --hex '02 03; 01 01' --json
    """
    F = load_field(field_spec, modulus)
    coefficients = [int(c) for c in F.minpoly(_matrix(F, matrix_text, input_path, hex_text))]
    if as_json:
        emit_json({**base_payload(F), "minpoly": coefficients})
    else:
        _print_polynomial("minpoly", coefficients, F, hex_text)


# --------------------------------------------------------------------------- order, power

@cli.command()
@field_options()
@matrix_input
@output_options
@gfla_command
def order(field_spec, modulus, matrix_text, input_path, hex_text, as_json):
    """Multiplicative order of a matrix.

    The least k > 0 with A^k = I; a singular matrix is refused (exit code 1).

    \b
    Examples:
      gfla order --field 'GF(7)' '1 1; 0 1'
      gfla order --field 'GF(2^8)' --hex '02 03; 01 01' --json
    """
    F = load_field(field_spec, modulus)
    value = F.order(_matrix(F, matrix_text, input_path, hex_text))
    if as_json:
        emit_json({**base_payload(F), "order": int(value)})
    else:
        click.echo(int(value))


@cli.command()
@field_options()
@matrix_input
@click.option("-e", "--exponent", "exponent_text", metavar="EXP", required=True,
              help="Decimal or 0x hex, or an expression with + - * ^ and parentheses: "
                   "2^128, 2^64-1, -1 (negative: a power of the inverse).")
@output_options
@gfla_command
def power(field_spec, modulus, matrix_text, input_path, exponent_text, hex_text, as_json):
    """A square matrix raised to an integer power.

    \b
    Examples:
      gfla power --field 'GF(7)' -e 2^100 '1 1; 0 1'
      gfla power --field 'GF(2^8)' --hex -e -1 '02 03; 01 01' --json
    """
    exponent = parse_exponent(exponent_text)
    F = load_field(field_spec, modulus)
    result = F.power(_matrix(F, matrix_text, input_path, hex_text), exponent)
    if as_json:
        emit_json({**base_payload(F), "power": result, "exponent": exponent})
    else:
        click.echo(format_matrix(result, F, hex_text))


# --------------------------------------------------------------------------- demo

@cli.command()
@click.option("--section", "sections", multiple=True,
              type=click.Choice(list(demo_report.SECTIONS)),
              help="Run only this section (may be repeated). Default: all.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of text.")
@gfla_command
def demo(sections, as_json):
    """A tour on invented data (cipher, archive).

    A toy cipher's mixing layer and a 6-disk archive code, both invented. Inverts and analyses (det, rank, charpoly, minpoly, order) matrices over GF(2^8).
    The data is made up for illustration; it is not a set of reference values.

    \b
    Examples:
      gfla demo
      gfla demo --section archive --json
    """
    built = demo_report.build_sections(sections)
    if as_json:
        emit_json(demo_report.report_json(built))
    else:
        click.echo(demo_report.report_text(built))


if __name__ == "__main__":  # pragma: no cover
    main()


# --------------------------------------------------------------------------- job groups
from .batch import batch as _batch  # noqa: E402
from .bench import bench as _bench  # noqa: E402
from .erasure import erasure as _erasure  # noqa: E402
from .keysched import keysched as _keysched  # noqa: E402
from .mixing import mixing as _mixing  # noqa: E402

cli.add_command(_batch)
cli.add_command(_bench)
cli.add_command(_erasure)
cli.add_command(_keysched)
cli.add_command(_mixing)
