"""Duplicate ids in a JSON Lines input: the first record with an id runs, every later
record with the same id becomes an error line naming the first one's line.

The ids seen so far live in an open-addressing hash table of three arrays (hash, input
line, input byte offset): 24 bytes a slot, at most 70 % full, so about 35-70 bytes per
record, whatever the ids' length. Equal hashes are confirmed by reading both ids back
from the input file, so the answer is exact. A resumed run rebuilds the table by
reading the ids of the part of the input already done.
"""

import json

import numpy as np

from ...errors import InputError

__all__ = ["IdRegistry", "BYTES_PER_SLOT"]

BYTES_PER_SLOT = 24
_MAX_LOAD = 0.7


class IdRegistry:
    """The ids of the records of one input seen so far.

    Parameters
    ----------
    path : str
        The JSON Lines input (ids are read back from it to confirm equal hashes).
    capacity : int
        Initial number of slots (rounded up to a power of two); the table doubles as
        it fills.
    """

    def __init__(self, path, capacity=1 << 16):
        size = 1
        while size < capacity:
            size *= 2
        self.path = path
        self.count = 0
        self._alloc(size)
        self._fh = None

    def _alloc(self, size):
        self.keys = np.zeros(size, dtype=np.uint64)
        self.lines = np.zeros(size, dtype=np.int64)
        self.offsets = np.zeros(size, dtype=np.int64)

    def _grow(self, need):
        from ...kernels.batch import id_place
        size = self.keys.shape[0]
        while need > _MAX_LOAD * size:
            size *= 2
        if size == self.keys.shape[0]:
            return
        used = self.lines != 0
        keys, lines, offsets = self.keys[used], self.lines[used], self.offsets[used]
        self._alloc(size)
        id_place(self.keys, self.lines, self.offsets, keys, lines, offsets)

    def _id_at(self, offset):
        if self._fh is None:
            try:
                self._fh = open(self.path, "rb")
            except OSError as exc:
                raise InputError(f"{self.path}: cannot be read "
                                 f"({exc.strerror or exc})") from None
        return _key(_read_id(self._fh, int(offset)))

    def add(self, ids, base):
        """Record a chunk's ids (``ChunkResult.ids``; offsets relative to ``base``, the
        chunk's byte offset in the input), in input order.

        Returns
        -------
        list of (int, int, int)
            (output slot in the chunk, input line, input line of the first record with
            that id) for each record whose id was seen before, in input order.
        """
        if ids is None:
            return []
        from ...kernels.batch import id_insert, id_place
        h, line, rel, slots = ids
        offset = rel + base
        self._grow(self.count + h.shape[0])
        hits = np.empty(h.shape[0], dtype=np.int64)
        self.count += int(id_insert(self.keys, self.lines, self.offsets, h, line, offset,
                                    hits))
        found = []
        mask = self.keys.shape[0] - 1
        for i in np.flatnonzero(hits >= 0):
            mine = self._id_at(offset[i])
            first = None
            j = int(h[i]) & mask
            while self.lines[j] != 0:  # every slot of the probe run with this hash
                if (self.keys[j] == h[i] and (first is None or self.lines[j] < first)
                        and self._id_at(self.offsets[j]) == mine):
                    first = int(self.lines[j])
                j = (j + 1) & mask
            if first is None:  # a different id with the same hash
                id_place(self.keys, self.lines, self.offsets, h[i:i + 1], line[i:i + 1],
                         offset[i:i + 1])
                self.count += 1
            else:
                found.append((int(slots[i]), int(line[i]), first))
        return found

    def close(self):
        if self._fh is not None:
            self._fh.close()
            self._fh = None


def _key(rid):
    return (type(rid) is int, rid)


def _read_id(fh, offset):
    fh.seek(offset)
    return json.loads(fh.readline())["id"]
