"""``gfla keysched``: key schedules over GF(2): round keys, analysis, key recovery.

The numerical parts of gfla are imported inside the commands, so ``gfla --help`` stays
fast. Arithmetic happens in :mod:`gfla.jobs.keysched`; this module parses options and
prints.
"""

import functools
import sys
import json

import click

from .common import GflaGroup, jsonable

__all__ = ["keysched"]

CONTEXT = {"help_option_names": ["-h", "--help"], "max_content_width": 100}

SPEC_HELP = """\b
SPEC is one of:
  a .toml spec file (format: vectors/keysched/README.md, or gfla keysched example)
  a built-in spec name: simon32-64 (Simon32/64), wrenlock-80 (invented, demo)
  a raw matrix file, .npy or text: n x n matrix M, or n x (n+1) [M | c]
    (state' = M state + c; the round key is the whole state)
  module:function (or file.py:function): a Python callable state -> next state
Hex values (keys, states, round keys) are the integer whose bit i is state bit i."""


def _state_bits_option(function):
    return click.option(
        "--state-bits", "state_bits", type=click.IntRange(1, 1 << 16), default=None,
        metavar="N", help="State size for a module:function SPEC without a state_bits "
                          "attribute.")(function)


# The default is the schedule module's PROBE_SEED; it is not imported here so that
# ``gfla --help`` stays free of numpy (tests/test_hardening.py checks the two agree).
_PROBE_SEED_TEXT = "0x6b73636864"


def _seed_option(function):
    return click.option(
        "--seed", "seed_text", default=None, metavar="N",
        help="Seed of the random pairs and points that check the schedule is affine, "
             f"decimal or 0x hex (default {_PROBE_SEED_TEXT}); the same seed gives the "
             "same check, e.g. --seed 0x2a.")(function)


def _seed(seed_text):
    from gfla.jobs.keysched.schedule import PROBE_SEED
    if seed_text is None:
        return PROBE_SEED
    try:
        seed = int(seed_text.replace("_", ""), 0)
    except ValueError:
        seed = -1
    if not 0 <= seed < 1 << 63:
        raise click.BadParameter(f"{seed_text!r} is not an integer 0 .. 2^63 - 1",
                                 param_hint="'--seed'")
    return seed


def _json_option(function):
    return click.option("--json", "as_json", is_flag=True,
                        help="Print one JSON object instead of text.")(function)


def _refusals(function):
    """Mathematical refusals: exit code 1 with the certificate (stderr in text mode,
    one JSON object on stdout with --json). Input errors go to the group (exit 2)."""

    @functools.wraps(function)
    def wrapper(*args, **kwargs):
        from gfla.errors import InputError, MathError

        try:
            return function(*args, **kwargs)
        except MathError as exc:
            if isinstance(exc, InputError):
                raise
            ctx = click.get_current_context()
            message = " ".join(str(exc).split())
            cert = exc.certificate() if callable(getattr(exc, "certificate", None)) else {}
            if kwargs.get("as_json"):
                click.echo(json.dumps(jsonable({"field": "GF(2)", "error": message,
                                                "kind": type(exc).__name__,
                                                "certificate": cert})))
            else:
                click.echo(f"refused: {message}", err=True)
                for key, value in cert.items():
                    if isinstance(value, list) and value and isinstance(value[0], dict):
                        click.echo(f"  {key}:", err=True)
                        for item in value:
                            click.echo("    " + ", ".join(f"{k} {v}" for k, v in item.items()),
                                       err=True)
                    else:
                        click.echo(f"  {key}: {value}", err=True)
            ctx.exit(1)

    return wrapper


def _load(spec, state_bits, seed_text=None):
    from gfla.jobs import keysched
    return keysched.load_schedule(spec, state_bits=state_bits, seed=_seed(seed_text))


def _parse_round(text, what="round"):
    from gfla.io.spec import parse_int_expr
    return parse_int_expr(text, what)


def _parse_range(text):
    """``R`` -> (0, R); ``A..B`` -> (A, B)."""
    from gfla.errors import InputError
    if ".." in text:
        a, _, b = text.partition("..")
        if not a.strip() or not b.strip():
            raise InputError(f"round range {text!r} is not A..B")
        return _parse_round(a, "first round"), _parse_round(b, "last round")
    return 0, _parse_round(text)


