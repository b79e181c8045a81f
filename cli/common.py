"""Shared pieces of the command line: options, reading input, printing results, errors.

Nothing here imports numpy or the numerical parts of gfla at import time; the functions
that need them import them when called.
"""

import functools
import json
import os
import re
import sys

import click

__all__ = [
    "GflaGroup",
    "field_options",
    "matrix_input",
    "output_options",
    "gfla_command",
    "load_field",
    "read_matrix",
    "read_vector",
    "parse_modulus",
    "parse_exponent",
    "base_payload",
    "emit_json",
    "format_matrix",
    "format_vector",
    "format_element",
    "format_polynomial",
    "jsonable",
]

DEBUG_VARIABLE = "GFLA_DEBUG"


# --------------------------------------------------------------------------- errors

def _one_line(text):
    """Collapse a message to one line, so stderr carries exactly one line per error."""
    parts = [part.strip() for part in str(text).splitlines() if part.strip()]
    return "; ".join(parts) if parts else "(no message)"


def _debug():
    return os.environ.get(DEBUG_VARIABLE, "") not in ("", "0")


def _fail(message, code):
    click.echo(f"error: {_one_line(message)}", err=True)
    sys.exit(code)


class GflaGroup(click.Group):
    """A click group that turns every failure into an exit code and one line on stderr.

    Exit codes: 0 done; 1 a mathematical refusal (printed by :func:`gfla_command` with
    its certificate); 2 bad input or usage; 3 an internal error (a bug: the traceback is
    shown only when the environment variable ``GFLA_DEBUG=1`` is set).
    """

    def main(self, args=None, prog_name=None, complete_var=None, standalone_mode=True, **extra):
        if not standalone_mode:
            return super().main(args=args, prog_name=prog_name, complete_var=complete_var,
                                standalone_mode=False, **extra)
        try:
            code = super().main(args=args, prog_name=prog_name, complete_var=complete_var,
                                standalone_mode=False, **extra)
        except click.exceptions.UsageError as exc:
            no_args = getattr(click.exceptions, "NoArgsIsHelpError", None)
            if no_args is not None and isinstance(exc, no_args) and exc.ctx is not None:
                click.echo(exc.ctx.get_help())
                sys.exit(0)
            hint = ""
            if exc.ctx is not None:
                hint = f" (see '{exc.ctx.command_path} --help')"
            _fail(exc.format_message() + hint, 2)
        except click.exceptions.ClickException as exc:
            _fail(exc.format_message(), 2)
        except click.exceptions.Abort:
            _fail("interrupted", 130)
        except Exception as exc:  # the boundary between the program and the user
            from gfla.errors import InputError, MathError

            if isinstance(exc, InputError):
                _fail(str(exc), 2)
            if isinstance(exc, MathError):
                _fail(str(exc), 1)
            if _debug():
                raise
            click.echo(
                f"internal error: {type(exc).__name__}: {_one_line(exc)} "
                f"(set {DEBUG_VARIABLE}=1 to see the traceback)",
                err=True,
            )
            sys.exit(3)
        sys.exit(code if isinstance(code, int) else 0)


def gfla_command(function):
    """Print a mathematical refusal (exit code 1) with its certificate.

    Text mode writes the message and the certificate to stderr; ``--json`` mode writes one
    JSON object ``{"field", "error", "kind", "certificate"}`` to stdout.
    """

    @functools.wraps(function)
    def wrapper(*args, **kwargs):
        from gfla.errors import InputError, MathError

        try:
            return function(*args, **kwargs)
        except MathError as exc:
            if isinstance(exc, InputError):
                raise
            ctx = click.get_current_context()
            field = ctx.meta.get("gfla.field")
            hex_output = bool(kwargs.get("hex_text", False))
            certificate = exc.certificate() if callable(getattr(exc, "certificate", None)) else {}
            if kwargs.get("as_json", False):
                payload = base_payload(field) if field is not None else {}
                payload.update({
                    "error": _one_line(exc),
                    "kind": type(exc).__name__,
                    "certificate": jsonable(certificate),
                })
                emit_json(payload)
            else:
                click.echo(f"refused: {_one_line(exc)}", err=True)
                for key, value in certificate.items():
                    click.echo(f"  {key}: {_format_certificate_value(value, field, hex_output)}",
                               err=True)
            ctx.exit(1)

    return wrapper


