"""Search structured families for good mixing layers.

A family and a set of allowed entries define the candidates:

* ``circulant``: first rows (c_0, ..., c_{n-1}) with every c_i in the set;
* ``hadamard``: Hadamard forms h[i XOR j], h_i in the set, n a power of two;
* ``companion``: C^power for the companion matrix C with last row in the set
  (power defaults to n: a serial layer);
* ``cauchy``: 1 / (x_i + y_j) for disjoint n-subsets x, y of the set.

Candidate number idx has digits (indices into the set) idx = sum_i d_i nv^(n-1-i)
(Cauchy: the lexicographic rank of the x-subset times C(nv-n, n) plus the rank of the
y-subset among the remaining values). The compiled loop rejects a candidate as soon as a
minor vanishes (1 x 1 and 2 x 2 minors first), optionally skips candidates equivalent to
an earlier one (a circulant by rotating its first row, a Hadamard form by h[i XOR t]:
the same matrix up to a row or column permutation, so the same cost and properties),
and gives the survivors' naive XOR count; the survivors are then ranked by the shorter
of Paar's and the Boyar-Peralta programs.
"""

import json
import math
import time

import numpy as np

from ...errors import InputError
from . import engine
from .analyze import bit_matrix, check_mixing_field, naive_xor_count, xor_count
from .constructors import cauchy, circulant, companion_power, hadamard_form

__all__ = ["FAMILIES", "candidate_count", "candidate", "estimate", "search_family",
           "write_jsonl"]

FAMILIES = ("circulant", "hadamard", "companion", "cauchy")
_CHUNK = 1 << 20
_MAX_CANDIDATES = 1 << 62


def _validate(F, family, n, values, require, branch, power):
    if check_mixing_field(F) != "extension":
        raise InputError("the family search works over GF(2^k)")
    if family not in FAMILIES:
        raise InputError(f"unknown family {family!r} (choose from {', '.join(FAMILIES)})")
    n = int(n)
    if not 2 <= n <= engine.MAX_SEARCH_SIZE:
        raise InputError(f"the search handles sizes 2 .. {engine.MAX_SEARCH_SIZE}, got {n}")
    if family == "hadamard" and n & (n - 1):
        raise InputError(f"a Hadamard form needs n a power of two, got {n}")
    vals = [int(v) for v in F.asarray(list(values), name="entries", ndim=1)]
    if len(vals) == 0:
        raise InputError("the set of entries is empty")
    if len(set(vals)) != len(vals):
        raise InputError("the set of entries lists a value twice")
    if family == "cauchy" and len(vals) < 2 * n:
        raise InputError(f"a Cauchy search needs at least 2n = {2 * n} points, got {len(vals)}")
    if require not in ("mds", "branch", "invertible"):
        raise InputError(f"unknown requirement {require!r} (mds, branch or invertible)")
    if require == "branch":
        if branch is None or not 2 <= int(branch) <= n + 1:
            raise InputError(f"a branch-number requirement needs 2 <= B <= n + 1 = {n + 1}")
    if power is not None and family != "companion":
        raise InputError("a power applies to the companion family only")
    if power is not None and int(power) < 1:
        raise InputError(f"the power must be at least 1, got {power}")
    total = candidate_count(family, n, len(vals))
    if total >= _MAX_CANDIDATES:
        raise InputError(f"{total} candidates is beyond this search (at most 2^62); "
                         "give a smaller set of entries")
    return n, vals


def candidate_count(family, n, nvalues):
    """Number of candidates of a family of n x n matrices over a set of nvalues entries."""
    if family == "cauchy":
        return math.comb(nvalues, n) * math.comb(nvalues - n, n)
    return nvalues ** n


def _unrank(rank, total, k):
    out, x = [], 0
    for i in range(k):
        while math.comb(total - x - 1, k - i - 1) <= rank:
            rank -= math.comb(total - x - 1, k - i - 1)
            x += 1
        out.append(x)
        x += 1
    return out


