"""Bit-packed GF(2) loops of the key-schedule job.

Storage is that of :mod:`gfla.kernels.binary`: a GF(2) matrix with ``n`` columns is a
C-contiguous ``uint64`` array of rows of ``w = (n + 63) // 64`` words, entry ``(i, j)``
being bit ``j % 64`` of word ``j // 64`` of row ``i``; padding bits are 0. Polynomials
over GF(2) are packed the same way (bit i is the coefficient of x^i).

Every kernel takes ``uint64`` arrays and ``int64`` sizes only, so each compiles once and
is cached on disk. Internal: no validation beyond shapes, nothing constant-time.

Functions
---------
krylov_charpoly
    Characteristic polynomial as a product of Krylov-chain polynomials.
poly_apply
    p(M) v for a packed polynomial p, by Horner's rule with matrix-vector products.
affine_orbit
    s, M s + c_0, M(M s + c_0) + c_1, ...: the states of an affine recurrence.
x_power_mod
    x^E modulo a polynomial f over GF(2), by squaring with byte-table reduction.
"""

import numpy as np
from numba import njit

from .binary import matvec

__all__ = ["krylov_charpoly", "poly_apply", "affine_orbit", "x_power_mod"]

_ONE = np.uint64(1)
_ZERO = np.uint64(0)


@njit(cache=True)
def krylov_charpoly(P, n):
    """Characteristic polynomial of a packed n x n GF(2) matrix M, chain by chain.

    Parameters
    ----------
    P : ndarray of uint64, shape (n, w)
        Rows of M, packed.
    n : int
        Order of M.

    Returns
    -------
    polys : ndarray of uint64, shape (n, (n + 64) // 64)
        Row j (j < chains) is the packed polynomial p_j of chain j; the characteristic
        polynomial of M is the product of p_0 .. p_(chains-1).
    lengths : ndarray of int64, shape (n,)
        deg p_j for j < chains (they add up to n).
    starts : ndarray of int64, shape (n,)
        Chain j starts from the unit vector e_(starts[j]).
    chains : int
        Number of chains.

    Notes
    -----
    Chain j takes a unit vector v outside the invariant subspace W spanned by the
    earlier chains (a column that is not yet a pivot), and reduces v, M v, M^2 v, ...
    against the echelon basis of W plus the chain so far, tracking each reduced vector
    as a polynomial in M applied to v (modulo W). The first vector that reduces to zero
    gives p_j(M) v in W with p_j monic of degree k, the length of the chain: in the
    basis of reduced chain vectors M is block upper triangular with the companion
    matrices of p_0, p_1, ... on the diagonal, so det(xI - M) = prod p_j. M is applied
    to the reduced vectors, which keeps the tracked polynomial a shift of the previous
    one. Word operations: about n^3 / 64 for the products and as many for the
    reductions.

    References
    ----------
    .. [1] A. N. Krylov, "On the numerical solution of the equation by which the
       frequency of small oscillations is determined in technical problems", Izv. Akad.
       Nauk SSSR 7, 1931 (Krylov sequences).
    .. [2] W. Keller-Gehrig, "Fast algorithms for the characteristic polynomial",
       Theoretical Computer Science 36, 1985 (charpoly from Krylov subspaces).
    """
    w = P.shape[1]
    wp = (n + 64) // 64
    B = np.zeros((n, w), np.uint64)
    T = np.zeros((n, wp), np.uint64)
    piv = np.empty(n, np.int64)
    is_piv = np.zeros(n + 1, np.bool_)
    polys = np.zeros((n, wp), np.uint64)
    lengths = np.zeros(n, np.int64)
    starts = np.zeros(n, np.int64)
    vec = np.zeros(w, np.uint64)
    nxt = np.zeros(w, np.uint64)
    t = np.zeros(wp, np.uint64)
    rank = 0
    chains = 0
    scan = 0
    while rank < n:
        while is_piv[scan]:
            scan += 1
        for q in range(w):
            vec[q] = _ZERO
        vec[scan >> 6] = _ONE << np.uint64(scan & 63)
        for q in range(wp):
            t[q] = _ZERO
        t[0] = _ONE
        chain_start = rank
        k = 0
        while True:
            for r in range(rank):
                p = piv[r]
                if (vec[p >> 6] >> np.uint64(p & 63)) & _ONE:
                    for q in range(w):
                        vec[q] ^= B[r, q]
                    if r >= chain_start:
                        for q in range(wp):
                            t[q] ^= T[r, q]
            lead = -1
            for q in range(w):
                x = vec[q]
                if x != _ZERO:
                    b = 0
                    while ((x >> np.uint64(b)) & _ONE) == _ZERO:
                        b += 1
                    lead = q * 64 + b
                    break
            if lead < 0:
                for q in range(wp):
                    polys[chains, q] = t[q]
                lengths[chains] = k
                starts[chains] = scan
                chains += 1
                break
            for q in range(w):
                B[rank, q] = vec[q]
            for q in range(wp):
                T[rank, q] = t[q]
            piv[rank] = lead
            is_piv[lead] = True
            rank += 1
            matvec(P, vec, nxt)
            for q in range(w):
                vec[q] = nxt[q]
            carry = _ZERO
            for q in range(wp):
                x = t[q]
                t[q] = (x << _ONE) | carry
                carry = x >> np.uint64(63)
            k += 1
    return polys, lengths, starts, chains


