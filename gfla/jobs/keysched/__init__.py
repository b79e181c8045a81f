"""Key schedules over GF(2): linearise, run, invert, and find periods and weak keys.

Many lightweight ciphers and tweakable designs expand their key with maps that are
affine over GF(2): rotations, shifts, XORs of words, cell permutations, multiplications
of cells by GF(2^k) constants, LFSR steps, round constants. This job takes such a
schedule in one of three forms,

1. a TOML spec (:mod:`gfla.jobs.keysched.spec` documents the format; built-in
   examples ``simon32-64`` and ``wrenlock-80``),
2. a Python callable ``module:function`` mapping a state to the next,
3. a raw GF(2) matrix with its constant vector (text or ``.npy``, n x n or n x (n+1)),

linearises it by probing (f(0) and f(e_i), then the affine claim checked on 64 random
pairs and 64 random points, seeded), and answers: the round keys of any round (round
2^64 included), invertibility, the structure of the minimal polynomial, the period of
the linear part and of the whole schedule, the keys fixed by the r-round maps (weak
keys), and the master key from a round key or from scattered known round-key bits.

Hex convention (everywhere: keys, states, round keys, vectors): the integer whose bit i
is state bit i (round-key bit i). Round 0's key comes from the master key itself.

>>> from gfla.jobs import keysched
>>> s = keysched.load_schedule("simon32-64")
>>> hex(keysched.round_keys(s, 0x1918111009080100, 4, 4)[0][1])
'0x71c3'

Nothing here is constant-time; it is an analysis tool.
"""

import numpy as np

from . import bits as _bits
from .analysis import analyze
from .errors import InconsistentKnownBitsError, NonAffineScheduleError, SpecError
from .recover import load_known_bits, parse_known_bits, recover_known, recover_round_key
from .schedule import AffineSchedule, from_callable, from_matrix, from_spec, load_schedule
from .spec import load_spec, parse_spec

__all__ = ["load_schedule", "from_spec", "from_callable", "from_matrix", "load_spec",
           "parse_spec", "AffineSchedule", "analyze", "round_keys", "recover_known",
           "recover_round_key", "parse_known_bits", "load_known_bits", "SpecError",
           "NonAffineScheduleError", "InconsistentKnownBitsError", "ROUND_LIST_LIMIT"]

ROUND_LIST_LIMIT = 1 << 16


def round_keys(sched, key, first, last):
    """[(round, round key, state)] for rounds first .. last (ints, hex convention).

    ``last - first`` may be at most ``ROUND_LIST_LIMIT - 1``; ``first`` may be any round
    (2^64 and beyond: one polynomial power modulo the characteristic polynomial).
    """
    from ...errors import InputError, int_text
    n = sched.n
    if isinstance(key, (int, np.integer)):
        if key < 0 or int(key).bit_length() > n:
            raise InputError(f"key has the wrong length: the state has {n} bits")
        key = _bits.int_to_bits(int(key), n)
    first = sched.check_round(first, "first round")
    last = sched.check_round(last, "last round")
    if last < first:
        raise InputError(f"round range {int_text(first)}..{int_text(last)} runs backwards")
    if last - first + 1 > ROUND_LIST_LIMIT:
        raise InputError(f"rounds {int_text(first)}..{int_text(last)} would list "
                         f"{int_text(last - first + 1)} round keys; "
                         f"at most {ROUND_LIST_LIMIT} at a time (ask for a range a..b, or "
                         "for one round)")
    states = sched.states(key, first, last)
    rks = _bits.bits_to_ints(sched.round_key(states))
    sts = _bits.bits_to_ints(states)
    return [(first + i, rks[i], sts[i]) for i in range(len(rks))]
