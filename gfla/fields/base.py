"""The field protocol shared by every family, and the dense implementation of its
primitives on top of ``gfla.kernels.dense``.

A field object carries the arithmetic; matrices are plain numpy integer arrays. Public
methods validate and convert their inputs, then call the generic algorithms of
``gfla.linalg`` which in turn use the small set of primitives a family supplies
(``_matmul``, ``_rref``, ``_hessenberg``, ``_berkowitz`` and the elementwise operations).
Internally every matrix is a C-contiguous uint64 array (the kernels' single dtype).
"""

import numbers
from collections import namedtuple

import numpy as np

from ..errors import InputError, NotAUnitError, int_text

__all__ = ["Field", "Solution"]

Solution = namedtuple("Solution", ["consistent", "particular", "nullspace", "left_vector"],
                      defaults=(None,))
Solution.__doc__ = """Result of ``solve``: ``consistent`` (bool), ``particular`` (one
solution x of A x = b, or None), ``nullspace`` (rows spanning {x : A x = 0}; over Z/n a
generating set of that module), ``left_vector`` (over a field, when inconsistent: a
certificate y with y A = 0 and y b != 0)."""


class Field:
    """Base class of gfla's fields and rings. Subclasses set the attributes below and a
    context array ``_ctx`` for the dense kernels."""

    spec = None
    size = None
    characteristic = None
    is_field = True
    modulus = None
    dtype = np.dtype(np.int64)
    _ctx = None
    # Work arrays alive at each operation's peak, as a number of n x n matrices of
    # ``_WORKSPACE_BYTES``-byte entries (or a (count, bytes) pair), on top of the
    # caller's own input; "matmul_in" counts arrays per entry of each factor and
    # "matmul_out" per entry of the product. The figures are the growth of peak
    # resident memory measured at n = 2000 (GF(2): n = 4000; Z/n and charpoly:
    # n = 1000; products also as (n x 1)(1 x n) outer products at n = 4000), rounded
    # down, taking the
    # smallest member of each family or tier, so that the estimate errs low. Where
    # nothing was measured the figure is what the code surely holds (the validated
    # copy and one working copy). These defaults are GF(2^k)'s (measured on GF(2^8)
    # and GF(2^16)).
    _WORKSPACE = {"matmul_in": 0, "matmul_out": 2, "inv": 3, "det": 2, "rank": 2,
                  "rref": 2, "nullspace": 5, "solve": 5, "charpoly": 9, "minpoly": 2,
                  "power": 4, "order": 4, "poly_eval_matrix": 4, "random": 2,
                  "random_invertible": 3, "copy": 2}
    _WORKSPACE_BYTES = 8

    def __repr__(self):
        if self.modulus is not None:
            return f"gfla.field({self.spec!r}, modulus={self.modulus:#x})"
        return f"gfla.field({self.spec!r})"

    def __eq__(self, other):
        return (isinstance(other, Field) and type(other) is type(self)
                and other.spec == self.spec and other.modulus == self.modulus)

    def __hash__(self):
        return hash((type(self).__name__, self.spec, self.modulus))

    # ------------------------------------------------------------------ conversion
    def asarray(self, A, name="matrix", ndim=2):
        """Validate ``A`` as an array of field elements and return a copy of dtype
        ``self.dtype``.

        Raises
        ------
        InputError
            When ``A`` is not an integer array of the expected number of dimensions, or
            an entry lies outside 0 .. order-1 (the message names row and column).
        """
        if isinstance(A, np.ndarray) and A.size:
            from .. import limits
            if limits.fits(A.size * (self._validate_dtype().itemsize + self.dtype.itemsize)):
                return self._out(self._validate(A, name, ndim))
            w = limits.Workspace(f"validating the {' x '.join(map(str, A.shape))} {name} "
                                 f"over {self.spec}")
            w.add(1, A.shape, self._validate_dtype().itemsize, "validated array")
            w.add(1, A.shape, self.dtype.itemsize, "returned array").check()
        return self._out(self._validate(A, name, ndim))

    def _validate_dtype(self):
        """dtype of the internal (validated) arrays."""
        return np.dtype(np.uint64)

    def _validate(self, A, name="matrix", ndim=2):
        """Validate and convert to the internal uint64 representation."""
        U = self._validate_entries(A, name, ndim)
        if U.size == 0:
            raise InputError(f"{name} is empty")
        return U

    def _validate_entries(self, A, name, ndim):
        if isinstance(A, np.ndarray) and A.dtype.kind in "iu":
            arr = A
            if arr.ndim != ndim and ndim is not None:
                raise InputError(_ndim_message(name, ndim, arr.ndim))
            if arr.dtype.kind == "i":
                bad = arr < 0
            else:
                bad = np.zeros(arr.shape, dtype=bool)
            if self.size <= np.iinfo(np.uint64).max:
                bad = bad | (arr.astype(np.uint64, copy=False) >= np.uint64(self.size)) & ~bad
            if bad.any():
                idx = tuple(int(i) for i in np.argwhere(bad)[0])
                raise InputError(self._range_message(name, idx, int(arr[idx])))
            return np.ascontiguousarray(arr.astype(np.uint64))
        if isinstance(A, np.ndarray) and A.dtype.kind == "b":
            return self._validate_entries(A.astype(np.int64), name, ndim)
        if isinstance(A, np.ndarray) and A.dtype.kind not in "O":
            raise InputError(f"{name} must hold integers, got dtype {A.dtype}")
        try:
            obj = np.array(A, dtype=object)
        except (ValueError, TypeError):
            raise InputError(f"{name} is ragged: rows of different lengths") from None
        if ndim is not None and obj.ndim != ndim:
            if ndim == 2 and obj.ndim == 1 and obj.size and all(
                    isinstance(r, (list, tuple)) for r in obj):
                raise InputError(f"{name} is ragged: rows of different lengths")
            raise InputError(_ndim_message(name, ndim, obj.ndim))
        out = np.empty(obj.shape, dtype=np.uint64)
        for idx, x in np.ndenumerate(obj):
            if isinstance(x, (bool, np.bool_)) or not isinstance(x, numbers.Integral):
                raise InputError(f"{name}{_where(idx)}: {x!r} is not an integer")
            x = int(x)
            if x < 0 or x >= self.size:
                raise InputError(self._range_message(name, idx, x))
            out[idx] = x
        return out

    def _range_message(self, name, idx, value):
        return (f"{name}{_where(idx)}: {int_text(value)} is outside {self.spec} "
                f"(entries must be 0 .. {self.size - 1})")

    def _out(self, U):
        """Internal uint64 -> returned dtype."""
        return np.asarray(U).astype(self.dtype)

    def _square(self, A, name="matrix"):
        U = self._validate(A, name)
        if U.shape[0] != U.shape[1]:
            raise InputError(f"{name} must be square, got {U.shape[0]} x {U.shape[1]}")
        return U

    def _check_workspace(self, op, shape, what=None):
        """Refuse ``op`` on a matrix of ``shape`` before any work when its work arrays
        (``_WORKSPACE``) would not fit in the available memory (``gfla.limits``)."""
        from .. import limits
        rows, cols = (int(shape[0]), int(shape[-1])) if len(shape) >= 2 else (int(shape[0]), 1)
        count, bytes_each = self._workspace(op)
        if limits.fits(count * rows * cols * bytes_each):
            return
        if what is None:
            def what():
                return (f"{_OPERATION_NAMES.get(op, op)} of a {rows} x {cols} matrix "
                        f"over {self.spec}")
        limits.Workspace(what).add(count, (rows, cols), bytes_each).check()

    def _workspace(self, op):
        """(number of matrices, bytes per entry) of ``op`` from ``_WORKSPACE``."""
        figure = self._WORKSPACE[op]
        if isinstance(figure, tuple):
            return figure
        return figure, self._WORKSPACE_BYTES

    def _check_product(self, a_shape, b_shape):
        """The memory check of a product (m x k)(k x n): ``_WORKSPACE["matmul_out"]``
        arrays of the size of the m x n product and ``_WORKSPACE["matmul_in"]`` of the
        size of each factor."""
        from .. import limits
        m, k = int(a_shape[0]), int(a_shape[1])
        k2, n = int(b_shape[0]), int(b_shape[1])
        if k != k2:
            return      # the shape error is reported by the product itself
        c_in, b_in = self._workspace("matmul_in")
        c_out, b_out = self._workspace("matmul_out")
        if limits.fits(c_out * m * n * b_out + c_in * (m * k + k * n) * b_in):
            return
        w = limits.Workspace(lambda: f"product of a {m} x {k} and a {k} x {n} matrix over "
                                     f"{self.spec}")
        if m == k == n and b_in == b_out:
            w.add(c_out + 2 * c_in, (m, n), b_out)
        else:
            w.add(c_out, (m, n), b_out, "product-size array")
            w.add(c_in, (m, k), b_in, "left-factor-size array")
            w.add(c_in, (k, n), b_in, "right-factor-size array")
        w.check()

    def _checked_square(self, op, A, name="matrix"):
        """Memory check (from the shape of an array, before copying it; from the
        validated copy for nested lists), then validation as a square matrix."""
        shape = getattr(A, "shape", None)
        if isinstance(A, np.ndarray) and A.ndim == 2:
            self._check_workspace(op, shape)
            return self._square(A, name)
        U = self._square(A, name)
        self._check_workspace(op, U.shape)
        return U

    def _checked(self, op, A, name="matrix"):
        if isinstance(A, np.ndarray) and A.ndim == 2 and A.size:
            self._check_workspace(op, A.shape)
            return self._validate(A, name)
        U = self._validate(A, name)
        self._check_workspace(op, U.shape)
        return U

    def _element(self, a, name="element"):
        if isinstance(a, (bool, np.bool_)) or not isinstance(a, numbers.Integral):
            raise InputError(f"{name} {a!r} is not an integer")
        a = int(a)
        if a < 0 or a >= self.size:
            raise InputError(f"{name} {a} is outside {self.spec}")
        return a

    def identity(self, n):
        from .. import limits
        n = int(n)
        w = limits.Workspace(f"identity matrix of size {n} over {self.spec}")
        w.add(1, (n, n), self._identity(1).dtype.itemsize, "internal matrix")
        w.add(1, (n, n), self.dtype.itemsize, "returned matrix").check()
        return self._out(self._identity(n))

    def zeros(self, shape):
        from .. import limits
        dims = (int(shape),) if np.ndim(shape) == 0 else tuple(int(s) for s in shape)
        if all(d >= 0 for d in dims):
            limits.check_matrices(f"zero array of shape {dims} over {self.spec}", 1,
                                  dims, self.dtype.itemsize)
        return np.zeros(shape, dtype=self.dtype)

    def _identity(self, n):
        return np.eye(n, dtype=np.uint64)

    # ------------------------------------------------------------------ elementwise
    def _ew2(self, kernel, A, B):
        A = np.ascontiguousarray(A, dtype=np.uint64)
        B = np.ascontiguousarray(B, dtype=np.uint64)
        A, B = np.broadcast_arrays(A, B)
        a = np.ascontiguousarray(A).ravel()
        b = np.ascontiguousarray(B).ravel()
        out = np.empty_like(a)
        kernel(a, b, self._ctx, out)
        return out.reshape(A.shape)

    def _add(self, A, B):
        from ..kernels import dense
        return self._ew2(dense.ew_add, A, B)

    def _sub(self, A, B):
        from ..kernels import dense
        return self._ew2(dense.ew_sub, A, B)

    def _mul(self, A, B):
        from ..kernels import dense
        return self._ew2(dense.ew_mul, A, B)

    def _neg(self, A):
        from ..kernels import dense
        a = np.ascontiguousarray(A, dtype=np.uint64).ravel()
        out = np.empty_like(a)
        dense.ew_neg(a, self._ctx, out)
        return out.reshape(np.shape(A))

    def _scale(self, A, s):
        from ..kernels import dense
        a = np.ascontiguousarray(A, dtype=np.uint64).ravel()
        out = np.empty_like(a)
        dense.ew_scale(a, np.uint64(s), self._ctx, out)
        return out.reshape(np.shape(A))

    def _inv_scalar(self, a):
        from ..kernels import dense
        x = int(dense.f_inv(np.uint64(a), self._ctx)) if a else 0
        if x == 0:
            import math
            raise NotAUnitError(f"{a} is not a unit of {self.spec}", element=a,
                                gcd=math.gcd(a, self.size) if not self.is_field else None)
        return x

    def _mul_scalar(self, a, b):
        from ..kernels import dense
        return int(dense.f_mul(np.uint64(a), np.uint64(b), self._ctx))

    def _add_scalar(self, a, b):
        from ..kernels import dense
        return int(dense.f_add(np.uint64(a), np.uint64(b), self._ctx))

    def _sub_scalar(self, a, b):
        from ..kernels import dense
        return int(dense.f_sub(np.uint64(a), np.uint64(b), self._ctx))

    def _trace(self, U):
        from ..kernels import dense
        return int(dense.trace(U, self._ctx))

    def _operands(self, A, B, what):
        U, V = self._validate(A, "A", None), self._validate(B, "B", None)
        try:
            shape = np.broadcast_shapes(U.shape, V.shape)
        except ValueError:
            raise InputError(f"{what}: shapes {U.shape} and {V.shape} do not match") from None
        if shape != U.shape and shape != V.shape:
            # broadcasting makes a result larger than either operand: the two broadcast
            # copies, the result and its returned copy
            from .. import limits
            limits.check_matrices(f"elementwise {what} of shapes {U.shape} and {V.shape} "
                                  f"over {self.spec}", 4, shape, 8)
        return U, V

    def add(self, A, B):
        """Elementwise sum."""
        return self._out(self._add(*self._operands(A, B, "sum")))

    def sub(self, A, B):
        """Elementwise difference A - B."""
        return self._out(self._sub(*self._operands(A, B, "difference")))

    def mul(self, A, B):
        """Elementwise (Hadamard) product."""
        return self._out(self._mul(*self._operands(A, B, "product")))

    def neg(self, A):
        """Elementwise negation."""
        return self._out(self._neg(self._validate(A, "A", None)))

    def inv_element(self, a):
        """Multiplicative inverse of one element (``NotAUnitError`` if there is none)."""
        return self._inv_scalar(self._element(a))

    # ------------------------------------------------------------------ primitives
    def _matmul(self, A, B):
        from ..linalg.multiply import dense_matmul
        return dense_matmul(self, A, B)

    # Gauss-Jordan (``kernels.dense``) is the reference and the path for small
    # matrices; from ``blocked.BLOCKED_MIN`` rows and columns the block-recursive PLE
    # of ``linalg.blocked`` takes over (its cost is that of a few products).
    def _rref(self, M, ncols_pivot=None):
        """Reduced row echelon form in place on a uint64 matrix; returns (pivots, det)
        with det the determinant of the leading square block when the rank equals the
        number of rows and the pivots are columns 0..rank-1 (else 0 or a partial
        product: callers only read it in that case)."""
        from ..linalg import blocked
        if ncols_pivot is None:
            ncols_pivot = M.shape[1]
        if ncols_pivot == M.shape[1] and min(M.shape) >= blocked.BLOCKED_MIN:
            R, piv, det = blocked.rref(self, M)
            M[...] = R
            return piv, det
        return self._rref_gauss_jordan(M, ncols_pivot)

    def _rref_gauss_jordan(self, M, ncols_pivot=None):
        """The reference: Gauss-Jordan in place (``kernels.dense.rref``)."""
        from ..kernels import dense
        if ncols_pivot is None:
            ncols_pivot = M.shape[1]
        piv, det = dense.rref(M, ncols_pivot, self._ctx)
        return piv, int(det)

    def _rank(self, U):
        from ..linalg import blocked
        if min(U.shape) >= blocked.BLOCKED_MIN:
            return blocked.rank_auto(self, U)
        piv, _ = self._rref_gauss_jordan(U.copy())
        return len(piv)

    def _det(self, U):
        from ..linalg import blocked
        if U.shape[0] >= blocked.BLOCKED_MIN:
            return blocked.det_auto(self, U)
        return self._det_gauss_jordan(U)

    def _det_gauss_jordan(self, U):
        """The reference: Gauss-Jordan (``kernels.dense.rref``)."""
        piv, det = self._rref_gauss_jordan(U.copy())
        return det if len(piv) == U.shape[0] else 0

    def _inverse(self, U):
        """Inverse of a square uint64 matrix, or None when it is singular."""
        from ..linalg import blocked
        n = U.shape[0]
        if n >= blocked.BLOCKED_MIN:
            return blocked.inverse_auto(self, U)
        return self._inverse_gauss_jordan(U)

    def _inverse_gauss_jordan(self, U):
        """The reference: Gauss-Jordan on [A | I]."""
        n = U.shape[0]
        M = np.zeros((n, 2 * n), dtype=np.uint64)
        M[:, :n] = U
        M[:, n:] = self._identity(n)
        piv, _ = self._rref_gauss_jordan(M, n)
        if len(piv) < n:
            return None
        return M[:, n:].copy()

    def _hessenberg(self, U):
        from ..kernels import dense
        return [int(c) for c in dense.hessenberg_charpoly(U.copy(), self._ctx)]

    def _berkowitz(self, U):
        from ..kernels import dense
        return [int(c) for c in dense.berkowitz_charpoly(np.ascontiguousarray(U), self._ctx)]

    # ------------------------------------------------------------------ public API
    def matmul(self, A, B):
        """Matrix product A B."""
        from ..linalg import multiply
        if isinstance(A, np.ndarray) and isinstance(B, np.ndarray) and A.ndim == B.ndim == 2:
            self._check_product(A.shape, B.shape)
            U, V = self._validate(A, "A"), self._validate(B, "B")
        else:
            U, V = self._validate(A, "A"), self._validate(B, "B")
            self._check_product(U.shape, V.shape)
        return self._out(multiply.matmul(self, U, V))

    def rank(self, A):
        """Rank of A (over Z/n: the McCoy rank)."""
        from ..linalg import eliminate
        return eliminate.rank(self, self._checked("rank", A))

    def rref(self, A):
        """Reduced row echelon form and pivot columns (over Z/n: the Howell form)."""
        from ..linalg import eliminate
        R, piv = eliminate.rref(self, self._checked("rref", A))
        return self._out(R), tuple(int(p) for p in piv)

    def nullspace(self, A):
        """Basis (rows) of the right kernel {x : A x = 0}; over Z/n a generating set."""
        from ..linalg import eliminate
        return self._out(eliminate.nullspace(self, self._checked("nullspace", A)))

    def solve(self, A, b):
        """Solve A x = b: ``Solution(consistent, particular, nullspace)``."""
        from ..linalg import eliminate
        U = self._checked("solve", A)
        bv = self._validate(b, "rhs", 1)
        if bv.shape[0] != U.shape[0]:
            raise InputError(f"rhs has {bv.shape[0]} entries, the matrix has {U.shape[0]} rows")
        ok, x, N = eliminate.solve(self, U, bv)
        y = None
        if not ok and self.is_field:
            y = self._out(eliminate.left_certificate(self, U, bv))
        return Solution(ok, None if x is None else self._out(x), self._out(N), y)

    def inv(self, A, method="auto", verify=False):
        """Inverse of a square matrix.

        Parameters
        ----------
        method : {"auto", "gauss-jordan", "cayley-hamilton", "hensel", "crt"}
        verify : bool
            Run Freivalds' randomised check of A X = I before returning.
        """
        from ..linalg import inverse
        return self._out(inverse.inv(self, self._checked_square("inv", A), method=method,
                                     verify=verify))

    def det(self, A):
        """Determinant."""
        from ..linalg import eliminate
        return eliminate.det(self, self._checked_square("det", A))

    def charpoly(self, A, method="auto"):
        """Characteristic polynomial det(xI - A), highest degree first.

        Parameters
        ----------
        method : {"auto", "hessenberg", "berkowitz", "csanky"}
        """
        from ..linalg import charpoly
        return charpoly.charpoly(self, self._checked_square("charpoly", A), method=method)

    def minpoly(self, A):
        """Minimal polynomial, highest degree first (monic)."""
        from ..linalg import charpoly
        return charpoly.minpoly(self, self._checked_square("minpoly", A))

    def power(self, A, e):
        """A^e for any integer e (negative: a power of the inverse)."""
        from ..linalg import power
        op = "power"
        if isinstance(e, numbers.Integral) and not isinstance(e, bool) and -1 <= e <= 1:
            op = "inv" if e < 0 else "copy"     # A^-1, or a copy of A or of I
        return self._out(power.power(self, self._checked_square(op, A), e))

    def order(self, A):
        """Multiplicative order of an invertible matrix."""
        from ..linalg import power
        return power.order(self, self._checked_square("order", A))

    def random(self, shape, invertible=False, seed=None):
        """Uniformly random matrix; ``invertible=True`` draws uniformly from GL(n)."""
        from ..linalg import random as rnd
        dims = rnd._shape(shape)
        op = "random_invertible" if invertible and dims[0] == dims[1] else "random"
        self._check_workspace(op, dims, f"random {dims[0]} x {dims[1]} matrix"
                              f"{' (invertible)' if invertible else ''} over {self.spec}")
        return self._out(rnd.random(self, shape, invertible=invertible, seed=seed))

    def poly_eval_matrix(self, poly, A):
        """Evaluate a polynomial (highest degree first) at a square matrix (Horner)."""
        from ..linalg import charpoly
        return self._out(charpoly.poly_at_matrix(self, poly,
                                                 self._checked_square("poly_eval_matrix", A)))

    def info(self):
        """Order, characteristic, modulus and a generator of the multiplicative group."""
        raise NotImplementedError


_OPERATION_NAMES = {"inv": "inverse", "det": "determinant", "rank": "rank",
                    "rref": "row echelon form", "nullspace": "nullspace",
                    "solve": "solving a system", "charpoly": "characteristic polynomial",
                    "minpoly": "minimal polynomial", "power": "power",
                    "order": "multiplicative order",
                    "poly_eval_matrix": "polynomial evaluation",
                    "random": "random matrix", "matmul": "product", "copy": "power"}


def _where(idx):
    if len(idx) == 2:
        return f" row {idx[0] + 1}, column {idx[1] + 1}"
    if len(idx) == 1:
        return f" entry {idx[0] + 1}"
    return " at index " + ",".join(str(i) for i in idx)


def _ndim_message(name, want, got):
    kinds = {1: "a vector", 2: "a matrix (2-D)", 3: "a stack of matrices (3-D)"}
    return f"{name} must be {kinds.get(want, f'{want}-D')}, got {got}-D input"
