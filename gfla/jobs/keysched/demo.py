"""The key-schedule part of ``gfla demo``: the invented Wrenlock-80 key schedule.

Wrenlock is a toy cipher invented for gfla's demo; its 80-bit key schedule (built-in
spec ``wrenlock-80``) is made up too. The section reports what gfla computes for it:
the period of the schedule, a weak-key count (the keys some r-round map sends to
themselves), and the master key recovered from a handful of leaked round-key bits. The
master key and the leak are generated here from a fixed seed; nothing is a reference
value.
"""

import numpy as np

__all__ = ["demo_section", "format_text"]

TITLE = "Wrenlock-80 key schedule (invented): period, weak keys, key recovery"
STORY = ("Wrenlock (an invented toy cipher) expands an 80-bit key, 20 cells of 4 bits, with "
         "a cell rotation, GF(2^4) multiplications, XORs, an LFSR step and a 4-bit LFSR "
         "round constant; each round key is cells c0..c7. The schedule is affine over "
         "GF(2), so gfla linearises it and answers exactly.")
SEED = 80


def demo_section(json_mode=False):
    """Run the analyses; returns a JSON-ready dict (``format_text`` renders it).

    ``json_mode`` only selects the number format of keys: hex strings in both modes.
    """
    from . import analyze, load_schedule, recover_known, round_keys
    from .bits import hex_of
    from .recover import KnownBit

    sched = load_schedule("wrenlock-80")
    n = sched.n
    a = analyze(sched, up_to=32)
    weak = [f for f in a["fixed_spaces"] if f["dimension"] is not None]
    best = max(weak, key=lambda f: (f["dimension"], -f["rounds"])) if weak else None
    rng = np.random.default_rng(SEED)
    key = int.from_bytes(rng.bytes(10), "little") & ((1 << n) - 1)
    rounds_leaked = 0
    leaked_bits = (0, 1, 2)          # the low 3 bits of each round key leak
    result = None
    known = []
    rows = round_keys(sched, key, 0, 40)
    for r, rk, _ in rows:
        known.extend(KnownBit(r, b, (rk >> b) & 1) for b in leaked_bits)
        rounds_leaked = r + 1
        if len(known) >= n:
            result = recover_known(sched, known)
            if result["dimension"] == 0:
                break
    recovered = result.get("key") if result else None
    findings = [
        ("state", f"{n} bits, round keys of {sched.key_bits} bits, rank {a['rank']} "
                  f"({'invertible' if a['invertible'] else 'not invertible'})"),
        ("period of the linear part", str(a["period_linear"].get("value"))),
        ("period of the schedule", _schedule_period_text(a["period_schedule"])),
        ("minimal polynomial", f"degree {a['minpoly']['degree']}; irreducible factors of "
                               "degree " + ", ".join(str(f["degree"]) for f in a["factors"])
                               + " with exponents " + ", ".join(
                                   str(f["exponent_in_minpoly"]) for f in a["factors"])),
    ]
    if best is not None:
        findings.append(("weak keys", f"the {best['rounds']}-round map fixes "
                                      f"2^{best['dimension']} = {1 << best['dimension']} "
                                      f"keys (the most for r <= 32), e.g. "
                                      f"{hex_of(best['example'], n)}"))
    else:
        findings.append(("weak keys", "no r-round map with r <= 32 fixes a key"))
    findings.append(("leak", f"bits {', '.join(map(str, leaked_bits))} of round keys "
                             f"0..{rounds_leaked - 1} ({len(known)} bits)"))
    findings.append(("master key (seeded)", hex_of(key, n)))
    findings.append(("recovered key", "none" if recovered is None else hex_of(recovered, n)))
    findings.append(("recovered key matches", "yes" if recovered == key else "no"))
    return {
        "name": "keysched",
        "title": TITLE,
        "story": STORY,
        "invented": True,
        "schedule": sched.name,
        "state_bits": n,
        "period_linear": a["period_linear"],
        "period_schedule": {k: v for k, v in a["period_schedule"].items()
                            if k != "translation_after_lcm"},
        "weak_keys": None if best is None else {
            "rounds": best["rounds"], "dimension": best["dimension"],
            "count": 1 << best["dimension"], "example": hex_of(best["example"], n)},
        "leak": {"bits_per_round_key": list(leaked_bits), "rounds": rounds_leaked,
                 "known_bits": len(known)},
        "master_key": hex_of(key, n),
        "recovered_key": None if recovered is None else hex_of(recovered, n),
        "recovered_matches": recovered == key,
        "findings": [list(f) for f in findings],
    }


def _schedule_period_text(p):
    if not p.get("available"):
        return "not available: " + p.get("reason", "")
    if p.get("exact"):
        text = str(p["value"])
        if p.get("constant_period", 1) > 1:
            text += f" rounds (round constants repeat every {p['constant_period']})"
        return text
    return f"a multiple of {p['divisor']} dividing {p['multiple']}"


def format_text(d):
    """The section as text lines."""
    lines = [d["title"], "", d["story"], ""]
    width = max(len(label) for label, _ in d["findings"]) + 2
    for label, value in d["findings"]:
        lines.append("  " + (label + ":").ljust(width) + value)
    lines.append("")
    lines.append("  (Wrenlock and its key schedule are invented for this demo; the key is "
                 "drawn from a fixed seed. Not reference values.)")
    return "\n".join(lines)
