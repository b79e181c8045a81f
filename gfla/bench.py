"""The benchmark suite behind ``gfla bench``.

Everything is measured side by side in one run on the machine it runs on: gfla, galois
where galois does the operation, and a float64 BLAS matrix product (numpy ``@``) of the
same size as the yardstick. Each figure is the median of several repetitions; the first
call of each gfla operation (which may compile its kernel) is timed separately and
reported as warm-up. Nothing here asserts a speed: the table is for people to read.

Core rows report gfla's time over the BLAS product (``gfla/BLAS``) and, for the
operations other than the product, their time over gfla's own product in the same field
at the same n (``op/matmul``: elimination, inversion and the characteristic polynomial
should cost a small constant times one product). ``method`` says which algorithm ran
(the choice depends on the field and the size), ``target`` the figure the development
issue set for its 2-core machine. One row measures the peak memory of an inversion
(Python's ``tracemalloc``, which sees every numpy buffer; the large buffers of that path
are all numpy's) over the bytes of the input matrix.

A header line gives the load average and the number of CPUs: on a shared machine the
ratios move with the load, so compare rows of one run.

The job packages (``gfla.jobs.<job>.bench``) contribute rows through a function
``run(quick) -> list of dict``; they are collected by :func:`collect`.
"""

import importlib
import os
import statistics
import time

import numpy as np

__all__ = ["collect", "core_rows", "format_table", "Row", "GALOIS_LIMIT_SECONDS",
           "CORE_CASES", "machine_line"]

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
    """Median seconds of an n x n float64 product (numpy ``@``), the faster of the
    BLAS's own thread setting and one thread: on a loaded machine a multithreaded call
    can cost tens of milliseconds more than the work (see
    ``linalg.multiply.BLAS_THREADS_MIN``), and the yardstick should be the best the
    BLAS does. From n = 4096 on, a single timed run with the BLAS's own setting (one
    8192 product takes tens of seconds on 2 cores)."""
    from .linalg.multiply import blas_single_thread
    rng = np.random.default_rng(0)
    X = rng.random((n, n))
    Y = rng.random((n, n))
    if n >= 4096:
        t0 = time.perf_counter()
        X @ Y
        return time.perf_counter() - t0
    default = timed(lambda: X @ Y, reps)[0]
    with blas_single_thread():
        single = timed(lambda: X @ Y, reps)[0]
    return min(default, single)


