"""``gfla erasure``: erasure codes, decoding matrices, and files encoded into shards.

The group is the click object :data:`erasure`; the numerical parts of gfla are imported
inside each command so that ``gfla --help`` stays fast.
"""

import functools
import json
import os
import re
import sys
import time

import click

from .common import GflaGroup, emit_json, jsonable, parse_modulus

__all__ = ["erasure"]

CONTEXT = {"help_option_names": ["-h", "--help"], "max_content_width": 100}
FIELDS = ["GF(2^8)", "GF(2^16)"]
CONSTRUCTION_CHOICES = ["vandermonde", "cauchy"]


# --------------------------------------------------------------------------- plumbing

class _Progress:
    """A one-line progress bar on stderr, redrawn in place; silent unless stderr is a
    terminal and --quiet is off."""

    def __init__(self, quiet):
        self.stream = sys.stderr
        try:
            tty = self.stream.isatty()
        except (AttributeError, ValueError):
            tty = False
        self.enabled = not quiet and tty
        self.phase = None
        self.last = 0.0
        self.started = 0.0

    def __call__(self, phase, done, total):
        if not self.enabled:
            return
        now = time.monotonic()
        if phase != self.phase:
            self.finish()
            self.phase, self.started = phase, now
        elif now - self.last < 0.1 and done < total:
            return
        self.last = now
        fraction = 1.0 if total <= 0 else min(1.0, done / total)
        width = 30
        filled = int(round(fraction * width))
        rate = ""
        if now > self.started and done:
            rate = f" {done / (now - self.started) / 1e6:8.1f} MB/s" if phase != "patterns" \
                else f" {done / (now - self.started):8.0f}/s"
        self.stream.write(f"\r{phase:<16} [{'#' * filled}{'.' * (width - filled)}] "
                          f"{100 * fraction:5.1f}%{rate}")
        self.stream.flush()

    def finish(self):
        if self.enabled and self.phase is not None:
            self.stream.write("\n")
            self.stream.flush()
        self.phase = None


def _one_line(text):
    parts = [p.strip() for p in str(text).splitlines() if p.strip()]
    return "; ".join(parts) if parts else "(no message)"


def erasure_command(function):
    """Turn a mathematical refusal into exit code 1 with one line on stderr (or one
    JSON object with its certificate on stdout under --json); file-system errors into
    bad-input errors (exit 2)."""

    @functools.wraps(function)
    def wrapper(*args, **kwargs):
        from gfla.errors import InputError, MathError

        try:
            return function(*args, **kwargs)
        except MathError as exc:
            if isinstance(exc, InputError):
                raise
            certificate = exc.certificate() if callable(getattr(exc, "certificate", None)) \
                else {}
            if kwargs.get("as_json"):
                emit_json({"error": _one_line(exc), "kind": type(exc).__name__,
                           "certificate": jsonable(certificate)})
            click.echo(f"error: {_one_line(exc)}", err=True)
            click.get_current_context().exit(1)
        except OSError as exc:
            where = f"{exc.filename}: " if getattr(exc, "filename", None) else ""
            raise InputError(f"{where}{exc.strerror or exc}") from None

    return wrapper


def code_options(function):
    """-k, -m, --construction, --field, --modulus."""
    function = click.option("--modulus", metavar="HEX", default=None,
                            help="Reduction polynomial in hex (bit i = coefficient of x^i). "
                                 "Default: gfla's default for the field (0x11d for "
                                 "GF(2^8), 0x1002d for GF(2^16)).")(function)
    function = click.option("--field", "field_spec", type=click.Choice(FIELDS),
                            default="GF(2^8)", show_default=True,
                            help="Symbol field: one byte or two bytes (little endian) "
                                 "per symbol.")(function)
    function = click.option("--construction", type=click.Choice(CONSTRUCTION_CHOICES),
                            default="vandermonde", show_default=True,
                            help="Vandermonde made systematic, or identity over a Cauchy "
                                 "matrix.")(function)
    function = click.option("-m", "m", type=int, required=True,
                            help="Number of parity shards (any m of the k + m may be "
                                 "lost).")(function)
    function = click.option("-k", "k", type=int, required=True,
                            help="Number of data shards.")(function)
    return function


def _json_option(function):
    return click.option("--json", "as_json", is_flag=True,
                        help="Print one JSON object instead of text.")(function)


