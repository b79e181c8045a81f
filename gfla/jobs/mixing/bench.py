"""Benchmark rows of the mixing-layer job (wired into ``gfla bench``).

Each row: ``name``, ``value``, ``unit``, ``target`` (text), ``met`` (bool or None),
``note``. Kernels are compiled (and the field tables built) before anything is timed;
times are wall-clock medians where a row repeats its measurement.
"""

import statistics
import time

__all__ = ["run"]

AES_MIXCOLUMNS = [[2, 3, 1, 1], [1, 2, 3, 1], [1, 1, 2, 3], [3, 1, 1, 2]]  # FIPS 197, 5.1.3


def _median_time(fn, repeats):
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def _row(name, value, unit, target, met, note=""):
    return {"name": name, "value": value, "unit": unit, "target": target, "met": met,
            "note": note}


def run(quick=False):
    """Time the mixing-layer targets of the issue.

    Parameters
    ----------
    quick : bool
        Shorter measurements: the 16 x 16 MDS decision is replaced by 12 x 12 (said in
        the row), fewer Boyar-Peralta runs, a smaller search sample.

    Returns
    -------
    list of dict
    """
    import gfla

    from . import engine
    from .analyze import bit_matrix, branch_numbers, is_mds, xor_count
    from .constructors import cauchy, circulant
    from .search import _weights, candidate_count

    F = gfla.field("GF(2^8)", modulus=0x11B)
    threads = engine.thread_count()
    rows = []

    # warm-up: compile every kernel outside the timings
    is_mds(F, AES_MIXCOLUMNS)
    engine.mds_scan(F, cauchy(F, list(range(13)), list(range(13, 26))))
    branch_numbers(F, AES_MIXCOLUMNS)
    xor_count(bit_matrix(F, AES_MIXCOLUMNS), bp_runs=1)
    values = list(range(1, 256))
    weights = _weights(F)
    engine.search_chunk(F, "circulant", 4, values, 4, 0, 1000, "mds", 0, False, False,
                        weights, threads=1)

    # MDS decision, 8 x 8 (an MDS Cauchy matrix: every minor is examined)
    C8 = cauchy(F, list(range(8)), list(range(8, 16)))
    t = _median_time(lambda: is_mds(F, C8), 9)
    rows.append(_row("mixing: MDS decision 8x8 GF(2^8) (12869 minors)", t, "s",
                     "<= 0.010 s", t <= 0.010, "Cauchy matrix, all minors examined"))

    # MDS decision, 16 x 16 (or 12 x 12 in quick mode)
    n = 12 if quick else 16
    Cn = cauchy(F, list(range(n)), list(range(n, 2 * n)))
    t0 = time.perf_counter()
    result = is_mds(F, Cn)
    t = time.perf_counter() - t0
    minors = result["square_submatrices"]
    if quick:
        rows.append(_row(f"mixing: MDS decision 12x12 GF(2^8) ({minors} minors)", t, "s",
                         "16x16 <= 60 s (not run in quick mode)", None,
                         f"quick mode runs 12x12 instead of 16x16; {threads} threads"))
    else:
        rows.append(_row(f"mixing: MDS decision 16x16 GF(2^8) ({minors} minors)", t, "s",
                         "<= 60 s on 2 cores", t <= 60.0 and result["value"],
                         f"Cauchy matrix (MDS: every minor examined), {threads} threads, "
                         f"{engine.mds_work(16, 16) / t / 1e6:.0f} M table look-ups/s"))

    # exact branch numbers, 4 x 4
    t = _median_time(lambda: branch_numbers(F, AES_MIXCOLUMNS), 5)
    rows.append(_row("mixing: exact branch numbers 4x4 GF(2^8)", t, "s", "<= 1 s", t <= 1.0,
                     "differential and linear, FIPS 197 MixColumns"))

    # optimized XOR program for the 32 x 32 binary expansion
    bits = bit_matrix(F, AES_MIXCOLUMNS)
    runs = 2 if quick else 16
    t0 = time.perf_counter()
    xc = xor_count(bits, bp_runs=runs, seconds=50.0)
    t = time.perf_counter() - t0
    rows.append(_row("mixing: XOR program 32x32 (FIPS 197 MixColumns), time", t, "s",
                     "<= 60 s", t <= 60.0,
                     f"{runs} Boyar-Peralta runs and Paar's heuristic, program verified"))
    rows.append(_row("mixing: XOR program 32x32 (FIPS 197 MixColumns), length",
                     xc["optimized"], "XORs", "<= 100", xc["optimized"] <= 100,
                     f"naive {xc['naive']}, Paar {xc['paar']}, Boyar-Peralta "
                     f"{xc['boyar_peralta']}"))
    heavy = circulant(F, [0x8F, 0xD3, 0x5A, 0xE7])   # dense entries: the hard case
    t0 = time.perf_counter()
    xh = xor_count(bit_matrix(F, heavy), bp_runs=1 if quick else 4, seconds=50.0)
    t = time.perf_counter() - t0
    rows.append(_row("mixing: XOR program 32x32 of circ(8f,d3,5a,e7), time", t, "s",
                     "<= 60 s", t <= 60.0,
                     f"dense entries: naive {xh['naive']}, optimized {xh['optimized']} "
                     f"({xh['method']})"))

    # search throughput, 4 x 4 circulants over GF(2^8)
    count = (1 << 20) if quick else (1 << 23)
    total = candidate_count("circulant", 4, 255)
    start = total // 3
    t0 = time.perf_counter()
    flags = engine.search_chunk(F, "circulant", 4, values, 4, start, count, "mds", 0,
                                False, False, weights, threads=1)
    t = time.perf_counter() - t0
    kept = int((flags >= 0).sum())
    rate = count / t
    rows.append(_row("mixing: search 4x4 GF(2^8) circulants, 1 core", rate, "candidates/s",
                     ">= 1e6 per core", rate >= 1e6,
                     f"every nonzero entry allowed, no rotation skipping: {kept} of "
                     f"{count} candidates are MDS, so nearly all need every minor"))
    light = list(range(1, 17))
    total_light = candidate_count("hadamard", 4, len(light))
    t0 = time.perf_counter()
    reps = 0
    while time.perf_counter() - t0 < (0.5 if quick else 2.0):
        flags = engine.search_chunk(F, "hadamard", 4, light, 4, 0, total_light, "mds", 0,
                                    False, False, weights, threads=1)
        reps += 1
    t = time.perf_counter() - t0
    rate = reps * total_light / t
    kept = int((flags >= 0).sum())
    rows.append(_row("mixing: search 4x4 GF(2^8) Hadamard forms, entries 1..16, 1 core",
                     rate, "candidates/s", ">= 1e6 per core", rate >= 1e6,
                     f"{kept} of {total_light} candidates are MDS, the others are rejected "
                     "at their first vanishing minor"))
    if threads > 1:
        t0 = time.perf_counter()
        engine.search_chunk(F, "circulant", 4, values, 4, start, count, "mds", 0, False,
                            False, weights, threads=threads)
        t = time.perf_counter() - t0
        rows.append(_row(f"mixing: search 4x4 GF(2^8) circulants, {threads} threads",
                         count / t, "candidates/s", "", None, "same range as the 1-core row"))
    return rows
