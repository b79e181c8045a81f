"""Running a batch: read chunks, compute them (here, in worker processes or on a Dask
cluster), write the results in input order, journal every chunk.

The reader holds at most a bounded number of chunks at once (twice the number of
workers), so memory stays flat however large the input is: a JSON Lines input is read
a chunk of lines at a time, a ``.npy`` stack is memory-mapped and sliced.

Engines
-------
``local``, 1 worker
    Chunks run in this process; the compiled kernels use every core.
``local``, N workers
    A pool of N processes (started with "spawn"); each runs one chunk at a time with
    the kernels' threads capped so that N workers share the cores.
``dask``
    Chunks are tasks on a Dask distributed cluster: the scheduler at ``scheduler``, or a
    ``LocalCluster`` of ``workers`` processes on 127.0.0.1 when no address is given.
    The task functions are the same as the local engine's, so results are identical.
"""

import collections
import hashlib
import itertools
import os
import time

from ...errors import InputError

__all__ = ["Summary", "run", "DEFAULT_CHUNK_LINES", "DEFAULT_CHUNK_MATRICES"]

DEFAULT_CHUNK_LINES = 16384
DEFAULT_CHUNK_MATRICES = 65536
_HEAD_BYTES = 1 << 16
# Seconds to wait for a Dask scheduler given by address.
SCHEDULER_TIMEOUT = 10
_NPY_MAGIC = b"\x93NUMPY"


class Summary:
    """What a run did. ``exit_code`` is 0 when no record failed, else 1."""

    def __init__(self, input, kind, files, records, failed, kinds, seconds, resumed,
                 engine, workers, already_done=False):
        self.input = input
        self.kind = kind
        self.files = files
        self.records = records
        self.failed = failed
        self.kinds = dict(kinds)
        self.seconds = seconds
        self.resumed = resumed
        self.engine = engine
        self.workers = workers
        self.already_done = already_done

    @property
    def exit_code(self):
        return 0 if self.failed == 0 else 1

    def as_dict(self):
        return {"input": self.input, "format": self.kind, "files": self.files,
                "records": self.records, "succeeded": self.records - self.failed,
                "failed": self.failed, "failures_by_kind": self.kinds,
                "seconds": round(self.seconds, 3), "resumed": self.resumed,
                "already_done": self.already_done, "engine": self.engine,
                "workers": self.workers}

    def text(self):
        rate = self.records / self.seconds if self.seconds > 0 else 0.0
        kinds = ", ".join(f"{k} {v}" for k, v in sorted(self.kinds.items()))
        line = (f"{self.records} records, {self.records - self.failed} succeeded, "
                f"{self.failed} failed" + (f" ({kinds})" if kinds else "")
                + f" in {self.seconds:.2f} s ({rate:,.0f} records/s)")
        if self.already_done:
            line = "nothing to do: the run had finished; " + line
        elif self.resumed:
            line = "resumed; " + line
        return line


# --------------------------------------------------------------------------- executors

class _Done:
    __slots__ = ("value",)

    def __init__(self, value):
        self.value = value

    def result(self):
        return self.value


class _Inline:
    window = 1
    threads = None

    def submit(self, fn, *args):
        return _Done(fn(*args))

    def close(self):
        pass


def _init_worker(threads):
    os.environ["NUMBA_NUM_THREADS"] = str(threads)


