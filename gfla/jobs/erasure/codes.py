"""Systematic MDS erasure codes over GF(2^w): generator matrices and decoding matrices.

A code with k data shards and m parity shards is a (k + m) x k generator matrix G whose
top k x k block is the identity: shard i holds ``G[i] @ data`` (so shards 0 .. k-1 are the
data itself and shards k .. k+m-1 the parity). The code is MDS when every k x k
submatrix of G is invertible; then the data can be rebuilt from any k shards by the
inverse of the submatrix formed by their rows (the decoding matrix).

Shards are numbered from 0: data shards 0 .. k-1, parity shards k .. k+m-1.

Constructions
-------------
``vandermonde``
    V[i, j] = a_i^j with the n = k + m distinct points a_i = i (the field element whose
    bits are those of the integer i), made systematic as G = V (V[:k])^-1. Any k rows of
    V form a Vandermonde matrix on distinct points, hence are invertible, and right
    multiplication by an invertible matrix keeps that property.
``cauchy``
    G = [I; C] with the m x k Cauchy matrix C[i, j] = 1 / (x_i + y_j), x_i = k + i,
    y_j = j. Every square submatrix of a Cauchy matrix is invertible, which makes
    [I; C] MDS.

Both need n = k + m distinct field elements, so n can go up to the field size.

References
----------
.. [1] I. S. Reed, G. Solomon, "Polynomial codes over certain finite fields", J. SIAM
   8(2), 1960.
.. [2] J. S. Plank, "A tutorial on Reed-Solomon coding for fault-tolerance in RAID-like
   systems", Software: Practice and Experience 27(9), 1997, and J. S. Plank, Y. Ding,
   "Note: Correction to the 1997 tutorial on Reed-Solomon coding", 2005 (systematic
   Vandermonde generator by column operations).
.. [3] J. Bloemer, M. Kalfane, R. Karp, M. Karpinski, M. Luby, D. Zuckerman, "An
   XOR-based erasure-resilient coding scheme", ICSI TR-95-048, 1995 (Cauchy codes).
"""

import hashlib
import numbers
from dataclasses import dataclass

import numpy as np

from ...errors import InputError, MathError

__all__ = ["CONSTRUCTIONS", "FILE_FIELDS", "MAX_GENERATOR_ENTRIES", "ErasureCode",
           "DecodingPlan", "TooFewShardsError", "erasure_code", "vandermonde_matrix",
           "cauchy_matrix", "systematic_vandermonde", "systematic_cauchy",
           "generator_matrix", "decoding_table", "pattern_count"]

CONSTRUCTIONS = ("vandermonde", "cauchy")
# Fields whose symbols the region kernels handle (files and buffers).
FILE_FIELDS = ("GF(2^8)", "GF(2^16)")
# A generator is held as an int64 array; beyond this many entries (128 MiB) refuse.
MAX_GENERATOR_ENTRIES = 1 << 24


class TooFewShardsError(MathError):
    """Fewer than k shards are usable, so the data cannot be rebuilt.

    Attributes
    ----------
    lost : list of int
        Shards that are unusable (missing, corrupt, or named as lost).
    needed : int
        k, the number of shards any rebuild reads.
    intact : int
        How many usable shards there are.
    short : int
        ``needed - intact``: how many more shards would be needed.
    missing, corrupt : list of int or None
        For shard files: which shards are absent and which failed their checksum.
    """

    def __init__(self, message, lost, needed, intact, missing=None, corrupt=None):
        super().__init__(message)
        self.lost = [int(i) for i in lost]
        self.needed = int(needed)
        self.intact = int(intact)
        self.short = self.needed - self.intact
        self.missing = None if missing is None else [int(i) for i in missing]
        self.corrupt = None if corrupt is None else [int(i) for i in corrupt]

    def certificate(self):
        cert = {"lost": self.lost, "intact": self.intact, "needed": self.needed,
                "short": self.short}
        if self.missing is not None:
            cert["missing"] = self.missing
        if self.corrupt is not None:
            cert["corrupt"] = self.corrupt
        return cert


# --------------------------------------------------------------------------- matrices

def _check_binary_extension(F):
    if getattr(F, "characteristic", None) != 2 or getattr(F, "modulus", None) is None:
        raise InputError(f"erasure codes here are over GF(2^w) with w >= 2, not {F.spec}")


def _element_inverses(F, values):
    """Elementwise inverses of nonzero elements, a^(q-2) by repeated squaring."""
    w = int(F.size).bit_length() - 1
    square = F.asarray(values, ndim=None)
    result = np.ones_like(square)
    for _ in range(1, w):  # q - 2 = 2 + 4 + ... + 2^(w-1)
        square = F.mul(square, square)
        result = F.mul(result, square)
    return result


