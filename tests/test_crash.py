"""kill -9 at random moments: ``gfla erasure encode / decode / repair`` and ``gfla batch
run`` (JSON Lines and .npy) must leave

* no partial file under a final name: every file under its final name is complete and
  equal to a clean run's (for batch, whose outputs are journaled in place: the part the
  journal records as committed equals the clean output, a finished journal means
  finished outputs, and the .npy sidecar is never partial);
* the inputs byte-identical (SHA-256, FIPS 180-4, before and after);
* a rerun (erasure) or ``--resume`` (batch) that completes with the clean run's output;
  for batch every input id once, in input order.

Each trial starts the real console script in its own process group and SIGKILLs the
group at a seeded random point (see :func:`_first_kill`; stratified over the trials):
during start-up, once a random fraction of the output is written, at a random time
after the first temporary appeared, or near and just past the end of the work. Where
the kill fell is read from what it left (no temporary yet, a partly written one, all
bytes written, published). A third of the trials kill the rerun once more. Every trial
prints its seed, kill point, where the kill fell and what the rerun did; a failure is
replayed with ``GFLA_CRASH_SEED=<base> pytest tests/test_crash.py -m slow -k
'<test> and <trial>' -s`` (``GFLA_CRASH_DELAY=<seconds>`` forces the first kill at that
time after the start).

Besides the random kills, ``test_kill_at_*`` and ``test_kill_after_every_*`` kill at
chosen calls (the rename, link and unlink that publish results, every fsync, the
creation of the batch journal and sidecar), so the final and cleanup steps are hit
every time rather than by luck; stale temporary files of a killed run must be ignored
(never taken as a result) by the rerun.

The CI run does 2 trials per command on smaller inputs; ``-m slow`` runs 20 per
command on tens of MiB / 2.5e5 records.
"""

import collections
import json
import os
import pathlib
import random
import shutil
import subprocess
import time
import zlib

import numpy as np
import pytest

import crashkit

GFLA = crashkit.gfla_command()
SEED = os.environ.get("GFLA_CRASH_SEED", "gfla-crash-1")
FORCED_DELAY = os.environ.get("GFLA_CRASH_DELAY")
SPAN = 1.15          # the latest kills: SPAN times the clean run's work after its start
SLOW_TRIALS = 20
CODE = ["-k", "5", "-m", "3", "--construction", "cauchy"]

# Sizes: (CI, slow).
ERASURE_BYTES = {"ci": (20 << 20) + 4321, "slow": (64 << 20) + 4321}
JSONL_RECORDS = {"ci": 30_000, "slow": 250_000}
JSONL_CHUNK = {"ci": 2048, "slow": 4096}
NPY_MATRICES = {"ci": 200_000, "slow": 1_000_000}
NPY_CHUNK = {"ci": 8192, "slow": 16384}

FIGURES = collections.defaultdict(list)

BEFORE, MID, AFTER = "before first write", "mid-write", "after last write"


def _gfla(*args, timeout=900):
    return subprocess.run(GFLA + [str(a) for a in args], capture_output=True, text=True,
                          timeout=timeout)


def _visible(directory):
    return sorted(e for e in os.listdir(directory) if not e.startswith("."))


def _hidden(directory):
    names = sorted(e for e in os.listdir(directory) if e.startswith("."))
    # Whatever a killed run leaves outside the final names is a marked temporary.
    assert all(crashkit.PARTIAL in e for e in names), names
    return names


@pytest.fixture(scope="module", autouse=True)
def _print_figures():
    yield
    if not FIGURES:
        return
    # Only trials that passed get here (a failed check fails its test): the counts say
    # how many checks were made.
    lines = ["", "crash trials passed: command, trials, kills (before first write / "
             "mid-write / after last write), checks for partial files under final names "
             "and of the inputs' SHA-256 (all passed), reruns that matched the clean run, "
             "stale temporaries left and ignored, seconds"]
    for command, rows in sorted(FIGURES.items()):
        where = collections.Counter(bucket for row in rows for bucket in row["buckets"])
        lines.append(
            f"  {command:<14} {len(rows):>3} trials, {sum(len(r['buckets']) for r in rows)} "
            f"kills ({where[BEFORE]} / {where[MID]} / {where[AFTER]}), "
            f"{sum(len(r['buckets']) for r in rows)} partial-file checks, "
            f"{sum(r['input_checks'] for r in rows)} input checks, "
            f"matched {sum(r['matched'] for r in rows)}/{len(rows)}, "
            f"stale {sum(r['stale'] for r in rows)}, "
            f"{sum(r['seconds'] for r in rows):.1f} s")
        details = collections.Counter(d for row in rows for d in row["details"])
        lines.append("      " + "; ".join(f"{k}: {v}" for k, v in sorted(details.items())))
    text = "\n".join(lines)
    print(text)
    target = os.environ.get("GFLA_CRASH_REPORT")
    if target:
        with open(target, "a") as fh:
            fh.write(text + "\n" + json.dumps(FIGURES) + "\n")