class _Pool:
    def __init__(self, workers):
        import multiprocessing
        from concurrent.futures import ProcessPoolExecutor
        cores = os.cpu_count() or 1
        self.threads = max(1, cores // workers)
        self.window = 2 * workers
        self.pool = ProcessPoolExecutor(max_workers=workers,
                                        mp_context=multiprocessing.get_context("spawn"),
                                        initializer=_init_worker, initargs=(self.threads,))

    def submit(self, fn, *args):
        return self.pool.submit(fn, *args, self.threads)

    def close(self):
        self.pool.shutdown(wait=True, cancel_futures=True)


class _Dask:
    threads = 1

    def __init__(self, scheduler, workers):
        try:
            import logging

            from distributed import Client, LocalCluster
        except ImportError:
            raise InputError("the dask engine needs the optional dependency "
                             "dask[distributed]: pip install 'gfla[dask]'") from None
        self.cluster = None
        if scheduler:
            try:
                self.client = Client(scheduler, timeout=f"{SCHEDULER_TIMEOUT}s")
            except (OSError, TimeoutError, ValueError) as exc:
                raise InputError(f"cannot reach the dask scheduler at {scheduler}: "
                                 f"{_one_line(exc)}") from None
        else:
            self.cluster = LocalCluster(n_workers=workers, threads_per_worker=1,
                                        processes=True, host="127.0.0.1",
                                        dashboard_address=None,
                                        silence_logs=logging.ERROR,
                                        env={"NUMBA_NUM_THREADS": "1"})
            self.client = Client(self.cluster)
        n = len(self.client.scheduler_info().get("workers", {})) or workers
        self.window = 2 * max(1, n)

    def submit(self, fn, *args):
        return self.client.submit(fn, *args, self.threads, pure=False)

    def close(self):
        try:
            self.client.close()
        finally:
            if self.cluster is not None:
                self.cluster.close()


def _one_line(exc):
    return " ".join(str(exc).split()) or type(exc).__name__


def _executor(engine, workers, scheduler):
    if engine == "dask":
        return _Dask(scheduler, workers)
    if engine != "local":
        raise InputError(f"unknown engine {engine!r}: use 'local' or 'dask'")
    if scheduler:
        raise InputError("--scheduler applies to the dask engine only")
    return _Inline() if workers == 1 else _Pool(workers)


# --------------------------------------------------------------------------- input

def _inspect(path):
    """('jsonl' | 'npy', size, head digest) of an input file; InputError if unreadable."""
    path = os.fspath(path)
    if not os.path.exists(path):
        raise InputError(f"{path}: no such file")
    if os.path.isdir(path):
        raise InputError(f"{path}: is a directory, not a file")
    try:
        with open(path, "rb") as fh:
            head = fh.read(_HEAD_BYTES)
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror or exc})") from None
    size = os.path.getsize(path)
    digest = hashlib.sha256(head).hexdigest()
    if head.startswith(_NPY_MAGIC) or path.lower().endswith(".npy"):
        return "npy", size, digest
    if b"\x00" in head:
        raise InputError(f"{path}: is neither JSON Lines text nor a .npy stack")
    return "jsonl", size, digest


def _jsonl_chunks(path, offset, line, chunk_lines):
    """(data, first line, end offset, number of lines) from byte ``offset`` on."""
    try:
        fh = open(path, "rb")
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror or exc})") from None
    with fh:
        fh.seek(offset)
        while True:
            lines = list(itertools.islice(fh, chunk_lines))
            if not lines:
                return
            data = b"".join(lines)
            offset += len(data)
            yield data, line, offset, len(lines)
            line += len(lines)


# --------------------------------------------------------------------------- run

def run(input_path, out, workers=1, resume=False, engine="local", scheduler=None,
        chunk_size=None, progress=None, check_ids=True):
    """Run a batch job over a vector file.

    Parameters
    ----------
    input_path : str
        JSON Lines records, or a ``.npy`` stack with its JSON sidecar.
    out : str
        JSON Lines results for a JSON Lines input; for a ``.npy`` input the results
        stack (``.npy`` added if missing) with its sidecar and errors file beside it.
    workers : int
        Worker processes (local engine) or LocalCluster workers (dask engine).
    resume : bool
        Continue the run recorded in ``OUT.journal``.
    engine : {"local", "dask"}
    scheduler : str, optional
        Dask scheduler address (dask engine).
    chunk_size : int, optional
        Lines (JSON Lines) or matrices (.npy) per chunk.
    progress : callable, optional
        ``progress(done, total, records)``: done and total in bytes of input (JSON
        Lines) or matrices (.npy), records done so far.
    check_ids : bool
        JSON Lines: a record whose id an earlier record has becomes an error line
        (:mod:`gfla.jobs.batch.ids`; about 35-70 bytes of memory per record). False
        runs every record and keeps memory flat.

    Returns
    -------
    Summary

    Raises
    ------
    InputError
        The input cannot be read, the options do not fit, or a resume is impossible
        (nothing is written then).
    """
    if isinstance(workers, bool) or not isinstance(workers, int) or workers < 1:
        raise InputError(f"workers must be a positive integer, got {workers!r}")
    if chunk_size is not None and (isinstance(chunk_size, bool)
                                   or not isinstance(chunk_size, int) or chunk_size < 1):
        raise InputError(f"chunk size must be a positive integer, got {chunk_size!r}")
    if engine not in ("local", "dask"):
        raise InputError(f"unknown engine {engine!r}: use 'local' or 'dask'")
    input_path = os.fspath(input_path)
    out = os.fspath(out)
    kind, size, digest = _inspect(input_path)
    header = {"kind": "header", "format": "gfla-batch-journal-1", "input_format": kind,
              "input": os.path.abspath(input_path), "input_bytes": size,
              "input_head_sha256": digest}
    if kind == "jsonl":
        if os.path.abspath(out) == os.path.abspath(input_path):
            raise InputError("--out names the input file itself")
        return _run_jsonl(input_path, out, header, workers, resume, engine, scheduler,
                          chunk_size or DEFAULT_CHUNK_LINES, progress, check_ids)
    return _run_bulk(input_path, out, header, workers, resume, engine, scheduler,
                     chunk_size or DEFAULT_CHUNK_MATRICES, progress)


