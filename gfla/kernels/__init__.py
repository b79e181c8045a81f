"""Compiled kernels (numba). Internal: not part of the public API.

One file per arithmetic family:

* ``modular``   -- arithmetic modulo n < 2^64 (or n = 2^64), shared by GF(p) and Z/n;
* ``extension`` -- GF(2^k) by log/exp tables;
* ``binary``    -- bit-packed GF(2);
* ``dense``     -- elimination, charpoly and products on dense uint64 matrices, generic
  over a context array ``ctx`` that selects the modular or the extension arithmetic.

Importing this package compiles nothing: numba compiles each kernel on first call and
caches it on disk (``cache=True``).

The on-disk cache
-----------------
numba picks the directory itself when a kernel is decorated: ``NUMBA_CACHE_DIR`` when
that is set and writable, else ``__pycache__`` beside the kernel files, else a per-user
cache directory. Whatever it picks, this package keeps a digest of all kernel sources
there (``gfla-kernels.stamp``) and drops the cached kernels when the digest changes:
numba keys a cached kernel on its own file only, so a kernel that inlines a function
from another kernel file would otherwise keep stale machine code after that file
changes.

Cache faults never stop a computation, and each process prints at most one warning
line about them on stderr:

* no writable directory at all (numba would raise at decoration): the kernels compile
  in memory, on every run;
* ``NUMBA_CACHE_DIR`` set but not writable: numba caches elsewhere; the warning says
  where;
* an unreadable cache file (truncated, garbage): it counts as a miss, the kernel is
  recompiled and the cache entry rewritten;
* a cache write that fails: the kernel stays compiled in memory for this run.

These hooks wrap two numba methods (``Dispatcher.enable_caching`` and
``Cache.load_overload`` / ``save_overload``) for gfla's kernels only; every other numba
function in the process keeps numba's own behaviour.
"""

import hashlib as _hashlib
import os as _os
import sys as _sys

_HERE = _os.path.dirname(_os.path.abspath(__file__))
_STAMP = "gfla-kernels.stamp"
_state = {"digest": None, "refreshed": set(), "warned": False}


def _source_digest():
    """sha256 over the names and contents of all kernel source files."""
    if _state["digest"] is None:
        digest = _hashlib.sha256()
        for name in sorted(_os.listdir(_HERE)):
            if name.endswith(".py"):
                with open(_os.path.join(_HERE, name), "rb") as fh:
                    digest.update(name.encode() + b"\0" + fh.read())
        _state["digest"] = digest.hexdigest()
    return _state["digest"]


def _warn(text):
    """One warning line on stderr, the first time only."""
    if _state["warned"]:
        return
    _state["warned"] = True
    try:
        _sys.stderr.write(f"gfla: warning: {text}\n")
        _sys.stderr.flush()
    except (OSError, ValueError):
        pass


def _refresh(cache):
    """Drop numba cache files in ``cache`` compiled from an older version of any kernel
    file, and record the current digest there. Failures are not errors (numba then
    recompiles, or compiles in memory)."""
    stamp_value = _source_digest()
    stamp = _os.path.join(cache, _STAMP)
    try:
        with open(stamp) as fh:
            if fh.read().strip() == stamp_value:
                return
    except (OSError, UnicodeDecodeError):
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


def _is_kernel(py_func):
    return getattr(py_func, "__module__", "").startswith(__name__ + ".")


def _requested_dir():
    """The directory the user asked numba to cache in (``NUMBA_CACHE_DIR``), or None."""
    from numba.core import config
    return getattr(config, "CACHE_DIR", "") or None


def _inside(path, root):
    try:
        path, root = _os.path.realpath(path), _os.path.realpath(root)
        return _os.path.commonpath([path, root]) == root
    except ValueError:
        return False


def _install_hooks():
    """Wrap numba's cache entry points for gfla's kernels (see the module docstring).
    Returns False when this numba lacks them; the in-tree cache is then refreshed the
    old way and faults behave as numba makes them."""
    try:
        from numba.core import caching, dispatcher
        Dispatcher = dispatcher.Dispatcher
        Cache = caching.Cache
        NullCache = caching.NullCache
        enable, load, save = (Dispatcher.enable_caching, Cache.load_overload,
                              Cache.save_overload)
    except (ImportError, AttributeError):
        return False
    if getattr(enable, "_gfla_hook", False):
        return True

    def enable_caching(self):
        if not _is_kernel(getattr(self, "py_func", None)):
            return enable(self)
        requested = _requested_dir()
        try:
            enable(self)
        except RuntimeError:
            # numba found no writable cache directory ("no locator available")
            self._cache = NullCache()
            where = requested or _os.path.join(_HERE, "__pycache__")
            _warn(f"numba cache at {where} is not writable; kernels compile in memory "
                  f"on every run")
            return
        path = self._cache.cache_path
        if path and path not in _state["refreshed"]:
            _state["refreshed"].add(path)
            _refresh(path)
            if requested and not _inside(path, requested):
                _warn(f"numba cache at {requested} (NUMBA_CACHE_DIR) is not writable; "
                      f"kernels are cached at {path} instead")

    def load_overload(self, sig, target_context):
        if not _is_kernel(getattr(self, "_py_func", None)):
            return load(self, sig, target_context)
        try:
            return load(self, sig, target_context)
        except Exception as exc:  # an unreadable index or data file is a cache miss
            _warn(f"numba cache at {self.cache_path} holds an unreadable file "
                  f"({type(exc).__name__}); its kernels are recompiled and the cache "
                  f"rewritten")
            try:
                self.flush()  # an empty index in place of the unreadable one
            except Exception:
                pass
            return None

    def save_overload(self, sig, data):
        if not _is_kernel(getattr(self, "_py_func", None)):
            return save(self, sig, data)
        try:
            save(self, sig, data)
        except Exception as exc:  # the kernel is compiled; only the cache copy is lost
            _warn(f"numba cache at {self.cache_path} could not be written "
                  f"({type(exc).__name__}); kernels compile in memory on every run")

    enable_caching._gfla_hook = True
    Dispatcher.enable_caching = enable_caching
    Cache.load_overload = load_overload
    Cache.save_overload = save_overload
    return True


# numba is imported here because every kernel module imports it on its next line
# anyway (this package is only ever imported on the way to one of them).
if not _install_hooks():  # pragma: no cover - numba without the hooked methods
    _refresh(_os.path.join(_HERE, "__pycache__"))
