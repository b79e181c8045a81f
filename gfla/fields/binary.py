"""GF(2), stored bit-packed (64 entries per uint64 word) inside its kernels.

The API takes and returns plain 0/1 numpy arrays (dtype uint8) like every other family;
packing is internal. Products (Four Russians), elimination (rank, rref, nullspace,
solve, inverse, det) run on packed rows, so a 20000 x 20000 operand occupies 50 MB in
the kernels.
"""

import numpy as np

from ..errors import InputError
from .base import Field, _where

__all__ = ["BinaryField"]


class BinaryField(Field):
    """The field with two elements."""

    # In bytes of uint8 0/1 entries (measured at n = 4000, see fields/base.py); the
    # characteristic polynomial runs on uint64 copies (measured at n = 1000).
    _WORKSPACE = {"matmul_in": 0, "matmul_out": 2, "inv": 2, "det": 2, "rank": 2,
                  "rref": 2, "nullspace": 2, "solve": 9, "charpoly": (5, 8),
                  "minpoly": (1, 8), "power": 4, "order": 2, "poly_eval_matrix": 4,
                  "random": 2, "random_invertible": 3, "copy": 2}
    _WORKSPACE_BYTES = 1

    def __init__(self, modulus=None):
        self.size = 2
        self.characteristic = 2
        self.spec = "GF(2)"
        self.modulus = None
        self.dtype = np.dtype(np.uint8)
        self._ctx = np.array([0, 2, 0, 0], dtype=np.uint64)

    def info(self):
        return {"field": self.spec, "order": 2, "characteristic": 2, "degree": 1,
                "modulus": None, "modulus_poly": None, "primitive": None,
                "generator": 1, "is_field": True}

    # Internal matrices are uint8 0/1 arrays (an eighth of uint64), packed per call.
    def _validate_entries(self, A, name, ndim):
        if isinstance(A, np.ndarray) and A.dtype.kind in "iub":
            if ndim is not None and A.ndim != ndim:
                return super()._validate_entries(A, name, ndim)  # raises the message
            bad = (A != 0) & (A != 1)
            if bad.any():
                idx = tuple(int(i) for i in np.argwhere(bad)[0])
                raise InputError(self._range_message(name, idx, int(A[idx])))
            return np.ascontiguousarray(A, dtype=np.uint8)
        return super()._validate_entries(A, name, ndim).astype(np.uint8)

    def _identity(self, n):
        return np.eye(n, dtype=np.uint8)

    def _validate_dtype(self):
        return np.dtype(np.uint8)

    @staticmethod
    def _pack(A):
        from ..kernels import binary
        return binary.pack(np.ascontiguousarray(A, dtype=np.uint8))

    def _matmul(self, A, B):
        from ..kernels import binary
        from ..linalg.multiply import binary_product
        return binary.unpack(binary_product(self._pack(A), self._pack(B)), B.shape[1])

    # M4RI Gauss-Jordan for moderate sizes and as the reference; the block-recursive
    # PLE (``linalg.blocked``, products by M4RM and Strassen) from
    # ``blocked.BINARY_BLOCKED_MIN`` on.
    def _rref(self, M, ncols_pivot=None):
        from ..linalg import blocked
        if ncols_pivot is None:
            ncols_pivot = M.shape[1]
        if ncols_pivot == M.shape[1] and min(M.shape) >= blocked.BINARY_BLOCKED_MIN:
            R, piv, _ = blocked.rref(self, M)
            M[...] = R
            return piv, 1
        return self._rref_gauss_jordan(M, ncols_pivot)

    def _rref_gauss_jordan(self, M, ncols_pivot=None):
        from ..kernels import binary
        if ncols_pivot is None:
            ncols_pivot = M.shape[1]
        P = self._pack(M)
        piv = binary.rref(P, ncols_pivot)
        M[...] = binary.unpack(P, M.shape[1])
        return piv, 1

    def _rank(self, U):
        from ..kernels import binary
        from ..linalg import blocked
        if min(U.shape) >= blocked.BINARY_BLOCKED_MIN:
            return blocked.rank(self, U)
        return int(binary.rank(self._pack(U), U.shape[1]))

    def _det(self, U):
        return 1 if self._rank(U) == U.shape[0] else 0

    def _inverse(self, U):
        from ..linalg import blocked
        if U.shape[0] >= blocked.BINARY_BLOCKED_MIN:
            return blocked.inverse(self, U)
        return self._inverse_gauss_jordan(U)

    def _inverse_gauss_jordan(self, U):
        from ..kernels import binary
        n = U.shape[0]
        out = np.zeros((n, binary.word_count(n)), dtype=np.uint64)
        if not binary.inverse(self._pack(U), n, out):
            return None
        return binary.unpack(out, n)

    def _add(self, A, B):
        return np.bitwise_xor(np.asarray(A, dtype=np.uint8), np.asarray(B, dtype=np.uint8))

    _sub = _add

    def _neg(self, A):
        return np.array(A, dtype=np.uint8)

    def _mul(self, A, B):
        return np.bitwise_and(np.asarray(A, dtype=np.uint8), np.asarray(B, dtype=np.uint8))

    def _scale(self, A, s):
        return np.asarray(A, dtype=np.uint8) * np.uint8(int(s) & 1)

    def _hessenberg(self, U):
        return super()._hessenberg(np.ascontiguousarray(U, dtype=np.uint64))

    def _berkowitz(self, U):
        return super()._berkowitz(np.ascontiguousarray(U, dtype=np.uint64))

    def _trace(self, U):
        return int(np.trace(U.astype(np.int64)) & 1)
