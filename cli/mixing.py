"""``gfla mixing``: analyse a block cipher's mixing layer, search families for good ones.

The numerical parts of gfla are imported inside the commands (``gfla --help`` stays fast).
"""

import sys

import click

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
    read_matrix,
)

__all__ = ["mixing"]

CONTEXT = {"help_option_names": ["-h", "--help"], "max_content_width": 100}
REQUIREMENTS = ["mds", "invertible", "involutory"]
SKIPPABLE = ["order", "branch", "xor", "minor-counts"]
FAMILIES = ["circulant", "hadamard", "companion", "cauchy"]


@click.group(cls=GflaGroup, context_settings=CONTEXT)
def mixing():
    """Mixing layers: MDS proofs, branch numbers, XOR cost, family search.

    A mixing matrix over GF(2^k) (cells = field elements), or a binary matrix over GF(2)
    with --cell-size bits per cell. Exit code 1 when a --require fails or a search finds
    nothing; 2 for bad input.

    \b
    Examples:
      gfla mixing analyze --field 'GF(2^8)' --modulus 0x11b --hex --circulant 02,03,01,01
      gfla mixing search --field 'GF(2^4)' --family circulant --hex --entries 1,2,4,8,9
    """


# --------------------------------------------------------------------------- helpers

def _elements(text, hex_text, what):
    from gfla.errors import InputError
    from gfla.io.matrix_text import parse_vector

    try:
        return parse_vector(text, hex=hex_text)
    except InputError as exc:
        raise InputError(f"{what}: {exc}") from None


def _constructed(F, args, hex_text):
    """The matrix named by a constructor option, or None."""
    from gfla.jobs import mixing as mx

    chosen = [(name, value) for name, value in args.items() if value]
    if len(chosen) > 1:
        raise click.UsageError("give one constructor: "
                               + " or ".join(f"--{name}" for name, _ in chosen))
    if not chosen:
        return None
    name, value = chosen[0]
    if name == "circulant":
        return mx.circulant(F, _elements(value, hex_text, "--circulant"))
    if name == "hadamard":
        return mx.hadamard_form(F, _elements(value, hex_text, "--hadamard"))
    if name == "vandermonde":
        return mx.vandermonde(F, _elements(value, hex_text, "--vandermonde"))
    if name == "companion":
        return mx.companion(F, _elements(value, hex_text, "--companion"))
    x, y = value
    return mx.cauchy(F, _elements(x, hex_text, "--cauchy x"),
                     _elements(y, hex_text, "--cauchy y"))


def _stderr_progress(label, enabled):
    """A progress callback drawing a bar on stderr, and a function closing it."""
    if not enabled:
        return None, lambda: None
    state = {"bar": None, "last": 0}

    def update(done, total):
        if state["bar"] is None:
            state["bar"] = click.progressbar(length=total, label=label,
                                             file=sys.stderr)
            state["bar"].__enter__()
        state["bar"].update(done - state["last"])
        state["last"] = done

    def close():
        if state["bar"] is not None:
            state["bar"].__exit__(None, None, None)

    return update, close


def _cells_text(values, F, hex_text, cell):
    """A vector as text: field elements, or bits grouped by cell for GF(2)."""
    if F.size == 2:
        bits = "".join(str(int(v)) for v in values)
        return " ".join(bits[i:i + cell] for i in range(0, len(bits), cell))
    return format_vector(values, F, hex_text)


# --------------------------------------------------------------------------- analyze

@mixing.command()
@field_options()
@click.argument("matrix_text", metavar="[MATRIX]", required=False)
@click.option("-i", "--input", "input_path", metavar="FILE", default=None,
              help="Read the matrix from FILE: .npy (integer array) or text; '-' reads stdin.")
@click.option("--circulant", metavar="LIST", help="Circulant with this first row "
              "(row i is the first row rotated right by i).")
@click.option("--hadamard", metavar="LIST", help="Hadamard form H[i][j] = h[i XOR j] "
              "(length a power of two).")
@click.option("--cauchy", nargs=2, metavar="X Y", default=None,
              help="Cauchy matrix 1/(x_i + y_j) from two comma-separated point lists.")
@click.option("--vandermonde", metavar="LIST", help="Square Vandermonde matrix "
              "V[i][j] = p_i^j.")