def _first_kill(u, rng, case):
    """Where the first kill of a trial falls, from u in [0, 1):

    * u < 0.2: a random time in start-up (measured on the clean run: from the start to
      its first temporary or journal);
    * 0.2 <= u < 0.5: during the writes, as soon as a fraction (u - 0.2) / 0.3 of the
      output bytes is written (polled every 2 ms), so that mid-write kills do not
      depend on how loaded the machine is;
    * 0.5 <= u < 0.85: a random time during the work (after the first temporary of
      this run appeared): writes, fsync, read-back;
    * u >= 0.85: 0.95 to 1.15 times the work's duration after it: the final steps
      (rename, link, done entry) and just past the end.

    Returns (mode, value): ("start", seconds), ("written", fraction) or ("marker",
    seconds after the first temporary)."""
    if u < 0.2:
        return "start", rng.uniform(0.0, case.startup)
    if u < 0.5:
        return "written", (u - 0.2) / 0.3
    if u < 0.85:
        return "marker", rng.uniform(0.0, case.work)
    return "marker", case.work * (0.95 + (u - 0.85) / 0.15 * (SPAN - 0.95))


def _delays(case, trial, count):
    """(seed, kills) for one trial: u is stratified over the trials (trial i draws u in
    [i/count, (i+1)/count)), so a handful of trials still spreads from start-up to past
    the end; a third of the trials kill the rerun too, at a uniform time over a clean
    run."""
    seed = f"{SEED}/{case.name}/{case.scale}/{trial}"
    rng = random.Random(seed)
    kills = [_first_kill((trial + rng.random()) / count, rng, case)]
    if FORCED_DELAY is not None:
        kills = [("start", float(FORCED_DELAY))]
    if rng.random() < 1 / 3:
        kills.append(("start", rng.uniform(0.0, SPAN * case.seconds)))
    return seed, kills


_ORIGIN = {"start": "s after the start", "marker": "s after the first temporary",
           "written": "of the output written"}


def _run_trial(case, tmp_path, trial, count):
    started = time.perf_counter()
    seed, kills = _delays(case, trial, count)
    work = case.prepare(tmp_path)
    inputs = case.input_digests(work)
    buckets, details = [], []
    for attempt, (mode, value) in enumerate(kills):
        before = case.temporaries(work)
        delay, after = value, None
        if mode == "marker":
            after = case.marker(work, before)
        elif mode == "written":
            written = case.written(work, before)
            delay, after = 0.0, lambda: written() >= value
        # A rerun after a kill that fell once the output was published refuses to
        # overwrite it (exit 2), as the final rerun's check expects too.
        expected = case.expected_code(work) if attempt else case.clean_code
        killed, code, at = crashkit.run_and_kill(case.argv(work, attempt > 0), delay,
                                                 after=after)
        if killed:
            bucket, detail = case.where(work, before)
        else:
            assert code == expected, (seed, mode, value, code)
            bucket, detail = AFTER, "exited before the kill"
        buckets.append(bucket)
        details.append(detail)
        print(f"crash trial {case.name}[{trial}] seed={seed!r} kill {attempt + 1}: "
              f"{value:.3f} {_ORIGIN[mode]}, {at:.3f} s after the start (clean run "
              f"{case.seconds:.2f} s, {case.startup:.2f} s before its first temporary): "
              f"{bucket} ({detail})")
        case.check_after_kill(work)
        assert case.input_digests(work) == inputs, "an input changed"
    r = case.rerun(work)
    case.check_final(work, r)
    assert case.input_digests(work) == inputs, "an input changed"
    stale = case.stale(work)
    seconds = time.perf_counter() - started
    print(f"crash trial {case.name}[{trial}]: rerun exit {r.returncode}, output matches "
          f"the clean run, {stale} stale temporaries ignored, {seconds:.1f} s")
    FIGURES[case.name].append({"buckets": buckets, "details": details, "matched": 1,
                               "input_checks": len(buckets) + 1,
                               "stale": stale, "seconds": seconds, "seed": seed,
                               "kills": kills})


def _timed(argv, marker):
    """(seconds, seconds before the marker) of a clean run, which must succeed."""
    code, seconds, to_marker, err = crashkit.timed_run(GFLA + [str(a) for a in argv],
                                                       marker)
    assert code in (0, 1), err
    return code, seconds, to_marker


def _partial_in(directory):
    return lambda: any(crashkit.PARTIAL in e for e in os.listdir(directory))


# --------------------------------------------------------------------------- erasure