def _same_input(old, new, journal_path):
    """Refuse to resume over another input (size, first 64 KiB) or, for a .npy input,
    another sidecar (op, field, result layout)."""
    for key in sorted(new):
        if key != "input" and old.get(key) != new.get(key):
            what = "input" if key.startswith("input") else "sidecar"
            raise InputError(f"cannot resume: {journal_path} records a run over another "
                             f"{what} ({key} differs); delete it and the output to start "
                             "over")


def _state_after(entries):
    for entry in reversed(entries):
        if entry.get("kind") in ("chunk", "done"):
            return entry
    return None


PARTIAL = ".partial"


def _publish(names):
    """Rename each working file (``NAME.partial``) that is still there to its final
    name, then make the renames durable. Safe to repeat: a resumed run that was killed
    between two renames finishes the rest."""
    from .journal import fsync_directory
    moved = False
    for final in names:
        if os.path.exists(final + PARTIAL):
            os.replace(final + PARTIAL, final)
            moved = True
    if moved:
        fsync_directory(names[0])


def _open_journal(journal, header, resume, outputs):
    """(entries, last state or None, done) after checking resume rules.

    ``outputs`` are the final names. While a run is going its outputs are written under
    working names (``NAME.partial``), so a file under a final name is always complete;
    they are renamed once the journal records the run as done.
    """
    entries, valid = journal.read()
    if resume:
        if not entries:
            present = [p for name in outputs for p in (name, name + PARTIAL)
                       if os.path.exists(p) and os.path.getsize(p)]
            if present:
                raise InputError(f"cannot resume: {present[0]} exists but there is no "
                                 f"journal {journal.path}")
            return None, False, 0
        if entries[0].get("kind") != "header":
            raise InputError(f"cannot resume: {journal.path} is not a gfla batch journal")
        _same_input(entries[0], header, journal.path)
        state = _state_after(entries)
        done = state is not None and state.get("kind") == "done"
        if done:
            _publish(outputs)
        return state, done, valid
    if entries and (_state_after(entries) or {}).get("kind") != "done":
        raise InputError(f"{outputs[0]}: an unfinished run is recorded in {journal.path}; "
                         "add --resume to continue it, or delete both to start over")
    for name in outputs:
        if os.path.exists(name):
            raise InputError(f"{name} already exists: gfla does not overwrite results; "
                             "pick another --out or delete it")
    return None, False, 0


def _known_ids(path, upto, chunk_lines, check_ids):
    """The id registry of a run, with the ids of the input's first ``upto`` bytes."""
    if not check_ids:
        return None
    from .ids import IdRegistry
    from .records import scan_ids
    registry = IdRegistry(path)
    for data, first, end, _ in _jsonl_chunks(path, 0, 1, chunk_lines):
        start = end - len(data)
        if start >= upto:
            break
        # A resumed run may use another chunk size: stop at the recorded offset (the
        # end of a line) even inside a chunk.
        registry.add(scan_ids(data[:upto - start], first), start)
    return registry


