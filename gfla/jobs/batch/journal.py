"""The journal of a batch run: what has been written durably, so a run can resume.

The journal is a text file beside the output (``OUT.journal``), one entry per line:
``<JSON object>\\t<CRC-32 of the JSON, 8 hex digits>``. The first entry is the header
(which input, which output, which format); then one ``chunk`` entry per committed
chunk, holding the input position after it, the output sizes after it and the running
counts; a ``done`` entry closes a finished run.

A chunk is committed in this order: its output is appended and fsync'd, then its journal
entry is appended and fsync'd. So every entry describes output that is on disk, and
output after the last entry (a chunk cut short by a crash) is cut off on resume. A torn
last entry fails its CRC and is dropped; the chunk it described is simply run again.

References
----------
.. [1] C. Mohan, D. Haderle, B. Lindsay, H. Pirahesh, P. Schwarz, "ARIES: a transaction
   recovery method supporting fine-granularity locking and partial rollbacks using
   write-ahead logging", ACM TODS 17(1), 1992 (commit records written after the data
   they describe, recovery by replaying the log up to the last complete record).
"""

import json
import os
import tempfile
import zlib

from ...errors import InputError

__all__ = ["Journal", "JOURNAL_FORMAT", "fsync_directory", "write_whole"]

JOURNAL_FORMAT = "gfla-batch-journal-1"


def _encode(entry):
    text = json.dumps(entry, sort_keys=True, separators=(",", ":"))
    return f"{text}\t{zlib.crc32(text.encode('utf-8')):08x}\n".encode("utf-8")


def _decode(line):
    try:
        text, crc = line.decode("utf-8").rstrip("\n").rsplit("\t", 1)
        if int(crc, 16) != zlib.crc32(text.encode("utf-8")):
            return None
        entry = json.loads(text)
    except (UnicodeDecodeError, ValueError):
        return None
    return entry if isinstance(entry, dict) else None


def fsync_directory(path):
    """fsync the directory holding ``path`` so a newly created file's name is durable
    (not possible on every platform; failures are ignored)."""
    directory = os.path.dirname(os.path.abspath(path))
    try:
        fd = os.open(directory, os.O_RDONLY)
    except OSError:
        return
    try:
        os.fsync(fd)
    except OSError:
        pass
    finally:
        os.close(fd)


def write_whole(path, data):
    """Write ``data`` (bytes) to ``path`` in one step: into a hidden temporary beside it
    (``.NAME.gfla-partial-*``), fsync'd, then renamed over ``path``. A crash leaves the
    old file or the new one under the name, never a partial one (at worst a stale
    temporary, which nothing reads)."""
    path = os.fspath(path)
    directory = os.path.dirname(os.path.abspath(path))
    fd, temporary = tempfile.mkstemp(prefix=f".{os.path.basename(path)}.gfla-partial-",
                                     dir=directory)
    try:
        with os.fdopen(fd, "wb") as fh:
            mask = os.umask(0)
            os.umask(mask)
            os.fchmod(fh.fileno(), 0o666 & ~mask)  # the mode open() would have given
            fh.write(data)
            fh.flush()
            os.fsync(fh.fileno())
        os.replace(temporary, path)
    except BaseException:
        try:
            os.unlink(temporary)
        except OSError:
            pass
        raise
    fsync_directory(path)


class Journal:
    """Append-only journal with a CRC per entry.

    Parameters
    ----------
    path : str
        The journal file.
    """

    def __init__(self, path):
        self.path = os.fspath(path)
        self._fh = None

    def exists(self):
        return os.path.exists(self.path)

    def read(self):
        """The valid entries, in order, and the byte length they occupy (a torn or
        corrupt entry and everything after it are not part of the journal)."""
        entries = []
        valid = 0
        try:
            with open(self.path, "rb") as fh:
                for line in fh:
                    if not line.endswith(b"\n"):
                        break
                    entry = _decode(line)
                    if entry is None:
                        break
                    entries.append(entry)
                    valid += len(line)
        except FileNotFoundError:
            return [], 0
        except OSError as exc:
            raise InputError(f"{self.path}: cannot be read ({exc.strerror or exc})") from None
        return entries, valid

    def create(self, header):
        """Start a new journal with its header entry, replacing any old one in one step
        (a crash leaves the old journal or the new header, never an empty journal
        beside outputs that a resume would then refuse)."""
        self.close()
        try:
            write_whole(self.path, _encode(header))
            self._fh = open(self.path, "r+b")
        except OSError as exc:
            raise InputError(f"{self.path}: cannot be written ({exc.strerror or exc})") from None
        self._fh.seek(0, os.SEEK_END)

    def reopen(self, valid_bytes):
        """Continue an existing journal after its last valid entry."""
        self.close()
        try:
            self._fh = open(self.path, "r+b")
        except OSError as exc:
            raise InputError(f"{self.path}: cannot be written ({exc.strerror or exc})") from None
        self._fh.truncate(valid_bytes)
        self._fh.seek(valid_bytes)

    def append(self, entry):
        """Append one entry and make it durable."""
        self._fh.write(_encode(entry))
        self._fh.flush()
        os.fsync(self._fh.fileno())

    def close(self):
        if self._fh is not None:
            self._fh.close()
            self._fh = None