class _ErasureData:
    """An input file, its clean shard set, and the damaged sets decode and repair
    start from, with the clean outputs of each command."""

    def __init__(self, base, size):
        self.base = base
        rng = np.random.default_rng(size)
        self.input = base / "ledger.bin"
        self.input.write_bytes(rng.integers(0, 256, size=size, dtype=np.uint8).tobytes())
        self.input_sha = crashkit.sha256_file(self.input)
        # Warm the kernel cache on a small file so the timed runs are warm.
        small = base / "warm.bin"
        small.write_bytes(bytes(range(256)) * 999)
        assert _gfla("erasure", "encode", small, *CODE, "--out", base / "warm",
                     "-q").returncode == 0

        self.timing = {}
        (base / "encode").mkdir()
        self.timing["encode"] = _timed(
            ["erasure", "encode", self.input, *CODE, "--out", base / "encode" / "clean",
             "-q"], _partial_in(base / "encode"))
        shutil.move(base / "encode" / "clean", base / "clean")
        self.clean = crashkit.snapshot(base / "clean")
        manifest = json.loads((base / "clean" / "manifest.json").read_text())
        self.shard_size = manifest["shard_size"]
        self.names = [s["file"] for s in manifest["shards"]]

        # Decode starts from a set with data shard 1 missing and data shard 3 corrupt.
        self.decode_set = base / "decode-set"
        shutil.copytree(base / "clean", self.decode_set)
        os.unlink(self.decode_set / self.names[1])
        self._flip(self.decode_set / self.names[3], rng)
        self.decode_inputs = crashkit.snapshot(self.decode_set)
        self.timing["decode"] = _timed(
            ["erasure", "decode", self.decode_set, "--out", base / "clean.out", "-q"],
            _partial_in(base))
        assert crashkit.sha256_file(base / "clean.out") == self.input_sha

        # Repair starts from data shard 0 and parity shard 6 missing, data shard 2
        # corrupt (set aside as NAME.damaged).
        self.repair_set = base / "repair-set"
        shutil.copytree(base / "clean", self.repair_set)
        os.unlink(self.repair_set / self.names[0])
        os.unlink(self.repair_set / self.names[6])
        self._flip(self.repair_set / self.names[2], rng)
        self.corrupt_sha = crashkit.sha256_file(self.repair_set / self.names[2])
        self.repair_inputs = crashkit.snapshot(self.repair_set)
        shutil.copytree(self.repair_set, base / "repaired")
        self.timing["repair"] = _timed(["erasure", "repair", base / "repaired", "-q"],
                                       _partial_in(base / "repaired"))
        self.repaired = crashkit.snapshot(base / "repaired")
        assert self.repaired == {**self.clean, self.names[2] + ".damaged": self.corrupt_sha}
        assert all(code == 0 for code, _, _ in self.timing.values())

    @staticmethod
    def _flip(path, rng):
        with open(path, "r+b") as fh:
            where = int(rng.integers(0, os.path.getsize(path)))
            fh.seek(where)
            byte = fh.read(1)[0]
            fh.seek(where)
            fh.write(bytes([byte ^ 0x20]))


class _Encode:
    name = "encode"
    clean_code = 0

    def __init__(self, data, scale):
        self.data, self.scale = data, scale
        _, self.seconds, self.startup = data.timing["encode"]
        self.work = self.seconds - self.startup

    def prepare(self, tmp_path):
        return tmp_path

    def argv(self, work, again):
        return GFLA + ["erasure", "encode", self.data.input, *CODE, "--out",
                       work / "set", "-q"]

    def input_digests(self, work):
        return crashkit.sha256_file(self.data.input)

    def temporaries(self, work):
        return set(_hidden(work))

    def marker(self, work, before):
        return lambda: bool(self.temporaries(work) - before)

    def _new(self, work, before):
        new = sorted(self.temporaries(work) - before)
        return work / new[-1] if new else None

    def written(self, work, before):
        """Fraction of the shard bytes written into this run's temporary."""
        total = len(self.data.names) * self.data.shard_size

        def fraction():
            temp = self._new(work, before)
            try:
                return sum(os.path.getsize(temp / n) for n in os.listdir(temp)
                           if n != "manifest.json") / total if temp else 0.0
            except FileNotFoundError:  # renamed into place meanwhile
                return 1.0
        return fraction

    def where(self, work, before):
        if os.path.exists(work / "set"):
            return AFTER, "published"
        new = sorted(self.temporaries(work) - before)
        if not new:
            return BEFORE, "start-up"
        temp = work / new[-1]
        written = sum(os.path.getsize(temp / n) for n in os.listdir(temp)
                      if n != "manifest.json")
        if written == 0:
            return BEFORE, "hashing input"
        if written < len(self.data.names) * self.data.shard_size:
            return MID, "writing shards"
        return AFTER, ("reading back" if os.path.exists(temp / "manifest.json")
                       else "shards written, manifest not yet")

    def check_after_kill(self, work):
        assert set(_visible(work)) <= {"set"}, _visible(work)
        _hidden(work)
        if os.path.exists(work / "set"):
            assert crashkit.snapshot(work / "set") == self.data.clean

    def expected_code(self, work):
        return 2 if os.path.exists(work / "set") else self.clean_code

    def rerun(self, work):
        existed = os.path.exists(work / "set")
        r = _gfla(*self.argv(work, True)[len(GFLA):])
        r.existed = existed
        return r

    def check_final(self, work, r):
        if r.existed:  # published before the kill: never overwritten
            assert r.returncode == 2 and "not empty" in r.stderr, r.stderr
            assert r.stderr.count("\n") == 1
        else:
            assert r.returncode == 0, r.stderr
        assert crashkit.snapshot(work / "set") == self.data.clean
        assert _visible(work) == ["set"]

    def stale(self, work):
        return len(_hidden(work))