@click.option("--companion", metavar="POLY", help="Companion matrix of the monic "
              "polynomial with these coefficients, highest degree first (1,c3,c2,c1,c0).")
@click.option("--power", "exponent", metavar="E", default=None,
              help="Analyse the E-th power of the matrix (serial layers: E = n).")
@click.option("--cell-size", type=int, default=None, metavar="BITS",
              help="GF(2) matrices: bits per cell (e.g. 4 or 8) for branch numbers and MDS.")
@click.option("--require", "requirements", type=click.Choice(REQUIREMENTS), multiple=True,
              help="Exit with code 1 when this property fails (repeatable).")
@click.option("--skip", "skipped", type=click.Choice(SKIPPABLE), multiple=True,
              help="Leave out a part: order, branch numbers, the optimized XOR program, "
                   "or the singular-minor counts (stop at the first one). Repeatable.")
@click.option("--show-program", is_flag=True,
              help="Print the optimized XOR program (one two-input XOR per line).")
@click.option("--xor-seconds", type=float, default=20.0, show_default=True,
              help="No new Boyar-Peralta run starts after this many seconds.")
@click.option("--seed", type=click.IntRange(0, (1 << 31) - 1), default=0, show_default=True,
              help="Seed of the random tie-breaking runs of the XOR heuristics; the same "
                   "seed gives the same programs, e.g. --seed 7.")
@click.option("--bp-runs", type=click.IntRange(1, 1000), default=8, show_default=True,
              help="Boyar-Peralta runs (the first with fixed ties, then random ties).")
@click.option("--progress/--no-progress", default=None,
              help="Progress bar on stderr for long MDS decisions (default: when the "
                   "matrix is 12 x 12 or larger).")
@click.option("--hex", "hex_text", is_flag=True,
              help="Read bare entries as hex and print elements in hex.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object instead of text.")
@gfla_command
def analyze(field_spec, modulus, matrix_text, input_path, circulant, hadamard, cauchy,
            vandermonde, companion, exponent, cell_size, requirements, skipped,
            show_program, xor_seconds, seed, bp_runs, progress, hex_text, as_json):
    """Everything about one mixing matrix, each property with how it was decided.

    Invertibility and inverse, involutory, orthogonal, order, characteristic and
    minimal polynomials; MDS (every square submatrix nonsingular; if not, a singular
    submatrix and the count of singular minors by size); differential and linear branch
    numbers with a witness; the binary expansion and its rank; the naive (d-XOR) and
    optimized XOR counts (the shorter of Paar's and the Boyar-Peralta programs, checked
    on every unit vector). Indices are 0-based; input bit b of cell j is x(k*j+b).

    \b
    Examples:
      gfla mixing analyze --field 'GF(2^8)' --modulus 0x11b --hex '02 03 01 01; 01 02 03 01; 01 01 02 03; 03 01 01 02'
      gfla mixing analyze --field 'GF(2^8)' --modulus 0x11d --hex --circulant 01,01,04,01,08,05,02,09 --skip xor
      gfla mixing analyze --field 'GF(2^4)' --modulus 0x13 --companion 1,2,2,1,4 --power 4 --require mds
      gfla mixing analyze --field 'GF(2^8)' --hex --circulant 02,03,01,01 --show-program --json
    """
    from gfla.jobs import mixing as mx

    F = load_field(field_spec, modulus)
    constructors = {"circulant": circulant, "hadamard": hadamard, "cauchy": cauchy,
                    "vandermonde": vandermonde, "companion": companion}
    built = _constructed(F, constructors, hex_text)
    if built is not None:
        if matrix_text is not None or input_path is not None:
            raise click.UsageError("give the matrix as text, with -i FILE, or with a "
                                   "constructor option; not several")
        M = built
    else:
        M = F.asarray(read_matrix(matrix_text, input_path, hex_text), name="matrix")
    if exponent is not None:
        from .common import parse_exponent

        if M.shape[0] != M.shape[1]:
            raise click.UsageError("--power needs a square matrix")
        M = F.power(M, parse_exponent(exponent))
    n = M.shape[0]
    if progress is None:
        progress = n >= 12 and not as_json
    update, close = _stderr_progress("MDS decision", progress)
    skip = set(skipped)
    if not show_program:
        skip.add("program")
    try:
        report = mx.analyze_layer(F, M, cell_size=cell_size, skip=skip, xor_seconds=xor_seconds,
                            bp_runs=bp_runs, progress=update, seed=seed)
    finally:
        close()
    failed = _failed_requirements(report, requirements)
    if as_json:
        payload = {**base_payload(F), "matrix": M.tolist(), **report}
        if requirements:
            payload["requirements"] = {r: r not in failed for r in requirements}
        emit_json(payload)
    else:
        click.echo("\n".join(_analysis_text(F, M, report, hex_text)))
    if failed:
        for r in failed:
            click.echo(f"error: requirement failed: {r}{_why(report, r)}", err=True)
        sys.exit(1)