def vandermonde_matrix(F, points, ncols):
    """The matrix V[i, j] = points[i]^j (with 0^0 = 1), of shape (len(points), ncols).

    Parameters
    ----------
    F : field object (GF(2^w))
    points : sequence of int
        Field elements, one per row.
    ncols : int
        Number of columns (powers 0 .. ncols-1).

    Returns
    -------
    numpy.ndarray of int64
    """
    x = F.asarray(np.asarray(list(points), dtype=np.int64).reshape(-1, 1), name="points")
    V = np.empty((x.shape[0], ncols), dtype=np.int64)
    column = np.ones_like(x)
    for j in range(ncols):
        V[:, j] = column[:, 0]
        if j + 1 < ncols:
            column = F.mul(column, x)
    return V


def cauchy_matrix(F, xs, ys):
    """The Cauchy matrix C[i, j] = 1 / (xs[i] + ys[j]).

    All xs and ys must be distinct field elements (in characteristic 2, x + y = 0
    exactly when x = y).

    Returns
    -------
    numpy.ndarray of int64, shape (len(xs), len(ys))
    """
    x = np.asarray(list(xs), dtype=np.int64)
    y = np.asarray(list(ys), dtype=np.int64)
    if len(set(x.tolist()) | set(y.tolist())) != len(x) + len(y):
        raise InputError("Cauchy points must be distinct field elements")
    sums = F.add(np.repeat(x.reshape(-1, 1), len(y), axis=1),
                 np.repeat(y.reshape(1, -1), len(x), axis=0))
    return _element_inverses(F, sums).reshape(len(x), len(y))


def systematic_vandermonde(F, k, m):
    """Generator [I; P] = V (V[:k])^-1 for the Vandermonde matrix on points 0 .. k+m-1."""
    V = vandermonde_matrix(F, range(k + m), k)
    G = F.matmul(V, F.inv(V[:k]))
    if not np.array_equal(G[:k], np.eye(k, dtype=G.dtype)):  # V[:k] (V[:k])^-1 = I
        raise AssertionError("systematic Vandermonde generator lost its identity block")
    return G


def systematic_cauchy(F, k, m):
    """Generator [I; C] with the Cauchy matrix on x_i = k + i, y_j = j."""
    G = np.zeros((k + m, k), dtype=np.int64)
    G[:k] = np.eye(k, dtype=np.int64)
    if m:
        G[k:] = cauchy_matrix(F, range(k, k + m), range(k))
    return G


def _count(value, name, minimum):
    if isinstance(value, bool) or not isinstance(value, numbers.Integral):
        raise InputError(f"{name} must be an integer, got {value!r}")
    value = int(value)
    if value < minimum:
        raise InputError(f"{name} must be at least {minimum}, got {value}")
    return value


def generator_matrix(F, k, m, construction="vandermonde"):
    """The (k + m) x k systematic MDS generator of the named construction.

    Raises
    ------
    InputError
        When k < 1, m < 0, k + m exceeds the field size, the generator would be too
        large to hold (more than ``MAX_GENERATOR_ENTRIES`` entries) or the construction
        is unknown.
    """
    _check_binary_extension(F)
    k = _count(k, "k (data shards)", 1)
    m = _count(m, "m (parity shards)", 0)
    if construction not in CONSTRUCTIONS:
        raise InputError(f"construction must be one of {', '.join(CONSTRUCTIONS)}, "
                         f"got {construction!r}")
    if k + m > F.size:
        points = ("the points 0 .. k+m-1" if construction == "vandermonde"
                  else "the points x_i = k+i and y_j = j")
        raise InputError(f"k + m = {k + m} shards is more than {F.spec} allows: the "
                         f"{construction} construction needs k + m distinct field elements "
                         f"({points}) but {F.spec} has only {F.size} elements, so "
                         f"k + m <= {F.size}"
                         + (f" (with m = {m}: k <= {F.size - m})" if m < F.size else ""))
    from ...limits import Workspace, format_bytes
    if (k + m) * k > MAX_GENERATOR_ENTRIES:
        raise InputError(f"a {k + m} x {k} generator has {(k + m) * k} entries "
                         f"({format_bytes((k + m) * k * 8)} as int64), more than the "
                         f"{MAX_GENERATOR_ENTRIES} ({format_bytes(MAX_GENERATOR_ENTRIES * 8)})"
                         " this tool holds in memory")
    # the generator and the matrix it is made from (Vandermonde V, or the Cauchy sums),
    # plus the inverse of the top k x k block of V with its work arrays
    w = Workspace(f"the {construction} generator for k = {k}, m = {m} over {F.spec}")
    w.add(2, (k + m, k), 8, "generator-size matrix")
    if construction == "vandermonde":
        count, bytes_each = F._workspace("inv")
        w.add(count, (k, k), bytes_each, "inverse work matrix")
    w.check()
    if construction == "vandermonde":
        return systematic_vandermonde(F, k, m)
    return systematic_cauchy(F, k, m)


