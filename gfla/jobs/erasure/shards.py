"""Shard files: encode a file, verify a shard set, decode the original, repair shards.

A file of L bytes becomes k data shards of ``shard_size = ceil(L / k)`` bytes (rounded up
to a whole symbol; data shard d is bytes ``d * shard_size ..`` of the file, zero padded)
and m parity shards, all in one directory with a ``manifest.json`` (see
:mod:`.manifest`). Work streams in chunks: each pass reads ``chunk`` bytes of every shard
involved into fixed buffers, so memory stays at the buffers (about ``(k + m) * chunk``,
64 MiB at most by default) whatever the file size.

Safety rules every operation follows:

* nothing is ever written over an existing file: outputs go to a hidden temporary name
  (``.NAME.gfla-partial-*``) in the destination directory, are flushed to disk
  (``fsync``), checked, and only then published under their final name (a new link, which
  fails rather than replace anything; a whole new shard directory is renamed into place
  in one step);
* an error or an interrupt removes the temporary files, so no file ever appears under its
  final name unless it is complete and verified (a process killed outright can leave a
  hidden ``.gfla-partial-`` entry behind, never a final name);
* shard files are opened without following symbolic links, and a manifest naming a file
  outside its directory is refused (see :func:`.manifest.check_shard_name`).

Progress: every function takes ``progress(phase, done, total)``, called with byte counts
as work proceeds (``None`` for silence).
"""

import errno
import hashlib
import os
import shutil
import stat
import tempfile

import numpy as np

from ...errors import InputError, MathError
from .codes import TooFewShardsError
from .manifest import (MANIFEST_NAME, build_manifest, load_manifest, manifest_text,
                       shard_file_name, shard_size_for)
from .regions import RegionMatrix, words_for

__all__ = ["DEFAULT_CHUNK", "BUFFER_BUDGET", "VerificationError", "encode_file",
           "verify_shards", "decode_file", "repair_shards", "chunk_bytes"]

DEFAULT_CHUNK = 1 << 20     # bytes per shard per pass
BUFFER_BUDGET = 64 << 20    # the default chunk shrinks so that all buffers fit in this
MIN_CHUNK = 64 << 10
_HASH_BUFFER = 1 << 20
_PARTIAL = ".gfla-partial-"
_READ_FLAGS = os.O_RDONLY | getattr(os, "O_NOFOLLOW", 0) | getattr(os, "O_NONBLOCK", 0) \
    | getattr(os, "O_CLOEXEC", 0)


class VerificationError(MathError):
    """Rebuilt or written data does not match the checksum the manifest records (or
    changed while it was read). Nothing was published."""

    def __init__(self, message, what=None, expected=None, got=None):
        super().__init__(message)
        self.what = what
        self.expected = expected
        self.got = got

    def certificate(self):
        cert = {}
        if self.what is not None:
            cert["checked"] = self.what
        if self.expected is not None:
            cert["expected_sha256"] = self.expected
        if self.got is not None:
            cert["got_sha256"] = self.got
        return cert


# --------------------------------------------------------------------------- helpers