def _failed_requirements(report, requirements):
    failed = []
    for r in requirements:
        value = report[r]["value"] if r != "mds" else report["mds"].get("value")
        if not value:
            failed.append(r)
    return failed


def _why(report, r):
    if r == "mds":
        cert = report["mds"].get("singular_submatrix")
        if cert:
            return (f" (singular {len(cert['rows'])}x{len(cert['rows'])} submatrix, rows "
                    f"{','.join(map(str, cert['rows']))}, columns "
                    f"{','.join(map(str, cert['columns']))})")
        if report["mds"].get("value") is None:
            return " (not decided at this size)"
        return ""
    if r == "invertible":
        return " (det 0)"
    return ""


def _yes(value):
    return "yes" if value else "no"


def _analysis_text(F, M, report, hex_text):
    n = report["n"]
    modulus = f", modulus 0x{F.modulus:x}" if F.modulus is not None else ""
    cells = "" if F.size != 2 else f", {report['cells']} cells of {report['cell_bits']} bits"
    lines = [f"matrix ({n} x {n} over {F.spec}{modulus}{cells}):",
             format_matrix(M, F, hex_text, indent="  ")]
    inv = report["invertible"]
    lines.append(f"invertible: {_yes(inv['value'])} (det "
                 f"{format_element(report['det'], F, hex_text)}, {inv['method']})")
    if report["inverse"] is not None:
        lines.append("inverse (checked: inverse times matrix is I):")
        lines.append(format_matrix(report["inverse"], F, hex_text, indent="  "))
    lines.append(f"involutory: {_yes(report['involutory']['value'])} (M^2 = I?)")
    lines.append(f"orthogonal: {_yes(report['orthogonal']['value'])} (M M^T = I?)")
    order = report["order"]
    if order is not None:
        if order.get("value") is not None:
            lines.append(f"order: {order['value']} (M^order = I checked)")
        else:
            lines.append(f"order: none ({order.get('note') or order.get('refused')})")
    lines.append(f"charpoly: {format_polynomial(report['charpoly'], F, hex_text)}")
    lines.append(f"minpoly: {format_polynomial(report['minpoly'], F, hex_text)}")
    mds = report["mds"]
    if mds.get("value") is None:
        lines.append(f"mds: not decided ({mds.get('note')})")
    elif "square_submatrices" in mds:
        total = mds["square_submatrices"]
        if mds["value"]:
            lines.append(f"mds: yes (all {total} square submatrices nonsingular)")
        else:
            cert = mds["singular_submatrix"]
            s = len(cert["rows"])
            lines.append(f"mds: no: the {s} x {s} submatrix at rows "
                         f"{', '.join(map(str, cert['rows']))} and columns "
                         f"{', '.join(map(str, cert['columns']))} is singular (det 0):")
            lines.append(format_matrix(cert["submatrix"], F, hex_text, indent="  "))
        by_size = mds.get("singular_minors_by_size")
        if by_size is not None:
            shown = ", ".join(f"{s}x{s}: {c}" for s, c in by_size.items())
            lines.append(f"  singular minors by size (of {total}): {shown}")
        lines.append(f"  method: {mds['method']}")
    else:
        lines.append(f"mds: {_yes(mds['value'])} ({mds['method']})")
    branch = report["branch_number"]
    if branch is not None and "differential" in branch:
        lines.append(f"branch number: differential {branch['differential']['value']}, "
                     f"linear {branch['linear']['value']}")
        cell = report["cell_bits"]
        for name, image in (("differential", "M x"), ("linear", "M^T x")):
            b = branch[name]
            lines.append(f"  {name} witness: x = {_cells_text(b['witness'], F, hex_text, cell)}"
                         f" -> {image} = {_cells_text(b['image'], F, hex_text, cell)}")
    elif branch is not None:
        lines.append(f"branch number: {branch['note']}")
    bm = report["bit_matrix"]
    lines.append(f"bit matrix: {bm['rows']} x {bm['columns']} over GF(2), rank {bm['rank']}, "
                 f"{bm['ones']} ones")
    xc = report["xor_count"]
    text = f"xor count: naive {xc['naive']} (d-XOR)"
    if xc.get("optimized") is not None:
        text += (f", optimized {xc['optimized']} ({xc['method']}; Paar {xc['paar']}"
                 + (f", Boyar-Peralta {xc['boyar_peralta']}" if xc.get("boyar_peralta")
                    is not None else "")
                 + f"), program verified on all {bm['columns']} unit vectors")
    elif xc.get("note"):
        text += f"; {xc['note']}"
    lines.append(text)
    if xc.get("program"):
        from gfla.jobs.mixing import format_program

        lines.append(f"program ({xc['optimized']} XORs, inputs x0..x{bm['columns'] - 1}, "
                     f"outputs y0..y{bm['rows'] - 1}):")
        lines.extend("  " + line for line in format_program(xc["program"]))
    return lines