def candidate(F, family, n, values, idx, power=None):
    """(parameters, matrix) of candidate number ``idx`` (see the module docstring)."""
    nv = len(values)
    if family == "cauchy":
        per_y = math.comb(nv - n, n)
        xs = _unrank(idx // per_y, nv, n)
        rest = [i for i in range(nv) if i not in set(xs)]
        ys = [rest[i] for i in _unrank(idx % per_y, nv - n, n)]
        params = {"x": [values[i] for i in xs], "y": [values[i] for i in ys]}
        return params, cauchy(F, params["x"], params["y"])
    digits = []
    for _ in range(n):
        digits.append(idx % nv)
        idx //= nv
    entries = [values[d] for d in reversed(digits)]
    if family == "circulant":
        return {"first_row": entries}, circulant(F, entries)
    if family == "hadamard":
        return {"h": entries}, hadamard_form(F, entries)
    e = n if power is None else int(power)
    poly = [1] + entries[::-1]       # last row (c_0 .. c_{n-1}) -> x^n + c_{n-1} x^{n-1} ...
    return ({"last_row": entries, "polynomial": poly, "power": e},
            companion_power(F, poly, e))


def _run(F, family, n, vals, power, start, count, require, branch, involutory, canonical):
    return engine.search_chunk(F, family, n, vals, n if power is None else power, start,
                               count, require, 0 if branch is None else int(branch),
                               involutory, canonical, weights=_weights(F))


_WEIGHTS = {}


def _weights(F):
    """Ones in the k x k multiplication matrix of each element (for the naive count)."""
    key = (F.k, F.modulus)
    ones = _WEIGHTS.get(key)
    if ones is None:
        q, k = F.size, F.k
        elems = np.arange(q, dtype=np.int64)
        powers = 1 << np.arange(k, dtype=np.int64)
        P = np.asarray(F.mul(np.broadcast_to(elems[:, None], (q, k)),
                             np.broadcast_to(powers[None, :], (q, k))), dtype=np.int64)
        ones = np.zeros(q, dtype=np.int32)
        for b in range(k):
            ones += ((P >> b) & 1).sum(axis=1).astype(np.int32)
        ones.setflags(write=False)
        _WEIGHTS[key] = ones
    return ones


def estimate(F, family, n, values, require="mds", branch=None, involutory=False,
             canonical=True, power=None, sample=None):
    """Candidate count and an estimated running time from a timed sample.

    Returns
    -------
    dict
        ``candidates``, ``rate`` (candidates per second measured on ``sample``
        candidates spread over the range), ``seconds`` (estimated for the whole range,
        without the final ranking).
    """
    n, vals = _validate(F, family, n, values, require, branch, power)
    total = candidate_count(family, n, len(vals))
    _run(F, family, n, vals, power, 0, min(total, 64), require, branch, involutory,
         canonical)    # compile / warm up outside the timing
    sample = sample or min(total, 1 << 18)
    pieces = 8 if total > 8 * sample else 1
    size = max(1, sample // pieces)
    t0 = time.perf_counter()
    done = 0
    for p in range(pieces):
        start = (total * p) // pieces
        cnt = min(size, total - start)
        _run(F, family, n, vals, power, start, cnt, require, branch, involutory, canonical)
        done += cnt
    elapsed = max(time.perf_counter() - t0, 1e-9)
    rate = done / elapsed
    return {"candidates": total, "rate": rate, "seconds": total / rate,
            "threads": engine.thread_count()}


def search_family(F, family, n, values, require="mds", branch=None, involutory=False,
           canonical=True, power=None, keep=10, rank_limit=2000, refine=20,
           bp_runs=2, progress=None, seed=0):
    """Enumerate a family, keep the candidates meeting the requirement, rank them by
    optimized XOR count.

    Parameters
    ----------
    F : GF(2^k) field object
    family : {"circulant", "hadamard", "companion", "cauchy"}
    n : int
        Matrix size, 2 .. 8.
    values : sequence of int
        Allowed entries (Cauchy: the points).
    require : {"mds", "branch", "invertible"}
        ``"branch"`` keeps invertible matrices whose differential and linear branch
        numbers are at least ``branch``.
    involutory : bool
        Also require M^2 = I.
    canonical : bool
        Skip candidates equivalent to an earlier one (see the module docstring).
    power : int, optional
        Companion family: the exponent (default n).
    keep : int
        Number of best matrices returned.
    rank_limit : int
        Survivors with the lowest naive count that get Paar's program (all of them when
        there are fewer).
    refine : int
        Best survivors by Paar's count that also get Boyar-Peralta runs.
    bp_runs : int
        Boyar-Peralta runs for each refined survivor.
    progress : callable, optional
        ``progress(done, total)`` after each chunk of candidates.
    seed : int
        Seed of the random tie-breaking runs of the XOR heuristics (see
        :func:`~gfla.jobs.mixing.analyze.xor_count`). Every Boyar-Peralta run is made
        (no time budget), so the same seed gives the same result on any machine.

    Returns
    -------
    dict
        ``candidates``, ``tested``, ``equivalent_skipped``, ``kept``, ``ranked``
        (survivors given an optimized count), ``seconds``, ``rate`` and ``best``: a list
        of ``keep`` dicts (``index``, ``params``, ``matrix``, ``xor_count``) sorted by
        optimized count, then naive count, then index.

    References
    ----------
    .. [1] C. Paar, "Optimized arithmetic for Reed-Solomon encoders", IEEE ISIT 1997.
    .. [2] J. Boyar, R. Peralta, "A new combinational logic minimization technique with
       applications to cryptology", SEA 2010.

    Examples
    --------
    >>> import gfla
    >>> F = gfla.field("GF(2^4)", modulus=0x13)
    >>> r = search_family(F, "circulant", 4, [1, 2, 4, 8, 9], keep=1)
    >>> r["best"][0]["xor_count"]["optimized"] <= r["best"][0]["xor_count"]["naive"]
    True
    """
    n, vals = _validate(F, family, n, values, require, branch, power)
    total = candidate_count(family, n, len(vals))
    t0 = time.perf_counter()
    # Survivors: only the rank_limit best by (naive count, index) are ever ranked, so
    # the scan keeps no more than those (memory stays bounded however many survive).
    kept_idx = np.zeros(0, dtype=np.int64)
    kept_cost = np.zeros(0, dtype=np.int64)
    kept = 0
    skipped = 0
    done = 0
    while done < total:
        cnt = min(_CHUNK, total - done)
        flags = _run(F, family, n, vals, power, done, cnt, require, branch, involutory,
                     canonical)
        skipped += int(np.count_nonzero(flags == engine.FLAG_EQUIVALENT))
        hit = np.nonzero(flags >= 0)[0]
        if len(hit):
            kept += len(hit)
            kept_idx = np.concatenate([kept_idx, hit.astype(np.int64) + done])
            kept_cost = np.concatenate([kept_cost, flags[hit].astype(np.int64)])
            if len(kept_idx) > 2 * rank_limit:
                best_so_far = np.lexsort((kept_idx, kept_cost))[:rank_limit]
                kept_idx, kept_cost = kept_idx[best_so_far], kept_cost[best_so_far]
        done += cnt
        if progress:
            progress(done, total)
    scan_seconds = time.perf_counter() - t0
    order = np.lexsort((kept_idx, kept_cost))[:rank_limit]
    ranked = []
    for pos in order:
        idx = int(kept_idx[pos])
        params, M = candidate(F, family, n, vals, idx, power)
        bits = bit_matrix(F, M)
        naive = naive_xor_count(bits)
        if naive != int(kept_cost[pos]):  # pragma: no cover - kernel/decoder mismatch
            raise AssertionError(f"candidate {idx}: naive count {naive} != {kept_cost[pos]}")
        quick = xor_count(bits, bp=False, paar_runs=1)
        ranked.append({"index": idx, "params": params, "matrix": M, "bits": bits,
                       "naive": naive, "paar": quick["paar"]})
    ranked.sort(key=lambda r: (r["paar"], r["naive"], r["index"]))
    best = []
    for i, r in enumerate(ranked):
        if i < refine:
            cost = xor_count(r["bits"], bp_runs=bp_runs, paar_runs=4, program=True,
                             seconds=math.inf, seed=seed)
        else:
            cost = xor_count(r["bits"], bp=False, paar_runs=1, program=True)
        best.append({"index": r["index"], "params": r["params"], "matrix": r["matrix"].tolist(),
                     "xor_count": cost})
        if i + 1 >= max(refine, keep):
            break
    best.sort(key=lambda b: (b["xor_count"]["optimized"], b["xor_count"]["naive"],
                             b["index"]))
    tested = total - skipped
    return {
        "family": family, "n": n, "field": F.spec, "modulus": int(F.modulus),
        "entries": vals, "require": require, "branch": branch, "involutory": involutory,
        "power": (n if power is None else int(power)) if family == "companion" else None,
        "seed": seed,
        "candidates": total, "tested": tested, "equivalent_skipped": skipped,
        "kept": kept, "ranked": len(ranked),
        "seconds": time.perf_counter() - t0, "scan_seconds": scan_seconds,
        "rate": total / max(scan_seconds, 1e-9),
        "best": best[:keep],
    }


def write_jsonl(result, path_or_file):
    """Write the best matrices of a search, one JSON object per line."""
    own = isinstance(path_or_file, (str, bytes)) or hasattr(path_or_file, "__fspath__")
    handle = open(path_or_file, "w", encoding="utf-8") if own else path_or_file
    try:
        for rank, b in enumerate(result["best"], start=1):
            line = {"rank": rank, "family": result["family"], "n": result["n"],
                    "field": result["field"], "modulus": result["modulus"],
                    "require": result["require"], "index": b["index"],
                    "params": b["params"], "matrix": b["matrix"],
                    "xor_count": {k: v for k, v in b["xor_count"].items() if k != "program"},
                    "program": b["xor_count"].get("program")}
            handle.write(json.dumps(line) + "\n")
    finally:
        if own:
            handle.close()