def chunk_bytes(chunk_size, shard_size, rows):
    """Bytes per shard per pass: a multiple of 8, at most the (rounded) shard size."""
    if chunk_size is None:
        chunk = min(DEFAULT_CHUNK, max(MIN_CHUNK, BUFFER_BUDGET // max(1, rows)))
    else:
        if isinstance(chunk_size, bool) or not isinstance(chunk_size, int) or chunk_size < 1:
            raise InputError(f"chunk size must be a positive number of bytes, got "
                             f"{chunk_size!r}")
        chunk = chunk_size
    chunk = -(-chunk // 8) * 8
    chunk = max(8, min(chunk, -(-shard_size // 8) * 8))
    from ...limits import Workspace
    Workspace(f"buffers of {chunk} bytes for each of {rows} shards").add(
        rows, (chunk,), 1, "shard buffer").check()
    return chunk


def _report(progress, phase, done, total):
    if progress is not None:
        progress(phase, done, total)


def _umask():
    mask = os.umask(0)
    os.umask(mask)
    return mask


def _fsync_dir(path):
    try:
        fd = os.open(path, os.O_RDONLY | getattr(os, "O_DIRECTORY", 0))
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def _ensure_file_limit(needed):
    try:
        import resource
    except ImportError:  # not on POSIX: nothing to adjust
        return
    soft, hard = resource.getrlimit(resource.RLIMIT_NOFILE)
    if soft == resource.RLIM_INFINITY or soft >= needed:
        return
    if hard != resource.RLIM_INFINITY and hard < needed:
        raise InputError(f"{needed} files must be open at once but the open-file limit is "
                         f"{hard}")
    resource.setrlimit(resource.RLIMIT_NOFILE, (needed, hard))


def _read_exact(fd, view, offset):
    """Fill ``view`` from ``offset``; returns the number of bytes read (short at EOF)."""
    got = 0
    total = len(view)
    while got < total:
        n = os.preadv(fd, [view[got:]], offset + got)
        if n == 0:
            break
        got += n
    return got


def _write_all(fd, view):
    done = 0
    while done < len(view):
        done += os.write(fd, view[done:])


def _pwrite_all(fd, view, offset):
    done = 0
    while done < len(view):
        done += os.pwrite(fd, view[done:], offset + done)


def _hash_fd(fd, progress=None, phase=None, base=0, total=0):
    """SHA-256 and length of a whole open file, read from offset 0."""
    digest = hashlib.sha256()
    buf = bytearray(_HASH_BUFFER)
    view = memoryview(buf)
    offset = 0
    while True:
        n = os.preadv(fd, [view], offset)
        if n == 0:
            break
        digest.update(view[:n])
        offset += n
        _report(progress, phase, base + offset, total)
    return digest.hexdigest(), offset


def _open_shard(path):
    """Open a shard for reading without following links: fd, or None when absent."""
    try:
        return os.open(path, _READ_FLAGS)
    except FileNotFoundError:
        return None
    except OSError as exc:
        if exc.errno == errno.ELOOP:
            raise InputError(f"{path}: shard file is a symbolic link; refused") from None
        raise


def _publish(temporary, final):
    """Give the finished file ``temporary`` its final name, never replacing a file."""
    try:
        os.link(temporary, final)
    except FileExistsError:
        raise InputError(f"{final}: already exists; not overwritten") from None
    except OSError:
        # File systems without hard links: check, then rename (small race accepted).
        if os.path.lexists(final):
            raise InputError(f"{final}: already exists; not overwritten") from None
        os.rename(temporary, final)
        return
    os.unlink(temporary)


def _remove_quietly(path):
    try:
        os.unlink(path)
    except OSError:
        pass


def _check_output_path(path, what):
    path = os.fspath(path)
    if os.path.lexists(path):
        raise InputError(f"{path}: already exists; choose a new name ({what} never "
                         f"overwrites a file)")
    parent = os.path.dirname(os.path.abspath(path))
    if not os.path.isdir(parent):
        raise InputError(f"{parent}: directory does not exist")
    return path, parent


# --------------------------------------------------------------------------- encode

def encode_file(input_path, out_dir, code, chunk_size=None, progress=None):
    """Encode a file into k + m shard files and a manifest in a new directory.

    Parameters
    ----------
    input_path : path
        A regular file (any size, 0 bytes included).
    out_dir : path
        Destination directory: must not exist yet, or be empty. It appears (renamed
        into place in one step) only once every shard and the manifest are written,
        flushed and read back against their checksums.
    code : ErasureCode
        Over GF(2^8) or GF(2^16).
    chunk_size : int, optional
        Bytes per shard per pass (rounded up to a multiple of 8). Default: 1 MiB, less
        when k + m is large, so buffers stay under 64 MiB.
    progress : callable(phase, done, total), optional

    Returns
    -------
    dict
        ``{"directory": out_dir, "manifest": <the manifest dict>}``.

    Raises
    ------
    InputError
        The input is missing or not a regular file, the destination exists and is not
        an empty directory, or the input changed while it was encoded.
    """
    input_path = os.fspath(input_path)
    out_dir = os.fspath(out_dir)
    try:
        st = os.stat(input_path)
    except FileNotFoundError:
        raise InputError(f"{input_path}: no such file") from None
    if stat.S_ISDIR(st.st_mode):
        raise InputError(f"{input_path}: is a directory, not a file")
    if not stat.S_ISREG(st.st_mode):
        raise InputError(f"{input_path}: not a regular file")
    out_abs = os.path.abspath(out_dir)
    parent = os.path.dirname(out_abs)
    if os.path.islink(out_dir):
        raise InputError(f"{out_dir}: is a symbolic link; give a real directory")
    if os.path.lexists(out_dir):
        if not os.path.isdir(out_dir):
            raise InputError(f"{out_dir}: exists and is not a directory")
        if os.listdir(out_dir):
            raise InputError(f"{out_dir}: exists and is not empty; encode into a new or "
                             f"empty directory")
    elif not os.path.isdir(parent):
        raise InputError(f"{parent}: directory does not exist")
    regions = RegionMatrix(code.field, code.parity_matrix)
    _ensure_file_limit(code.n + 16)

    length = st.st_size
    k, n = code.k, code.n
    shard_size = shard_size_for(length, k, code.symbol_bytes)
    chunk = chunk_bytes(chunk_size, shard_size, k + regions.padded_rows)
    words = words_for(chunk)
    total_encode = k * shard_size

    temporary = tempfile.mkdtemp(prefix=f".{os.path.basename(out_abs)}{_PARTIAL}",
                                 dir=parent)
    fds = []
    try:
        with open(input_path, "rb", buffering=0) as source:
            fd_in = source.fileno()
            before = os.fstat(fd_in)
            if before.st_size != length:
                raise InputError(f"{input_path}: changed while it was being encoded")
            _report(progress, "hashing input", 0, length)
            original_sha256, seen = _hash_fd(fd_in, progress, "hashing input", 0, length)
            if seen != length:
                raise InputError(f"{input_path}: changed while it was being encoded")

            names = [shard_file_name(i, n) for i in range(n)]
            for name in names:
                fds.append(os.open(os.path.join(temporary, name),
                                   os.O_WRONLY | os.O_CREAT | os.O_EXCL
                                   | getattr(os, "O_CLOEXEC", 0), 0o666))
            digests = [hashlib.sha256() for _ in range(n)]
            src = np.zeros((k, words), dtype=np.uint64)
            dst = regions.output_buffer(words)
            src_bytes = src.view(np.uint8)
            dst_bytes = dst.view(np.uint8)
            data_rows = np.arange(k, dtype=np.int64)
            _report(progress, "encoding", 0, total_encode)
            for start in range(0, shard_size, chunk):
                valid = min(chunk, shard_size - start)
                for d in range(k):
                    row = src_bytes[d]
                    offset = d * shard_size + start
                    want = max(0, min(valid, length - offset))
                    got = _read_exact(fd_in, memoryview(row[:want]), offset) if want else 0
                    if got != want:
                        raise InputError(f"{input_path}: changed while it was being encoded")
                    row[want:] = 0
                if code.m:
                    regions.apply(src, data_rows, dst)
                for i in range(n):
                    piece = memoryview(src_bytes[i] if i < k else dst_bytes[i - k])[:valid]
                    _write_all(fds[i], piece)
                    digests[i].update(piece)
                _report(progress, "encoding", k * (start + valid), total_encode)
            after = os.fstat(fd_in)
            if (after.st_size, after.st_mtime_ns) != (before.st_size, before.st_mtime_ns):
                raise InputError(f"{input_path}: changed while it was being encoded")
        for fd in fds:
            os.fsync(fd)
        while fds:
            os.close(fds.pop())

        shard_hashes = [d.hexdigest() for d in digests]
        body = build_manifest(code, os.path.basename(input_path), length, original_sha256,
                              shard_size, shard_hashes)
        fd = os.open(os.path.join(temporary, MANIFEST_NAME),
                     os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o666)
        try:
            _write_all(fd, memoryview(manifest_text(body).encode("ascii")))
            os.fsync(fd)
        finally:
            os.close(fd)

        # Read everything back before the directory gets its final name.
        total_check = n * shard_size
        _report(progress, "checking shards", 0, total_check)
        for i, name in enumerate(names):
            fd = os.open(os.path.join(temporary, name), _READ_FLAGS)
            try:
                got, size = _hash_fd(fd, progress, "checking shards", i * shard_size,
                                     total_check)
            finally:
                os.close(fd)
            if got != shard_hashes[i] or size != shard_size:
                raise VerificationError(f"shard {i} read back from disk differs from what "
                                        f"was written; nothing published",
                                        what=f"shard {i}", expected=shard_hashes[i], got=got)
        check = load_manifest(temporary)
        if check.original_sha256 != original_sha256:
            raise AssertionError("manifest did not round-trip")
        os.chmod(temporary, 0o777 & ~_umask())
        _fsync_dir(temporary)
        try:
            os.rename(temporary, out_dir)
        except OSError as exc:
            raise InputError(f"{out_dir}: could not be created ({exc.strerror}); nothing "
                             f"written") from None
        _fsync_dir(parent)
    except BaseException:
        for fd in fds:
            try:
                os.close(fd)
            except OSError:
                pass
        shutil.rmtree(temporary, ignore_errors=True)
        raise
    return {"directory": out_dir, "manifest": body}


# --------------------------------------------------------------------------- verify

def _check_shard(path, shard_size, expected, progress, base, total):
    fd = _open_shard(path)
    if fd is None:
        return "missing", "no such file"
    try:
        st = os.fstat(fd)
        if not stat.S_ISREG(st.st_mode):
            return "corrupt", "not a regular file"
        if st.st_size < shard_size:
            return "corrupt", f"truncated: {st.st_size} of {shard_size} bytes"
        if st.st_size > shard_size:
            return "corrupt", f"too long: {st.st_size} bytes, expected {shard_size}"
        got, size = _hash_fd(fd, progress, "verifying shards", base, total)
    finally:
        os.close(fd)
    if size != shard_size:
        return "corrupt", f"changed while read: {size} of {shard_size} bytes"
    if got != expected:
        return "corrupt", "checksum mismatch (SHA-256 differs from the manifest)"
    return "intact", "checksum matches"


def _survey(manifest, progress):
    total = len(manifest.shards) * manifest.shard_size
    _report(progress, "verifying shards", 0, total)
    rows = []
    for entry in manifest.shards:
        status, detail = _check_shard(manifest.path(entry), manifest.shard_size,
                                      entry.sha256, progress, entry.index * manifest.shard_size,
                                      total)
        rows.append({"index": entry.index, "role": entry.role, "file": entry.file,
                     "status": status, "detail": detail})
    return rows


def _summary(manifest, rows):
    code = manifest.code
    intact = [r["index"] for r in rows if r["status"] == "intact"]
    missing = [r["index"] for r in rows if r["status"] == "missing"]
    corrupt = [r["index"] for r in rows if r["status"] == "corrupt"]
    return {"directory": manifest.directory, "code": code.describe(),
            "original": {"name": manifest.original_name, "length": manifest.original_length,
                         "sha256": manifest.original_sha256},
            "shard_size": manifest.shard_size, "shards": rows, "intact": intact,
            "missing": missing, "corrupt": corrupt,
            "recoverable": len(intact) >= code.k}


def verify_shards(directory, progress=None):
    """Which shards are present and intact, missing, or corrupt.

    A shard is corrupt when it is not a regular file, has the wrong size (truncated or
    too long) or its SHA-256 differs from the manifest's.

    Returns
    -------
    dict
        ``shards`` (one row per shard: index, role, file, status, detail), the lists
        ``intact``, ``missing``, ``corrupt``, and ``recoverable`` (at least k intact).

    Raises
    ------
    InputError
        A missing directory or a bad manifest (see :func:`.manifest.load_manifest`).
    """
    manifest = load_manifest(directory)
    return _summary(manifest, _survey(manifest, progress))


def _too_few(manifest, summary, action):
    code = manifest.code
    intact = len(summary["intact"])
    parts = []
    if summary["missing"]:
        parts.append("missing " + ", ".join(map(str, summary["missing"])))
    if summary["corrupt"]:
        parts.append("corrupt " + ", ".join(map(str, summary["corrupt"])))
    lost = sorted(summary["missing"] + summary["corrupt"])
    return TooFewShardsError(
        f"cannot {action}: {intact} of {code.n} shards intact, {code.k} needed, "
        f"{code.k - intact} more missing ({'; '.join(parts)})",
        lost=lost, needed=code.k, intact=intact, missing=summary["missing"],
        corrupt=summary["corrupt"])


def _read_plan(manifest, plan):
    fds = []
    try:
        for index in plan.read:
            path = manifest.path(manifest.shards[index])
            fd = _open_shard(path)
            if fd is None:
                raise VerificationError(f"{path}: shard disappeared while in use",
                                        what=f"shard {index}")
            fds.append(fd)
    except BaseException:
        for fd in fds:
            os.close(fd)
        raise
    return fds


def _fill(fds, plan, src_bytes, start, valid):
    for r, fd in enumerate(fds):
        row = src_bytes[r]
        if _read_exact(fd, memoryview(row[:valid]), start) != valid:
            index = plan.read[r]
            raise VerificationError(f"shard {index} changed while it was read",
                                    what=f"shard {index}")
        row[valid:] = 0


# --------------------------------------------------------------------------- decode

def decode_file(directory, out_path, chunk_size=None, progress=None):
    """Rebuild the original file from any k intact shards.

    Missing and corrupt shards are treated as lost. The output is written to a
    temporary file beside ``out_path``, every rebuilt data shard is checked against its
    recorded SHA-256, the whole file against the original's SHA-256, and only then it
    gets its final name.

    Returns
    -------
    dict
        The verification summary plus ``output``, ``read`` (shards used),
        ``rebuilt`` (data shards recomputed) and ``sha256``.

    Raises
    ------
    InputError
        Bad directory, manifest, or output path (it must not exist).
    TooFewShardsError
        Fewer than k intact shards (names the missing and corrupt ones).
    VerificationError
        The rebuilt data does not match the recorded checksums.
    """
    manifest = load_manifest(directory)
    out_path, parent = _check_output_path(out_path, "decode")
    summary = _summary(manifest, _survey(manifest, progress))
    code = manifest.code
    if not summary["recoverable"]:
        raise _too_few(manifest, summary, f"rebuild {manifest.original_name}")
    lost = sorted(summary["missing"] + summary["corrupt"])
    plan = code.decoding_plan(lost, targets=[i for i in lost if i < code.k])
    regions = RegionMatrix(code.field, plan.matrix)
    k = code.k
    size, length = manifest.shard_size, manifest.original_length
    chunk = chunk_bytes(chunk_size, size, k + regions.padded_rows)
    words = words_for(chunk)
    position = {index: r for r, index in enumerate(plan.read)}
    target_row = {index: r for r, index in enumerate(plan.targets)}
    digests = {index: hashlib.sha256() for index in plan.targets}

    fd_out, temporary = tempfile.mkstemp(
        prefix=f".{os.path.basename(out_path)}{_PARTIAL}", dir=parent)
    fds = []
    try:
        os.ftruncate(fd_out, length)
        fds = _read_plan(manifest, plan)
        src = np.zeros((k, words), dtype=np.uint64)
        dst = regions.output_buffer(words)
        src_bytes, dst_bytes = src.view(np.uint8), dst.view(np.uint8)
        read_rows = np.arange(k, dtype=np.int64)
        total = k * size
        _report(progress, "decoding", 0, total)
        for start in range(0, size, chunk):
            valid = min(chunk, size - start)
            _fill(fds, plan, src_bytes, start, valid)
            if plan.targets:
                regions.apply(src, read_rows, dst)
            for d in range(k):
                if d in position:
                    piece = src_bytes[position[d]][:valid]
                else:
                    piece = dst_bytes[target_row[d]][:valid]
                    digests[d].update(memoryview(piece))
                offset = d * size + start
                keep = max(0, min(valid, length - offset))
                if keep:
                    _pwrite_all(fd_out, memoryview(piece[:keep]), offset)
            _report(progress, "decoding", k * (start + valid), total)
        for index, digest in digests.items():
            expected = manifest.shards[index].sha256
            if digest.hexdigest() != expected:
                raise VerificationError(
                    f"rebuilt data shard {index} does not match its recorded SHA-256; "
                    f"nothing written", what=f"shard {index}", expected=expected,
                    got=digest.hexdigest())
        os.fsync(fd_out)
        _report(progress, "checking output", 0, length)
        got, seen = _hash_fd(fd_out, progress, "checking output", 0, length)
        if got != manifest.original_sha256 or seen != length:
            raise VerificationError(
                f"rebuilt file does not match the original's recorded SHA-256; nothing "
                f"written", what="original", expected=manifest.original_sha256, got=got)
        os.fchmod(fd_out, 0o666 & ~_umask())
        os.close(fd_out)
        fd_out = None
        _publish(temporary, out_path)
        _fsync_dir(parent)
    except BaseException:
        if fd_out is not None:
            os.close(fd_out)
        _remove_quietly(temporary)
        raise
    finally:
        for fd in fds:
            os.close(fd)
    result = dict(summary)
    result.update({"output": out_path, "read": list(plan.read),
                   "rebuilt": list(plan.targets), "sha256": got,
                   "decoding_matrix": [[int(v) for v in row] for row in plan.matrix]})
    return result


# --------------------------------------------------------------------------- repair

def _set_aside_name(path):
    candidate = path + ".damaged"
    number = 1
    while os.path.lexists(candidate):
        candidate = f"{path}.damaged.{number}"
        number += 1
    return candidate


def repair_shards(directory, chunk_size=None, progress=None):
    """Rebuild missing and corrupt shards in place.

    Each rebuilt shard is written to a temporary file in the directory, checked against
    the SHA-256 the manifest records (computed while writing, then read back from disk)
    and only then published. A corrupt shard is not overwritten: it is renamed to
    ``NAME.damaged`` (``NAME.damaged.1``, ... if taken) and kept for inspection.

    Returns
    -------
    dict
        The verification summary before repair plus ``repaired`` (shard indices),
        ``read`` (shards used) and ``set_aside`` (``{index: file name}``).

    Raises
    ------
    InputError, TooFewShardsError, VerificationError
        As for :func:`decode_file`.
    """
    manifest = load_manifest(directory)
    summary = _summary(manifest, _survey(manifest, progress))
    code = manifest.code
    lost = sorted(summary["missing"] + summary["corrupt"])
    result = dict(summary)
    result.update({"repaired": [], "read": [], "set_aside": {}})
    if not lost:
        return result
    if not summary["recoverable"]:
        raise _too_few(manifest, summary, "repair")
    plan = code.decoding_plan(lost)
    regions = RegionMatrix(code.field, plan.matrix)
    size = manifest.shard_size
    chunk = chunk_bytes(chunk_size, size, code.k + regions.padded_rows)
    words = words_for(chunk)
    directory = manifest.directory
    temporaries, out_fds, fds = [], [], []
    try:
        for index in plan.targets:
            fd, path = tempfile.mkstemp(
                prefix=f".{manifest.shards[index].file}{_PARTIAL}", dir=directory)
            out_fds.append(fd)
            temporaries.append(path)
        fds = _read_plan(manifest, plan)
        digests = [hashlib.sha256() for _ in plan.targets]
        src = np.zeros((code.k, words), dtype=np.uint64)
        dst = regions.output_buffer(words)
        src_bytes, dst_bytes = src.view(np.uint8), dst.view(np.uint8)
        read_rows = np.arange(code.k, dtype=np.int64)
        total = code.k * size
        _report(progress, "rebuilding", 0, total)
        for start in range(0, size, chunk):
            valid = min(chunk, size - start)
            _fill(fds, plan, src_bytes, start, valid)
            regions.apply(src, read_rows, dst)
            for r in range(len(plan.targets)):
                piece = memoryview(dst_bytes[r][:valid])
                _write_all(out_fds[r], piece)
                digests[r].update(piece)
            _report(progress, "rebuilding", code.k * (start + valid), total)
        for r, index in enumerate(plan.targets):
            expected = manifest.shards[index].sha256
            os.fsync(out_fds[r])
            got, seen = _hash_fd(out_fds[r])
            if digests[r].hexdigest() != expected or got != expected or seen != size:
                raise VerificationError(
                    f"rebuilt shard {index} does not match its recorded SHA-256; nothing "
                    f"replaced", what=f"shard {index}", expected=expected, got=got)
            os.fchmod(out_fds[r], 0o666 & ~_umask())
        while out_fds:
            os.close(out_fds.pop())
        set_aside = {}
        for r, index in enumerate(plan.targets):
            final = manifest.path(manifest.shards[index])
            if os.path.lexists(final):
                aside = _set_aside_name(final)
                os.rename(final, aside)
                set_aside[index] = os.path.basename(aside)
            _publish(temporaries[r], final)
        _fsync_dir(directory)
    except BaseException:
        for fd in out_fds:
            os.close(fd)
        for path in temporaries:
            _remove_quietly(path)
        raise
    finally:
        for fd in fds:
            os.close(fd)
    result.update({"repaired": list(plan.targets), "read": list(plan.read),
                   "set_aside": set_aside})
    return result