@click.group(cls=GflaGroup, context_settings=CONTEXT)
def keysched():
    """Key schedules over GF(2): round keys, periods, weak keys, key recovery.

    A key schedule that is affine over GF(2) (rotations, shifts, XORs, cell
    permutations, GF(2^k) constant multiplications, LFSR steps, round constants) is
    linearised by probing and then analysed exactly. State 0 is the master key; round
    key r comes from state r.

    \b
    Examples:
      gfla keysched rounds simon32-64 --key '1918 1110 0908 0100' -r 8
      gfla keysched analyze wrenlock-80
      gfla keysched recover simon32-64 --round 4 --round-key 0x71c3
      gfla keysched example simon32-64 > simon.toml
    """


# --------------------------------------------------------------------------- rounds

@keysched.command(epilog=SPEC_HELP)
@click.argument("spec")
@click.option("-k", "--key", "key_text", required=True, metavar="HEX",
              help="Master key in hex (bit i = state bit i; blanks and _ allowed).")
@click.option("-r", "--rounds", "rounds_text", required=True, metavar="R|A..B",
              help="Round keys 0..R, or A..B; R may be an expression such as 2^60.")
@click.option("--only", is_flag=True, help="Print only the last round's key.")
@click.option("--states", "with_states", is_flag=True, help="Print the states as well.")
@_state_bits_option
@_seed_option
@_json_option
@_refusals
def rounds(spec, key_text, rounds_text, only, with_states, state_bits, seed_text, as_json):
    """Round keys of the rounds asked for.

    Any round is fast: round 2^64 costs one power of x modulo the characteristic
    polynomial and one matrix-vector product per state bit.

    \b
    Examples:
      gfla keysched rounds simon32-64 --key '1918 1110 0908 0100' -r 31
      gfla keysched rounds simon32-64 --key 0x1918111009080100 -r 2^60 --only --states
      gfla keysched rounds wrenlock-80 --key 0x0123456789abcdef0123 -r 100..103 --json
    """
    from gfla.jobs import keysched as ks
    from gfla.jobs.keysched import bits as B
    from gfla.jobs.keysched import report

    sched = _load(spec, state_bits, seed_text)
    key = B.parse_hex(key_text, sched.n, "key")
    first, last = _parse_range(rounds_text)
    if only:
        first = last
    rows = ks.round_keys(sched, key, first, last)
    if as_json:
        click.echo(json.dumps(jsonable(report.rounds_json(
            sched.name, sched.n, sched.key_bits, key, rows, with_states))))
    else:
        click.echo(report.rounds_text(sched.n, sched.key_bits, rows, with_states))


# --------------------------------------------------------------------------- analyze

@keysched.command(epilog=SPEC_HELP)
@click.argument("spec")
@click.option("--up-to", "up_to", type=click.IntRange(0, 4096), default=32,
              show_default=True, metavar="R",
              help="Fixed spaces (weak keys) of the r-round maps for r = 1..R.")
@click.option("--factor-seconds", type=click.FloatRange(0.1, 3600), default=20.0,
              show_default=True, metavar="S",
              help="Time budget for factoring 2^d - 1 (exact periods need it).")
@_state_bits_option
@_seed_option
@_json_option
@_refusals
def analyze(spec, up_to, factor_seconds, state_bits, seed_text, as_json):
    """Invertibility, polynomial structure, periods and weak keys.

    Reports the state size, whether the update is affine (a schedule that is not is
    refused with a witness pair, exit code 1), the rank, the factored characteristic and
    minimal polynomials (the degrees of the irreducible factors give the invariant
    subspaces), the period of the linear part and of the whole schedule (with the
    round constants, where they repeat), and for r = 1..R the dimension of the space of
    keys the r-round map sends to themselves (2^dim weak keys). An exact period that
    needs a factorisation not found in time is given as a proven divisor and multiple.

    \b
    Examples:
      gfla keysched analyze simon32-64
      gfla keysched analyze wrenlock-80 --up-to 64 --json
    """
    from gfla.jobs import keysched as ks
    from gfla.jobs.keysched import report
    from gfla.jobs.keysched.analysis import check_analysis_memory

    if state_bits is not None:      # refuse before probing, which takes a while
        check_analysis_memory(state_bits, spec)
    sched = _load(spec, state_bits, seed_text)
    result = ks.analyze(sched, up_to=up_to, factor_seconds=factor_seconds)
    if as_json:
        click.echo(json.dumps(jsonable(report.analysis_json(result))))
    else:
        click.echo(report.analysis_text(result))


