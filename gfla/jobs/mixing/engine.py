"""The bridge between the mixing-layer job and its compiled loops (``gfla.kernels.mixing``).

This is the only module of the job that calls kernels: it turns field objects and
matrices into the tables the kernels take (see the kernel module's docstring for the
conventions), splits long work into parallel bins and batches for progress reports, and
turns kernel outputs back into Python values. Everything here is internal.
"""

import functools
import math
import os

import numpy as np

from ...errors import InputError

__all__ = ["field_tables", "subset_tables", "minor_tables", "mds_scan", "mds_work",
           "branch_field", "branch_binary", "search_plan", "search_chunk", "paar",
           "boyar_peralta", "pack_rows", "thread_count", "FLAG_REJECTED", "FLAG_EQUIVALENT",
           "MAX_MDS_ROWS", "MAX_SEARCH_SIZE", "MAX_PROGRAM_BITS"]

MAX_MDS_ROWS = 20          # minor table of 2^rows entries per thread
MAX_SEARCH_SIZE = 8        # per-candidate minor memo of 4^n entries
MAX_PROGRAM_BITS = 64      # XOR programs on uint64 rows


def _kernels():
    from ...kernels import mixing
    return mixing


def thread_count():
    """Threads used for parallel work: NUMBA_NUM_THREADS if set, else the usable CPUs."""
    env = os.environ.get("NUMBA_NUM_THREADS")
    if env and env.isdigit() and int(env) > 0:
        return int(env)
    try:
        return max(1, len(os.sched_getaffinity(0)))
    except (AttributeError, OSError):  # pragma: no cover - not Linux
        return max(1, os.cpu_count() or 1)


def _in_threads(fn, count):
    """fn(0) .. fn(count-1), on up to ``count`` threads (the kernels release the GIL)."""
    if count == 1:
        fn(0)
        return
    from concurrent.futures import ThreadPoolExecutor

    with ThreadPoolExecutor(max_workers=count) as pool:
        for future in [pool.submit(fn, i) for i in range(count)]:
            future.result()


# --------------------------------------------------------------------------- tables

@functools.lru_cache(maxsize=32)
def _tables_for(k, modulus):
    import gfla
    from ...kernels.extension import EXP_OFFSET, log_offset

    F = gfla.field(f"GF(2^{k})", modulus=modulus)
    q = 1 << k
    q1 = q - 1
    ctx = F._ctx
    exp = np.asarray(ctx[EXP_OFFSET:EXP_OFFSET + q1], dtype=np.int64)
    lo = int(log_offset(q))
    log = np.asarray(ctx[lo:lo + q], dtype=np.int64)
    exp_ext = np.zeros(4 * q1 + 1, dtype=np.int32)
    exp_ext[:q1] = exp
    exp_ext[q1:2 * q1] = exp
    log_ext = log.astype(np.int32)
    log_ext[0] = 2 * q1
    exp_ext.setflags(write=False)
    log_ext.setflags(write=False)
    return exp_ext, log_ext, q1


def field_tables(F):
    """(exp_ext, log_ext, q - 1) of a GF(2^k) field object (cached per modulus)."""
    if getattr(F, "modulus", None) is None or F.size <= 2:
        raise InputError(f"{F.spec} is not a field GF(2^k) with k >= 2")
    return _tables_for(int(F.k), int(F.modulus))


@functools.lru_cache(maxsize=32)
def subset_tables(n):
    """(masks, level_start, mask_bits, bits_start) for subsets of n elements."""
    if n > MAX_MDS_ROWS:
        raise InputError(f"subsets of {n} elements are beyond this job's tables "
                         f"(at most {MAX_MDS_ROWS})")
    from ...limits import Workspace
    # the masks' bits while they are built: n shifted int64 copies of the 2^n masks
    # and their 0/1 bytes, then the per-mask row lists (int32, n 2^(n-1) entries)
    (Workspace(f"the subset tables of {n} rows (2^{n} row sets)")
     .add(1, (1 << n, n), 9, "bit table").add(1, (n << max(0, n - 1),), 4, "row list")
     .check())
    all_masks = np.arange(1 << n, dtype=np.int64)
    pop = np.zeros(1 << n, dtype=np.int64)
    for i in range(n):
        pop += (all_masks >> i) & 1
    order = np.argsort(pop, kind="stable")
    masks = all_masks[order].astype(np.int32)
    counts = np.bincount(pop, minlength=n + 1)
    level_start = np.zeros(n + 2, dtype=np.int64)
    level_start[1:] = np.cumsum(counts)
    bits_start = np.zeros(n + 2, dtype=np.int64)
    for s in range(n + 1):
        bits_start[s + 1] = bits_start[s] + s * counts[s]
    sorted_masks = masks.astype(np.int64)
    bit_matrix = ((sorted_masks[:, None] >> np.arange(n)[None, :]) & 1).astype(np.uint8)
    mask_bits = np.nonzero(bit_matrix)[1].astype(np.int32)  # row-major: ascending per mask
    for a in (masks, level_start, mask_bits, bits_start):
        a.setflags(write=False)
    return masks, level_start, mask_bits, bits_start