class _Decode(_Encode):
    name = "decode"

    def __init__(self, data, scale):
        self.data, self.scale = data, scale
        _, self.seconds, self.startup = data.timing["decode"]
        self.work = self.seconds - self.startup

    def argv(self, work, again):
        return GFLA + ["erasure", "decode", self.data.decode_set, "--out", work / "out.bin",
                       "-q"]

    def input_digests(self, work):
        return crashkit.snapshot(self.data.decode_set)

    def written(self, work, before):
        total = os.path.getsize(self.data.input)

        def fraction():
            temp = self._new(work, before)
            try:
                return crashkit.allocated_bytes(temp) / total if temp else 0.0
            except FileNotFoundError:
                return 1.0
        return fraction

    def where(self, work, before):
        if os.path.exists(work / "out.bin"):
            return AFTER, "published"
        new = sorted(self.temporaries(work) - before)
        if not new:
            return BEFORE, "start-up or checking shards"
        # The temporary is sized up front and filled by pwrite: count what is written.
        written = crashkit.allocated_bytes(work / new[-1])
        if written == 0:
            return BEFORE, "temporary created"
        if written < os.path.getsize(self.data.input):
            return MID, "writing the file"
        return AFTER, "checking the output"

    def check_after_kill(self, work):
        assert set(_visible(work)) <= {"out.bin"}, _visible(work)
        _hidden(work)
        if os.path.exists(work / "out.bin"):
            assert crashkit.sha256_file(work / "out.bin") == self.data.input_sha

    def expected_code(self, work):
        return 2 if os.path.exists(work / "out.bin") else self.clean_code

    def rerun(self, work):
        existed = os.path.exists(work / "out.bin")
        r = _gfla(*self.argv(work, True)[len(GFLA):])
        r.existed = existed
        return r

    def check_final(self, work, r):
        if r.existed:
            assert r.returncode == 2 and "already exists" in r.stderr, r.stderr
            assert r.stderr.count("\n") == 1
        else:
            assert r.returncode == 0, r.stderr
        assert crashkit.sha256_file(work / "out.bin") == self.data.input_sha
        assert _visible(work) == ["out.bin"]


class _Repair(_Encode):
    name = "repair"

    def __init__(self, data, scale):
        self.data, self.scale = data, scale
        _, self.seconds, self.startup = data.timing["repair"]
        self.work = self.seconds - self.startup

    def prepare(self, tmp_path):
        shutil.copytree(self.data.repair_set, tmp_path / "set")
        return tmp_path / "set"

    def argv(self, work, again):
        return GFLA + ["erasure", "repair", work, "-q"]

    def expected_code(self, work):  # repair finishes what a killed repair left
        return self.clean_code

    def written(self, work, before):
        total = 3 * self.data.shard_size

        def fraction():
            done = 0
            for name in self.temporaries(work) - before:
                try:
                    done += os.path.getsize(work / name)
                except FileNotFoundError:
                    done += self.data.shard_size
            return done / total
        return fraction

    def input_digests(self, work):
        # The intact shards and the manifest, unchanged; the corrupt shard's bytes kept
        # (under its name or set aside as NAME.damaged).
        d = self.data
        corrupt = d.names[2]
        kept = [n for n in (corrupt, corrupt + ".damaged") if os.path.exists(work / n)
                and crashkit.sha256_file(work / n) == d.corrupt_sha]
        return ({n: crashkit.sha256_file(work / n) for n in d.repair_inputs
                 if n != corrupt}, bool(kept))

    def temporaries(self, work):
        return set(_hidden(work))

    def where(self, work, before):
        d = self.data
        targets = [d.names[0], d.names[2], d.names[6]]
        published = [n for n in targets if os.path.exists(work / n)
                     and crashkit.sha256_file(work / n) == d.clean[n]]
        if published:
            return AFTER, f"{len(published)} of 3 rebuilt shards published"
        if os.path.exists(work / (d.names[2] + ".damaged")):
            return AFTER, "corrupt shard set aside, none published"
        new = sorted(self.temporaries(work) - before)
        written = sum(os.path.getsize(work / n) for n in new)
        if not new or written == 0:
            return BEFORE, "start-up or checking shards" if not new else "temporaries created"
        if written < len(targets) * d.shard_size:
            return MID, "writing rebuilt shards"
        return AFTER, "checking rebuilt shards"

    def check_after_kill(self, work):
        d = self.data
        allowed = set(d.repaired)
        assert set(_visible(work)) <= allowed, _visible(work)
        for name in _visible(work):
            got = crashkit.sha256_file(work / name)
            if name == d.names[2]:
                assert got in (d.clean[name], d.corrupt_sha), name
            else:
                assert got == d.repaired[name], name

    def rerun(self, work):
        return _gfla(*self.argv(work, True)[len(GFLA):])

    def check_final(self, work, r):
        assert r.returncode == 0, r.stderr
        got = {n: crashkit.sha256_file(work / n) for n in _visible(work)}
        assert got == self.data.repaired


@pytest.fixture(scope="module")
def erasure_ci(tmp_path_factory):
    return _ErasureData(tmp_path_factory.mktemp("erasure-ci"), ERASURE_BYTES["ci"])


