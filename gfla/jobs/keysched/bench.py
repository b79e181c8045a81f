"""Benchmarks of the key-schedule job (rows for ``gfla bench``).

Three measurements, on schedules generated here (invented, word-oriented and
Simon-like: a new word from rotations and XORs of two others plus a round constant,
then the words slide):

* linearise and analyse a 256-bit state with 48 listed round constants
  (target <= 1 s after JIT warm-up);
* analyse a 4096-bit state (target <= 30 s; quick mode uses 1024 bits and says so),
  once with a Simon-like update and once with mixed rotations and a shift (large
  irreducible factors: the exact period then needs factorisations of 2^d - 1 that
  may not be found within the 20 s budget, and the period is given as bounds);
* round 2^60 of a 128-bit state (target <= 0.1 s), with and without loading the spec.

Every figure is the median of a few runs; the first run, which may compile kernels, is
reported as warm-up. Nothing is asserted.
"""

import time

import numpy as np

__all__ = ["run", "word_schedule_spec"]


def word_schedule_spec(words, width, rounds, seed=2024, lfsr=False, name=None,
                       style="simon"):
    """TOML text of an invented word schedule of ``words * width`` bits.

    ``style="simon"``: new word = k0 ^ (I ^ S^-1)(S^-3 k_last ^ k1 ^ k_mid) ^ constants
    (Simon-like; the linear part is unipotent). ``style="mixed"``: two rotations and a
    shift, whose characteristic polynomial has large irreducible factors.
    """
    rng = np.random.default_rng(seed)
    names = [f"k{i}" for i in range(words)]
    lines = [f'name = "{name or f"bench-{words * width}"} (invented)"',
             f"rounds = {rounds}", "", "[state]", f"words = {words}", f"width = {width}",
             "names = [" + ", ".join(f'"{n}"' for n in names) + "]", "",
             "[scratch]", f"widths = [{width}, {width}]", 'names = ["t", "u"]', "",
             "[round_key]", 'words = ["k0", "k1"]', ""]
    if lfsr:
        lines += ["[constants.rc]", "lfsr = { width = 7, taps = [6, 5], seed = 1 }", ""]
    else:
        values = [int(v) for v in rng.integers(0, 1 << min(width, 62), rounds)]
        lines += ["[constants.rc]", "values = [" + ", ".join(hex(v) for v in values) + "]",
                  f"width = {width}", ""]
    mid = words // 2 + 1

    def step(**kv):
        out = ["[[step]]"]
        for k, v in kv.items():
            key = "from" if k == "from_" else k
            if isinstance(v, str):
                out.append(f'{key} = "{v}"')
            elif isinstance(v, list):
                out.append(f"{key} = [" + ", ".join(f'"{x}"' for x in v) + "]")
            else:
                out.append(f"{key} = {v}")
        return out + [""]

    if style == "simon":
        lines += step(op="rotate", word=names[-1], right=3, into="t")
        lines += step(op="xor", into="t", words=[names[1], names[mid]])
        lines += step(op="rotate", word="t", right=1, into="u")
        lines += step(op="xor", into="t", words=["u"])
    else:
        lines += step(op="rotate", word=names[-1], right=1, into="t")
        lines += step(op="rotate", word=names[words // 2], left=8, into="u")
        lines += step(op="xor", into="t", words=["u", names[1]])
        lines += step(op="shift", word="t", left=3, into="u")
        lines += step(op="xor", into="t", words=["u"])
    lines += step(op="xor", into="k0", words=["t"])
    lines += step(op="xor_constant", into="k0", value=(1 << width) - 4)
    lines += step(op="round_constant", into="k0", sequence="rc")
    lines += step(op="permute", words=names, from_=names[1:] + names[:1])
    return "\n".join(lines)


def _median(fn, reps):
    from ...bench import timed
    return timed(fn, reps)


def _row(operation, n, seconds, warm, target, note=""):
    met = "met" if seconds <= target else "MISSED"
    return {"operation": operation, "family": "GF(2)", "n": n, "gfla_s": seconds,
            "galois_s": None, "blas_s": None, "warmup_s": warm,
            "note": f"target <= {target:g} s: {met}" + (f"; {note}" if note else ""),
            "gfla_over_blas": None, "galois_over_gfla": None, "target_s": target,
            "target_met": seconds <= target}


def run(quick=False):
    """Rows: (operation, family, n, gfla_s, warmup_s, note, target_s, target_met)."""
    from . import analyze, parse_spec, round_keys
    from .schedule import from_spec

    rows = []
    # 1. 256-bit state, 48 rounds: linearise (parse + probe + affine check) and analyse.
    text256 = word_schedule_spec(8, 32, 48)

    def lin_and_analyse():
        sched = from_spec(parse_spec(text256, "<bench-256>"))
        analyze(sched, up_to=48, factor_seconds=20.0)

    t, warm = _median(lin_and_analyse, 3)
    rows.append(_row("keysched linearise+analyze, 48 rounds", 256, t, warm, 1.0))

    # 2. large state analysis.
    n_big = 1024 if quick else 4096
    words = n_big // 32
    text_big = word_schedule_spec(words, 32, 64)
    t0 = time.perf_counter()
    sched_big = from_spec(parse_spec(text_big, f"<bench-{n_big}>"))
    result = analyze(sched_big, up_to=32, factor_seconds=20.0)
    t = time.perf_counter() - t0
    exact = result["period_linear"].get("exact")
    note = "quick mode: 1024 bits instead of 4096" if quick else ""
    note = (note + "; " if note else "") + ("period exact" if exact else
                                            "period as divisor/multiple")
    rows.append(_row("keysched linearise+analyze, Simon-like (r <= 32)", n_big, t,
                     None, 30.0, note))
    text_mixed = word_schedule_spec(words, 32, 64, style="mixed")
    t0 = time.perf_counter()
    sched_mixed = from_spec(parse_spec(text_mixed, f"<bench-{n_big}-mixed>"))
    budget = 5.0 if quick else 20.0
    result = analyze(sched_mixed, up_to=32, factor_seconds=budget)
    t = time.perf_counter() - t0
    degrees = sorted(f["degree"] for f in result["factors"])
    exact = result["period_linear"].get("exact")
    note = ("quick mode: 1024 bits instead of 4096; " if quick else "") + (
        f"irreducible factor degrees {degrees}; factoring budget {budget:g} s; "
        + ("period exact" if exact else "period as proven divisor/multiple"))
    rows.append(_row("keysched linearise+analyze, rotations+shift (r <= 32)", n_big, t,
                     None, 30.0, note))

    # 3. round 2^60 of a 128-bit state.
    text128 = word_schedule_spec(4, 32, 44, lfsr=True, name="bench-128")
    sched128 = from_spec(parse_spec(text128, "<bench-128>"))
    key = int(np.random.default_rng(7).integers(0, 1 << 62)) << 64 | 0x0123456789abcdef
    R = 1 << 60

    def one_round():
        round_keys(sched128, key, R, R)

    t, warm = _median(one_round, 5)
    rows.append(_row("keysched rounds -r 2^60", 128, t, warm, 0.1,
                     "schedule already loaded"))

    def load_and_round():
        s = from_spec(parse_spec(text128, "<bench-128>"))
        round_keys(s, key, R, R)

    t, warm = _median(load_and_round, 5)
    rows.append(_row("keysched rounds -r 2^60 (incl. spec load)", 128, t, warm, 0.1))
    return rows