# --------------------------------------------------------------------------- search

@mixing.command()
@field_options()
@click.option("--family", type=click.Choice(FAMILIES), required=True,
              help="circulant (first row), hadamard (h[i XOR j]), companion (C^power, "
                   "last row of C), cauchy (1/(x_i + y_j) for disjoint point sets).")
@click.option("-n", "--size", "n", type=int, default=4, show_default=True,
              help="Matrix size (2..8).")
@click.option("--entries", metavar="LIST", default=None,
              help="Allowed entries (Cauchy: points), e.g. 1,2,3,4. Default: every "
                   "nonzero element.")
@click.option("--require", "requirement", type=click.Choice(["mds", "invertible"]),
              default="mds", show_default=True, help="What a kept matrix must be.")
@click.option("--branch-number", "branch", type=int, default=None, metavar="B",
              help="Instead of MDS: invertible with differential and linear branch "
                   "numbers at least B.")
@click.option("--involutory", is_flag=True, help="Also require M^2 = I.")
@click.option("--all-equivalent", is_flag=True,
              help="Also test candidates equivalent to an earlier one (rotated circulant "
                   "rows, h[i XOR t]); by default they are skipped.")
@click.option("--power", type=int, default=None, help="Companion family: the exponent "
              "(default n).")
@click.option("--keep", type=click.IntRange(1, 100000), default=10, show_default=True,
              help="How many of the best matrices to report.")
@click.option("--rank-limit", type=click.IntRange(1), default=2000, show_default=True,
              help="Survivors (lowest naive count first) that get an optimized count.")
@click.option("--refine", type=click.IntRange(0), default=20, show_default=True,
              help="Best survivors by Paar's count that also get Boyar-Peralta runs.")
@click.option("--seed", type=click.IntRange(0, (1 << 31) - 1), default=0, show_default=True,
              help="Seed of the random tie-breaking runs that rank the survivors by XOR "
                   "count; the same seed gives the same ranking, e.g. --seed 7.")
@click.option("-o", "--output", "output", metavar="FILE", default=None,
              help="Write the best matrices as JSON Lines to FILE ('-' for stdout).")
@click.option("--estimate-only", is_flag=True,
              help="Print the candidate count and the time estimate, then stop.")
@click.option("--progress/--no-progress", default=True, show_default=True,
              help="Estimate and progress bar on stderr.")
@click.option("--hex", "hex_text", is_flag=True,
              help="Read bare entries as hex and print elements in hex.")
@click.option("--json", "as_json", is_flag=True,
              help="Print one JSON object (summary and best matrices) instead of text.")