def _run_jsonl(path, out, header, workers, resume, engine, scheduler, chunk_lines, progress,
               check_ids):
    from .journal import Journal, fsync_directory
    from .records import mark_duplicates, process_lines
    t0 = time.perf_counter()
    journal = Journal(out + ".journal")
    state, done, valid = _open_journal(journal, header, resume, [out])
    files = {"results": out, "journal": journal.path}
    base = {"input_offset": 0, "next_line": 1, "output_bytes": 0, "records": 0,
            "failed": 0, "kinds": {}, "seq": 0, "seconds": 0.0}
    if state is not None:
        base.update({k: state[k] for k in base if k in state})
    if done:
        return Summary(path, "jsonl", files, base["records"], base["failed"], base["kinds"],
                       base["seconds"], True, engine, workers, already_done=True)
    resumed = state is not None
    registry = _known_ids(path, base["input_offset"], chunk_lines, check_ids)
    executor = _executor(engine, workers, scheduler)
    try:
        work = out + PARTIAL
        if resumed:
            have = os.path.getsize(work) if os.path.exists(work) else -1
            if have < base["output_bytes"]:
                raise InputError(f"cannot resume: {work} is shorter than {journal.path} "
                                 "records; delete both to start over")
            outfh = open(work, "r+b")
            outfh.truncate(base["output_bytes"])
            outfh.seek(base["output_bytes"])
            journal.reopen(valid)
        else:
            journal.create(header)
            outfh = open(work, "wb")
            fsync_directory(work)
    except BaseException as exc:
        journal.close()
        executor.close()
        if isinstance(exc, OSError):
            raise InputError(f"{out}: cannot be written ({exc.strerror or exc})") from None
        raise
    total = header["input_bytes"]
    counts = collections.Counter(base["kinds"])
    records, failed, seq, outbytes = (base["records"], base["failed"], base["seq"],
                                      base["output_bytes"])
    elapsed_before = base["seconds"]
    if progress:
        progress(base["input_offset"], total, records)
    pending = collections.deque()

    def commit(item):
        nonlocal records, failed, seq, outbytes
        start, end, next_line, fut = item
        res = fut.result()
        data = res.data
        if registry is not None:
            found = registry.add(res.ids, start)
            if found:
                data, more, kinds = mark_duplicates(data, found)
                failed += more
                counts.update(kinds)
        outfh.write(data)
        outfh.flush()
        os.fsync(outfh.fileno())
        outbytes += len(data)
        records += res.records
        failed += res.failed
        counts.update(res.kinds)
        for kind in [k for k, v in counts.items() if v == 0]:
            del counts[kind]
        seq += 1
        journal.append({"kind": "chunk", "seq": seq, "input_offset": end,
                        "next_line": next_line, "output_bytes": outbytes,
                        "records": records, "failed": failed, "kinds": dict(counts),
                        "seconds": elapsed_before + time.perf_counter() - t0})
        if progress:
            progress(end, total, records)

    try:
        for data, first, end, nlines in _jsonl_chunks(path, base["input_offset"],
                                                      base["next_line"], chunk_lines):
            pending.append((end - len(data), end, first + nlines,
                            executor.submit(process_lines, data, first)))
            while len(pending) >= executor.window:
                commit(pending.popleft())
        while pending:
            commit(pending.popleft())
        seconds = elapsed_before + time.perf_counter() - t0
        journal.append({"kind": "done", "seq": seq, "input_offset": total,
                        "output_bytes": outbytes, "records": records, "failed": failed,
                        "kinds": dict(counts), "seconds": seconds})
        _publish([out])
    finally:
        executor.close()
        outfh.close()
        journal.close()
        if registry is not None:
            registry.close()
    return Summary(path, "jsonl", files, records, failed, counts, seconds, resumed,
                   engine, workers)


