"""The mixing-layer part of ``gfla demo``: the invented Brackenmoth cipher.

Brackenmoth does not exist: it is a 64-bit lightweight block cipher made up for this
tour, whose state is a 4 x 4 array of 4-bit cells and whose mixing layer multiplies each
column by a 4 x 4 matrix over GF(2^4) (modulus x^4 + x + 1). Its matrices are invented;
everything printed about them is computed by gfla when the demo runs, and none of it is
a reference value.
"""

import time

__all__ = ["demo_section", "format_text", "CIPHER", "SHIPPED_ROW", "DRAFT_ROW"]

CIPHER = "Brackenmoth"
MODULUS = 0x13
SHIPPED_ROW = [0x2, 0x3, 0x1, 0x1]     # invented: the specification's circulant
DRAFT_ROW = [0x1, 0x2, 0x1, 0x4]       # invented: a cheaper draft the designers tried
SEARCH_ENTRIES = list(range(1, 16))    # every nonzero element of GF(2^4)
NOTE = (f"{CIPHER} is an invented lightweight cipher and its matrices are invented for "
        "this demo; the figures are computed by gfla, not reference values.")


def _summary(report):
    """The parts of an analysis the demo shows."""
    mds = report["mds"]
    out = {
        "invertible": report["invertible"]["value"],
        "involutory": report["involutory"]["value"],
        "order": (report["order"] or {}).get("value"),
        "mds": mds["value"],
        "singular_minors_by_size": mds.get("singular_minors_by_size"),
        "singular_submatrix": mds.get("singular_submatrix"),
        "branch_number": {k: v["value"] for k, v in report["branch_number"].items()},
        "branch_witness": report["branch_number"]["differential"]["witness"],
        "branch_image": report["branch_number"]["differential"]["image"],
        "xor_naive": report["xor_count"]["naive"],
        "xor_optimized": report["xor_count"]["optimized"],
        "xor_method": report["xor_count"]["method"],
        "program_verified": report["xor_count"]["verified"],
    }
    return out


def demo_section(json_mode=False):
    """Analyse Brackenmoth's mixing matrix, a draft that fails MDS, and the cheapest MDS
    circulant a short search finds.

    Parameters
    ----------
    json_mode : bool
        Include the full analyses (everything ``analyze_layer`` reports, without the bit
        matrices) besides the summaries shown as text.

    Returns
    -------
    dict
        JSON-ready: ``name``, ``title``, ``story``, ``field``, ``modulus``, ``shipped``,
        ``draft`` and ``replacement`` (each with ``matrix`` and ``summary``), ``search``
        (counts and time), ``note``.
    """
    import gfla

    from .analyze import analyze_layer
    from .constructors import circulant
    from .search import search_family

    F = gfla.field("GF(2^4)", modulus=MODULUS)
    t0 = time.perf_counter()
    parts = {}
    for key, row in (("shipped", SHIPPED_ROW), ("draft", DRAFT_ROW)):
        M = circulant(F, row)
        report = analyze_layer(F, M, bp_runs=4, xor_seconds=2.0)
        parts[key] = {"first_row": row, "matrix": M.tolist(), "summary": _summary(report)}
        if json_mode:
            report["bit_matrix"].pop("matrix", None)
            parts[key]["analysis"] = report
    found = search_family(F, "circulant", 4, SEARCH_ENTRIES, keep=3, refine=8, bp_runs=2)
    best = found["best"][0] if found["best"] else None
    replacement = None
    if best is not None:
        report = analyze_layer(F, best["matrix"], bp_runs=4, xor_seconds=2.0)
        replacement = {"first_row": best["params"]["first_row"], "matrix": best["matrix"],
                       "summary": _summary(report)}
        if json_mode:
            report["bit_matrix"].pop("matrix", None)
            replacement["analysis"] = report
    return {
        "name": "mixing",
        "title": f"{CIPHER} (invented lightweight cipher): its mixing layer",
        "story": (f"{CIPHER} (an invented 64-bit lightweight cipher) mixes each 4-cell "
                  f"column of its state with a 4 x 4 circulant over GF(2^4). The "
                  "specification uses circ(2,3,1,1); an earlier draft tried the cheaper "
                  "circ(1,2,1,4). Is each MDS, what does it cost in XOR gates, and is "
                  "there a cheaper MDS circulant?"),
        "field": F.spec, "modulus": MODULUS,
        "shipped": parts["shipped"], "draft": parts["draft"],
        "replacement": replacement,
        "search": {"family": "circulant", "entries": SEARCH_ENTRIES,
                   "candidates": found["candidates"], "tested": found["tested"],
                   "equivalent_skipped": found["equivalent_skipped"],
                   "kept": found["kept"], "ranked": found["ranked"],
                   "seconds": round(found["seconds"], 3),
                   "best": [{"first_row": b["params"]["first_row"],
                             "xor_optimized": b["xor_count"]["optimized"],
                             "xor_naive": b["xor_count"]["naive"]} for b in found["best"]]},
        "seconds": round(time.perf_counter() - t0, 3),
        "note": NOTE,
    }