@gfla_command
def search(field_spec, modulus, family, n, entries, requirement, branch, involutory,
           all_equivalent, power, keep, rank_limit, refine, seed, output, estimate_only,
           progress, hex_text, as_json):
    """Enumerate a family of matrices, keep the good ones, rank them by XOR count.

    Minors are checked smallest first and a candidate is rejected at its first
    vanishing one, so with small entry sets most candidates cost a few products;
    survivors are ranked by the shorter of Paar's and the Boyar-Peralta XOR programs. An
    estimate (from a timed sample) is printed before the enumeration starts.

    \b
    Examples:
      gfla mixing search --field 'GF(2^4)' --modulus 0x13 --family circulant --hex --entries 1,2,4,8,9
      gfla mixing search --field 'GF(2^8)' --modulus 0x11b --family hadamard --hex --entries 01,02,03,04,05,06,07,08 --keep 3 --refine 3 -o best.jsonl
      gfla mixing search --field 'GF(2^4)' --family companion --entries 1,2,3,4 --estimate-only
    """
    from gfla.jobs import mixing as mx

    F = load_field(field_spec, modulus)
    if entries is None:
        values = list(range(1, int(F.size)))
    else:
        values = _elements(entries, hex_text, "--entries")
    require = "branch" if branch is not None else requirement
    if branch is not None and requirement != "mds":
        raise click.UsageError("--branch-number replaces --require; give one of them")
    canonical = not all_equivalent
    est = mx.estimate(F, family, n, values, require=require, branch=branch,
                      involutory=involutory, canonical=canonical, power=power)
    message = (f"estimate: {est['candidates']} candidates, about {est['rate']:.3g} per "
               f"second on {est['threads']} thread{'s' if est['threads'] != 1 else ''}: "
               f"{_duration(est['seconds'])} before ranking")
    if estimate_only:
        if as_json:
            emit_json({**base_payload(F), "estimate": est})
        else:
            click.echo(message)
        return
    if progress:
        click.echo(message, err=True)
    update, close = _stderr_progress("candidates", progress)
    try:
        result = mx.search_family(F, family, n, values, require=require, branch=branch,
                           involutory=involutory, canonical=canonical, power=power,
                           keep=keep, rank_limit=rank_limit, refine=refine,
                           progress=update, seed=seed)
    finally:
        close()
    if output is not None:
        if output == "-":
            mx.write_jsonl(result, click.get_text_stream("stdout"))
        else:
            try:
                mx.write_jsonl(result, output)
            except OSError as exc:
                from gfla.errors import InputError

                raise InputError(f"{output}: cannot be written "
                                 f"({exc.strerror or exc})") from None
    if as_json:
        emit_json({**base_payload(F), "search": {k: v for k, v in result.items()
                                                 if k not in ("field", "modulus")}})
    elif output != "-":
        click.echo("\n".join(_search_text(F, result, hex_text, output)))
    if not result["best"]:
        click.echo("error: no candidate of the family meets the requirement", err=True)
        sys.exit(1)


def _duration(seconds):
    if seconds < 1:
        return "under a second"
    if seconds < 120:
        return f"about {seconds:.0f} s"
    if seconds < 7200:
        return f"about {seconds / 60:.0f} min"
    return f"about {seconds / 3600:.1f} h"


def _params_text(params, F, hex_text):
    parts = []
    for key, value in params.items():
        if isinstance(value, list):
            parts.append(f"{key} " + ",".join(format_element(v, F, hex_text).replace("0x", "")
                                               if hex_text else str(v) for v in value))
        else:
            parts.append(f"{key} {value}")
    return "; ".join(parts)


def _search_text(F, result, hex_text, output):
    need = {"mds": "MDS", "invertible": "invertible",
            "branch": f"branch numbers >= {result['branch']}"}[result["require"]]
    if result["involutory"]:
        need += ", involutory"
    lines = [f"family {result['family']} {result['n']} x {result['n']} over {F.spec}, "
             f"modulus 0x{F.modulus:x}, {len(result['entries'])} allowed entries, "
             f"requirement: {need}",
             f"candidates {result['candidates']}: {result['equivalent_skipped']} skipped as "
             f"equivalent, {result['tested']} tested, {result['kept']} kept, "
             f"{result['ranked']} ranked by XOR count ({result['seconds']:.2f} s)"]
    for rank, b in enumerate(result["best"], start=1):
        xc = b["xor_count"]
        lines.append(f"{rank}. optimized {xc['optimized']} XORs ({xc['method']}), naive "
                     f"{xc['naive']}: {_params_text(b['params'], F, hex_text)}")
        lines.append(format_matrix(b["matrix"], F, hex_text, indent="     "))
    if output:
        lines.append(f"best {len(result['best'])} written to {output} (JSON Lines)")
    return lines