@functools.lru_cache(maxsize=8)
def minor_tables(n):
    """(masks, level_start, sub_index, bits_start) for the MDS kernel: ``sub_index``
    packs each row r of each row set with the rank (within its popcount) of the row set
    without r, as rank << 5 | r."""
    masks, level_start, mask_bits, bits_start = subset_tables(n)
    position = np.zeros(1 << n, dtype=np.int64)
    position[masks.astype(np.int64)] = np.arange(1 << n)
    sub_index = np.zeros(len(mask_bits), dtype=np.int32)
    for s in range(1, n + 1):
        lo, hi = bits_start[s], bits_start[s + 1]
        rows = mask_bits[lo:hi].astype(np.int64).reshape(-1, s)
        sets = masks[level_start[s]:level_start[s + 1]].astype(np.int64)[:, None]
        rank = position[sets ^ (1 << rows)] - level_start[s - 1]
        sub_index[lo:hi] = ((rank << 5) | rows).reshape(-1)
    sub_index.setflags(write=False)
    return masks, level_start, sub_index, bits_start


# --------------------------------------------------------------------------- MDS

def _task_cost(nrows, ncols, prefix):
    """Table look-ups of the column sets that start with ``prefix``."""
    t = len(prefix)
    rest = ncols - 1 - prefix[-1]
    return sum(math.comb(rest, j) * (t + j) * math.comb(nrows, t + j)
               for j in range(0, min(rest, nrows - t) + 1))


def mds_work(nrows, ncols):
    """Total table look-ups of a full scan: sum_s s C(rows, s) C(cols, s)."""
    return sum(s * math.comb(nrows, s) * math.comb(ncols, s)
               for s in range(1, min(nrows, ncols) + 1))


def mds_scan(F, M, stop_first=False, progress=None, threads=None):
    """Every square minor of M over GF(2^k).

    Returns ``(counts, certificate)``: counts[s] = number of vanishing s x s minors
    (partial when ``stop_first``), certificate = (rows, columns) of a smallest vanishing
    minor found, or None. ``progress(done, total)`` is called between batches.
    """
    km = _kernels()
    exp_ext, log_ext, q1 = field_tables(F)
    M = np.asarray(M, dtype=np.int64)
    nrows, ncols = M.shape
    if nrows > MAX_MDS_ROWS:
        # minors of a tall matrix are those of its transpose
        if ncols <= MAX_MDS_ROWS:
            counts, cert = mds_scan(F, M.T, stop_first, progress, threads)
            return counts, (None if cert is None else (cert[1], cert[0]))
        raise InputError(f"MDS decision is limited to {MAX_MDS_ROWS} rows or columns")
    logc = np.ascontiguousarray(log_ext[M].T.astype(np.int32))
    tables = minor_tables(nrows)
    max_level = min(nrows, ncols)
    threads = threads or thread_count()
    counts = np.zeros(max_level + 1, dtype=np.int64)
    best_cert = None
    total = mds_work(nrows, ncols)
    work_small = total < 2_000_000
    prefix_len = 0 if work_small else min(3 if ncols > 12 else 2, max_level)
    stop_flag = np.zeros(1, dtype=np.int64)

    def run(tasks, bins, count_from, levels):
        nb = len(bins)
        cnt = np.zeros((nb, max_level + 1), dtype=np.int64)
        certs = np.zeros((nb, max_level + 2), dtype=np.int64)

        def one(b):
            km.mds_minors(logc, exp_ext, log_ext, *tables, tasks,
                          np.asarray(bins[b], dtype=np.int64), count_from, levels,
                          stop_first, cnt[b], certs[b], stop_flag)

        _in_threads(one, nb)
        return cnt.sum(axis=0), certs

    def take(certs):
        nonlocal best_cert
        for row in certs:
            s = int(row[0])
            if s and (best_cert is None or s < len(best_cert[0])):
                rmask = int(row[1])
                rows = [i for i in range(nrows) if (rmask >> i) & 1]
                best_cert = (rows, [int(c) for c in row[2:2 + s]])

    if prefix_len == 0:
        cnt, certs = run(np.zeros((1, 0), dtype=np.int64), [[0]], 1, max_level)
        counts += cnt
        take(certs)
        if progress:
            progress(total, total)
        return counts, best_cert

    # column sets smaller than the prefix, in one serial pass
    cnt, certs = run(np.zeros((1, 0), dtype=np.int64), [[0]], 1, prefix_len - 1)
    counts += cnt
    take(certs)
    done = sum(s * math.comb(nrows, s) * math.comb(ncols, s) for s in range(1, prefix_len))
    if progress:
        progress(done, total)
    import itertools

    prefixes = list(itertools.combinations(range(ncols), prefix_len))
    costs = [_task_cost(nrows, ncols, p) for p in prefixes]
    tasks = np.asarray(prefixes, dtype=np.int64).reshape(len(prefixes), prefix_len)
    order = sorted(range(len(prefixes)), key=lambda i: -costs[i])
    # batches of roughly equal work (for progress), each split over the threads by
    # longest-processing-time-first
    nbatches = 1 if total < 50_000_000 else 40
    per_batch = total / nbatches
    batch, acc = [], 0
    batches = []
    for i in order:
        batch.append(i)
        acc += costs[i]
        if acc >= per_batch:
            batches.append(batch)
            batch, acc = [], 0
    if batch:
        batches.append(batch)
    for batch in batches:
        if stop_first and stop_flag[0]:
            break
        loads = [0] * threads
        bins = [[] for _ in range(threads)]
        for i in batch:
            j = loads.index(min(loads))
            bins[j].append(i)
            loads[j] += costs[i]
        bins = [b for b in bins if b]
        cnt, certs = run(tasks, bins, prefix_len, max_level)
        counts += cnt
        take(certs)
        done += sum(costs[i] for i in batch)
        if progress:
            progress(min(done, total), total)
    return counts, best_cert


