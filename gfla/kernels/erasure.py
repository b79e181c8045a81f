"""Region arithmetic for erasure codes: products of a small GF(2^w) matrix with byte buffers.

An erasure code turns k buffers ("regions") into r buffers by a fixed r x k matrix over
GF(2^8) or GF(2^16): ``out[i] = sum_j M[i, j] * in[j]``, symbol by symbol. These kernels
do that over whole buffers; nothing else in gfla touches bytes this way.

Method (``region_product``, the one the erasure job uses)
--------------------------------------------------------
Multiplication by a constant c is GF(2)-linear: ``c * a = sum_b c_b (x^b * a)`` over the
bits c_b of c. Each 64-bit word holds 8 GF(2^8) symbols (or 4 GF(2^16) symbols, little
endian) as lanes, and ``x * a`` is computed for all lanes at once with shifts, masks and
one conditional reduction by the modulus (the ``xtime`` step of FIPS 197, section 4.2.1,
done lane-wise in a machine word). For each input word the chain ``a, x a, x^2 a, ...``
is computed once and folded into four output rows at a time with AND-masks taken from
the bits of the four coefficients, so the inner loop is branch-free XOR/AND/shift work
that LLVM vectorises over the words of a cache-sized block. It is the bit-matrix (XOR
only) view of multiplication by a constant, applied in place on the byte layout, so the
shards stay plain byte strings and parity equals the symbol-wise matrix product.

``region_product_table`` is the classic table method kept for the benchmark's
comparison: one 256-entry table per input region whose entry d packs the products
``M[i, j] * d`` of up to 8 output rows into one uint64, so one lookup per input byte
serves 8 outputs. On the shared 2-core development machine (AMD EPYC with AVX-512,
numba 0.68; k = 10, r = 4, one core, per CPU second) the mask method ran at 2.9 GB/s on
256 MiB and 3.2 GB/s on 8 MiB, the packed tables at 1.6 and 2.0 GB/s, and one table per
constant (not kept) at 0.2 GB/s, so the mask method is the one used.
``gfla.jobs.erasure.bench`` repeats the comparison.

Nothing here is constant-time.

References
----------
.. [1] NIST, "Advanced Encryption Standard (AES)", FIPS PUB 197, 2001, section 4.2.1
   (multiplication by x, ``xtime``).
.. [2] J. Bloemer, M. Kalfane, R. Karp, M. Karpinski, M. Luby, D. Zuckerman, "An
   XOR-based erasure-resilient coding scheme", ICSI technical report TR-95-048, 1995
   (multiplication by a constant as a binary matrix, XOR-only coding).
.. [3] J. S. Plank, K. M. Greenan, E. L. Miller, "Screaming fast Galois field arithmetic
   using Intel SIMD instructions", USENIX FAST 2013 (region multiplication, table
   methods).
"""

import numpy as np
from numba import njit

__all__ = ["region_product", "region_product_table", "ROWS_PER_GROUP", "TABLE_ROWS"]

# Output rows computed together by ``region_product``; callers pad the matrix to a
# multiple of this with zero rows.
ROWS_PER_GROUP = 4
# Output rows served by one packed table of ``region_product_table``.
TABLE_ROWS = 8

_ALL_ONES = np.uint64(0xFFFFFFFFFFFFFFFF)
_ZERO = np.uint64(0)
_ONE = np.uint64(1)


@njit(cache=True, inline="always")
def _times_x(a, reduction, high_shift, lane_low, lane_one, lane_shift):
    """x * a in every lane of the word a (lanes of lane_shift bits)."""
    high = (a >> high_shift) & lane_one
    return ((a & lane_low) << _ONE) ^ (((high << lane_shift) - high) & reduction)


@njit(cache=True, inline="always")
def _group_body(src, d0, d1, d2, d3, c0, c1, c2, c3, nbits, reduction, high_shift,
                lane_low, lane_one, lane_shift):
    # The masks live in an array local to this function so LLVM sees they cannot alias
    # the output rows; the two loops over b have constant trip counts (8, then 0 or 8)
    # so they unroll fully and the loop over t vectorises.
    masks = np.empty((4, 16), np.uint64)
    for b in range(16):
        masks[0, b] = _ALL_ONES if (c0 >> b) & 1 else _ZERO
        masks[1, b] = _ALL_ONES if (c1 >> b) & 1 else _ZERO
        masks[2, b] = _ALL_ONES if (c2 >> b) & 1 else _ZERO
        masks[3, b] = _ALL_ONES if (c3 >> b) & 1 else _ZERO
    for t in range(src.shape[0]):
        a = src[t]
        x0 = d0[t]
        x1 = d1[t]
        x2 = d2[t]
        x3 = d3[t]
        for b in range(8):
            x0 ^= a & masks[0, b]
            x1 ^= a & masks[1, b]
            x2 ^= a & masks[2, b]
            x3 ^= a & masks[3, b]
            a = _times_x(a, reduction, high_shift, lane_low, lane_one, lane_shift)
        for b in range(8, nbits):
            x0 ^= a & masks[0, b]
            x1 ^= a & masks[1, b]
            x2 ^= a & masks[2, b]
            x3 ^= a & masks[3, b]
            a = _times_x(a, reduction, high_shift, lane_low, lane_one, lane_shift)
        d0[t] = x0
        d1[t] = x1
        d2[t] = x2
        d3[t] = x3