def _hex(v):
    return format(int(v), "x")


def _row(values):
    return ",".join(_hex(v) for v in values)


def _matrix_lines(M, indent="    "):
    return [indent + " ".join(_hex(v) for v in row) for row in M]


def _describe(label, part):
    s = part["summary"]
    lines = [f"{label}: circ({_row(part['first_row'])})"]
    lines += _matrix_lines(part["matrix"])
    bn = s["branch_number"]
    order = f"order {s['order']}" if s["order"] is not None else "no order (singular)"
    lines.append(f"  invertible: {'yes' if s['invertible'] else 'no'}, {order}, "
                 f"branch numbers: differential {bn['differential']}, linear {bn['linear']}")
    if s["mds"]:
        lines.append("  MDS: yes (every square submatrix nonsingular)")
    else:
        cert = s["singular_submatrix"]
        size = len(cert["rows"])
        lines.append(f"  MDS: no; the {size} x {size} submatrix at rows "
                     f"{','.join(map(str, cert['rows']))}, columns "
                     f"{','.join(map(str, cert['columns']))} (0-based) is singular:")
        lines += _matrix_lines(cert["submatrix"], indent="      ")
        counts = ", ".join(f"{k}x{k}: {v}" for k, v in s["singular_minors_by_size"].items())
        lines.append(f"  singular minors by size: {counts}")
        lines.append(f"  low-weight input: x = {_row(s['branch_witness'])} -> M x = "
                     f"{_row(s['branch_image'])}")
    lines.append(f"  XOR count: naive {s['xor_naive']}, optimized {s['xor_optimized']} "
                 f"({s['xor_method']}; program checked on all 16 unit vectors)")
    return lines


def format_text(d):
    """The section as readable text."""
    lines = [f"== {d['title']} ==", f"field: {d['field']}, modulus 0x{d['modulus']:x} "
             "(entries in hex)", d["story"], ""]
    lines += _describe("specified matrix", d["shipped"])
    lines.append("")
    lines += _describe("draft matrix", d["draft"])
    lines.append("")
    sr = d["search"]
    lines.append(f"search: every circulant with entries 1..f: {sr['candidates']} candidates, "
                 f"{sr['equivalent_skipped']} skipped as rotations, {sr['kept']} MDS, "
                 f"{sr['ranked']} ranked by XOR count in {sr['seconds']:.1f} s")
    for i, b in enumerate(sr["best"], start=1):
        lines.append(f"  {i}. circ({_row(b['first_row'])}): optimized {b['xor_optimized']} "
                     f"XORs, naive {b['xor_naive']}")
    if d["replacement"] is not None:
        lines.append("")
        lines += _describe("cheapest MDS replacement found", d["replacement"])
        saved = (d["shipped"]["summary"]["xor_optimized"]
                 - d["replacement"]["summary"]["xor_optimized"])
        lines.append(f"  versus the specified matrix: {saved} XORs fewer per column")
    lines.append("")
    lines.append(d["note"])
    return "\n".join(lines)