def _quiet_option(function):
    return click.option("-q", "--quiet", is_flag=True,
                        help="No progress bar on stderr.")(function)


def _chunk_option(function):
    return click.option("--chunk-size", "chunk_text", metavar="BYTES", default=None,
                        help="Bytes per shard read or written per pass (e.g. 65536, 256K, "
                             "4M; rounded up to a multiple of 8). Default: 1M, less for "
                             "many shards, so buffers stay under 64 MiB.")(function)


_SIZE = re.compile(r"\s*(\d+)\s*([kKmMgG]?)(i?[bB])?\s*")


def _parse_chunk(text):
    if text is None:
        return None
    match = _SIZE.fullmatch(text)
    if not match or int(match.group(1)) == 0:
        raise click.BadParameter(f"{text!r} is not a positive size (e.g. 65536, 256K, 4M)",
                                 param_hint="'--chunk-size'")
    scale = {"": 1, "k": 1 << 10, "m": 1 << 20, "g": 1 << 30}[match.group(2).lower()]
    return int(match.group(1)) * scale


def _parse_lost(text):
    if text.strip() == "":
        return []
    out = []
    for part in text.split(","):
        part = part.strip()
        if not re.fullmatch(r"\d+", part):
            raise click.BadParameter(f"{part!r} is not a shard number (give e.g. 2,5,11)",
                                     param_hint="'--lost'")
        out.append(int(part))
    return out


def _load_code(k, m, construction, field_spec, modulus_text):
    import gfla
    from gfla.jobs.erasure import ErasureCode

    field = gfla.field(field_spec, modulus=parse_modulus(modulus_text))
    return ErasureCode(field, k, m, construction)


def _hex(value, digits):
    return format(int(value), f"0{digits}x")


def _code_line(code):
    return (f"code: {code.field.spec} (modulus 0x{int(code.field.modulus):x}), "
            f"{code.construction}, k = {code.k} data + m = {code.m} parity shards "
            f"(data 0..{code.k - 1}, parity {code.k}..{code.n - 1})"
            if code.m else
            f"code: {code.field.spec} (modulus 0x{int(code.field.modulus):x}), "
            f"{code.construction}, k = {code.k} data shards, no parity")


def _code_payload(code):
    return {"field": code.field.spec, "modulus": int(code.field.modulus),
            "construction": code.construction, "k": code.k, "m": code.m}


def _matrix_lines(plan, digits):
    """The decoding matrix with shard labels: one row per rebuilt shard."""
    width = max(digits, len(str(max(plan.read, default=0))))
    label = max(len(str(t)) for t in plan.targets)
    head = " " * (label + 9) + " ".join(str(s).rjust(width) for s in plan.read)
    lines = [head]
    for t, row in zip(plan.targets, plan.matrix):
        role = "data  " if t < plan.k else "parity"
        cells = " ".join(_hex(v, digits).rjust(width) for v in row)
        lines.append(f"  {role} {str(t).rjust(label)}: {cells}")
    return lines


def _size_text(n):
    for unit, scale in (("GiB", 1 << 30), ("MiB", 1 << 20), ("KiB", 1 << 10)):
        if n >= scale:
            return f"{n} bytes ({n / scale:.1f} {unit})"
    return f"{n} bytes"


# --------------------------------------------------------------------------- group

@click.group(cls=GflaGroup, context_settings=CONTEXT)
def erasure():
    """Erasure codes: k data shards plus m parity shards, any k rebuild the data.

    Systematic MDS codes over GF(2^8) or GF(2^16) (Vandermonde made systematic, or
    Cauchy), decoding matrices for any set of lost shards, and files encoded into shard
    files with a manifest of SHA-256 checksums, then verified, decoded and repaired.
    Shards are numbered from 0: data 0..k-1, parity k..k+m-1.

    \b
    Examples:
      gfla erasure matrix -k 10 -m 4 --lost 2,5,11
      gfla erasure encode ledger.tar -k 10 -m 4 --out ledger.shards
      gfla erasure verify ledger.shards
      gfla erasure decode ledger.shards --out ledger-restored.tar

    \b
    Exit codes: 0 done; 1 refused (too many shards lost, checksum mismatch) or, for
    verify, damaged shards found; 2 bad input or usage.
    """


