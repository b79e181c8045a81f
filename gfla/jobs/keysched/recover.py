"""Master-key recovery from round-key bits, and the known-bits file format.

Each known bit is one linear equation over GF(2) in the master key k: round-key bit j
of round R is state bit s = S[j] of state_R = M^R k + d_R, so

    (row s of M^R) . k = value + (bit s of d_R).

The system is solved by Gauss-Jordan elimination over GF(2). Consistent: the master
keys form an affine space (a particular key plus the span of a nullspace basis); a key
bit is determined when every basis vector is 0 there. Inconsistent: a vector y with
y A = 0 and y . b = 1 (from the left nullspace of A) names equations whose left sides add
up to zero for every key while their values add up to one: the certificate.

Known-bits file
---------------
One known bit per line, ``ROUND BIT VALUE`` (blanks or commas between)::

    # round  bit  value
    3        0    1
    3        17   0
    5        8..15 0xa5     # a range: bit 8 + i of the round key is bit i of 0xa5

ROUND is a round number (decimal, ``0x`` hex, or an expression such as ``2^40``); BIT is
a round-key bit index, 0 being the least significant bit of the round key in the hex
convention, or a range ``a..b``; VALUE is 0 or 1, or for a range an integer whose bit i
is round-key bit a + i. ``#`` starts a comment; blank lines are ignored.

References
----------
.. [1] Common practice: recovering a key from linear leakage is solving a linear
   system over GF(2); an inconsistency is certified by a vector of the left nullspace.
"""

import os
import re

import numpy as np

from ...errors import InputError, file_error
from . import bits as B
from .errors import InconsistentKnownBitsError

__all__ = ["KnownBit", "parse_known_bits", "load_known_bits", "recover_known",
           "recover_round_key"]


class KnownBit(tuple):
    """(round, bit, value, line)."""

    __slots__ = ()

    def __new__(cls, round, bit, value, line=None):
        return super().__new__(cls, (int(round), int(bit), int(value), line))

    round = property(lambda self: self[0])
    bit = property(lambda self: self[1])
    value = property(lambda self: self[2])
    line = property(lambda self: self[3])


_RANGE = re.compile(r"([0-9]+)\.\.([0-9]+)\Z")
# A bit index has at most this many digits (far beyond any round key); longer ones are
# refused before they are converted (Python stops at 4300 digits).
_MAX_INDEX_DIGITS = 12
_SEP = re.compile(r"[\s,]+")


def _show(token):
    return repr(token if len(token) <= 40 else token[:36] + "...")


def _int_token(token, what, where):
    from ...io.spec import parse_int_expr
    try:
        return parse_int_expr(token, what)
    except InputError as exc:
        raise InputError(f"{where}: {exc}") from None


