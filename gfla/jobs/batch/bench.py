"""Benchmark rows of the batch job (wired into ``gfla bench``).

Each row: ``name``, ``value``, ``unit``, ``target`` (text), ``met`` (bool or None),
``note``. Kernels are compiled and worker processes started before anything is timed;
kernel rows are the median of several repetitions, end-to-end rows one run each (they
are long). Files go to a temporary directory that is removed afterwards.

Rows: the batched kernels (4 x 4 inverses and 16 x 16 ranks over GF(2^8)); 4 x 4
inverses over GF(2^8) end to end from a ``.npy`` stack and from JSON Lines (in this
process and with 2 worker processes), JSON Lines parsing alone; and the Dask engine
with 2 workers against 1 worker on a CPU-heavy batch of MDS decisions (Cauchy
matrices, every minor examined).
"""

import json
import os
import shutil
import statistics
import tempfile
import time

import numpy as np

__all__ = ["run"]


def _row(name, value, unit, target, met, note=""):
    # The machine's load average goes into every note: on a shared 2-core machine a
    # parallel speed-up or a rate means little without it.
    try:
        load = f"load average {os.getloadavg()[0]:.1f}"
    except OSError:  # pragma: no cover - not available on this platform
        load = ""
    note = "; ".join(part for part in (note, load) if part)
    return {"name": name, "value": value, "unit": unit, "target": target, "met": met,
            "note": note}


def _median_time(fn, repeats):
    times = []
    for _ in range(repeats):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times)


def _write_inputs(directory, N, seed=2024):
    """4 x 4 matrices over GF(2^8) (modulus 0x11b) as a .npy stack with its sidecar and
    as JSON Lines records."""
    rng = np.random.default_rng(seed)
    A = rng.integers(0, 256, size=(N, 4, 4), dtype=np.uint8)
    npy = os.path.join(directory, "inv4.npy")
    np.save(npy, A)
    with open(os.path.join(directory, "inv4.json"), "w") as fh:
        json.dump({"field": "GF(2^8)", "modulus": "0x11b", "op": "inv", "count": N,
                   "shape": [4, 4], "dtype": "uint8"}, fh)
    jsonl = os.path.join(directory, "inv4.jsonl")
    head = '{"id": %d, "field": "GF(2^8)", "modulus": "0x11b", "op": "inv", "matrix": '
    with open(jsonl, "w") as fh:
        for start in range(0, N, 65536):
            rows = A[start:start + 65536].tolist()
            fh.write("".join(head % (start + k) + json.dumps(m) + "}\n"
                             for k, m in enumerate(rows)))
    return npy, jsonl


def _parse_rate(path, limit):
    """Records per second of JSON decoding plus the per-record checks of the runner,
    one core, no arithmetic (``_process_lines`` minus the groups' work)."""
    from .records import _lines_of, _scan_once
    import gc
    with open(path, "rb") as fh:
        data = b"".join(fh.readline() for _ in range(limit))
    collecting = gc.isenabled()
    gc.disable()
    try:
        t0 = time.perf_counter()
        count = 0
        for text in _lines_of(data):
            text = text.strip()
            obj, end = _scan_once(text, 0)
            mat = obj.get("matrix")
            _ = (obj.get("id"), obj.get("op"), obj.get("field"), obj.get("modulus"),
                 len(mat), len(mat[0]))
            count += 1
        seconds = time.perf_counter() - t0
    finally:
        if collecting:
            gc.enable()
    return count / seconds


def _kernel_rows(quick):
    import gfla
    from ...linalg import batched
    F = gfla.field("GF(2^8)", modulus=0x11B)
    rng = np.random.default_rng(1)
    rows = []
    N = 10**5 if quick else 10**6
    A = rng.integers(0, 256, size=(N, 4, 4)).astype(np.uint64)
    batched.inv(F, A[:1000])
    t = _median_time(lambda: batched.inv(F, A), 3 if quick else 5)
    rows.append(_row(f"batch: kernel, {N} inverses 4x4 GF(2^8)", N / t, "matrices/s",
                     ">= 1e6 /s (2 cores)", N / t >= 1e6,
                     f"{os.cpu_count()} cores; includes validation and the int64 result"))
    M = 10**4 if quick else 10**5
    R = rng.integers(0, 256, size=(M, 16, 16)).astype(np.uint64)
    batched.rank(F, R[:300])
    t = _median_time(lambda: batched.rank(F, R), 3 if quick else 5)
    rows.append(_row(f"batch: kernel, {M} ranks 16x16 GF(2^8)", M / t, "matrices/s",
                     ">= 1e5 /s (2 cores)", M / t >= 1e5, f"{os.cpu_count()} cores"))
    return rows