# --------------------------------------------------------------------------- matrix

@erasure.command("matrix")
@code_options
@click.option("--lost", "lost_text", metavar="LIST", required=True,
              help="Lost shards, comma separated, numbered from 0 (e.g. 2,5,11).")
@_json_option
@erasure_command
def matrix_command(k, m, construction, field_spec, modulus, lost_text, as_json):
    """Decoding matrix for a set of lost shards.

    Reads the first k surviving shards; prints the rows that rebuild each lost data
    shard and each lost parity shard from them (entries in hex). More than m lost is
    refused with exit code 1, saying how many shards are missing.

    \b
    Examples:
      gfla erasure matrix -k 10 -m 4 --lost 2,5,11
      gfla erasure matrix -k 6 -m 3 --construction cauchy --lost 0,1 --json
    """
    lost = _parse_lost(lost_text)
    code = _load_code(k, m, construction, field_spec, modulus)
    plan = code.decoding_plan(lost)
    if as_json:
        emit_json({**_code_payload(code), **plan.as_dict()})
        return
    digits = code.symbol_bytes * 2
    click.echo(_code_line(code))
    if not plan.targets:
        click.echo("lost: none; every shard is intact, nothing to rebuild")
        return
    click.echo("lost: " + ", ".join(map(str, plan.lost)))
    click.echo(f"read: {' '.join(map(str, plan.read))}  (the first {code.k} intact shards)")
    click.echo("decoding matrix (hex): rebuilt shard = sum over the shards read of "
               "coefficient x shard")
    for line in _matrix_lines(plan, digits):
        click.echo(line)


# --------------------------------------------------------------------------- table

@erasure.command("table")
@code_options
@click.option("--max-lost", type=int, required=True,
              help="Largest number of lost shards to tabulate (1 .. m).")
@click.option("--out", "out_path", metavar="FILE.jsonl", required=True,
              help="Output JSON Lines file (must not exist), or '-' for stdout.")
@_quiet_option
@_json_option
@erasure_command
def table_command(k, m, construction, field_spec, modulus, max_lost, out_path, quiet,
                  as_json):
    """Every erasure pattern up to --max-lost losses with its decoding matrix.

    Writes JSON Lines: a first line {"code": ..., "max_lost": L, "patterns": N}, then one
    line per pattern {"lost", "read", "rebuild", "lost_data", "lost_parity",
    "decoding_matrix"} (rows in the order of "rebuild", columns in the order of "read").
    Patterns are streamed as they are computed; the file appears under its name only
    when complete.

    \b
    Examples:
      gfla erasure table -k 10 -m 4 --max-lost 4 --out rs-10-4.jsonl
      gfla erasure table -k 4 -m 2 --max-lost 2 --out - | head -3
    """
    import tempfile

    from gfla.errors import InputError
    from gfla.jobs.erasure import decoding_table, pattern_count

    code = _load_code(k, m, construction, field_spec, modulus)
    patterns = decoding_table(code, max_lost)  # validates max_lost
    total = pattern_count(code.n, max_lost)
    to_stdout = out_path == "-"
    if not to_stdout:
        if os.path.lexists(out_path):
            raise InputError(f"{out_path}: already exists; choose a new name (table never "
                             f"overwrites a file)")
        parent = os.path.dirname(os.path.abspath(out_path))
        if not os.path.isdir(parent):
            raise InputError(f"{parent}: directory does not exist")
    progress = _Progress(quiet or to_stdout)
    header = {"code": code.describe(), "max_lost": max_lost, "patterns": total}
    started = time.perf_counter()
    if to_stdout:
        click.echo(json.dumps(header))
        for plan in patterns:
            click.echo(json.dumps(plan.as_dict()))
        return
    fd, temporary = tempfile.mkstemp(prefix=f".{os.path.basename(out_path)}.gfla-partial-",
                                     dir=parent)
    try:
        with os.fdopen(fd, "w", encoding="ascii") as fh:
            fh.write(json.dumps(header) + "\n")
            for done, plan in enumerate(patterns, 1):
                fh.write(json.dumps(plan.as_dict()) + "\n")
                if done % 64 == 0 or done == total:
                    progress("patterns", done, total)
            fh.flush()
            os.fsync(fh.fileno())
        progress.finish()
        mask = os.umask(0)
        os.umask(mask)
        os.chmod(temporary, 0o666 & ~mask)
        try:
            os.link(temporary, out_path)
        except FileExistsError:
            raise InputError(f"{out_path}: already exists; not overwritten") from None
        os.unlink(temporary)
    except BaseException:
        progress.finish()
        try:
            os.unlink(temporary)
        except OSError:
            pass
        raise
    seconds = time.perf_counter() - started
    if as_json:
        emit_json({**_code_payload(code), "table": out_path, "max_lost": max_lost,
                   "patterns": total, "seconds": round(seconds, 6)})
    else:
        click.echo(f"wrote {total} erasure patterns (1..{max_lost} of {code.n} shards lost) "
                   f"to {out_path} in {seconds:.2f} s")