@njit(cache=True)
def poly_apply(P, n, coeffs, deg, v, out):
    """out = p(M) v by Horner's rule: deg matrix-vector products.

    Parameters
    ----------
    P : ndarray of uint64, shape (n, w)
        Rows of M, packed.
    n : int
        Order of M.
    coeffs : ndarray of uint64
        Packed polynomial p (bit i = coefficient of x^i), at least deg + 1 bits.
    deg : int
        Degree of p (-1 for the zero polynomial).
    v, out : ndarray of uint64, shape (w,)
        Input vector and result.

    References
    ----------
    .. [1] W. G. Horner, "A new method of solving numerical equations of all orders, by
       continuous approximation", Phil. Trans. R. Soc. London 109, 1819.
    """
    w = P.shape[1]
    tmp = np.zeros(w, np.uint64)
    for q in range(w):
        out[q] = _ZERO
    for i in range(deg, -1, -1):
        matvec(P, out, tmp)
        if (coeffs[i >> 6] >> np.uint64(i & 63)) & _ONE:
            for q in range(w):
                out[q] = tmp[q] ^ v[q]
        else:
            for q in range(w):
                out[q] = tmp[q]


@njit(cache=True)
def affine_orbit(P, n, C, s0, out):
    """States of s_(r+1) = M s_r + c_r.

    Parameters
    ----------
    P : ndarray of uint64, shape (n, w)
        Rows of M, packed.
    n : int
        Order of M.
    C : ndarray of uint64, shape (R, w)
        Packed constants c_0 .. c_(R-1).
    s0 : ndarray of uint64, shape (w,)
        Initial state.
    out : ndarray of uint64, shape (R + 1, w)
        Receives s_0 .. s_R.

    References
    ----------
    .. [1] Common practice: an affine recurrence iterated with one matrix-vector
       product per step.
    """
    w = P.shape[1]
    R = C.shape[0]
    for q in range(w):
        out[0, q] = s0[q]
    for r in range(R):
        matvec(P, out[r], out[r + 1])
        for q in range(w):
            out[r + 1, q] ^= C[r, q]


@njit(cache=True)
def _reduce(a, d, table, nwt):
    """a mod f in place, with table[t] = q_t f (deg q_t < 8) whose bits d .. d+7 are t."""
    top = a.shape[0] - 1
    while top >= 0 and a[top] == _ZERO:
        top -= 1
    while top >= 0:
        x = a[top]
        b = 63
        while ((x >> np.uint64(b)) & _ONE) == _ZERO:
            b -= 1
        high = top * 64 + b
        if high < d:
            return
        k = high - d - 7
        if k < 0:
            k = 0
        p = d + k
        pw = p >> 6
        pb = p & 63
        t = a[pw] >> np.uint64(pb)
        if pb > 56 and pw + 1 < a.shape[0]:
            t |= a[pw + 1] << np.uint64(64 - pb)
        t &= np.uint64(0xFF)
        kw = k >> 6
        kb = k & 63
        ti = np.int64(t)
        for j in range(nwt):
            v = table[ti, j]
            if v != _ZERO:
                a[j + kw] ^= v << np.uint64(kb)
                if kb and j + kw + 1 < a.shape[0]:
                    a[j + kw + 1] ^= v >> np.uint64(64 - kb)
        while top >= 0 and a[top] == _ZERO:
            top -= 1


@njit(cache=True)
def x_power_mod(f, d, ebits, table, spread, out):
    """out = x^E mod f over GF(2).

    Parameters
    ----------
    f : ndarray of uint64
        Packed f, degree d >= 1 (at least (d + 64) // 64 words).
    d : int
        Degree of f.
    ebits : ndarray of uint8
        Bits of E, most significant first.
    table : ndarray of uint64, shape (256, nwt)
        table[t] = q_t f with deg q_t < 8 and bits d .. d+7 equal to t.
    spread : ndarray of uint64, shape (256,)
        spread[b] = the bits of byte b moved to the even positions 0, 2, ..., 14.
    out : ndarray of uint64, shape ((d + 63) // 64,)
        Receives x^E mod f.

    Notes
    -----
    Left-to-right binary powering: square (over GF(2) squaring spreads the bits to the
    even positions), multiply by x when the exponent bit is set (a shift), reduce eight
    bits at a time with the table.

    References
    ----------
    .. [1] D. E. Knuth, "The Art of Computer Programming", Vol. 2, 3rd ed., 1997,
       Section 4.6.3 (left-to-right binary method).
    """
    nw = (d + 63) // 64
    nwt = table.shape[1]
    size = 2 * nw + nwt + 2
    r = np.zeros(size, np.uint64)
    sq = np.zeros(size, np.uint64)
    r[0] = _ONE
    for i in range(ebits.shape[0]):
        for q in range(size):
            sq[q] = _ZERO
        for q in range(nw):
            w = r[q]
            lo = _ZERO
            hi = _ZERO
            for byte in range(4):
                low_byte = np.int64((w >> np.uint64(8 * byte)) & np.uint64(0xFF))
                high_byte = np.int64((w >> np.uint64(32 + 8 * byte)) & np.uint64(0xFF))
                lo |= spread[low_byte] << np.uint64(16 * byte)
                hi |= spread[high_byte] << np.uint64(16 * byte)
            sq[2 * q] = lo
            sq[2 * q + 1] = hi
        if ebits[i]:
            carry = _ZERO
            for q in range(size):
                x = sq[q]
                sq[q] = (x << _ONE) | carry
                carry = x >> np.uint64(63)
        _reduce(sq, d, table, nwt)
        for q in range(size):
            r[q] = sq[q]
    for q in range(nw):
        out[q] = r[q]
