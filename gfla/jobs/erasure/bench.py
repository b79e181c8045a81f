"""Erasure-coding benchmark: encode and decode from memory, on one core.

``run(quick)`` returns one dict per measurement:

``operation``
    what was timed;
``size_bytes``
    bytes of data (the k data shards; for decode, the k shards read);
``seconds``, ``cpu_seconds``
    best wall-clock time of a few repetitions and the process CPU time of that
    repetition (the kernels are not parallel, so CPU time is one core's time; on a busy
    machine it is the fairer figure);
``gb_per_s``, ``gb_per_s_cpu``
    ``size_bytes / seconds / 1e9``, and the same from ``cpu_seconds``;
``ratio_to_numpy_xor``
    ``gb_per_s`` divided by the speed of one numpy XOR pass over the same bytes
    (``numpy.bitwise_xor(a, c, out=a)``, the memory-bandwidth anchor): 1.0 would mean
    coding as fast as touching the data once;
``ratio_to_galois``
    how many times faster than ``galois`` matrix multiplication doing the same product
    (galois is timed on at most ``galois_bytes`` of the data and scaled per byte, since
    it is far slower);
``target``
    the goal from the issue, when there is one, and ``met`` (bool).

Sizes: 256 MiB of data (quick mode: 8 MiB), k = 10, m = 4, GF(2^8) with the default
modulus (plus GF(2^16) and the table method for comparison).
"""

import os
import time

import numpy as np

__all__ = ["run", "format_rows"]

K, M = 10, 4


def _best(function, repeats):
    """(best wall seconds, CPU seconds of that run) over ``repeats`` calls."""
    best = (float("inf"), float("inf"))
    for _ in range(repeats):
        cpu = time.process_time()
        wall = time.perf_counter()
        function()
        wall = time.perf_counter() - wall
        cpu = time.process_time() - cpu
        if wall < best[0]:
            best = (wall, cpu)
    return best


def _galois_field(field):
    import galois

    return galois.GF(int(field.size), irreducible_poly=int(field.modulus))


