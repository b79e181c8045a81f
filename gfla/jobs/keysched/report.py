"""Text and JSON forms of the key-schedule results (no arithmetic here).

JSON: states, keys, round keys and polynomials are hex strings in the job's convention
(bit i of the integer is state bit i, or the coefficient of x^i); counts, dimensions and
periods are plain integers.
"""

from . import bits as B
from . import gf2poly as P

__all__ = ["poly_text", "analysis_json", "analysis_text", "recover_json", "recover_text",
           "rounds_json", "rounds_text", "power_text"]


def poly_text(f, max_terms=8):
    """``x^4 + x + 1``; long polynomials as ``<degree d: 0x...>``."""
    if bin(f).count("1") <= max_terms:
        return P.to_text(f)
    return f"<degree {f.bit_length() - 1}: {f:#x}>"


def _factored(factors, key):
    parts = []
    for item in factors:
        e = item[key]
        base = poly_text(item["polynomial"])
        if " " in base and not base.startswith("<"):
            base = f"({base})"
        parts.append(base if e == 1 else f"{base}^{e}")
    return " * ".join(parts) if parts else "1"


def power_text(value):
    """An integer, with its size in bits when it is large."""
    if value is None:
        return "none"
    if value < 10 ** 12:
        return str(value)
    return f"{value} (about 2^{value.bit_length() - 1})"


def analysis_json(a):
    n = a["state_bits"]
    out = {k: v for k, v in a.items() if k not in ("charpoly", "minpoly", "factors",
                                                   "fixed_spaces", "collision", "constants")}
    out["constants"] = dict(a["constants"])
    if "value" in out["constants"]:
        out["constants"]["value"] = B.hex_of(out["constants"]["value"], n)
    if "fixed_part" in out["constants"]:
        out["constants"]["fixed_part"] = B.hex_of(out["constants"]["fixed_part"], n)
    out["charpoly"] = {"degree": a["charpoly"]["degree"],
                       "polynomial": hex(a["charpoly"]["polynomial"]),
                       "krylov_chains": a["charpoly"]["krylov_chains"]}
    out["minpoly"] = {"degree": a["minpoly"]["degree"],
                      "polynomial": hex(a["minpoly"]["polynomial"])}
    out["factors"] = []
    for f in a["factors"]:
        g = dict(f)
        g["polynomial"] = hex(f["polynomial"])
        if g.get("order_bounds"):
            g["order_bounds"] = {"divisor": f["order_bounds"][0],
                                 "multiple": f["order_bounds"][1]}
        out["factors"].append(g)
    if "collision" in a:
        out["collision"] = {"kernel_vector": B.hex_of(a["collision"]["kernel_vector"], n),
                            "note": a["collision"]["note"]}
    ps = dict(a["period_schedule"])
    if "translation_after_lcm" in ps:
        ps["translation_after_lcm"] = B.hex_of(ps["translation_after_lcm"], n)
    out["period_schedule"] = ps
    out["fixed_spaces"] = []
    for fs in a["fixed_spaces"]:
        g = dict(fs)
        g["example"] = None if fs["example"] is None else B.hex_of(fs["example"], n)
        g["weak_keys"] = None if fs["dimension"] is None else 1 << fs["dimension"]
        out["fixed_spaces"].append(g)
    return out


def _period_line(p):
    if p.get("value") is None and p.get("exact", True):
        return "none (" + p.get("note", "") + ")"
    if p.get("exact"):
        return power_text(p["value"])
    return (f"unknown exactly: a multiple of {power_text(p['divisor'])} dividing "
            f"{power_text(p['multiple'])} ({p.get('note', '')})")


def _constants_line(c, n):
    kind = c["kind"]
    if kind == "none":
        return "none (the update is linear)"
    if kind == "fixed":
        return f"the same every round: {B.hex_of(c['value'], n)}"
    parts = []
    for s in c.get("sequences", []):
        if not s["used"]:
            continue
        text = f"{s['name']}: {s['description']}"
        if s["period"]:
            text += f", period {s['period']}"
        parts.append(text)
    if c.get("note"):
        parts.append(c["note"])
    return "vary by round (" + "; ".join(parts) + ")"