# --------------------------------------------------------------------------- the code

@dataclass(frozen=True, eq=False)
class DecodingPlan:
    """How to rebuild some shards from k others.

    Attributes
    ----------
    lost : tuple of int
        Shards unusable in this pattern (sorted).
    read : tuple of int
        The k shards read: the first k usable ones.
    inverse : numpy.ndarray
        k x k inverse of ``G[read]``: row d rebuilds data shard d from the shards read.
    targets : tuple of int
        Shards rebuilt (lost data shards first, then lost parity shards).
    matrix : numpy.ndarray
        ``len(targets) x k`` decoding matrix: shard ``targets[r]`` is
        ``sum_j matrix[r, j] * shard read[j]`` symbol by symbol. Rows for data shards are
        rows of ``inverse``; rows for parity shards are ``G[p] @ inverse``.
    """

    k: int
    m: int
    lost: tuple
    read: tuple
    inverse: np.ndarray
    targets: tuple
    matrix: np.ndarray

    @property
    def lost_data(self):
        return tuple(i for i in self.targets if i < self.k)

    @property
    def lost_parity(self):
        return tuple(i for i in self.targets if i >= self.k)

    def as_dict(self):
        """Plain-Python form (lists of ints) for JSON."""
        return {"lost": list(self.lost), "read": list(self.read),
                "rebuild": list(self.targets),
                "lost_data": list(self.lost_data), "lost_parity": list(self.lost_parity),
                "decoding_matrix": [[int(v) for v in row] for row in self.matrix]}


class ErasureCode:
    """A systematic MDS code: k data shards, m parity shards, over GF(2^w).

    Parameters
    ----------
    field : field object
        ``gfla.field("GF(2^8)")`` or any GF(2^w); buffers and files need GF(2^8) or
        GF(2^16).
    k, m : int
        Number of data and parity shards; k + m is at most the field size.
    construction : {"vandermonde", "cauchy"}

    Examples
    --------
    >>> import gfla
    >>> from gfla.jobs.erasure import ErasureCode
    >>> code = ErasureCode(gfla.field("GF(2^8)"), 4, 2, "cauchy")
    >>> code.generator.shape
    (6, 4)
    >>> plan = code.decoding_plan([1, 4])
    >>> plan.read, plan.targets
    ((0, 2, 3, 5), (1, 4))
    """

    def __init__(self, field, k, m, construction="vandermonde"):
        self.field = field
        self.generator = generator_matrix(field, k, m, construction)
        self.generator.setflags(write=False)
        self.k = int(k)
        self.m = int(m)
        self.n = self.k + self.m
        self.construction = construction
        self.symbol_bits = int(field.size).bit_length() - 1
        self.symbol_bytes = (self.symbol_bits + 7) // 8

    def __repr__(self):
        return (f"ErasureCode({self.field!r}, k={self.k}, m={self.m}, "
                f"construction={self.construction!r})")

    @property
    def parity_matrix(self):
        """The m x k block of the generator below the identity."""
        return self.generator[self.k:]

    def describe(self):
        """The code's parameters as a dict (the ``code`` part of a manifest)."""
        return {"field": self.field.spec, "modulus": int(self.field.modulus),
                "construction": self.construction, "data_shards": self.k,
                "parity_shards": self.m, "symbol_bytes": self.symbol_bytes,
                "generator_sha256": self.generator_sha256()}

    def generator_sha256(self):
        """SHA-256 of the generator's entries as little-endian 32-bit words, row by row
        (lets a manifest pin the exact code it was written with)."""
        return hashlib.sha256(self.generator.astype("<u4").tobytes()).hexdigest()

    # ------------------------------------------------------------------ patterns
    def _shard_list(self, shards, name):
        out = []
        for s in shards:
            if isinstance(s, bool) or not isinstance(s, numbers.Integral):
                raise InputError(f"{name}: shard {s!r} is not an integer")
            s = int(s)
            if not 0 <= s < self.n:
                raise InputError(f"{name}: shard {s} does not exist (shards are numbered "
                                 f"0 .. {self.n - 1} for k = {self.k}, m = {self.m})")
            if s in out:
                raise InputError(f"{name}: shard {s} is listed twice")
            out.append(s)
        return sorted(out)

    def decoding_plan(self, lost, targets=None):
        """The decoding matrix for a set of lost shards.

        Parameters
        ----------
        lost : iterable of int
            Unusable shards (0-based).
        targets : iterable of int, optional
            Shards to rebuild (default: all of ``lost``). Each must be in ``lost``.

        Returns
        -------
        DecodingPlan

        Raises
        ------
        InputError
            A shard number out of range or repeated.
        TooFewShardsError
            More than m shards lost.
        """
        lost = self._shard_list(lost, "lost shards")
        targets = lost if targets is None else self._shard_list(targets, "shards to rebuild")
        if not set(targets) <= set(lost):
            extra = sorted(set(targets) - set(lost))
            raise InputError(f"shards to rebuild {extra} are not among the lost shards")
        if len(lost) > self.m:
            intact = self.n - len(lost)
            raise TooFewShardsError(
                f"{len(lost)} of {self.n} shards lost ({', '.join(map(str, lost))}) but "
                f"k = {self.k}, m = {self.m} rebuilds at most {self.m}: {intact} intact, "
                f"{self.k} needed, {self.k - intact} more missing",
                lost=lost, needed=self.k, intact=intact)
        lost_set = set(lost)
        read = tuple([i for i in range(self.n) if i not in lost_set][:self.k])
        F = self.field
        if read == tuple(range(self.k)):
            inverse = np.eye(self.k, dtype=np.int64)
        else:
            inverse = F.inv(self.generator[list(read)])
        data = [t for t in targets if t < self.k]
        parity = [t for t in targets if t >= self.k]
        ordered = data + parity
        matrix = np.zeros((len(ordered), self.k), dtype=np.int64)
        if data:
            matrix[:len(data)] = inverse[data]
        if parity:
            matrix[len(data):] = F.matmul(self.generator[parity], inverse)
        inverse.setflags(write=False)
        matrix.setflags(write=False)
        return DecodingPlan(self.k, self.m, tuple(lost), read, inverse, tuple(ordered), matrix)

    # ------------------------------------------------------------------ buffers
    def encode(self, data):
        """Parity shards of in-memory data.

        Parameters
        ----------
        data : array_like of uint8, shape (k, S)
            The k data shards; S a multiple of the symbol size (1 byte for GF(2^8), 2
            for GF(2^16), symbols little endian).

        Returns
        -------
        numpy.ndarray of uint8, shape (m, S)
        """
        from .regions import RegionMatrix

        data = _byte_rows(data, self.k, self.symbol_bytes, "data")
        return RegionMatrix(self.field, self.parity_matrix).apply_bytes(data)

    def rebuild(self, plan, shards_read):
        """Rebuild ``plan.targets`` from the k shards ``plan.read`` (uint8 rows)."""
        from .regions import RegionMatrix

        shards_read = _byte_rows(shards_read, self.k, self.symbol_bytes, "shards read")
        return RegionMatrix(self.field, plan.matrix).apply_bytes(shards_read)


