"""The benchmark suite behind ``gfla bench``.

Everything is measured side by side in one run on the machine it runs on: gfla, galois
where galois does the operation, and a float64 BLAS matrix product (numpy ``@``) of the
same size as the yardstick. Each figure is the median of several repetitions; the first
call of each gfla operation (which may compile its kernel) is timed separately and
reported as warm-up. Nothing here asserts a speed: the table is for people to read.

The job packages (``gfla.jobs.<job>.bench``) contribute rows through a function
``run(quick) -> list of dict``; they are collected by :func:`collect`.
"""

import importlib
import statistics
import time

import numpy as np

__all__ = ["collect", "core_rows", "format_table", "Row", "GALOIS_LIMIT_SECONDS"]

GALOIS_LIMIT_SECONDS = 60.0
JOB_BENCHES = ("erasure", "mixing", "keysched", "batch")


def Row(operation, family, n, gfla_s=None, galois_s=None, blas_s=None, warmup_s=None,
        note="", **extra):
    row = {"operation": operation, "family": family, "n": n, "gfla_s": gfla_s,
           "galois_s": galois_s, "blas_s": blas_s, "warmup_s": warmup_s, "note": note}
    row["gfla_over_blas"] = (gfla_s / blas_s) if gfla_s and blas_s else None
    row["galois_over_gfla"] = (galois_s / gfla_s) if gfla_s and galois_s else None
    row.update(extra)
    return row


def timed(fn, reps):
    """(median seconds over ``reps`` runs, seconds of the first, warm-up, run)."""
    t0 = time.perf_counter()
    fn()
    warm = time.perf_counter() - t0
    times = []
    for _ in range(reps):
        t0 = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t0)
    return statistics.median(times), warm


def _blas(n, reps):
    rng = np.random.default_rng(0)
    X = rng.random((n, n))
    Y = rng.random((n, n))
    return timed(lambda: X @ Y, reps)[0]


def _galois_time(F, op, n, reps, limit):
    """Time galois on ``op`` at size n, unless a run at a small size predicts more than
    ``limit`` seconds (cubic scaling); returns (seconds or None, note)."""
    if op == "charpoly":
        # Measured on the development machine: galois' characteristic_poly took about
        # 30 s at n = 4 and 58 s at n = 8 (GF(65521)), so it is never timed here.
        return None, "galois not timed: its characteristic_poly is impractically slow"
    try:
        import galois
    except ImportError:  # pragma: no cover - galois is a dependency
        return None, "galois not installed"
    if F.modulus is not None:
        GF = galois.GF(F.size, irreducible_poly=F.modulus)
    else:
        GF = galois.GF(F.size)
    def make(m):
        A = GF(F.random(m, invertible=op == "inverse", seed=11).astype(np.int64))
        B = GF(F.random(m, seed=12).astype(np.int64))
        if op == "matmul":
            return lambda: A @ B
        if op == "inverse":
            return lambda: np.linalg.inv(A)
        if op == "det":
            return lambda: np.linalg.det(A)
        if op == "rank":
            return lambda: np.linalg.matrix_rank(A)
        if op == "charpoly":
            return lambda: A.characteristic_poly()
        raise ValueError(op)

    probe = min(n, 48)
    t_probe, _ = timed(make(probe), 1)
    estimate = t_probe * (n / probe) ** 3
    if estimate > limit:
        return None, f"galois skipped: about {estimate:.0f} s predicted from n = {probe}"
    return timed(make(n), max(1, reps // 2))[0], ""


# (operation, field spec, modulus, full n, quick n)
CORE_CASES = [
    ("matmul", "GF(65521)", None, 2048, 256),
    ("matmul", "GF(2^31-1)", None, 1024, 128),
    ("matmul", "GF(2^61-1)", None, 512, 96),
    ("matmul", "GF(2^8)", 0x11B, 1024, 128),
    ("matmul", "GF(2)", None, 8192, 512),
    ("inverse", "GF(65521)", None, 2048, 128),
    ("inverse", "GF(2)", None, 8192, 512),
    ("inverse", "GF(2^8)", 0x11B, 1024, 96),
    ("det", "GF(65521)", None, 2048, 128),
    ("rank", "GF(65521)", None, 2048, 128),
    ("rank", "GF(2)", None, 8192, 512),
    ("det", "GF(2^8)", 0x11B, 1024, 96),
    ("charpoly", "GF(65521)", None, 1024, 96),
]


def core_rows(quick=False, reps=None, galois_limit=GALOIS_LIMIT_SECONDS, progress=None):
    """Rows for the core operations: gfla vs galois vs float64 BLAS; operations other
    than matmul also report their time over gfla's matmul time at the same n."""
    import gfla
    reps = reps or 3
    rows = []
    matmul_time = {}
    blas_time = {}
    for op, spec, modulus, n_full, n_quick in CORE_CASES:
        n = n_quick if quick else n_full
        if progress:
            progress(f"{op} {spec} n={n}")
        F = gfla.field(spec, modulus=modulus)
        A = F.random(n, invertible=op == "inverse", seed=7)
        B = F.random(n, seed=8)
        fn = {
            "matmul": lambda: F.matmul(A, B),
            "inverse": lambda: F.inv(A),
            "det": lambda: F.det(A),
            "rank": lambda: F.rank(A),
            "charpoly": lambda: F.charpoly(A),
        }[op]
        t, warm = timed(fn, reps)
        if n not in blas_time:
            blas_time[n] = _blas(n, reps)
        key = (spec, n)
        if op == "matmul":
            matmul_time[key] = t
        elif key not in matmul_time:
            matmul_time[key] = timed(lambda: F.matmul(A, B), reps)[0]
        g, note = _galois_time(F, op, n, reps, galois_limit)
        extra = {}
        if op != "matmul":
            extra["over_matmul"] = t / matmul_time[key]
        rows.append(Row(op, spec, n, t, g, blas_time[n], warm, note, **extra))
    return rows


def collect(quick=False, jobs=JOB_BENCHES, core=True, progress=None):
    """All rows: the core table, then each job's rows (a job whose bench module is
    missing is skipped with a note)."""
    rows = core_rows(quick, progress=progress) if core else []
    for job in jobs:
        try:
            mod = importlib.import_module(f"gfla.jobs.{job}.bench")
        except ImportError:
            continue
        if progress:
            progress(f"{job} job")
        rows.extend(mod.run(quick))
    return rows


def _fmt(v, digits=4):
    if v is None:
        return "-"
    if isinstance(v, float):
        if v >= 100:
            return f"{v:.0f}"
        return f"{v:.{digits}g}"
    return str(v)


COLUMNS = [("operation", "operation"), ("family", "family"), ("n", "n"),
           ("gfla_s", "gfla s"), ("galois_s", "galois s"), ("blas_s", "f64 BLAS s"),
           ("gfla_over_blas", "gfla/BLAS"), ("galois_over_gfla", "galois/gfla"),
           ("over_matmul", "op/matmul"), ("warmup_s", "warm-up s"), ("note", "note")]


def format_table(rows):
    """One plain-text table, a row per measurement."""
    table = [[label for _, label in COLUMNS]]
    for r in rows:
        table.append([_fmt(r.get(key)) for key, _ in COLUMNS])
    widths = [max(len(row[i]) for row in table) for i in range(len(COLUMNS))]
    lines = []
    for j, row in enumerate(table):
        lines.append("  ".join(cell.ljust(w) for cell, w in zip(row, widths)).rstrip())
        if j == 0:
            lines.append("  ".join("-" * w for w in widths))
    return "\n".join(lines)