def parse_known_bits(text, key_bits, path="<known bits>", check_round=None):
    """Parse known-bits text into a list of :class:`KnownBit` (``InputError`` naming
    file and line on any problem)."""
    out = []
    for number, line in enumerate(text.splitlines(), start=1):
        body = line.split("#", 1)[0].strip()
        if not body:
            continue
        where = f"{path}:{number}"
        tokens = [t for t in _SEP.split(body) if t]
        if len(tokens) != 3:
            raise InputError(f"{where}: expected 'ROUND BIT VALUE', got {len(tokens)} "
                             f"field{'s' if len(tokens) != 1 else ''}")
        rtok, btok, vtok = tokens
        rnd = _int_token(rtok, "round", where)
        if rnd < 0:
            raise InputError(f"{where}: round {_show(rtok)} is negative")
        if check_round is not None:
            try:
                rnd = check_round(rnd)
            except InputError as exc:
                raise InputError(f"{where}: {exc}") from None
        m = _RANGE.match(btok)
        if m:
            if max(len(m.group(1)), len(m.group(2))) > _MAX_INDEX_DIGITS:
                raise InputError(f"{where}: bit range {_show(btok)} is out of range: round "
                                 f"keys have {key_bits} bits (0 .. {key_bits - 1})")
            lo, hi = int(m.group(1)), int(m.group(2))
            if hi < lo:
                raise InputError(f"{where}: bit range {btok} runs backwards")
            if hi >= key_bits:
                # Checked before the range is listed: 0..10^11 must not build a list.
                raise InputError(f"{where}: bit {hi} is out of range: round keys have "
                                 f"{key_bits} bits (0 .. {key_bits - 1})")
            bits_ = list(range(lo, hi + 1))
        else:
            if not re.fullmatch(r"[0-9]+", btok):
                raise InputError(f"{where}: bit {_show(btok)} is not a bit index or an a..b "
                                 "range")
            if len(btok) > _MAX_INDEX_DIGITS:
                raise InputError(f"{where}: bit {_show(btok)} is out of range: round keys "
                                 f"have {key_bits} bits (0 .. {key_bits - 1})")
            bits_ = [int(btok)]
        for b in bits_:
            if b >= key_bits:
                raise InputError(f"{where}: bit {b} is out of range: round keys have "
                                 f"{key_bits} bits (0 .. {key_bits - 1})")
        value = _int_token(vtok, "value", where)
        if len(bits_) == 1 and not m:
            if value not in (0, 1):
                raise InputError(f"{where}: value {_show(vtok)} is not 0 or 1")
            out.append(KnownBit(rnd, bits_[0], value, number))
        else:
            if value < 0:
                raise InputError(f"{where}: value {_show(vtok)} is negative")
            if value.bit_length() > len(bits_):
                raise InputError(f"{where}: value {_show(vtok)} has more than the "
                                 f"{len(bits_)} bits of the range {btok}")
            for i, b in enumerate(bits_):
                out.append(KnownBit(rnd, b, (value >> i) & 1, number))
    if not out:
        raise InputError(f"{path}: no known bits (lines 'ROUND BIT VALUE')")
    return out


def load_known_bits(path, key_bits, check_round=None):
    path = os.fspath(path)
    try:
        with open(path, "rb") as fh:
            data = fh.read()
    except (OSError, ValueError) as exc:
        raise file_error(path, exc) from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        raise InputError(f"{path}: is not UTF-8 text") from None
    return parse_known_bits(text, key_bits, path, check_round)


def _round_maps(sched, rounds):
    """{R: (M^R, d_R)} for the distinct rounds, computed incrementally."""
    rounds = sorted(set(rounds))
    n = sched.n
    zero = np.zeros(n, dtype=np.uint8)
    top = rounds[-1]
    if top <= 4 * n + 256 or not sched.has_fast_form():
        orbit = sched.states(zero, 0, top)
        d = {R: orbit[R] for R in rounds}
    else:
        d = {R: sched.state(zero, R) for R in rounds}
    out = {}
    prev_R, prev = 0, np.eye(n, dtype=np.uint8)
    for R in rounds:
        step = R - prev_R
        if step == 0:
            cur = prev
        elif step == 1:
            cur = B.matmul(sched.M, prev)
        else:
            cur = B.matmul(B.power(sched.M, step), prev)
        out[R] = (cur, d[R])
        prev_R, prev = R, cur
    return out


