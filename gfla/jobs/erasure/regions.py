"""Applying a small GF(2^8) / GF(2^16) matrix to byte buffers (regions).

``RegionMatrix(F, M).apply(src, rows, dst)`` computes ``dst = M @ src[rows]`` symbol by
symbol over whole buffers with the compiled kernel ``gfla.kernels.erasure.region_product``
(bit-sliced masks over 64-bit words; see that module for the method and the measured
comparison with table lookups). Buffers are uint64 arrays, one region per row, so the
caller can read files straight into them; ``apply_bytes`` is the convenience form on uint8
arrays.

GF(2^16) symbols are two bytes, little endian.
"""

import sys

import numpy as np

from ...errors import InputError

__all__ = ["RegionMatrix", "TableRegionMatrix", "BLOCK_WORDS", "words_for"]

# Words per block of the region kernel: 16 KiB per region, so a block of 14 regions
# (RS k = 10, m = 4) stays in a 1 MiB L2 cache. Chosen by measurement (1024 .. 8192
# words were within noise of each other; 256 was slower).
BLOCK_WORDS = 2048


def words_for(nbytes):
    """64-bit words needed to hold ``nbytes`` bytes."""
    return (int(nbytes) + 7) // 8


def _symbol_bits(field):
    bits = int(field.size).bit_length() - 1
    if getattr(field, "modulus", None) is None or bits not in (8, 16):
        raise InputError(f"region arithmetic needs GF(2^8) or GF(2^16), not {field.spec}")
    if bits == 16 and sys.byteorder != "little":
        raise InputError("GF(2^16) regions need a little-endian machine (symbols are "
                         "stored little endian)")
    return bits


class RegionMatrix:
    """An r x k matrix over GF(2^8) or GF(2^16), ready to multiply byte regions.

    Parameters
    ----------
    field : field object
        GF(2^8) or GF(2^16), any modulus.
    matrix : array_like, shape (r, k)
        Entries are field elements.

    Attributes
    ----------
    rows, cols : int
    padded_rows : int
        r rounded up to a multiple of ``ROWS_PER_GROUP``: the number of rows the output
        buffer of :meth:`apply` must have (the extra rows are scratch).

    References
    ----------
    .. [1] J. Bloemer et al., "An XOR-based erasure-resilient coding scheme", ICSI
       TR-95-048, 1995 (multiplication by a constant as a binary matrix).
    """

    def __init__(self, field, matrix):
        from ...kernels.erasure import ROWS_PER_GROUP

        self.symbol_bits = _symbol_bits(field)
        self.modulus = int(field.modulus)
        M = np.asarray(matrix)
        if M.ndim != 2:
            raise InputError(f"region matrix must be 2-D, got shape {M.shape}")
        self.rows, self.cols = M.shape
        if self.rows and self.cols:
            M = field.asarray(M, name="region matrix")
        self.padded_rows = -(-self.rows // ROWS_PER_GROUP) * ROWS_PER_GROUP
        self.coefficients = np.zeros((self.padded_rows, self.cols), dtype=np.uint64)
        self.coefficients[:self.rows] = M

    def output_buffer(self, words):
        """A fresh uint64 output buffer of ``padded_rows`` x ``words``."""
        return np.empty((self.padded_rows, words), dtype=np.uint64)

    def apply(self, src, src_rows, dst, block=BLOCK_WORDS):
        """``dst[:rows] = matrix @ src[src_rows]`` (rows beyond ``rows`` are scratch).

        Parameters
        ----------
        src : numpy.ndarray of uint64, shape (N, W), C order
        src_rows : sequence of int, length ``cols``
            Which rows of ``src`` are the inputs, in column order.
        dst : numpy.ndarray of uint64, shape (padded_rows, W), C order
        block : int
            Words per cache block.
        """
        from ...kernels.erasure import region_product

        src_rows = np.asarray(src_rows, dtype=np.int64)
        if src_rows.shape != (self.cols,):
            raise InputError(f"need {self.cols} input rows, got {src_rows.shape[0]}")
        for name, buf in (("input", src), ("output", dst)):
            if (not isinstance(buf, np.ndarray) or buf.dtype != np.uint64 or buf.ndim != 2
                    or not buf.flags.c_contiguous):
                raise InputError(f"{name} buffer must be a C-contiguous 2-D uint64 array")
        if dst.shape[0] != self.padded_rows or dst.shape[1] != src.shape[1]:
            raise InputError(f"output buffer must have shape ({self.padded_rows}, "
                             f"{src.shape[1]}), got {dst.shape}")
        if src_rows.size and (src_rows.min() < 0 or src_rows.max() >= src.shape[0]):
            raise InputError("input row index outside the input buffer")
        if self.padded_rows == 0 or src.shape[1] == 0:
            return dst
        region_product(src, src_rows, self.coefficients, dst, self.modulus,
                       self.symbol_bits, int(block))
        return dst

    def apply_bytes(self, data):
        """``matrix @ data`` for a uint8 array of shape (cols, S); returns (rows, S)."""
        data = np.asarray(data, dtype=np.uint8)
        nbytes = data.shape[1]
        words = words_for(nbytes)
        src = np.zeros((self.cols, words), dtype=np.uint64)
        src.view(np.uint8)[:, :nbytes] = data
        dst = self.output_buffer(words)
        self.apply(src, range(self.cols), dst)
        return np.ascontiguousarray(dst.view(np.uint8)[:self.rows, :nbytes])


class TableRegionMatrix:
    """The same product over GF(2^8) by packed 256-entry product tables.

    Kept to measure against :class:`RegionMatrix` in the benchmark (it is the classic
    table method: one lookup per input byte serves up to 8 output rows).

    References
    ----------
    .. [1] J. S. Plank, K. M. Greenan, E. L. Miller, "Screaming fast Galois field
       arithmetic using Intel SIMD instructions", USENIX FAST 2013 (table methods).
    """

    def __init__(self, field, matrix):
        from ...kernels.erasure import TABLE_ROWS

        if _symbol_bits(field) != 8:
            raise InputError("the table method is implemented for GF(2^8) only")
        M = field.asarray(matrix, name="region matrix")
        self.rows, self.cols = M.shape
        groups = -(-self.rows // TABLE_ROWS)
        self.padded_rows = groups * TABLE_ROWS
        constants = np.zeros((self.padded_rows, self.cols), dtype=np.int64)
        constants[:self.rows] = M
        values = np.arange(256, dtype=np.int64)
        products = field.mul(np.repeat(constants.reshape(-1, 1), 256, axis=1),
                             np.repeat(values.reshape(1, -1), constants.size, axis=0))
        products = products.reshape(groups, TABLE_ROWS, self.cols, 256).astype(np.uint64)
        shifts = (np.arange(TABLE_ROWS, dtype=np.uint64) * np.uint64(8)).reshape(1, -1, 1, 1)
        self.tables = np.ascontiguousarray(
            np.bitwise_or.reduce(products << shifts, axis=1))  # (groups, cols, 256)

    def apply(self, src, src_rows, dst, block=16384):
        """``dst[:rows] = matrix @ src[src_rows]`` on uint8 buffers (dst has
        ``padded_rows`` rows)."""
        from ...kernels.erasure import region_product_table

        region_product_table(src, np.asarray(src_rows, dtype=np.int64), self.tables, dst,
                             int(block))
        return dst
