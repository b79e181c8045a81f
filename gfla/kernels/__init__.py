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