# --------------------------------------------------------------------------- recover

@keysched.command(epilog=SPEC_HELP + """

\b
Known-bits file: one 'ROUND BIT VALUE' per line, '#' comments, e.g.
  # round  bit  value
  3        0    1
  5        8..15 0xa5     (a range: bit 8+i is bit i of 0xa5)
BIT 0 is the least significant bit of the round key.""")
@click.argument("spec")
@click.option("--round", "round_text", metavar="R", default=None,
              help="The round whose key is given with --round-key.")
@click.option("--round-key", "round_key_text", metavar="HEX", default=None,
              help="A whole round key, in hex.")
@click.option("--known", "known_path", metavar="FILE", default=None,
              help="Known round-key bits ('ROUND BIT VALUE' lines); '-' reads stdin.")
@_state_bits_option
@_seed_option
@_json_option
@_refusals
def recover(spec, round_text, round_key_text, known_path, state_bits, seed_text, as_json):
    """The master key from a round key or from known round-key bits.

    Solves the linear system over GF(2). When the bits do not determine the key, prints
    the affine space of master keys (dimension, one key and a basis) and how many key
    bits are determined. Contradictory bits are refused (exit code 1) with the
    conflicting equations.

    \b
    Examples:
      gfla keysched recover simon32-64 --round 4 --round-key 0x71c3
      printf '0 0..15 0x0100\\n1 0..15 0x0908\\n2 0..15 0x1110\\n3 0..15 0x1918\\n' |
        gfla keysched recover simon32-64 --known -
      gfla keysched recover wrenlock-80 --round 0 --round-key 0x89abcdef --json
    """
    from gfla.jobs import keysched as ks
    from gfla.jobs.keysched import bits as B
    from gfla.jobs.keysched import report

    if known_path is not None and (round_text is not None or round_key_text is not None):
        raise click.UsageError("give --known FILE, or --round with --round-key, not both")
    if known_path is None and (round_text is None or round_key_text is None):
        raise click.UsageError("give --round R with --round-key HEX, or --known FILE")
    sched = _load(spec, state_bits, seed_text)
    if known_path == "-":
        text = sys.stdin.read()
        known = ks.parse_known_bits(text, sched.key_bits, "<stdin>", sched.check_round)
        result = ks.recover_known(sched, known)
    elif known_path is not None:
        known = ks.load_known_bits(known_path, sched.key_bits, sched.check_round)
        result = ks.recover_known(sched, known)
    else:
        R = sched.check_round(_parse_round(round_text))
        rk = B.parse_hex(round_key_text, sched.key_bits, "round key", "a round key")
        result = ks.recover_round_key(sched, R, rk)
    if as_json:
        click.echo(json.dumps(jsonable(report.recover_json(result))))
    else:
        click.echo(report.recover_text(result))


# --------------------------------------------------------------------------- example

@keysched.command()
@click.argument("name", required=False)
def example(name):
    """Print a built-in spec (a starting point for your own).

    Without NAME, lists the built-in specs.

    \b
    Examples:
      gfla keysched example
      gfla keysched example simon32-64 > simon.toml
    """
    from gfla.errors import InputError
    from gfla.jobs.keysched import examples

    if name is None:
        for key in sorted(examples.SPECS):
            click.echo(key)
        return
    if name not in examples.SPECS:
        raise InputError(f"no built-in spec {name!r}; built-in: "
                         + ", ".join(sorted(examples.SPECS)))
    click.echo(examples.SPECS[name], nl=False)