def _run_bulk(path, out, header, workers, resume, engine, scheduler, chunk_size, progress):
    import json

    import numpy as np

    from .bulk import bulk_paths, open_bulk, process_stack, result_layout
    from .journal import Journal, fsync_directory, write_whole
    t0 = time.perf_counter()
    bulk = open_bulk(path, chunk_size=chunk_size, workers=workers,
                     remote_workers=engine == "dask" and scheduler is not None)
    res_path, side_path, err_path = bulk_paths(out)
    if os.path.abspath(res_path) == os.path.abspath(path):
        raise InputError("--out names the input file itself")
    shape, dtype, description = result_layout(bulk)
    journal = Journal(res_path + ".journal")
    files = {"results": res_path, "sidecar": side_path, "errors": err_path,
             "journal": journal.path}
    header = dict(header, op=bulk.op.name, field=bulk.F.spec, modulus=bulk.F.modulus,
                  result_shape=list(shape), result_dtype=str(dtype))
    finals = [res_path, err_path, side_path]
    state, done, valid = _open_journal(journal, header, resume, finals)
    res_work, err_work = res_path + PARTIAL, err_path + PARTIAL
    base = {"stop": 0, "errors_bytes": 0, "records": 0, "failed": 0, "kinds": {}, "seq": 0,
            "seconds": 0.0}
    if state is not None:
        base.update({k: state[k] for k in base if k in state})
    if done:
        return Summary(path, "npy", files, base["records"], base["failed"], base["kinds"],
                       base["seconds"], True, engine, workers, already_done=True)
    resumed = state is not None
    N = bulk.count
    executor = _executor(engine, workers, scheduler)
    try:
        if resumed:
            try:
                mm = np.load(res_work, mmap_mode="r", allow_pickle=False)
            except (OSError, ValueError) as exc:
                raise InputError(f"cannot resume: {res_work} is not readable "
                                 f"({_one_line(exc)}); delete it and {journal.path}") from None
            if tuple(mm.shape) != tuple(shape) or mm.dtype != dtype:
                raise InputError(f"cannot resume: {res_work} has shape {mm.shape} and "
                                 f"dtype {mm.dtype}, the run needs {shape} {dtype}")
            data_offset = mm.offset
            del mm
            have = os.path.getsize(err_work) if os.path.exists(err_work) else -1
            if have < base["errors_bytes"]:
                raise InputError(f"cannot resume: {err_work} is shorter than "
                                 f"{journal.path} records; delete the outputs to start over")
            errfh = open(err_work, "r+b")
            errfh.truncate(base["errors_bytes"])
            errfh.seek(base["errors_bytes"])
            journal.reopen(valid)
        else:
            journal.create(header)
            mm = np.lib.format.open_memmap(res_work, mode="w+", dtype=dtype, shape=shape)
            data_offset = mm.offset
            del mm
            errfh = open(err_work, "wb")
            fsync_directory(res_work)
        resfd = os.open(res_work, os.O_RDWR)
    except BaseException as exc:
        journal.close()
        executor.close()
        if isinstance(exc, OSError):
            raise InputError(f"{res_path}: cannot be written ({exc.strerror or exc})") from None
        raise
    row_bytes = int(np.prod(shape[1:], dtype=np.int64)) * dtype.itemsize
    counts = collections.Counter(base["kinds"])
    records, failed, seq, errbytes = (base["records"], base["failed"], base["seq"],
                                      base["errors_bytes"])
    elapsed_before = base["seconds"]
    if progress:
        progress(base["stop"], N, records)
    pending = collections.deque()

    def commit(item):
        nonlocal records, failed, seq, errbytes
        start, stop, fut = item
        res = fut.result()
        values = np.ascontiguousarray(res.values, dtype=dtype)
        os.pwrite(resfd, values.tobytes(), data_offset + start * row_bytes)
        os.fsync(resfd)
        if res.errors:
            errfh.write(res.errors)
            errfh.flush()
            os.fsync(errfh.fileno())
            errbytes += len(res.errors)
        records += stop - start
        failed += res.failed
        counts.update(res.kinds)
        seq += 1
        journal.append({"kind": "chunk", "seq": seq, "stop": stop, "errors_bytes": errbytes,
                        "records": records, "failed": failed, "kinds": dict(counts),
                        "seconds": elapsed_before + time.perf_counter() - t0})
        if progress:
            progress(stop, N, records)

    try:
        for start in range(base["stop"], N, chunk_size):
            stop = min(N, start + chunk_size)
            pending.append((start, stop, executor.submit(process_stack,
                                                         *bulk.task(start, stop))))
            while len(pending) >= executor.window:
                commit(pending.popleft())
        while pending:
            commit(pending.popleft())
        seconds = elapsed_before + time.perf_counter() - t0
        sidecar = {"field": bulk.F.spec, "op": bulk.op.name, "count": N,
                   "shape": list(shape[1:]), "dtype": str(dtype), "contents": description,
                   "failed": failed, "errors": os.path.basename(err_path),
                   "input": os.path.basename(path)}
        if bulk.F.modulus is not None:
            sidecar["modulus"] = hex(bulk.F.modulus)
        # In one step: a crash never leaves a partial sidecar, even under its working
        # name; all three files get their final names once the journal says done.
        write_whole(side_path + PARTIAL,
                    (json.dumps(sidecar, indent=2) + "\n").encode("utf-8"))
        journal.append({"kind": "done", "seq": seq, "stop": N, "errors_bytes": errbytes,
                        "records": records, "failed": failed, "kinds": dict(counts),
                        "seconds": seconds})
        _publish(finals)
    finally:
        executor.close()
        os.close(resfd)
        errfh.close()
        journal.close()
    return Summary(path, "npy", files, records, failed, counts, seconds, resumed,
                   engine, workers)
