"""Compiled kernels (numba). Internal: not part of the public API.

One file per arithmetic family:

* ``modular``   -- arithmetic modulo n < 2^64 (or n = 2^64), shared by GF(p) and Z/n;
* ``extension`` -- GF(2^k) by log/exp tables;
* ``binary``    -- bit-packed GF(2);
* ``dense``     -- elimination, charpoly and products on dense uint64 matrices, generic
  over a context array ``ctx`` that selects the modular or the extension arithmetic.

Importing this package compiles nothing: numba compiles each kernel on first call and
caches it on disk (``cache=True``).
"""

import hashlib as _hashlib
import os as _os


def _refresh_cache():
    """Drop numba cache files compiled from an older version of any kernel file.

    numba keys a cached kernel on its own file's timestamp only, so a kernel that inlines
    a function from another kernel file would keep stale machine code after that other
    file changes. A digest of all kernel sources, stored beside the cache, detects it.
    Failure to read or write the cache directory is not an error: numba then compiles
    in memory.
    """
    here = _os.path.dirname(__file__)
    digest = _hashlib.sha256()
    for name in sorted(_os.listdir(here)):
        if name.endswith(".py"):
            with open(_os.path.join(here, name), "rb") as fh:
                digest.update(name.encode() + b"\0" + fh.read())
    stamp_value = digest.hexdigest()
    cache = _os.path.join(here, "__pycache__")
    stamp = _os.path.join(cache, "gfla-kernels.stamp")
    try:
        with open(stamp) as fh:
            if fh.read().strip() == stamp_value:
                return
    except OSError:
        pass
    try:
        for name in _os.listdir(cache):
            if name.endswith((".nbi", ".nbc")):
                _os.remove(_os.path.join(cache, name))
    except OSError:
        pass
    try:
        _os.makedirs(cache, exist_ok=True)
        with open(stamp, "w") as fh:
            fh.write(stamp_value + "\n")
    except OSError:
        pass


_refresh_cache()