# --------------------------------------------------------------------------- branch numbers

def branch_field(F, M):
    """(branch number, witness x) of a square matrix over GF(2^k), cells = elements."""
    km = _kernels()
    exp_ext, log_ext, q1 = field_tables(F)
    M = np.ascontiguousarray(np.asarray(M, dtype=np.int64).astype(np.int32))
    n = M.shape[0]
    tables = subset_tables(n)
    x = np.zeros(n, dtype=np.int32)
    b = km.branch_number_field(M, exp_ext, log_ext, q1, *tables, x)
    return int(b), [int(v) for v in x]


def pack_rows(bits):
    """0/1 matrix with at most 64 columns -> uint64 rows (bit j = column j)."""
    bits = np.asarray(bits, dtype=np.uint64)
    weights = np.uint64(1) << np.arange(bits.shape[1], dtype=np.uint64)
    return np.ascontiguousarray((bits * weights[None, :]).sum(axis=1, dtype=np.uint64))


def branch_binary(bits, cell):
    """(branch number, witness as a 0/1 list) of a square binary matrix, weights in cells
    of ``cell`` bits."""
    km = _kernels()
    bits = np.asarray(bits)
    N = bits.shape[0]
    if N > 64:
        raise InputError(f"branch numbers of binary matrices are limited to 64 bits, got {N}")
    rows = pack_rows(bits)
    tables = subset_tables(N // cell)
    xb = np.zeros(1, dtype=np.uint64)
    b = km.branch_number_binary(rows, int(cell), *tables, xb)
    x = int(xb[0])
    return int(b), [(x >> j) & 1 for j in range(N)]


# --------------------------------------------------------------------------- search

FAMILY_CODES = {"circulant": 0, "hadamard": 1, "companion": 2, "cauchy": 3}
CRITERION_CODES = {"mds": 0, "branch": 1, "invertible": 2}


@functools.lru_cache(maxsize=8)
def _binomials(nmax, kmax):
    table = np.zeros((nmax + 1, kmax + 1), dtype=np.int64)
    for a in range(nmax + 1):
        for b in range(min(a, kmax) + 1):
            table[a, b] = min(math.comb(a, b), 1 << 62)
    table.setflags(write=False)
    return table


FLAG_REJECTED = -1
FLAG_EQUIVALENT = -2


def _permute_mask(mask, perm):
    out = 0
    for i, j in enumerate(perm):
        if (mask >> i) & 1:
            out |= 1 << j
    return out


@functools.lru_cache(maxsize=32)
def search_plan(family, n, symmetric=True):
    """The minors the search checks, as records for ``_mds_by_plan``: one minor per orbit
    of the family's symmetries (circulant: shifting rows and columns together; Hadamard
    form: i -> i XOR t on rows and columns, and transposition), by increasing size."""
    perms = [tuple(range(n))]
    transpose = False
    if symmetric and family == "circulant":
        perms = [tuple((i + k) % n for i in range(n)) for k in range(n)]
    elif symmetric and family == "hadamard":
        perms = [tuple(i ^ t for i in range(n)) for t in range(n)]
        transpose = True
    images = {}

    def canon(R, C):
        key = (R, C)
        found = images.get(key)
        if found is None:
            options = []
            for p in perms:
                a, b = _permute_mask(R, p), _permute_mask(C, p)
                options.append((a, b))
                if transpose:
                    options.append((b, a))
            found = min(options, key=lambda rc: (rc[0] << n) | rc[1])
            images[key] = found
        return found

    import itertools

    slot = {(0, 0): 0}
    records = []
    for s in range(1, n + 1):
        sets = [sum(1 << i for i in c) for c in itertools.combinations(range(n), s)]
        for R in sets:
            for C in sets:
                rep = canon(R, C)
                if rep in slot:
                    continue
                slot[rep] = len(slot)
                R0, C0 = rep
                c = C0.bit_length() - 1
                Cp = C0 ^ (1 << c)
                rec = [slot[rep], c, s]
                for r in range(n):
                    if (R0 >> r) & 1:
                        sub = (0, 0) if s == 1 else canon(R0 ^ (1 << r), Cp)
                        rec += [r, slot[sub]]
                records.extend(rec)
    plan = np.asarray(records, dtype=np.int32)
    plan.setflags(write=False)
    return plan


def search_chunk(F, family, n, values, power, start, count, criterion, target_branch,
                 involutory, canonical, weights, threads=None):
    """Flags of ``count`` candidates: FLAG_REJECTED, FLAG_EQUIVALENT, or the naive XOR
    count (>= 0) of a kept one; ``weights[a]`` = ones of the multiplication matrix of a."""
    km = _kernels()
    exp_ext, log_ext, q1 = field_tables(F)
    tables = subset_tables(n)
    values = np.ascontiguousarray(np.asarray(values, dtype=np.int32))
    binom = _binomials(max(len(values), 2 * n), 2 * n)
    flags = np.zeros(count, dtype=np.int32)
    threads = threads or thread_count()
    nblocks = max(1, min(threads, count // 4096 or 1))
    plan = search_plan(family, n)
    bounds = [(count * b) // nblocks for b in range(nblocks + 1)]

    def one(b):
        lo, hi = bounds[b], bounds[b + 1]
        km.search_block(FAMILY_CODES[family], n, values, int(power), int(start) + lo,
                        hi - lo, exp_ext, log_ext, q1, plan, *tables, binom, weights,
                        CRITERION_CODES[criterion], int(target_branch), bool(involutory),
                        bool(canonical), flags[lo:hi])

    _in_threads(one, nblocks)
    return flags


# --------------------------------------------------------------------------- XOR programs

def _program_out(prog, length, outsig):
    return [(int(a), int(b)) for a, b in prog[:length]], [int(s) for s in outsig]


def paar(bits, seed=0):
    """Paar's heuristic on a 0/1 matrix (rows = outputs): (xors, outputs)."""
    km = _kernels()
    bits = np.asarray(bits)
    rows = pack_rows(bits)
    nin = bits.shape[1]
    cap = int(bits.sum()) + nin + 8
    prog = np.zeros((cap, 2), dtype=np.int32)
    outsig = np.zeros(bits.shape[0], dtype=np.int32)
    length = km.paar_program(rows, nin, int(seed), prog, outsig)
    return _program_out(prog, length, outsig)


def boyar_peralta(bits, seed=0, node_budget=None):
    """The Boyar-Peralta heuristic on a 0/1 matrix: (xors, outputs, exact).

    ``node_budget``: sets searched per target and step (default 200 000 for up to 32
    outputs, less for more outputs so that a step stays near 6.4 million sets)."""
    km = _kernels()
    bits = np.asarray(bits)
    rows = pack_rows(bits)
    nin = bits.shape[1]
    cap = int(bits.sum()) + nin + 8
    prog = np.zeros((cap, 2), dtype=np.int32)
    outsig = np.zeros(bits.shape[0], dtype=np.int32)
    info = np.zeros(4, dtype=np.int64)
    if node_budget is None:
        node_budget = min(200_000, 6_400_000 // max(1, bits.shape[0]))
    length = km.bp_program(rows, nin, int(seed), int(node_budget), prog, outsig, info)
    xors, outs = _program_out(prog, length, outsig)
    return xors, outs, bool(info[0])