# --------------------------------------------------------------------------- encode

@erasure.command("encode")
@click.argument("input_path", metavar="INPUT", type=click.Path(dir_okay=True))
@code_options
@click.option("--out", "out_dir", metavar="DIR", required=True,
              help="New (or empty) directory for the shard files and manifest.json.")
@_chunk_option
@_quiet_option
@_json_option
@erasure_command
def encode_command(input_path, k, m, construction, field_spec, modulus, out_dir,
                   chunk_text, quiet, as_json):
    """Encode a file into k + m shard files plus manifest.json.

    Data shard d holds bytes d*S .. (d+1)*S-1 of INPUT (S = shard size, the last shard
    zero padded); parity shards hold the code's combinations. The manifest records the
    code, the shard size, the original's length and SHA-256, and every shard's index,
    file name and SHA-256. DIR appears only when everything is written and read back.

    \b
    Examples:
      gfla erasure encode ledger.tar -k 10 -m 4 --out ledger.shards
      gfla erasure encode scan.img -k 20 -m 6 --field 'GF(2^16)' --construction cauchy --out scan.shards --json
    """
    from gfla.jobs.erasure import encode_file

    chunk = _parse_chunk(chunk_text)
    code = _load_code(k, m, construction, field_spec, modulus)
    progress = _Progress(quiet)
    try:
        result = encode_file(input_path, out_dir, code, chunk_size=chunk, progress=progress)
    finally:
        progress.finish()
    body = result["manifest"]
    if as_json:
        emit_json({"encode": {"directory": out_dir, "manifest": body}})
        return
    original = body["original"]
    click.echo(f"encoded {input_path} ({_size_text(original['length'])}) into {out_dir}/")
    click.echo(_code_line(code))
    click.echo(f"shards: {code.n} files of {body['shard_size']} bytes "
               f"({body['shards'][0]['file']} .. {body['shards'][-1]['file']}); "
               f"any {code.k} rebuild the file")
    click.echo(f"original sha256: {original['sha256']}")
    click.echo(f"manifest: {os.path.join(out_dir, 'manifest.json')}")


# --------------------------------------------------------------------------- verify

def _damage_line(summary):
    code = summary["code"]
    k, n = code["data_shards"], code["data_shards"] + code["parity_shards"]
    parts = []
    if summary["missing"]:
        parts.append("missing " + ", ".join(map(str, summary["missing"])))
    if summary["corrupt"]:
        parts.append("corrupt " + ", ".join(map(str, summary["corrupt"])))
    damaged = len(summary["missing"]) + len(summary["corrupt"])
    intact = len(summary["intact"])
    if summary["recoverable"]:
        tail = (f"recoverable: {intact} of {n} shards intact, {k} needed "
                f"(run 'gfla erasure repair {summary['directory']}')")
    else:
        tail = (f"NOT recoverable: {intact} of {n} shards intact, {k} needed, "
                f"{k - intact} more missing")
    return f"{damaged} of {n} shards damaged ({'; '.join(parts)}); {tail}"