def _galois_time(F, op, n, reps, limit):
    """Time galois on ``op`` at size n, unless a run at a small size predicts more than
    half of ``limit`` seconds (cubic scaling); returns (seconds or None, note)."""
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
        raise ValueError(op)

    probe = min(n, 48)
    t_probe, _ = timed(make(probe), 1)
    estimate = t_probe * (n / probe) ** 3
    # the cubic prediction from n = 48 came out low by up to 2x (GF(2^31-1) matmul at
    # n = 1024: 86 s run against a prediction under 60 s), hence the margin
    if 2 * estimate > limit:
        return None, f"galois skipped: about {estimate:.0f} s predicted from n = {probe}"
    return timed(make(n), max(1, reps // 2))[0], ""


# (operation, field spec, modulus, full n, quick n, target on the development machine)
CORE_CASES = [
    ("matmul", "GF(65521)", None, 2048, 256, "<= 1.2 x BLAS"),
    ("matmul", "GF(2^31-1)", None, 1024, 128, "<= 4 x BLAS"),
    ("matmul", "GF(2^61-1)", None, 512, 96, "<= 16 x BLAS"),
    ("matmul", "GF(2^8)", 0x11B, 1024, 128, "<= 10 x BLAS"),
    ("matmul", "GF(2)", None, 8192, 512, "<= 0.5 x BLAS"),
    ("inverse", "GF(65521)", None, 2048, 128, "<= 3 x matmul"),
    ("inverse", "GF(2)", None, 8192, 512, "<= 3 x matmul"),
    ("inverse", "GF(2^8)", 0x11B, 1024, 128, "<= 3 x matmul"),
    ("det", "GF(65521)", None, 2048, 128, "<= 2 x matmul"),
    ("rank", "GF(65521)", None, 2048, 128, "<= 2 x matmul"),
    ("det", "GF(2)", None, 8192, 512, "<= 2 x matmul"),
    ("rank", "GF(2)", None, 8192, 512, "<= 2 x matmul"),
    ("det", "GF(2^8)", 0x11B, 1024, 128, "<= 2 x matmul"),
    ("rank", "GF(2^8)", 0x11B, 1024, 128, "<= 2 x matmul"),
    ("charpoly", "GF(65521)", None, 1024, 128, "<= 10 x matmul"),
]

# (field spec, full n, quick n, target): peak memory of an inversion over the input
MEMORY_CASES = [("GF(65521)", 4096, 512, "<= 4 x input")]


def method_text(F, op, n):
    """Which algorithm gfla runs for ``op`` at order n over F."""
    from .linalg import blocked, charpoly, multiply
    product = multiply.method(F, n, n, n)
    if op == "matmul":
        return product
    if op == "charpoly":
        start = charpoly.krylov_min(F, n)
        if start is not None and n >= start:
            return f"Krylov sequence + block elimination; products: {product}"
        return "Hessenberg reduction"
    if F.spec == "GF(2)":
        if n >= blocked.BINARY_BLOCKED_MIN:
            return f"block-recursive PLE; products: {product}"
        return "M4RI Gauss-Jordan" + (" on [A | I]" if op == "inverse" else "")
    if n < blocked.BLOCKED_MIN:
        return "Gauss-Jordan" + (" on [A | I]" if op == "inverse" else "")
    if op == "inverse" and blocked.uses_float_schur(F, n):
        return ("Schur-complement recursion (Strassen's inversion), float64 in place; "
                f"products: {product}")
    if blocked.uses_schur(F, n) and op in ("inverse", "det", "rank"):
        first = {"inverse": "Schur-complement recursion (Strassen's inversion)",
                 "det": "det A11 det S by the Schur-complement recursion",
                 "rank": "full rank from det by the Schur recursion, else PLE"}[op]
        return f"{first}; products: {product}"
    backend = "float64" if isinstance(blocked.backend_for(F, n),
                                      blocked._FloatBackend) else "uint64"
    return f"block-recursive PLE ({backend}); products: {product}"


def core_rows(quick=False, reps=None, galois_limit=GALOIS_LIMIT_SECONDS, progress=None):
    """Rows for the core operations: gfla vs galois vs float64 BLAS; operations other
    than matmul also report their time over gfla's matmul time at the same n; one row
    per memory case."""
    import gfla
    reps = reps or 3
    rows = []
    matmul_time = {}
    blas_time = {}
    for op, spec, modulus, n_full, n_quick, target in CORE_CASES:
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
        op_reps = reps if n < 4096 else 1
        t, warm = timed(fn, op_reps)
        if n not in blas_time:
            blas_time[n] = _blas(n, reps)
        key = (spec, n)
        if op == "matmul":
            matmul_time[key] = t
        elif key not in matmul_time:
            matmul_time[key] = timed(lambda: F.matmul(A, B), op_reps)[0]
        g, note = _galois_time(F, op, n, reps, galois_limit)
        extra = {"method": method_text(F, op, n), "target": target}
        if op != "matmul":
            extra["over_matmul"] = t / matmul_time[key]
        rows.append(Row(op, spec, n, t, g, blas_time[n], warm, note, **extra))
    for spec, n_full, n_quick, target in MEMORY_CASES:
        n = n_quick if quick else n_full
        if progress:
            progress(f"inverse peak memory {spec} n={n}")
        rows.append(_memory_row(spec, n, target))
    return rows


def _memory_row(spec, n, target):
    import tracemalloc

    import gfla
    F = gfla.field(spec)
    A = F.random(n, invertible=True, seed=7)
    F.inv(F.random(min(n, 256), invertible=True, seed=3))  # compile outside the trace
    tracemalloc.start()
    try:
        t0 = time.perf_counter()
        X = F.inv(A)
        seconds = time.perf_counter() - t0
        _, peak = tracemalloc.get_traced_memory()
    finally:
        tracemalloc.stop()
    del X
    return Row("inverse peak memory", spec, n, seconds,
               note=f"peak {peak / 2**20:.0f} MiB over an input of "
                    f"{A.nbytes / 2**20:.0f} MiB ({A.dtype})",
               peak_over_input=peak / A.nbytes, method=method_text(F, "inverse", n),
               target=target)


def machine_line():
    """Load average and CPU count, for the header of the table."""
    try:
        load = "load average " + " ".join(f"{x:.1f}" for x in os.getloadavg())
    except OSError:  # pragma: no cover - not available on this platform
        load = "load average unknown"
    return f"{load}; {os.cpu_count()} CPUs"


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
    if isinstance(v, bool):
        return "yes" if v else "no"
    if isinstance(v, float):
        if v >= 100:
            return f"{v:.0f}"
        return f"{v:.{digits}g}"
    return str(v)


COLUMNS = [("operation", "operation"), ("family", "family"), ("n", "n"),
           ("gfla_s", "gfla s"), ("galois_s", "galois s"), ("blas_s", "f64 BLAS s"),
           ("gfla_over_blas", "gfla/BLAS"), ("galois_over_gfla", "galois/gfla"),
           ("over_matmul", "op/matmul"), ("peak_over_input", "mem/input"),
           ("target", "target"), ("warmup_s", "warm-up s"), ("method", "method"),
           ("note", "note")]


def _table(rows, columns):
    table = [[label for _, label in columns]]
    for r in rows:
        table.append([_fmt(r.get(key)) for key, _ in columns])
    widths = [max(len(row[i]) for row in table) for i in range(len(columns))]
    lines = []
    for j, row in enumerate(table):
        lines.append("  ".join(cell.ljust(w) for cell, w in zip(row, widths)).rstrip())
        if j == 0:
            lines.append("  ".join("-" * w for w in widths))
    return lines


def format_table(rows):
    """Plain text: a header line (load, CPUs), then the rows. Rows in the core layout
    share one table; rows a job reports in a layout of its own (other keys) follow in
    tables of their own keys."""
    lines = [machine_line()]
    core_keys = {key for key, _ in COLUMNS}
    groups = []
    for r in rows:
        keys = tuple(r.keys())
        kind = "core" if "operation" in r and "gfla_s" in r else keys
        if groups and groups[-1][0] == kind:
            groups[-1][1].append(r)
        else:
            groups.append((kind, [r]))
    for kind, group in groups:
        if kind == "core":
            used = [(k, label) for k, label in COLUMNS
                    if any(r.get(k) not in (None, "") for r in group)
                    or k in ("operation", "family", "n", "gfla_s")]
            extra = [(k, k) for k in dict.fromkeys(k for r in group for k in r)
                     if k not in core_keys]
            lines += [""] + _table(group, used + extra)
        else:
            lines += [""] + _table(group, [(k, k) for k in kind])
    return "\n".join(lines)