def analysis_text(a):
    n = a["state_bits"]
    lines = []

    def add(label, value):
        lines.append((label, value))

    add("schedule", f"{a['name']} ({a['source']})")
    add("state bits", f"{n} (round keys of {a['round_key_bits']} bits)")
    chk = a["affine_check"]
    if chk.get("probed"):
        add("affine", f"yes (probed; checked on {chk['pairs']} random pairs and "
                      f"{chk['points']} random points, seed {chk['seed']:#x})")
    else:
        add("affine", "yes (given as a matrix)")
    add("constants", _constants_line(a["constants"], n))
    add("rank", f"{a['rank']} of {n} ({'invertible' if a['invertible'] else 'NOT invertible'})")
    if "collision" in a:
        add("colliding keys", f"k and k ^ {B.hex_of(a['collision']['kernel_vector'], n)} "
                              "share every state from round 1 on")
    add("charpoly", _factored(a["factors"], "multiplicity_in_charpoly"))
    add("minpoly", _factored(a["factors"], "exponent_in_minpoly")
        + f"  (degree {a['minpoly']['degree']})")
    degs = {}
    for f in a["factors"]:
        degs[f["degree"]] = degs.get(f["degree"], 0) + f["exponent_in_minpoly"]
    add("factor degrees", ", ".join(f"{d}" + (f" (x{c})" if c > 1 else "")
                                    for d, c in sorted(degs.items()))
        + "  (irreducible factors of the minimal polynomial, with exponents)")
    add("period, linear", _period_line(a["period_linear"]))
    ps = a["period_schedule"]
    if not ps["available"]:
        add("period, schedule", f"not available: {ps['reason']}")
    else:
        text = _period_line(ps)
        if ps.get("constant_period", 1) > 1:
            text += f" (the round constants repeat every {ps['constant_period']} rounds)"
        add("period, schedule", text)
    fs = a["fixed_spaces"]
    if fs:
        hits = [f for f in fs if f["dimension"] is not None]
        span = f"r = 1..{fs[-1]['rounds']}"
        if not hits:
            add("weak keys", f"no key is fixed by the r-round map for {span}")
        else:
            shown = ", ".join(
                f"r={f['rounds']}: 2^{f['dimension']}" for f in hits[:12])
            more = f", ... ({len(hits) - 12} more r)" if len(hits) > 12 else ""
            add("weak keys", f"keys fixed by the r-round map ({span}): {shown}{more}")
    width = max(len(label) for label, _ in lines) + 2
    return "\n".join((label + ":").ljust(width) + value for label, value in lines)


def recover_json(r):
    n = r["state_bits"]
    out = dict(r)
    out["determined_mask"] = B.hex_of(r["determined_mask"], n)
    out["particular"] = B.hex_of(r["particular"], n)
    out["basis"] = [B.hex_of(v, n) for v in r["basis"]]
    if "key" in r:
        out["key"] = B.hex_of(r["key"], n)
    return out


def recover_text(r, max_basis=8):
    n = r["state_bits"]
    lines = []
    if "key" in r:
        lines.append(f"master key: {B.hex_of(r['key'], n)}")
        lines.append(f"unique: all {n} bits determined by {r['equations']} equations "
                     f"(rank {r['rank']})")
        return "\n".join(lines)
    d = r["dimension"]
    lines.append(f"master keys: an affine space of dimension {d} (2^{d} keys) from "
                 f"{r['equations']} equations of rank {r['rank']}")
    lines.append(f"determined bits: {r['determined_bits']} of {n} "
                 f"(mask {B.hex_of(r['determined_mask'], n)}, values "
                 f"{B.hex_of(r['particular'] & r['determined_mask'], n)})")
    lines.append(f"one key: {B.hex_of(r['particular'], n)}")
    lines.append("plus any sum of:")
    for v in r["basis"][:max_basis]:
        lines.append(f"  {B.hex_of(v, n)}")
    if len(r["basis"]) > max_basis:
        lines.append(f"  ... ({len(r['basis']) - max_basis} more; --json lists all)")
    return "\n".join(lines)


def rounds_json(name, n, kbits, key, rows, with_states):
    out = {"schedule": name, "state_bits": n, "round_key_bits": kbits,
           "key": B.hex_of(key, n), "round_keys": []}
    for r, rk, st in rows:
        item = {"round": r, "round_key": B.hex_of(rk, kbits)}
        if with_states:
            item["state"] = B.hex_of(st, n)
        out["round_keys"].append(item)
    return out


def rounds_text(n, kbits, rows, with_states):
    width = max(len(str(r)) for r, _, _ in rows)
    lines = []
    for r, rk, st in rows:
        line = f"round {str(r).rjust(width)}: {B.hex_of(rk, kbits)}"
        if with_states:
            line += f"  state {B.hex_of(st, n)}"
        lines.append(line)
    return "\n".join(lines)