def recover_known(sched, known):
    """Solve for the master key from known round-key bits.

    Returns a JSON-ready dict: ``equations``, ``rank``, ``dimension`` (of the space of
    master keys), ``determined_bits``, ``key`` (when unique), ``particular`` and
    ``basis`` (ints in the hex convention), ``determined_mask``.

    Raises
    ------
    InconsistentKnownBitsError
        When no master key has these round-key bits, with the conflicting equations.
    """
    known = list(known)
    n = sched.n
    for kb in known:
        if not 0 <= kb.bit < sched.key_bits:
            raise InputError(f"bit {kb.bit} is out of range: round keys have "
                             f"{sched.key_bits} bits (0 .. {sched.key_bits - 1})")
        if kb.value not in (0, 1):
            raise InputError(f"value {kb.value} of round {kb.round} bit {kb.bit} is not 0 or 1")
        sched.check_round(kb.round)
    maps = _round_maps(sched, [kb.round for kb in known])
    A = np.zeros((len(known), n), dtype=np.uint8)
    b = np.zeros(len(known), dtype=np.uint8)
    for i, kb in enumerate(known):
        MR, dR = maps[kb.round]
        s = int(sched.round_key_bits[kb.bit])
        A[i] = MR[s]
        b[i] = kb.value ^ dR[s]
    ok, x, N = B.solve(A, b)
    rank = n - N.shape[0]
    if not ok:
        raise _inconsistency(A, b, known)
    free = N.shape[0]
    determined = ~N.any(axis=0) if free else np.ones(n, dtype=bool)
    result = {
        "state_bits": n,
        "equations": len(known),
        "rank": int(rank),
        "dimension": int(free),
        "candidates": 1 << free,
        "determined_bits": int(determined.sum()),
        "determined_mask": B.bits_to_int(determined.astype(np.uint8)),
        "particular": B.bits_to_int(x),
        "basis": [B.bits_to_int(row) for row in N],
    }
    if free == 0:
        result["key"] = B.bits_to_int(x)
        _self_check(sched, x, known)
    return result


def _self_check(sched, key, known):
    """The recovered key reproduces every known bit (a failed check is a bug)."""
    rounds = sorted({kb.round for kb in known})
    states = {}
    if rounds[-1] <= 4096 or not sched.has_fast_form():
        orbit = sched.states(key, 0, rounds[-1])
        states = {R: orbit[R] for R in rounds}
    else:
        states = {R: sched.state(key, R) for R in rounds}
    for kb in known:
        if states[kb.round][sched.round_key_bits[kb.bit]] != kb.value:  # pragma: no cover
            raise AssertionError("recovered key does not reproduce the known bits")


def _inconsistency(A, b, known):
    Y = B.nullspace(np.ascontiguousarray(A.T))
    hits = [y for y in Y if int(y.astype(np.int64) @ b.astype(np.int64)) & 1]
    if not hits:  # pragma: no cover - an inconsistent system has such a vector
        raise AssertionError("no left-nullspace certificate found")
    y = min(hits, key=lambda v: int(v.sum()))
    rows = [i for i in np.flatnonzero(y)]
    eqs = [{"round": known[i].round, "bit": known[i].bit, "value": known[i].value,
            "line": known[i].line} for i in rows]
    text = ", ".join(f"round {e['round']} bit {e['bit']} = {e['value']}"
                     + (f" (line {e['line']})" if e["line"] is not None else "")
                     for e in eqs[:6])
    more = f" and {len(eqs) - 6} more" if len(eqs) > 6 else ""
    return InconsistentKnownBitsError(
        f"no master key has these round-key bits: the {len(eqs)} equations {text}{more} "
        "add up to 0 = 1 for every key", eqs)


def recover_round_key(sched, R, round_key):
    """Master keys whose round key R is ``round_key`` (int in the hex convention)."""
    R = sched.check_round(R)
    kbits = sched.key_bits
    if isinstance(round_key, bool) or not isinstance(round_key, (int, np.integer)) \
            or round_key < 0 or int(round_key).bit_length() > kbits:
        raise InputError(f"round key has the wrong length: round keys have {kbits} bits")
    known = [KnownBit(R, j, (int(round_key) >> j) & 1) for j in range(kbits)]
    try:
        return recover_known(sched, known)
    except InconsistentKnownBitsError as exc:
        raise InconsistentKnownBitsError(
            f"no master key gives round key {B.hex_of(round_key, kbits)} at round {R}: "
            f"{len(exc.equations)} of its bits contradict each other for every key",
            exc.equations) from None