@njit(cache=True)
def _group8(src, d0, d1, d2, d3, c0, c1, c2, c3, reduction):
    _group_body(src, d0, d1, d2, d3, c0, c1, c2, c3, 8, reduction, np.uint64(7),
                np.uint64(0x7F7F7F7F7F7F7F7F), np.uint64(0x0101010101010101), np.uint64(8))


@njit(cache=True)
def _group16(src, d0, d1, d2, d3, c0, c1, c2, c3, reduction):
    _group_body(src, d0, d1, d2, d3, c0, c1, c2, c3, 16, reduction, np.uint64(15),
                np.uint64(0x7FFF7FFF7FFF7FFF), np.uint64(0x0001000100010001), np.uint64(16))


@njit(cache=True)
def region_product(src, src_rows, coefficients, dst, modulus, symbol_bits, block):
    """dst = coefficients @ src[src_rows] over GF(2^symbol_bits), word by word.

    Parameters
    ----------
    src : uint64[:, W] (C order)
        Input regions, one per row, as 64-bit words (8 or 4 symbols per word).
    src_rows : int64[k]
        Rows of ``src`` that are the k inputs, in the order of the matrix columns.
    coefficients : uint64[r, k]
        The matrix, r a multiple of ``ROWS_PER_GROUP`` (pad with zero rows).
    dst : uint64[r, W] (C order)
        Output regions; overwritten.
    modulus : int64
        The field's reduction polynomial (bit i = coefficient of x^i).
    symbol_bits : int64
        8 or 16.
    block : int64
        Words per block; a block of all rows should fit in the L2 cache.
    """
    k = src_rows.shape[0]
    words = src.shape[1]
    r = dst.shape[0]
    if symbol_bits == 8:
        lane_one = np.uint64(0x0101010101010101)
    else:
        lane_one = np.uint64(0x0001000100010001)
    low = np.uint64(modulus) & ((_ONE << np.uint64(symbol_bits)) - _ONE)
    reduction = low * lane_one
    for s in range(0, words, block):
        e = min(words, s + block)
        for g in range(0, r, 4):
            d0 = dst[g, s:e]
            d1 = dst[g + 1, s:e]
            d2 = dst[g + 2, s:e]
            d3 = dst[g + 3, s:e]
            d0[:] = 0
            d1[:] = 0
            d2[:] = 0
            d3[:] = 0
            for j in range(k):
                c0 = coefficients[g, j]
                c1 = coefficients[g + 1, j]
                c2 = coefficients[g + 2, j]
                c3 = coefficients[g + 3, j]
                if c0 == 0 and c1 == 0 and c2 == 0 and c3 == 0:
                    continue
                row = src[src_rows[j], s:e]
                if symbol_bits == 8:
                    _group8(row, d0, d1, d2, d3, c0, c1, c2, c3, reduction)
                else:
                    _group16(row, d0, d1, d2, d3, c0, c1, c2, c3, reduction)


@njit(cache=True)
def region_product_table(src, src_rows, tables, dst, block):
    """dst = M @ src[src_rows] over GF(2^8) by packed product tables (comparison method).

    Parameters
    ----------
    src : uint8[:, n] (C order)
        Input regions, one per row.
    src_rows : int64[k]
        Rows of ``src`` that are the k inputs.
    tables : uint64[groups, k, 256]
        ``tables[g, j, d]`` holds ``M[8 g + i, j] * d`` in byte i, for i < 8.
    dst : uint8[8 * groups, n] (C order)
        Output regions; overwritten.
    block : int64
        Bytes per block.
    """
    groups = tables.shape[0]
    k = src_rows.shape[0]
    n = src.shape[1]
    acc = np.empty(block, np.uint64)
    for s in range(0, n, block):
        e = min(n, s + block)
        width = e - s
        for g in range(groups):
            acc[:width] = 0
            for j in range(k):
                row = src[src_rows[j], s:e]
                table = tables[g, j]
                for t in range(width):
                    acc[t] ^= table[row[t]]
            for i in range(8):
                out = dst[8 * g + i, s:e]
                shift = np.uint64(8 * i)
                for t in range(width):
                    out[t] = np.uint8((acc[t] >> shift) & np.uint64(0xFF))