@pytest.fixture(scope="module")
def erasure_slow(tmp_path_factory):
    return _ErasureData(tmp_path_factory.mktemp("erasure-slow"), ERASURE_BYTES["slow"])


ERASURE_CASES = {"encode": _Encode, "decode": _Decode, "repair": _Repair}


@pytest.mark.parametrize("trial", range(2))
@pytest.mark.parametrize("command", sorted(ERASURE_CASES))
def test_erasure_kill_9_then_rerun(erasure_ci, tmp_path, command, trial):
    _run_trial(ERASURE_CASES[command](erasure_ci, "ci"), tmp_path, trial, 2)


@pytest.mark.slow
@pytest.mark.parametrize("trial", range(SLOW_TRIALS))
@pytest.mark.parametrize("command", sorted(ERASURE_CASES))
def test_erasure_kill_9_then_rerun_many(erasure_slow, tmp_path, command, trial):
    _run_trial(ERASURE_CASES[command](erasure_slow, "slow"), tmp_path, trial, SLOW_TRIALS)


# --------------------------------------------------------------------------- batch

def _journal_state(path):
    """The last chunk/done entry of a batch journal, read independently of gfla
    (``<JSON>\\t<CRC-32>`` lines, zlib's CRC-32 of ISO 3309), and whether it is done."""
    state = None
    try:
        raw = open(path, "rb").read()
    except FileNotFoundError:
        return None, False
    for line in raw.split(b"\n")[:-1]:
        text, _, crc = line.rpartition(b"\t")
        if not crc or int(crc, 16) != zlib.crc32(text):
            break
        entry = json.loads(text)
        if entry.get("kind") in ("chunk", "done"):
            state = entry
    return state, state is not None and state["kind"] == "done"


PARTIAL = ".partial"  # working names of batch outputs until the run is done


class _BatchCase:
    """Shared parts of the two batch formats: trials kill the run (and in a third of
    them the first resume); the final ``--resume`` must give the clean bytes."""

    def __init__(self, data, scale):
        self.data, self.scale = data, scale
        self.clean_code, self.seconds, self.startup = data.timing
        self.work = self.seconds - self.startup

    def prepare(self, tmp_path):
        return tmp_path

    def argv(self, work, again):
        extra = ["--resume"] if again else []
        return GFLA + ["batch", "run", self.data.input, "--out", work / self.data.out_name,
                       "--chunk-size", self.data.chunk, "-q", *extra]

    def input_digests(self, work):
        return {p: crashkit.sha256_file(p) for p in self.data.inputs}

    def temporaries(self, work):
        return set(_hidden(work))

    def marker(self, work, before):
        journal = work / (self.data.out_name + ".journal")
        return lambda: os.path.exists(journal)

    def written(self, work, before):
        """Fraction of the clean output's bytes written (results for JSON Lines, the
        errors file for .npy, whose results file is sized up front), under the working
        name while the run goes, under the final name once it is published."""
        path, total = work / self.data.progress_file, len(self.data.progress_bytes)

        def fraction():
            for name in (str(path) + PARTIAL, path):
                try:
                    return os.path.getsize(name) / total
                except FileNotFoundError:
                    pass
            return 0.0
        return fraction

    def expected_code(self, work):  # --resume finishes (or finds finished) the run
        return self.clean_code

    def rerun(self, work):
        return _gfla(*self.argv(work, True)[len(GFLA):])

    def stale(self, work):
        return len(_hidden(work))


