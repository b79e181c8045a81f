"""Uniformly random matrices, and uniformly random invertible ones (rejection sampling:
a uniform draw conditioned on being invertible is uniform over GL(n))."""

import numpy as np

from ..errors import InputError

__all__ = ["random", "rng_from"]

_MAX_TRIES = 1000


def rng_from(seed):
    if isinstance(seed, np.random.Generator):
        return seed
    return np.random.default_rng(seed)


def _shape(shape):
    if isinstance(shape, (int, np.integer)):
        shape = (int(shape), int(shape))
    shape = tuple(int(s) for s in shape)
    if len(shape) != 2 or min(shape) < 1:
        raise InputError(f"shape must be n or (rows, columns) with both >= 1, got {shape}")
    return shape


def random(F, shape, invertible=False, seed=None):
    shape = _shape(shape)
    rng = rng_from(seed)
    if not invertible:
        return _draw(F, rng, shape)
    if shape[0] != shape[1]:
        raise InputError(f"an invertible matrix must be square, got {shape}")
    from .eliminate import rank
    for _ in range(_MAX_TRIES):
        U = _draw(F, rng, shape)
        # Full rank means invertible over a field and, with the McCoy rank (the least
        # rank modulo a prime factor of n), over Z/n: det is a unit mod every prime.
        if rank(F, U) == shape[0]:
            return U
    raise InputError(f"no invertible matrix found in {_MAX_TRIES} draws over {F.spec}")


def _draw(F, rng, shape):
    if F.size == 1 << 64:
        return rng.integers(0, 1 << 64, size=shape, dtype=np.uint64)
    # GF(2) keeps 0/1 matrices as uint8 (an eighth of the memory of uint64)
    dtype = np.uint8 if F.size == 2 else np.uint64
    return rng.integers(0, F.size, size=shape, dtype=dtype)
