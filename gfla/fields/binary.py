"""GF(2), stored bit-packed (64 entries per uint64 word) inside its kernels.

The API takes and returns plain 0/1 integer arrays like every other family; packing is
internal. Elimination (rank, rref, nullspace, solve, inverse, det) and products run on
packed rows, so a 20000 x 20000 matrix occupies 50 MB.
"""

import numpy as np

from .base import Field

__all__ = ["BinaryField"]


class BinaryField(Field):
    """The field with two elements."""

    def __init__(self, modulus=None):
        self.size = 2
        self.characteristic = 2
        self.spec = "GF(2)"
        self.modulus = None
        self.dtype = np.dtype(np.int64)
        self._ctx = np.array([0, 2, 0, 0], dtype=np.uint64)

    def info(self):
        return {"field": self.spec, "order": 2, "characteristic": 2, "degree": 1,
                "modulus": None, "modulus_poly": None, "primitive": None,
                "generator": 1, "is_field": True}