def _format_certificate_value(value, field, hex_output):
    if isinstance(value, (list, tuple)):
        if field is not None and all(isinstance(v, int) for v in value):
            return format_vector(value, field, hex_output)
        return " ".join(str(v) for v in value)
    return str(value)


# --------------------------------------------------------------------------- options

SPEC_HELP = ("Field or ring: GF(p) with p prime (e.g. GF(7), GF(2^61-1)), GF(2), "
             "GF(2^k) for 2 <= k <= 16, or Z/n (e.g. Z/2^64).")
MODULUS_HELP = ("GF(2^k) only: the reduction polynomial in hex, bit i = coefficient of "
                "x^i (0x11b is x^8+x^4+x^3+x+1). Default: gfla's default for that k, "
                "shown by gfla info 'GF(2^k)'.")


def field_options(required=True):
    """``-f/--field SPEC`` and ``--modulus HEX``."""

    def decorate(function):
        function = click.option("--modulus", "modulus", metavar="HEX", default=None,
                                help=MODULUS_HELP)(function)
        function = click.option("-f", "--field", "field_spec", metavar="SPEC",
                                required=required, help=SPEC_HELP)(function)
        return function

    return decorate


def matrix_input(function):
    """The ``MATRIX`` text argument and ``-i/--input FILE``."""
    function = click.option(
        "-i", "--input", "input_path", metavar="FILE", default=None,
        help="Read the matrix from FILE: .npy (integer array) or text; '-' reads stdin.",
    )(function)
    function = click.argument("matrix_text", metavar="[MATRIX]", required=False)(function)
    return function


def output_options(function):
    """``--hex`` (read and print field elements in hex) and ``--json``."""
    function = click.option("--json", "as_json", is_flag=True,
                            help="Print one JSON object instead of text.")(function)
    function = click.option("--hex", "hex_text", is_flag=True,
                            help="Read bare entries as hex and print elements in hex.")(function)
    return function


# --------------------------------------------------------------------------- input

def parse_modulus(text):
    """Parse ``--modulus``: hexadecimal with or without a ``0x`` prefix."""
    if text is None:
        return None
    body = text.strip().replace("_", "")
    if body.lower().startswith("0x"):
        body = body[2:]
    if not body or not re.fullmatch(r"[0-9a-fA-F]+", body):
        raise click.BadParameter(f"{text!r} is not a hexadecimal number (e.g. 0x11b)",
                                 param_hint="'--modulus'")
    return int(body, 16)


def load_field(spec, modulus_text=None):
    """Build the field object and remember it for error reports."""
    import gfla

    modulus = parse_modulus(modulus_text)
    field = gfla.field(spec, modulus=modulus)
    ctx = click.get_current_context(silent=True)
    if ctx is not None:
        ctx.meta["gfla.field"] = field
    return field


def _read_stdin():
    from gfla.errors import InputError

    try:
        return sys.stdin.read()
    except UnicodeDecodeError:
        raise InputError("not UTF-8 text") from None


def read_matrix(text, path, hex_text, what="matrix"):
    """The matrix given as text or with ``-i FILE`` (exactly one of them)."""
    from gfla.errors import InputError
    from gfla.io.matrix_text import load_matrix_file, parse_matrix

    if text is not None and path is not None:
        raise click.UsageError(f"give the {what} as text or with -i FILE, not both")
    if text is None and path is None:
        raise click.UsageError(
            f"no {what} given: pass it as text (e.g. '1 2; 3 4') or with -i FILE")
    if path == "-":
        try:
            return parse_matrix(_read_stdin(), hex=hex_text)
        except InputError as exc:
            raise InputError(f"stdin: {exc}") from None
    if path is not None:
        return load_matrix_file(path, hex=hex_text)
    return parse_matrix(text, hex=hex_text)