@erasure.command("verify")
@click.argument("directory", metavar="DIR")
@_quiet_option
@_json_option
@erasure_command
def verify_command(directory, quiet, as_json):
    """Check every shard against the manifest: intact, missing or corrupt.

    A shard is corrupt when its size is wrong (truncated or too long) or its SHA-256
    differs from the manifest's. Exit code 0 when all shards are intact, 1 when some
    are missing or corrupt (the report says whether the file can still be rebuilt).

    \b
    Examples:
      gfla erasure verify ledger.shards
      gfla erasure verify ledger.shards --json
    """
    from gfla.jobs.erasure import verify_shards

    progress = _Progress(quiet)
    try:
        summary = verify_shards(directory, progress=progress)
    finally:
        progress.finish()
    damaged = bool(summary["missing"] or summary["corrupt"])
    if as_json:
        emit_json({"verify": summary})
    else:
        original = summary["original"]
        click.echo(f"{directory}: {original['name']} ({_size_text(original['length'])}), "
                   f"{len(summary['shards'])} shards of {summary['shard_size']} bytes")
        width = max(len(r["file"]) for r in summary["shards"])
        for row in summary["shards"]:
            click.echo(f"  {row['index']:>3} {row['role']:<6} {row['file']:<{width}} "
                       f"{row['status']:<7} {row['detail']}")
        if not damaged:
            click.echo(f"all {len(summary['shards'])} shards intact")
    if damaged:
        click.echo(f"error: {_damage_line(summary)}", err=True)
        click.get_current_context().exit(1)


# --------------------------------------------------------------------------- decode

@erasure.command("decode")
@click.argument("directory", metavar="DIR")
@click.option("--out", "out_path", metavar="FILE", required=True,
              help="Where to write the rebuilt file (must not exist).")
@_chunk_option
@_quiet_option
@_json_option
@erasure_command
def decode_command(directory, out_path, chunk_text, quiet, as_json):
    """Rebuild the original file from any k intact shards.

    Missing and corrupt shards count as lost. The result is checked against every
    rebuilt shard's SHA-256 and the original's before it gets its name. Fewer than k
    intact shards: refused with exit code 1, naming the missing and corrupt shards.

    \b
    Examples:
      gfla erasure decode ledger.shards --out ledger-restored.tar
      gfla erasure decode ledger.shards --out restored.tar --json --quiet
    """
    from gfla.jobs.erasure import decode_file

    chunk = _parse_chunk(chunk_text)
    progress = _Progress(quiet)
    try:
        result = decode_file(directory, out_path, chunk_size=chunk, progress=progress)
    finally:
        progress.finish()
    if as_json:
        emit_json({"decode": {key: result[key] for key in (
            "output", "sha256", "read", "rebuilt", "missing", "corrupt", "decoding_matrix")},
            "original": result["original"]})
        return
    click.echo(f"rebuilt {out_path} ({_size_text(result['original']['length'])}) from shards "
               f"{' '.join(map(str, result['read']))}")
    if result["missing"] or result["corrupt"]:
        click.echo(f"treated as lost: missing {result['missing'] or 'none'}, corrupt "
                   f"{result['corrupt'] or 'none'}; data shards recomputed: "
                   f"{' '.join(map(str, result['rebuilt'])) or 'none'}")
    click.echo(f"sha256: {result['sha256']} (matches the manifest)")


# --------------------------------------------------------------------------- repair

@erasure.command("repair")
@click.argument("directory", metavar="DIR")
@_chunk_option
@_quiet_option
@_json_option
@erasure_command
def repair_command(directory, chunk_text, quiet, as_json):
    """Rebuild missing or corrupt shards in place, verified against the manifest.

    Each rebuilt shard is checked against its recorded SHA-256 before it is put in
    place; a corrupt shard is kept as NAME.damaged, never overwritten. Fewer than k
    intact shards: refused with exit code 1.

    \b
    Examples:
      gfla erasure repair ledger.shards
      gfla erasure repair ledger.shards --json --quiet
    """
    from gfla.jobs.erasure import repair_shards

    chunk = _parse_chunk(chunk_text)
    progress = _Progress(quiet)
    try:
        result = repair_shards(directory, chunk_size=chunk, progress=progress)
    finally:
        progress.finish()
    if as_json:
        emit_json({"repair": {key: result[key] for key in (
            "directory", "repaired", "read", "missing", "corrupt", "set_aside")}})
        return
    if not result["repaired"]:
        click.echo(f"{directory}: all {len(result['shards'])} shards intact; nothing to repair")
        return
    click.echo(f"repaired shards {' '.join(map(str, result['repaired']))} from shards "
               f"{' '.join(map(str, result['read']))}; each matches its recorded SHA-256")
    for index, name in sorted(result["set_aside"].items()):
        click.echo(f"  damaged shard {index} kept as {name}")