def _byte_rows(data, rows, symbol_bytes, name):
    arr = np.asarray(data)
    if arr.dtype != np.uint8 or arr.ndim != 2 or arr.shape[0] != rows:
        raise InputError(f"{name} must be a uint8 array of shape ({rows}, S), got "
                         f"{arr.dtype} {arr.shape}")
    if arr.shape[1] % symbol_bytes:
        raise InputError(f"{name}: shard length {arr.shape[1]} is not a multiple of the "
                         f"{symbol_bytes}-byte symbol")
    return arr


def erasure_code(field="GF(2^8)", k=10, m=4, construction="vandermonde", modulus=None):
    """Build an :class:`ErasureCode` from a field spec (``"GF(2^8)"``, ``"GF(2^16)"``).

    Examples
    --------
    >>> from gfla.jobs.erasure import erasure_code
    >>> erasure_code("GF(2^8)", 10, 4).generator[10, :3].tolist() != [0, 0, 0]
    True
    """
    import gfla

    F = field if hasattr(field, "spec") else gfla.field(field, modulus=modulus)
    return ErasureCode(F, k, m, construction)


def pattern_count(n, max_lost):
    """Number of erasure patterns with 1 .. max_lost of n shards lost."""
    from math import comb

    return sum(comb(n, j) for j in range(1, max_lost + 1))


def decoding_table(code, max_lost):
    """Every erasure pattern with 1 .. max_lost lost shards and its decoding plan.

    Patterns come in order of size, then lexicographically. Returns an iterator: the
    table is streamed, never held whole.

    Raises
    ------
    InputError
        When ``max_lost`` is below 1 or above m.
    """
    max_lost = _count(max_lost, "max lost", 1)
    if max_lost > code.m:
        raise InputError(f"max lost {max_lost} exceeds m = {code.m}: patterns with more than "
                         f"m lost shards cannot be decoded")
    return _patterns(code, max_lost)


def _patterns(code, max_lost):
    from itertools import combinations

    for size in range(1, max_lost + 1):
        for lost in combinations(range(code.n), size):
            yield code.decoding_plan(lost)