def read_vector(text, path, hex_text, what="vector"):
    """A vector given as text or as a file (``-`` for stdin)."""
    from gfla.errors import InputError
    from gfla.io.matrix_text import load_vector_file, parse_vector

    if text is not None and path is not None:
        raise click.UsageError(f"give the {what} as text or as a file, not both")
    if text is None and path is None:
        raise click.UsageError(f"no {what} given")
    if path == "-":
        try:
            return parse_vector(_read_stdin(), hex=hex_text)
        except InputError as exc:
            raise InputError(f"stdin: {exc}") from None
    if path is not None:
        return load_vector_file(path, hex=hex_text)
    return parse_vector(text, hex=hex_text)


def parse_exponent(text):
    """Parse an exponent such as ``1000``, ``-1``, ``2^128``, ``2^64-1`` or ``3*(2^8-1)``.

    The syntax is that of numbers in field specs (``gfla.io.spec.parse_int_expr``:
    decimal or 0x integers with + - * ^ and parentheses), so ``GF(2^61-1)`` and
    ``-e 2^61-2`` read alike. A malformed or oversized exponent raises ``InputError``.
    """
    from gfla.io.spec import parse_int_expr

    return parse_int_expr(text, "exponent")


# --------------------------------------------------------------------------- output

def jsonable(value):
    """Convert numpy arrays and scalars (and tuples) to plain Python for ``json``."""
    if hasattr(value, "tolist") and not isinstance(value, (str, bytes)):
        return jsonable(value.tolist())
    if isinstance(value, dict):
        return {str(k): jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [jsonable(v) for v in value]
    if isinstance(value, bool) or value is None or isinstance(value, (int, float, str)):
        return value
    if hasattr(value, "__index__"):
        return int(value)
    return str(value)


def base_payload(field):
    """The keys every JSON answer carries: the canonical field spec (and modulus)."""
    payload = {"field": field.spec}
    modulus = getattr(field, "modulus", None)
    if modulus is not None:
        payload["modulus"] = int(modulus)
    return payload


def emit_json(payload):
    click.echo(json.dumps(jsonable(payload)))


def _hex_digits(field):
    return max(1, ((int(field.size) - 1).bit_length() + 3) // 4)


def format_element(value, field, hex_output):
    """One field element: decimal, or ``0x``-prefixed zero-padded hex."""
    value = int(value)
    if hex_output:
        return "0x" + format(value, "0{}x".format(_hex_digits(field)))
    return str(value)


def _cells(rows, field, hex_output):
    if hex_output:
        digits = _hex_digits(field)
        return [[format(int(v), "0{}x".format(digits)) for v in row] for row in rows]
    return [[str(int(v)) for v in row] for row in rows]


def format_matrix(matrix, field, hex_output, indent=""):
    """Rows of right-aligned entries; hex entries are bare (so ``--hex`` reads them back)."""
    rows = jsonable(matrix)
    cells = _cells(rows, field, hex_output)
    if not cells:
        return ""
    width = max((len(c) for row in cells for c in row), default=1)
    return "\n".join(indent + " ".join(c.rjust(width) for c in row) for row in cells)


def format_vector(vector, field, hex_output):
    return " ".join(_cells([jsonable(vector)], field, hex_output)[0])


def format_polynomial(coefficients, field, hex_output, variable="x"):
    """``x^3 + 2*x + 5`` from coefficients listed highest degree first."""
    coefficients = [int(c) for c in jsonable(coefficients)]
    degree = len(coefficients) - 1
    terms = []
    for position, c in enumerate(coefficients):
        power = degree - position
        if c == 0:
            continue
        shown = format_element(c, field, hex_output)
        if power == 0:
            terms.append(shown)
            continue
        monomial = variable if power == 1 else f"{variable}^{power}"
        terms.append(monomial if c == 1 else f"{shown}*{monomial}")
    return " + ".join(terms) if terms else "0"