def _galois_seconds_per_byte(field, matrix, symbols, limit_bytes, symbol_bytes):
    """Time galois on the first columns of ``symbols`` (k x L symbol array)."""
    GF = _galois_field(field)
    columns = max(1, min(symbols.shape[1], limit_bytes // (symbols.shape[0] * symbol_bytes)))
    A = GF(np.asarray(matrix, dtype=np.int64))
    B = GF(symbols[:, :columns].astype(np.int64))
    A @ B[:, :16]  # warm up (galois compiles its own kernels on first use)
    seconds, _ = _best(lambda: A @ B, 1)
    used = symbols.shape[0] * columns * symbol_bytes
    product = np.asarray(A @ B)
    return seconds / used, used, product, columns


def _xor_seconds(flat, repeats):
    word = np.uint64(0x5A5A5A5A5A5A5A5A)

    def twice():
        np.bitwise_xor(flat, word, out=flat)
        np.bitwise_xor(flat, word, out=flat)

    seconds, _ = _best(twice, repeats)
    return seconds / 2


def _row(operation, field, size, seconds, cpu, xor_seconds, galois_per_byte, galois_bytes,
         target=None):
    gbps = size / seconds / 1e9
    row = {"operation": operation, "field": field, "size_bytes": int(size),
           "seconds": round(seconds, 6), "cpu_seconds": round(cpu, 6),
           "gb_per_s": round(gbps, 3), "gb_per_s_cpu": round(size / max(cpu, 1e-9) / 1e9, 3),
           "ratio_to_numpy_xor": round(xor_seconds / seconds, 3),
           "ratio_to_galois": (round(galois_per_byte * size / seconds, 1)
                               if galois_per_byte else None),
           "galois_bytes": int(galois_bytes) if galois_bytes else None}
    if target is not None:
        row["target"] = target[0]
        row["met"] = bool(target[1](row))
    return row


def run(quick=False, seed=2024):
    """Run the erasure benchmark; returns a list of row dicts (see the module doc).

    Parameters
    ----------
    quick : bool
        8 MiB instead of 256 MiB, fewer repetitions.
    seed : int
        Seed of the random data.
    """
    import gfla
    from .codes import ErasureCode
    from .regions import RegionMatrix, TableRegionMatrix, words_for

    size = (8 << 20) if quick else (256 << 20)
    repeats = 3
    galois_limit = (2 << 20) if quick else (8 << 20)
    rng = np.random.default_rng(seed)
    rows = []

    for spec in ("GF(2^8)", "GF(2^16)"):
        field = gfla.field(spec)
        code = ErasureCode(field, K, M, "vandermonde")
        symbol_bytes = code.symbol_bytes
        shard = (size // K) // 64 * 64
        words = words_for(shard)
        shards = np.empty((K + M, words), dtype=np.uint64)
        shards[:K] = rng.integers(0, 256, size=(K, 8 * words), dtype=np.uint8).view(np.uint64)
        data_bytes = K * shard
        symbol_dtype = np.uint8 if symbol_bytes == 1 else np.dtype("<u2")
        as_symbols = shards.view(np.uint8).view(symbol_dtype)

        encoder = RegionMatrix(field, code.parity_matrix)
        parity = encoder.output_buffer(words)
        data_rows = np.arange(K, dtype=np.int64)
        encoder.apply(shards[:, :64].copy(), data_rows, parity[:, :64].copy())  # compile
        xor_seconds = _xor_seconds(shards[:K].reshape(-1), repeats)

        seconds, cpu = _best(lambda: encoder.apply(shards, data_rows, parity), repeats)
        shards[K:] = parity[:M]
        per_byte, used, reference, columns = _galois_seconds_per_byte(
            field, code.parity_matrix, as_symbols[:K], galois_limit, symbol_bytes)
        if not np.array_equal(reference, as_symbols[K:, :columns]):
            raise AssertionError(f"{spec} parity differs from galois")
        target = None
        if spec == "GF(2^8)":
            target = (">= 1 GB/s and >= 20x galois",
                      lambda r: r["gb_per_s"] >= 1.0 and r["ratio_to_galois"] >= 20)
        rows.append(_row(f"encode k={K} m={M} (bit-sliced masks)", spec, data_bytes, seconds,
                         cpu, xor_seconds, per_byte, used, target))

        if spec == "GF(2^8)":
            tables = TableRegionMatrix(field, code.parity_matrix)
            byte_view = shards.view(np.uint8)
            table_out = np.empty((tables.padded_rows, byte_view.shape[1]), dtype=np.uint8)
            tables.apply(byte_view[:, :256].copy(), data_rows, table_out[:, :256].copy())
            t_seconds, t_cpu = _best(lambda: tables.apply(byte_view, data_rows, table_out),
                                     repeats)
            if not np.array_equal(table_out[:M], byte_view[K:]):
                raise AssertionError("table method differs from the mask method")
            del table_out
            rows.append(_row(f"encode k={K} m={M} (packed product tables, comparison)", spec,
                             data_bytes, t_seconds, t_cpu, xor_seconds, per_byte, used))

        lost = list(range(4))  # four data shards lost: the costliest decode
        rebuilt = np.empty((4, words), dtype=np.uint64)
        holder = {}

        def decode():
            plan = code.decoding_plan(lost, targets=lost)
            decoder = RegionMatrix(field, plan.matrix)
            out = rebuilt if decoder.padded_rows == 4 else decoder.output_buffer(words)
            decoder.apply(shards, np.asarray(plan.read, dtype=np.int64), out)
            holder["plan"] = plan

        decode()
        seconds, cpu = _best(decode, repeats)
        if not np.array_equal(rebuilt, shards[:4]):
            raise AssertionError(f"{spec} decode did not rebuild the lost shards")
        plan = holder["plan"]
        columns = max(1, galois_limit // (K * symbol_bytes))
        per_byte, used, _, _ = _galois_seconds_per_byte(
            field, plan.matrix, as_symbols[:, :columns][list(plan.read)], galois_limit,
            symbol_bytes)
        target = None
        if spec == "GF(2^8)":
            target = (">= 0.5 GB/s", lambda r: r["gb_per_s"] >= 0.5)
        rows.append(_row(f"decode k={K} m={M}, data shards 0-3 lost", spec, data_bytes,
                         seconds, cpu, xor_seconds, per_byte, used, target))
        del shards, parity, rebuilt, as_symbols
    return rows


def format_rows(rows):
    """Rows as an aligned text table."""
    lines = [f"{'operation':<52} {'field':<9} {'MiB':>6} {'s':>8} {'GB/s':>7} {'cpu':>6} "
             f"{'xor':>6} {'galois':>8}  target"]
    for r in rows:
        galois = "" if r["ratio_to_galois"] is None else f"{r['ratio_to_galois']:.1f}x"
        target = "" if "target" not in r else \
            f"{r['target']}: {'met' if r['met'] else 'MISSED'}"
        lines.append(f"{r['operation']:<52} {r['field']:<9} {r['size_bytes'] / 2**20:6.0f} "
                     f"{r['seconds']:8.4f} {r['gb_per_s']:7.2f} {r['gb_per_s_cpu']:6.2f} "
                     f"{r['ratio_to_numpy_xor']:6.2f} "
                     f"{galois:>8}  {target}")
    return "\n".join(lines)


if __name__ == "__main__":
    import sys

    os.environ.setdefault("NUMBA_NUM_THREADS", "1")
    print(format_rows(run(quick="--quick" in sys.argv)))
