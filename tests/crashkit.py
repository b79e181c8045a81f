"""Helpers for the kill -9 tests (tests/test_crash.py, tests/test_batch.py, the erasure
tests): start ``gfla`` in its own process group, SIGKILL it at a chosen moment or at a
chosen system call, and take fingerprints of files and directories.

Nothing here uses gfla's arithmetic: the checks compare bytes and SHA-256 digests
(hashlib, FIPS 180-4) of what a killed-then-rerun command leaves against a clean run.
"""

import hashlib
import os
import pathlib
import signal
import subprocess
import sys
import time

__all__ = ["PARTIAL", "gfla_command", "start", "kill", "run_and_kill", "timed_run", "kill_on_call",
           "sha256_file", "snapshot", "journal_chunks", "wait_chunks", "allocated_bytes"]

# The marker every gfla temporary name carries (gfla/jobs/erasure/shards.py).
PARTIAL = ".gfla-partial-"

# Runs the gfla command line in this process with one function wrapped (``os.fsync``,
# ``builtins.open``, ...): at its N-th call whose path arguments contain PATTERN, the
# process SIGKILLs itself, either just before the real call or just after it returns.
# argv: MODULE.NAME WHEN N PATTERN ARGS...
_ON_CALL = r"""
import importlib, os, signal, sys
name, when, nth, pattern = sys.argv[1], sys.argv[2], int(sys.argv[3]), sys.argv[4]
module_name, _, name = name.rpartition(".")
module = importlib.import_module(module_name or "os")
real = getattr(module, name)
seen = [0]
def wrapped(*args, **kwargs):
    hit = False
    if pattern == "*" or any(pattern in os.fspath(a) for a in args
                             if isinstance(a, (str, bytes, os.PathLike))):
        seen[0] += 1
        hit = seen[0] == nth
    if hit and when == "before":
        os.kill(os.getpid(), signal.SIGKILL)
    result = real(*args, **kwargs)
    if hit and when == "after":
        os.kill(os.getpid(), signal.SIGKILL)
    return result
setattr(module, name, wrapped)
from gfla.cli.main import main
sys.argv = ["gfla"] + sys.argv[5:]
main()
"""


def gfla_command():
    """The ``gfla`` console script of this interpreter's environment, as an argv prefix
    (``python -m gfla.cli.main`` would miss the job groups registered after main())."""
    script = os.path.join(os.path.dirname(sys.executable), "gfla")
    if os.path.exists(script):
        return [script]
    return [sys.executable, "-c", "from gfla.cli.main import main; main()"]


def start(argv, **kwargs):
    """Popen ``argv`` in a new session (so :func:`kill` reaches its worker processes
    too); output discarded unless given."""
    kwargs.setdefault("stdout", subprocess.DEVNULL)
    kwargs.setdefault("stderr", subprocess.DEVNULL)
    return subprocess.Popen([str(a) for a in argv], start_new_session=True, **kwargs)


def kill(p):
    """SIGKILL the process group of ``p`` (if it still runs) and reap it. True when
    the kill found the process still running."""
    alive = p.poll() is None
    if alive:
        try:
            os.killpg(p.pid, signal.SIGKILL)
        except ProcessLookupError:
            alive = False
    p.wait()
    return alive and p.returncode == -signal.SIGKILL


def _wait(p, predicate, limit, poll):
    """Poll until ``predicate()`` holds or ``p`` exits; seconds waited."""
    t0 = time.perf_counter()
    while not predicate() and p.poll() is None and time.perf_counter() - t0 < limit:
        time.sleep(poll)
    return time.perf_counter() - t0


def run_and_kill(argv, delay, after=None, poll=0.002, limit=600):
    """Start ``argv`` and SIGKILL it ``delay`` seconds after its start or, with
    ``after`` (a predicate on the files, e.g. "a temporary exists"), ``delay`` seconds
    after ``after()`` first holds; then reap it.

    Returns
    -------
    (killed, returncode, seconds)
        ``killed`` is False when the process had already exited by then; ``seconds``
        is the time from the start to the kill.
    """
    t0 = time.perf_counter()
    p = start(argv)
    if after is not None:
        _wait(p, after, limit, poll)
    t1 = time.perf_counter()
    _wait(p, lambda: time.perf_counter() - t1 >= delay, limit, min(poll, delay or poll))
    killed = kill(p)
    return killed, p.returncode, time.perf_counter() - t0


def timed_run(argv, marker, poll=0.002, limit=900):
    """Run ``argv`` to its end, timing when ``marker()`` first holds.

    Returns
    -------
    (returncode, seconds, seconds to the marker, stderr text)
    """
    t0 = time.perf_counter()
    p = start(argv, stderr=subprocess.PIPE)
    to_marker = _wait(p, marker, limit, poll)
    _, err = p.communicate(timeout=limit)
    return p.returncode, time.perf_counter() - t0, to_marker, err.decode(errors="replace")


def kill_on_call(args, name, nth=1, when="after", pattern="*", timeout=300):
    """Run ``gfla ARGS`` and SIGKILL it at the ``nth`` call of ``name`` (``"os.link"``,
    ``"builtins.open"``; a bare name is in ``os``) whose path arguments contain
    ``pattern`` (``"*"``: any call, file descriptors included), ``when`` "before" or
    "after" the real call. Returns the CompletedProcess (returncode -9 when the kill
    happened, else the command's own exit code: there was no such call)."""
    argv = [sys.executable, "-c", _ON_CALL, name, when, str(nth), pattern,
            *map(str, args)]
    return subprocess.run(argv, capture_output=True, text=True, timeout=timeout)


def sha256_file(path):
    digest = hashlib.sha256()
    with open(path, "rb") as fh:
        for block in iter(lambda: fh.read(1 << 20), b""):
            digest.update(block)
    return digest.hexdigest()


def snapshot(root):
    """Every file under root with its SHA-256 (to show that nothing was written)."""
    out = {}
    for dirpath, _, files in os.walk(root):
        for name in files:
            path = os.path.join(dirpath, name)
            out[os.path.relpath(path, root)] = sha256_file(path)
    return out


def allocated_bytes(path):
    """Bytes the file system holds for ``path`` (a sparse file's written part)."""
    return os.stat(path).st_blocks * 512


def journal_chunks(path):
    """Committed chunks in a batch journal (a 'done' entry counts 2; -1: no journal)."""
    try:
        text = pathlib.Path(path).read_bytes()
    except FileNotFoundError:
        return -1
    return text.count(b'"kind":"chunk"') + 2 * text.count(b'"kind":"done"')


def wait_chunks(p, journal, count, limit=120):
    """Poll until the journal holds ``count`` chunks (or the run ends)."""
    t0 = time.perf_counter()
    while journal_chunks(journal) < count and p.poll() is None:
        if time.perf_counter() - t0 > limit:
            break
        time.sleep(0.002)
    return time.perf_counter() - t0