class _JsonlData:
    def __init__(self, base, count, chunk):
        rng = np.random.default_rng(count)
        self.input = base / "records.jsonl"
        self.ids = []
        specs = [("GF(2^8)", 256), ("GF(65521)", 65521), ("GF(2)", 2)]
        ops = ["inv", "det", "rank", "inv", "solve"]
        with open(self.input, "w") as fh:
            for i in range(count):
                spec, size = specs[i % 3]
                op = ops[(i // 3) % 5]
                n = 3 + i % 4
                A = rng.integers(0, size, size=(n, n))
                if i % 61 == 0:
                    A[1] = A[0]  # singular: an error line for this id
                rec = {"id": f"r{i}", "field": spec, "op": op, "matrix": A.tolist()}
                if op == "solve":
                    rec["rhs"] = rng.integers(0, size, size=n).tolist()
                fh.write(json.dumps(rec) + "\n")
                self.ids.append(f"r{i}")
        self.inputs = [self.input]
        self.chunk = chunk
        self.out_name = "results.jsonl"
        # Warm the kernels on the first records, then time a clean run.
        warm = base / "warm.jsonl"
        with open(self.input) as src, open(warm, "w") as dst:
            for _, line in zip(range(3000), src):
                dst.write(line)
        _gfla("batch", "run", warm, "--out", base / "warm.out.jsonl", "-q")
        (base / "clean").mkdir()
        out = base / "clean" / self.out_name
        self.timing = _timed(["batch", "run", self.input, "--out", out, "--chunk-size",
                              chunk, "-q"], lambda: os.path.exists(str(out) + ".journal"))
        self.clean = (base / "clean" / self.out_name).read_bytes()
        assert [json.loads(x)["id"] for x in self.clean.splitlines()] == self.ids
        self.progress_file, self.progress_bytes = self.out_name, self.clean


class _Jsonl(_BatchCase):
    name = "batch jsonl"

    def where(self, work, before):
        out = work / self.data.out_name
        state, done = _journal_state(str(out) + ".journal")
        if done:
            return AFTER, ("journal done, published" if os.path.exists(out)
                           else "journal done, not yet published")
        work_file = str(out) + PARTIAL
        size = os.path.getsize(work_file) if os.path.exists(work_file) else 0
        committed = state["output_bytes"] if state else 0
        if state is None and size == 0:
            if not os.path.exists(str(out) + ".journal"):
                return BEFORE, "start-up (nothing written)"
            return BEFORE, "journal begun, no output yet"
        if size > committed:
            return MID, "inside a chunk's write"
        return MID, "between chunks"

    def check_after_kill(self, work):
        out = work / self.data.out_name
        assert set(_visible(work)) <= {out.name, out.name + PARTIAL,
                                       out.name + ".journal"}, _visible(work)
        _hidden(work)
        state, done = _journal_state(str(out) + ".journal")
        if os.path.exists(out):  # a final name only ever holds the finished output
            assert done and out.read_bytes() == self.data.clean
            assert not os.path.exists(str(out) + PARTIAL)
            return
        work_file = pathlib.Path(str(out) + PARTIAL)
        data = work_file.read_bytes() if work_file.exists() else b""
        committed = state["output_bytes"] if state else 0
        assert data[:committed] == self.data.clean[:committed]
        assert len(data) >= committed
        if done:
            assert data == self.data.clean

    def check_final(self, work, r):
        assert r.returncode == self.clean_code, r.stderr
        data = (work / self.data.out_name).read_bytes()
        ids = [json.loads(x)["id"] for x in data.splitlines()]
        assert ids == self.data.ids  # every id once, in input order
        assert data == self.data.clean
        _, done = _journal_state(str(work / self.data.out_name) + ".journal")
        assert done


class _NpyData:
    def __init__(self, base, count, chunk):
        rng = np.random.default_rng(count)
        A = rng.integers(0, 256, size=(count, 4, 4), dtype=np.uint8)
        A[::37, 3] = A[::37, 1]  # singular: one error line each
        self.input = base / "stack.npy"
        np.save(self.input, A)
        sidecar = base / "stack.json"
        sidecar.write_text(json.dumps({"field": "GF(2^8)", "modulus": "0x11b", "op": "inv"}))
        self.inputs = [self.input, sidecar]
        self.count = count
        self.chunk = chunk
        self.out_name = "inverses.npy"
        warm = base / "warm.npy"
        np.save(warm, A[:2000])
        (base / "warm.json").write_text(sidecar.read_text())
        _gfla("batch", "run", warm, "--out", base / "warm.out.npy", "-q")
        (base / "clean").mkdir()
        out = base / "clean" / self.out_name
        self.timing = _timed(["batch", "run", self.input, "--out", out, "--chunk-size",
                              chunk, "-q"], lambda: os.path.exists(str(out) + ".journal"))
        self.files = ["inverses.npy", "inverses.json", "inverses.errors.jsonl"]
        self.clean = {n: (base / "clean" / n).read_bytes() for n in self.files}
        self.errors = [json.loads(x)["index"]
                       for x in self.clean["inverses.errors.jsonl"].splitlines()]
        assert set(range(0, count, 37)) <= set(self.errors)  # the planted singular ones
        self.row_bytes = 16
        self.progress_file = "inverses.errors.jsonl"
        self.progress_bytes = self.clean[self.progress_file]
        self.data_offset = len(self.clean["inverses.npy"]) - count * self.row_bytes


class _Npy(_BatchCase):
    name = "batch npy"

    def where(self, work, before):
        state, done = _journal_state(str(work / "inverses.npy.journal"))
        if done:
            return AFTER, ("journal done, published" if os.path.exists(work / "inverses.json")
                           else "journal done, not yet published")
        if os.path.exists(work / ("inverses.json" + PARTIAL)):
            return AFTER, "sidecar written, journal not done"
        if state is None:
            if not os.path.exists(work / "inverses.npy.journal"):
                return BEFORE, "start-up (nothing written)"
            errors = work / ("inverses.errors.jsonl" + PARTIAL)
            if os.path.getsize(errors) if os.path.exists(errors) else 0:
                return MID, "first chunk written, not committed"
            return BEFORE, "journal begun, no chunk committed"
        if state["stop"] == self.data.count:
            return AFTER, "all chunks committed"
        return MID, "between or inside chunks"

    def check_after_kill(self, work):
        d = self.data
        assert set(_visible(work)) <= ({"inverses.npy.journal"} | set(d.files)
                                       | {n + PARTIAL for n in d.files}), _visible(work)
        _hidden(work)
        state, done = _journal_state(str(work / "inverses.npy.journal"))
        for n in d.files:  # a final name only ever holds the finished file
            if os.path.exists(work / n):
                assert done and (work / n).read_bytes() == d.clean[n], n
        # Each file under its final name, else under its working name.
        got = {n: (work / m).read_bytes() for n in d.files for m in (n, n + PARTIAL)
               if os.path.exists(work / m)}
        if "inverses.json" in got:  # written whole, at the end: complete or absent
            assert got["inverses.json"] == d.clean["inverses.json"]
        if state is not None:
            upto = d.data_offset + state["stop"] * d.row_bytes
            assert got["inverses.npy"][:upto] == d.clean["inverses.npy"][:upto]
            assert len(got["inverses.npy"]) == len(d.clean["inverses.npy"])
            eb = state["errors_bytes"]
            assert got["inverses.errors.jsonl"][:eb] == d.clean["inverses.errors.jsonl"][:eb]
        if done:
            assert got == d.clean

    def check_final(self, work, r):
        d = self.data
        assert r.returncode == self.clean_code, r.stderr
        got = {n: (work / n).read_bytes() for n in d.files}
        errors = [json.loads(x)["index"] for x in got["inverses.errors.jsonl"].splitlines()]
        assert errors == sorted(set(errors)) == d.errors  # each failed index once, in order
        assert np.array_equal(np.load(work / "inverses.npy"),
                              np.load(d.input.parent / "clean" / "inverses.npy"))
        assert got == d.clean


@pytest.fixture(scope="module")
def jsonl_ci(tmp_path_factory):
    return _JsonlData(tmp_path_factory.mktemp("jsonl-ci"), JSONL_RECORDS["ci"],
                      JSONL_CHUNK["ci"])


@pytest.fixture(scope="module")
def jsonl_slow(tmp_path_factory):
    return _JsonlData(tmp_path_factory.mktemp("jsonl-slow"), JSONL_RECORDS["slow"],
                      JSONL_CHUNK["slow"])


@pytest.fixture(scope="module")
def npy_ci(tmp_path_factory):
    return _NpyData(tmp_path_factory.mktemp("npy-ci"), NPY_MATRICES["ci"], NPY_CHUNK["ci"])


@pytest.fixture(scope="module")
def npy_slow(tmp_path_factory):
    return _NpyData(tmp_path_factory.mktemp("npy-slow"), NPY_MATRICES["slow"],
                    NPY_CHUNK["slow"])


@pytest.mark.parametrize("trial", range(2))
def test_batch_jsonl_kill_9_then_resume(jsonl_ci, tmp_path, trial):
    _run_trial(_Jsonl(jsonl_ci, "ci"), tmp_path, trial, 2)


@pytest.mark.parametrize("trial", range(2))
def test_batch_npy_kill_9_then_resume(npy_ci, tmp_path, trial):
    _run_trial(_Npy(npy_ci, "ci"), tmp_path, trial, 2)


@pytest.mark.slow
@pytest.mark.parametrize("trial", range(SLOW_TRIALS))
def test_batch_jsonl_kill_9_then_resume_many(jsonl_slow, tmp_path, trial):
    _run_trial(_Jsonl(jsonl_slow, "slow"), tmp_path, trial, SLOW_TRIALS)


@pytest.mark.slow
@pytest.mark.parametrize("trial", range(SLOW_TRIALS))
def test_batch_npy_kill_9_then_resume_many(npy_slow, tmp_path, trial):
    _run_trial(_Npy(npy_slow, "slow"), tmp_path, trial, SLOW_TRIALS)


# --------------------------------------------------------------------------- chosen calls

def _kill_at_calls(case, tmp_path, name, pattern="*", when="after", nths=None, limit=60):
    """Kill ``case``'s command at the nth call of ``name`` for each nth in ``nths``
    (default: 1, 2, ... until a run meets no such call), each time in a fresh work
    area; after each kill the partial-file and input checks, then the rerun must give
    the clean output. Returns the number of kills made."""
    kills = 0
    for nth in nths or range(1, limit + 1):
        area = tmp_path / f"{name}-{when}-{nth}"
        area.mkdir(parents=True)
        work = case.prepare(area)
        inputs = case.input_digests(work)
        r = crashkit.kill_on_call(case.argv(work, False)[len(GFLA):], name, nth, when,
                                  pattern)
        if r.returncode != -9:  # no nth such call: the run completed
            assert r.returncode == case.clean_code, r.stderr
            assert nths is None, f"{name} #{nth} was never called"
            case.check_final(work, case.rerun(work))
            break
        kills += 1
        print(f"crash call {case.name}: killed {when} {name} #{nth} ({pattern})")
        case.check_after_kill(work)
        assert case.input_digests(work) == inputs, "an input changed"
        case.check_final(work, case.rerun(work))
        assert case.input_digests(work) == inputs, "an input changed"
    return kills


@pytest.fixture(scope="module")
def erasure_small(tmp_path_factory):
    return _ErasureData(tmp_path_factory.mktemp("erasure-small"), 300_001)


@pytest.fixture(scope="module")
def jsonl_small(tmp_path_factory):
    return _JsonlData(tmp_path_factory.mktemp("jsonl-small"), 3000, 600)


@pytest.fixture(scope="module")
def npy_small(tmp_path_factory):
    return _NpyData(tmp_path_factory.mktemp("npy-small"), 20_000, 4000)


@pytest.mark.slow
@pytest.mark.parametrize("when", ["before", "after"])
def test_kill_at_encode_rename(erasure_small, tmp_path, when):
    # Before the rename the set is complete under its temporary name only; after it the
    # final directory is complete and a rerun refuses to overwrite it (exit 2).
    assert _kill_at_calls(_Encode(erasure_small, "small"), tmp_path, "os.rename",
                          crashkit.PARTIAL, when, nths=[1]) == 1


@pytest.mark.slow
def test_kill_at_decode_link_and_unlink(erasure_small, tmp_path):
    # The output gets its name by a hard link, then the temporary name is removed: a
    # kill between leaves the complete file plus a stale temporary the rerun ignores.
    case = _Decode(erasure_small, "small")
    assert _kill_at_calls(case, tmp_path, "os.link", crashkit.PARTIAL, "after",
                          nths=[1]) == 1
    assert _kill_at_calls(case, tmp_path, "os.unlink", crashkit.PARTIAL, "before",
                          nths=[1]) == 1


def test_kill_at_repair_set_aside_and_publish(erasure_small, tmp_path):
    # Three shards rebuilt (0, 2, 6): shard 2 is corrupt and renamed NAME.damaged just
    # before its rebuilt copy is linked in. Kill right after that rename (the final name
    # is then missing) and right after the second link (one shard published, one not);
    # -m slow kills after every rename, link, unlink and fsync.
    case = _Repair(erasure_small, "small")
    assert _kill_at_calls(case, tmp_path, "os.rename", "shard", "after", nths=[1]) == 1
    assert _kill_at_calls(case, tmp_path, "os.link", crashkit.PARTIAL, "after",
                          nths=[2]) == 1


@pytest.mark.slow
@pytest.mark.parametrize("command", sorted(ERASURE_CASES))
@pytest.mark.parametrize("name", ["os.fsync", "os.rename", "os.link", "os.unlink"])
def test_kill_after_every_publishing_call(erasure_small, tmp_path, command, name):
    # Every fsync, rename, link and unlink the command makes, one kill after each.
    _kill_at_calls(ERASURE_CASES[command](erasure_small, "small"), tmp_path, name)


@pytest.mark.slow
def test_kill_at_batch_commit_points(jsonl_small, npy_small, tmp_path):
    # The fsyncs of a run: journal header (1), two directory fsyncs, then per chunk the
    # output's then the journal entry's. Kill after chunk 1's output is durable but
    # before its entry (4), and after the entry (5), for both formats.
    assert _kill_at_calls(_Jsonl(jsonl_small, "small"), tmp_path / "j", "os.fsync",
                          nths=[4, 5]) == 2
    assert _kill_at_calls(_Npy(npy_small, "small"), tmp_path / "n", "os.fsync",
                          nths=[4, 5]) == 2


@pytest.mark.slow
@pytest.mark.parametrize("fmt", ["jsonl", "npy"])
def test_kill_after_every_batch_fsync(jsonl_small, npy_small, tmp_path, fmt):
    case = _Jsonl(jsonl_small, "small") if fmt == "jsonl" else _Npy(npy_small, "small")
    assert _kill_at_calls(case, tmp_path, "os.fsync") >= 10


SIDECAR_CALLS = ("builtins.open", "os.open", "os.replace", "os.rename")


@pytest.mark.parametrize("name", [pytest.param(n, marks=() if n in ("builtins.open",
                                  "os.replace") else pytest.mark.slow)
                                  for n in SIDECAR_CALLS])
def test_kill_while_writing_the_npy_sidecar(npy_small, tmp_path, name):
    # The sidecar inverses.json is written once, after the last chunk: a kill right
    # after any call that creates or renames it must leave it complete or absent
    # (a run killed right after opening it used to leave it empty under its name).
    _kill_at_calls(_Npy(npy_small, "small"), tmp_path, name, "inverses.json")


@pytest.mark.parametrize("name", [pytest.param(n, marks=() if n in ("builtins.open",
                                  "os.replace") else pytest.mark.slow)
                                  for n in SIDECAR_CALLS])
def test_kill_while_the_journal_is_recreated(jsonl_small, tmp_path, name):
    # A run killed after chunk 1's output is durable but before its journal entry (the
    # 4th fsync) leaves output and a journal with no chunk; --resume then starts over
    # and recreates the journal. A kill right after any call that opens, creates or
    # renames the journal must leave a state a further --resume completes from (a kill
    # right after it was reopened for writing used to leave it empty, and the next
    # --resume refused).
    case = _Jsonl(jsonl_small, "small")
    for nth in range(1, 20):
        (tmp_path / f"{name}-{nth}").mkdir()
        work = case.prepare(tmp_path / f"{name}-{nth}")
        first = crashkit.kill_on_call(case.argv(work, False)[len(GFLA):], "os.fsync", 4)
        assert first.returncode == -9, first.stderr
        r = crashkit.kill_on_call(case.argv(work, True)[len(GFLA):], name, nth, "after",
                                  ".journal")
        if r.returncode != -9:  # no nth such call: the resume completed
            case.check_final(work, r)
            break
        print(f"crash call {case.name}: resume killed after {name} #{nth} (.journal)")
        case.check_after_kill(work)
        case.check_final(work, case.rerun(work))
