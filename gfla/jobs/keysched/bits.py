"""GF(2) vectors and matrices of the key-schedule job: conversions and the few
operations it needs.

Vectors are 0/1 ``uint8`` arrays (bit i = state bit i), or Python ints with the same
bit order (the hex convention of the job: the integer whose bit i is state bit i).
Packed rows (64 bits per ``uint64`` word, least significant bit first) feed the
compiled loops of :mod:`gfla.kernels.keysched`. Rank, products, powers and linear
systems go through gfla's GF(2) field object.
"""

import re

import numpy as np

from ...errors import InputError

__all__ = ["field", "int_to_bits", "bits_to_int", "ints_to_bits", "bits_to_ints",
           "pack", "unpack", "parse_hex", "hex_of", "matmul", "rank", "power", "solve",
           "nullspace", "charpoly_chains", "poly_apply"]

_FIELD = None


def field():
    """gfla's GF(2)."""
    global _FIELD
    if _FIELD is None:
        import gfla
        _FIELD = gfla.field("GF(2)")
    return _FIELD


def int_to_bits(x, n):
    x = int(x)
    nbytes = max(1, (n + 7) // 8)
    raw = np.frombuffer(x.to_bytes(nbytes, "little"), dtype=np.uint8)
    return np.unpackbits(raw, count=n, bitorder="little")


def bits_to_int(b):
    b = np.asarray(b, dtype=np.uint8)
    if b.size == 0:
        return 0
    return int.from_bytes(np.packbits(b, bitorder="little").tobytes(), "little")


def ints_to_bits(values, n):
    values = [int(v) for v in values]
    nbytes = max(1, (n + 7) // 8)
    raw = b"".join(v.to_bytes(nbytes, "little") for v in values)
    arr = np.frombuffer(raw, dtype=np.uint8).reshape(len(values), nbytes)
    return np.unpackbits(arr, axis=1, count=n, bitorder="little")


def bits_to_ints(B):
    B = np.asarray(B, dtype=np.uint8)
    if B.ndim != 2:
        raise ValueError("2-D array expected")
    packed = np.packbits(B, axis=1, bitorder="little")
    return [int.from_bytes(row.tobytes(), "little") for row in packed]


def pack(B):
    """0/1 rows -> packed uint64 rows (the layout of gfla.kernels.binary)."""
    B = np.asarray(B, dtype=np.uint8)
    if B.ndim == 1:
        return pack(B[None, :])[0]
    m, n = B.shape
    w = (n + 63) // 64
    raw = np.zeros((m, 8 * w), dtype=np.uint8)
    if n:
        raw[:, :(n + 7) // 8] = np.packbits(B, axis=1, bitorder="little")
    return np.ascontiguousarray(raw.view("<u8").astype(np.uint64))


def unpack(P, n):
    P = np.ascontiguousarray(P, dtype="<u8")
    if P.ndim == 1:
        return unpack(P[None, :], n)[0]
    raw = P.view(np.uint8).reshape(P.shape[0], 8 * P.shape[1])
    return np.unpackbits(raw, axis=1, count=n, bitorder="little")


_HEX = re.compile(r"(0[xX])?[0-9a-fA-F]+")


def parse_hex(text, n, what="key", holder="the state"):
    """Parse a hex state of n bits (bit i of the integer = state bit i).

    Blanks and underscores between digits are ignored (``1918 1110 0908 0100``).
    More hex digits than ceil(n / 4), or a value of n + 1 bits or more, is refused.
    """
    if isinstance(text, int):
        value = text
        digits = None
    else:
        body = re.sub(r"[\s_]", "", str(text))
        if not body or not _HEX.fullmatch(body):
            raise InputError(f"{what} {text!r} is not a hexadecimal number")
        if body[:2].lower() == "0x":
            body = body[2:]
        digits = len(body)
        value = int(body, 16)
    if value < 0:
        raise InputError(f"{what} must not be negative")
    need = (n + 3) // 4
    if (digits is not None and digits > need) or value.bit_length() > n:
        raise InputError(f"{what} has the wrong length: {value.bit_length()} bits"
                         f"{'' if digits is None else f' ({digits} hex digits)'}, "
                         f"{holder} has {n} bits ({need} hex digits at most)")
    return value


def hex_of(x, n):
    return "0x" + format(int(x), f"0{max(1, (n + 3) // 4)}x")


# ---------------------------------------------------------------------- field calls

def _u8(A):
    return np.ascontiguousarray(A, dtype=np.uint8)


def matmul(A, B):
    return _u8(field().matmul(_u8(A), _u8(B)))


def rank(A):
    return int(field().rank(_u8(A)))


def power(A, e):
    return _u8(field().power(_u8(A), int(e)))


def rref(A):
    R, piv = field().rref(_u8(A))
    return _u8(R), [int(p) for p in piv]


def solve(A, b):
    """(consistent, particular or None, nullspace rows) for A x = b over GF(2), from
    one reduced row echelon form of [A | b]."""
    A = _u8(A)
    m, n = A.shape
    Mx = np.empty((m, n + 1), dtype=np.uint8)
    Mx[:, :n] = A
    Mx[:, n] = np.asarray(b, dtype=np.uint8)
    R, piv = rref(Mx)
    consistent = not (piv and piv[-1] == n)
    if not consistent:
        piv = piv[:-1]
    N = _nullspace_from_rref(R[:, :n], piv, n)
    if not consistent:
        return False, None, N
    x = np.zeros(n, dtype=np.uint8)
    if piv:
        x[piv] = R[:len(piv), n]
    return True, x, N


def _nullspace_from_rref(R, piv, n):
    rk = len(piv)
    free = np.setdiff1d(np.arange(n), np.asarray(piv, dtype=np.int64))
    N = np.zeros((free.size, n), dtype=np.uint8)
    if free.size:
        N[np.arange(free.size), free] = 1
        if rk:
            N[:, np.asarray(piv, dtype=np.int64)] = R[:rk][:, free].T
    return N


def nullspace(A):
    """Rows spanning {x : A x = 0}."""
    A = _u8(A)
    R, piv = rref(A)
    return _nullspace_from_rref(R, piv, A.shape[1])


# ---------------------------------------------------------------------- compiled loops

def charpoly_chains(M):
    """Characteristic polynomial of M as a list of chain polynomials (ints)."""
    from ...kernels import keysched as K
    n = M.shape[0]
    polys, lengths, _, chains = K.krylov_charpoly(pack(M), n)
    out = []
    for j in range(int(chains)):
        words = polys[j]
        value = int.from_bytes(np.ascontiguousarray(words, dtype="<u8").tobytes(), "little")
        out.append(value)
    return out


def poly_apply(P, n, poly, v_packed):
    """p(M) v with M given packed (P) and p an int polynomial."""
    from ...kernels import keysched as K
    deg = poly.bit_length() - 1
    nwords = max(1, (deg + 64) // 64)
    coeffs = np.frombuffer(poly.to_bytes(8 * nwords, "little"), dtype="<u8").astype(np.uint64)
    out = np.zeros_like(v_packed)
    K.poly_apply(P, n, coeffs, deg, v_packed, out)
    return out


def affine_orbit(P, n, C, s0):
    from ...kernels import keysched as K
    R = C.shape[0]
    out = np.zeros((R + 1, P.shape[1]), dtype=np.uint64)
    K.affine_orbit(P, n, np.ascontiguousarray(C, dtype=np.uint64),
                   np.ascontiguousarray(s0, dtype=np.uint64), out)
    return out