def _end_to_end_rows(quick, directory):
    from .engine import run as run_batch
    rows = []
    N = 10**5 if quick else 10**6
    npy, jsonl = _write_inputs(directory, N)
    # warm-up: compile, build tables, import in this process
    small = os.path.join(directory, "small.jsonl")
    with open(jsonl, "rb") as src, open(small, "wb") as dst:
        dst.write(b"".join(src.readline() for _ in range(2000)))
    run_batch(small, os.path.join(directory, "warm.jsonl"))
    for workers in (1, 2):
        out = os.path.join(directory, f"npy_out_{workers}.npy")
        s = run_batch(npy, out, workers=workers)
        rate = s.records / s.seconds
        rows.append(_row(f"batch: .npy end to end, {N} inverses 4x4 GF(2^8), "
                         f"workers={workers}", rate, "records/s", ">= 5e5 /s (2 cores)",
                         rate >= 5e5, f"{s.seconds:.2f} s, file to file, journal fsync'd"
                         + ("" if workers == 1 else "; includes starting 2 processes")))
    for workers in (1, 2):
        out = os.path.join(directory, f"jsonl_out_{workers}.jsonl")
        s = run_batch(jsonl, out, workers=workers)
        rate = s.records / s.seconds
        rows.append(_row(f"batch: JSON Lines end to end, {N} inverses 4x4 GF(2^8), "
                         f"workers={workers}", rate, "records/s", ">= 1e5 /s (2 cores)",
                         rate >= 1e5, f"{s.seconds:.2f} s, {os.path.getsize(jsonl) >> 20} MiB"
                         + ("" if workers == 1 else "; includes starting 2 processes")))
    rate = _parse_rate(jsonl, min(N, 200000))
    rows.append(_row("batch: JSON Lines parsing alone (decode + record checks), 1 core",
                     rate, "records/s", "(measured: the limit of the JSON Lines rows)", None,
                     "json scanner of the standard library, cyclic GC paused"))
    return rows


def _mds_records(path, n, count):
    import gfla
    from ..mixing import cauchy
    F = gfla.field("GF(2^8)", modulus=0x11B)
    with open(path, "w") as fh:
        for k in range(count):
            xs = [(k + i) % 255 + 1 for i in range(n)]
            ys = [(k + n + i) % 255 + 1 for i in range(n)]
            M = cauchy(F, xs, ys)
            fh.write(json.dumps({"id": k, "field": "GF(2^8)", "modulus": "0x11b",
                                 "op": "mds", "matrix": np.asarray(M).tolist()}) + "\n")


def _dask_rows(quick, directory):
    try:
        import logging

        from distributed import LocalCluster
    except ImportError:
        return [_row("batch: dask 2 workers vs 1", None, "x", ">= 1.6 x", None,
                     "skipped: dask[distributed] is not installed (pip install 'gfla[dask]')")]
    from .engine import run as run_batch
    try:
        import gfla.jobs.mixing  # noqa: F401
        mixing = True
    except ImportError:
        mixing = False
    if mixing:
        n, count = (13, 16) if quick else (16, 4)
        path = os.path.join(directory, "mds.jsonl")
        _mds_records(path, n, count)
        what = f"{count} MDS decisions {n}x{n} GF(2^8) (Cauchy, every minor examined)"
        chunk = 1
    else:  # pragma: no cover - the mixing job ships with gfla
        n, count = 12, 3000
        path = os.path.join(directory, "charpoly.jsonl")
        rng = np.random.default_rng(3)
        with open(path, "w") as fh:
            for k in range(count):
                fh.write(json.dumps({"id": k, "field": "Z/2^64", "op": "charpoly",
                                     "matrix": rng.integers(0, 1 << 62, (n, n)).tolist()})
                         + "\n")
        what = f"{count} charpolys {n}x{n} over Z/2^64 (Berkowitz, per record)"
        chunk = 100
    warm = os.path.join(directory, "dask_warm.jsonl")
    with open(path) as src, open(warm, "w") as dst:
        dst.write(src.readline())
    seconds = {}
    for workers in (1, 2):
        with LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                          host="127.0.0.1", dashboard_address=None,
                          silence_logs=logging.ERROR,
                          env={"NUMBA_NUM_THREADS": "1"}) as cluster:
            address = cluster.scheduler_address
            for w in range(workers):  # import gfla and load the kernels on every worker
                run_batch(warm, os.path.join(directory, f"w{workers}_{w}.jsonl"),
                          engine="dask", scheduler=address)
            s = run_batch(path, os.path.join(directory, f"dask_{workers}.jsonl"),
                          engine="dask", scheduler=address, chunk_size=chunk)
            seconds[workers] = s.seconds
    ratio = seconds[1] / seconds[2]
    return [_row(f"batch: dask 2 workers vs 1 worker, {what}", ratio, "x", ">= 1.6 x",
                 ratio >= 1.6, f"1 worker {seconds[1]:.2f} s, 2 workers {seconds[2]:.2f} s"
                 + ("" if mixing else "; the mixing job is absent, another CPU-heavy op"))]


def run(quick=False):
    """Time the batch targets of the issues.

    Parameters
    ----------
    quick : bool
        10^5 records instead of 10^6 for the end-to-end rows, 10^4 ranks, and 13 x 13
        MDS decisions instead of 16 x 16 for the Dask row (each said in its row).

    Returns
    -------
    list of dict
    """
    directory = tempfile.mkdtemp(prefix="gfla-batch-bench-")
    try:
        rows = _kernel_rows(quick)
        rows += _end_to_end_rows(quick, directory)
        rows += _dask_rows(quick, directory)
    finally:
        shutil.rmtree(directory, ignore_errors=True)
    return rows


if __name__ == "__main__":  # pragma: no cover
    import sys
    for r in run(quick="--quick" in sys.argv):
        value = r["value"]
        shown = "-" if value is None else (f"{value:,.0f}" if value >= 100 else f"{value:.2f}")
        print(f"{r['name']}: {shown} {r['unit']} (target {r['target']}, met {r['met']}) "
              f"{r['note']}")
