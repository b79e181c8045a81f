"""Matrix products, one fast path per family.

* GF(p) and Z/n (``modular_matmul``): float64 BLAS (numpy ``@``) with delayed reduction
  while k (p-1)^2 < 2^53 for inner dimension k; beyond that each entry is cut into L
  limbs of b bits and the limb polynomials are multiplied by a Karatsuba scheme (3 leaf
  products for 2 limbs, 6 for 3 limbs, 9 for 4 limbs instead of 4, 9, 16), each leaf an
  exact float64 BLAS product; the leaves are interpolated and evaluated at 2^b modulo n
  in exact integer arithmetic (``kernels.modular.limb_combine``). L and b are the
  cheapest choice keeping every leaf below 2^53, with the inner dimension cut into
  chunks when that is cheaper. This covers every p < 2^63 and every n <= 2^64.
* GF(2) (``binary_product``): bit-packed rows, the method of Four Russians (M4RM).
* GF(2^k) (``extension_matmul``): log/exp tables for small matrices; above
  ``EXTENSION_BITSLICE_MIN`` bit-slicing: the k bit planes of each operand are GF(2)
  matrices, the product is a product of polynomials of degree < k with GF(2)-matrix
  coefficients (Karatsuba on the planes, halving while 4 planes or more remain, from
  ``EXTENSION_KARATSUBA_MIN`` rows; the plane products of each piece in a single wide
  M4RM product), reduced modulo the field polynomial. A third method, ``float``, packs
  several planes into one float64 (Kronecker substitution) and counts with BLAS; it
  measured 4 to 16 times slower than bit-slicing (GF(2^8), n = 256 to 1024) and stays
  selectable for comparison.

Strassen-Winograd (7 products, 15 additions per level) runs above a cutoff over each
base case: over the integers in float64 for the BLAS paths (no reduction inside; the
number of levels is limited so every intermediate stays below 2^53), over packed words
for GF(2). The cutoffs are measured, see the constants below.

References
----------
.. [1] V. Strassen, "Gaussian elimination is not optimal", Numerische Mathematik 13,
   1969.
.. [2] S. Winograd, "On multiplication of 2 x 2 matrices", Linear Algebra and its
   Applications 4, 1971 (the 15-addition variant).
.. [3] J.-G. Dumas, P. Giorgi, C. Pernet, "Dense linear algebra over word-size prime
   fields: the FFLAS and FFPACK packages", ACM TOMS 35(3), 2008 (delayed reduction over
   floating-point BLAS; Strassen-Winograd over it).
.. [4] A. Karatsuba, Yu. Ofman, "Multiplication of multidigit numbers on automata",
   Soviet Physics Doklady 7, 1963.
.. [5] M. R. Albrecht, G. V. Bard, W. Hart, "Algorithm 898: Efficient multiplication
   of dense matrices over GF(2)", ACM TOMS 37(1), 2010 (M4RM and Strassen over it).
"""

import contextlib
import ctypes
import os
import time

import numpy as np

from ..errors import InputError

__all__ = ["matmul", "dense_matmul", "modular_matmul", "float_product", "int_product",
           "binary_product", "extension_matmul", "limb_plan", "method", "blas_matmul",
           "blas_single_thread", "EXTENSION_METHODS"]

_EXACT = 1 << 53

# Strassen-Winograd cutoffs: one level is applied while the smallest of m, k, n exceeds
# the cutoff. Measured on the 2-core development machine under a load of 3 to 6 (ratio
# of one Strassen level to the plain product, median of 5): float64 BLAS 2.03 at
# n = 1024, 1.49 at 2048, 1.19 at 4096 -- OpenBLAS still gains efficiency with n up to
# there, so a level only pays beyond 8192.
STRASSEN_FLOAT_CUTOFF = 8192
# GF(2), bit-packed M4RM base: 8192 x 8192 took 0.95 s plain against 0.63 s with
# Strassen down to 2048 and 0.68 s down to 4096; at 4096 one level lost (0.062 s
# against 0.051 s).
STRASSEN_BINARY_CUTOFF = 4096
# M4RM over bands of rows on all threads only for big products (m k n bits): under a
# load of 4 on the 2-core development machine two threads gained nothing (8192^3:
# 1.08 s on one, 1.32 s on two; 8192 x 8 x 8192: 7.8 ms against 15 ms), so they are
# kept for products where a free second core would pay for its start-up.
BINARY_PARALLEL_MIN_WORK = 1 << 36

# GF(2^k): bit-slicing against log/exp tables, measured for GF(2^8) (ms, tables /
# bit-slicing, m x k by k x n, load 4): 64^3 0.17 / 0.23; 96^3 0.52 / 0.28; 128^3
# 1.2 / 0.34; 512^3 111 / 8.9; 1024 x 8 x 1024 5.4 / 3.9; 1024 x 64 x 1024 40 / 4.6;
# 1024 x 64 x 64 2.8 / 0.8; 200 x 48 x 200 1.3 / 0.5.
EXTENSION_BITSLICE_MIN = 48
EXTENSION_BITSLICE_MIN_INNER = 8
EXTENSION_BITSLICE_MIN_WORK = 1 << 18
# One Karatsuba level on the planes per halving while the planes number 4 or more
# (and the left factor has at least 256 rows): GF(2^8) at n = 1024 went from 0.18 s
# (all 64 plane products) to 0.15 s (one level) and 0.05-0.10 s (to 2 planes);
# GF(2^16) at 1024 from 0.97 s to 0.27 s.
EXTENSION_KARATSUBA_MIN = 256
EXTENSION_KARATSUBA_DEPTH = 8
EXTENSION_METHODS = ("auto", "table", "bitslice", "float")

# BLAS products with m k n below this run on one thread; above, ``blas_matmul`` picks
# the thread setting that has been faster. Measured with numpy's OpenBLAS on the 2-core
# development machine under load: every call on two threads cost at least 32 ms
# (32 x 32 by 32 x 1024: 32 ms on two threads, 0.06 ms on one; 128 x 128 by 128 x
# 1024: 32 ms against 0.8 ms; 1024^3: 128 ms against 92 ms), which ruins the
# block-recursive algorithms with their many mid-size products; on the same machine
# when quiet two threads ran 2048^3 in 0.17 s against 0.38 s on one.
BLAS_THREADS_MIN = 1 << 28


def matmul(F, A, B):
    """Validated product A B (internal uint64 arrays)."""
    if A.shape[1] != B.shape[0]:
        raise InputError(f"cannot multiply a {A.shape[0]} x {A.shape[1]} matrix by a "
                         f"{B.shape[0]} x {B.shape[1]} matrix")
    return F._matmul(A, B)


def dense_matmul(F, A, B):
    """Product for the dense families, dispatching on the context's arithmetic."""
    if int(F._ctx[0]) == 1:
        return extension_matmul(F, A, B)
    return modular_matmul(A, B, int(F._ctx[1]) or (1 << 64))


# ------------------------------------------------------------- Karatsuba limb schemes
def _scheme(L):
    """(leaves as tuples of limb indices, interpolation rows {leaf: coefficient})."""
    if L == 1:
        return [(0,)], [{0: 1}]
    if L == 2:
        return [(0,), (1,), (0, 1)], [{0: 1}, {2: 1, 0: -1, 1: -1}, {1: 1}]
    if L == 3:
        # pairwise Karatsuba: c2 = P02 - P0 - P2 + P1 and so on
        leaves = [(0,), (1,), (2,), (0, 1), (0, 2), (1, 2)]
        rows = [{0: 1}, {3: 1, 0: -1, 1: -1}, {4: 1, 0: -1, 2: -1, 1: 1},
                {5: 1, 1: -1, 2: -1}, {2: 1}]
        return leaves, rows
    # L == 4: Karatsuba on the halves (a0 + a1 X) + X^2 (a2 + a3 X), then again inside
    leaves = [(0,), (1,), (0, 1), (2,), (3,), (2, 3), (0, 2), (1, 3), (0, 1, 2, 3)]
    P0, P1, P01, P2, P3, P23, P02, P13, PA = range(9)
    rows = [{P0: 1}, {P01: 1, P0: -1, P1: -1}, {P1: 1, P02: 1, P0: -1, P2: -1},
            {PA: 1, P02: -1, P13: -1, P01: -1, P0: 1, P1: 1, P23: -1, P2: 1, P3: 1},
            {P13: 1, P1: -1, P3: -1, P2: 1}, {P23: 1, P2: -1, P3: -1}, {P3: 1}]
    return leaves, rows


def _build_schemes():
    out = {}
    for L in (1, 2, 3, 4):
        leaves, rows = _scheme(L)
        sub = np.zeros((len(leaves), L), dtype=np.int64)
        for s, ls in enumerate(leaves):
            sub[s, list(ls)] = 1
        M = np.array([[r.get(s, 0) for s in range(len(leaves))] for r in rows],
                     dtype=np.int64)
        out[L] = (sub, M, max(len(x) for x in leaves))
    return out


SCHEMES = _build_schemes()


def limb_plan(nbits, k):
    """Cheapest exact scheme for entries of ``nbits`` bits and inner dimension k.

    Returns ``(L, b, kchunk)``: L limbs of b bits, the inner dimension cut into chunks
    of ``kchunk``. A scheme is admissible when a chunk of at least min(k, 256) keeps its
    largest leaf product below 2^53; among those the fewest leaf products wins.
    """
    best = None
    for L in (1, 2, 3, 4):
        sub, _, g = SCHEMES[L]
        b = -(-nbits // L)
        leafmax = (g * ((1 << b) - 1)) ** 2
        kmax = (_EXACT - 1) // leafmax if leafmax else k
        if kmax < min(k, 256):
            continue
        cost = sub.shape[0]
        if best is None or cost < best[0]:
            best = (cost, L, b, max(1, min(k, kmax)))
    return best[1:]


# ------------------------------------------------------------ BLAS thread control
_BLAS_THREADS = []


def _openblas_threads():
    """(get, set) thread-count functions of the OpenBLAS that numpy loaded, found
    among the process's shared objects (Linux); None when there is none."""
    if _BLAS_THREADS:
        return _BLAS_THREADS[0]
    found = None
    try:
        with open("/proc/self/maps") as fh:
            paths = {line.split()[-1] for line in fh if ".so" in line}
    except OSError:
        paths = set()
    names = (("scipy_openblas_get_num_threads64_", "scipy_openblas_set_num_threads64_"),
             ("openblas_get_num_threads64_", "openblas_set_num_threads64_"),
             ("openblas_get_num_threads", "openblas_set_num_threads"))
    for path in sorted(paths):
        if "openblas" not in os.path.basename(path).lower():
            continue
        try:
            lib = ctypes.CDLL(path)
        except OSError:
            continue
        for get, set_ in names:
            if hasattr(lib, get) and hasattr(lib, set_):
                found = (getattr(lib, get), getattr(lib, set_))
                break
        if found:
            break
    _BLAS_THREADS.append(found)
    return found


@contextlib.contextmanager
def blas_single_thread():
    """Run the enclosed BLAS calls on one thread (OpenBLAS only; a no-op with any
    other BLAS)."""
    funcs = _openblas_threads()
    if funcs is None:
        yield
        return
    get, set_ = funcs
    before = int(get())
    if before <= 1:
        yield
        return
    set_(1)
    try:
        yield
    finally:
        set_(before)


_THREAD_STATS = {}


def blas_matmul(A, B, out=None):
    """numpy's product: on one BLAS thread below ``BLAS_THREADS_MIN``; above, on the
    BLAS's own thread setting or on one thread, whichever has been faster for products
    of this size in this process (each is tried, then the slower one again every 16th
    call, so the choice follows the machine's load)."""
    m, k = A.shape
    n = B.shape[1]
    work = m * k * n
    if work < BLAS_THREADS_MIN:
        with blas_single_thread():
            return np.matmul(A, B, out=out)
    if _openblas_threads() is None:
        return np.matmul(A, B, out=out)
    stats = _THREAD_STATS.setdefault(work.bit_length(), [None, None, 0])
    stats[2] += 1
    if stats[0] is None:
        single = False
    elif stats[1] is None:
        single = True
    else:
        single = stats[1] < stats[0]
        if stats[2] % 16 == 0:
            single = not single
    t0 = time.perf_counter()
    if single:
        with blas_single_thread():
            result = np.matmul(A, B, out=out)
    else:
        result = np.matmul(A, B, out=out)
    per = (time.perf_counter() - t0) / work
    slot = 1 if single else 0
    stats[slot] = per if stats[slot] is None else 0.5 * (stats[slot] + per)
    return result


# ------------------------------------------------ exact integer products in float64
def _level_safe(k, ba, bb, sa, sb):
    """Whether one Strassen-Winograd level on operands bounded by ba, bb (signed or
    not) keeps every product and sum below 2^53 (sums of the Winograd schedule add at
    most four products)."""
    ga = 4 if sa else 2
    gb = 4 if sb else 2
    return 4 * (k // 2 + 1) * ga * ba * gb * bb < _EXACT


def int_product(A, B, ba, bb, sa=False, sb=False, out=None,
                cutoff=None):
    """Exact product of integer-valued float64 matrices, Strassen-Winograd above the
    cutoff.

    Parameters
    ----------
    A, B : float64 arrays (views allowed)
        Integer entries with ``|A| <= ba``, ``|B| <= bb``; ``sa``/``sb`` say whether
        they may be negative. The caller guarantees ``k ba bb < 2^53``.
    out : float64 array, optional
        Receives the product.

    Notes
    -----
    The schedule is Winograd's with three temporaries (Boyer, Dumas, Pernet, Zhou,
    ISSAC 2009 give schedules of this kind); odd dimensions are peeled (the last row,
    column or rank-one term is a plain product).
    """
    if cutoff is None:
        cutoff = STRASSEN_FLOAT_CUTOFF
    m, k = A.shape
    n = B.shape[1]
    if out is None:
        out = np.empty((m, n))
    if min(m, k, n) <= cutoff or not _level_safe(k, ba, bb, sa, sb):
        blas_matmul(A, B, out=out)
        return out
    h, kh, w = m // 2, k // 2, n // 2
    A11, A12, A21, A22 = A[:h, :kh], A[:h, kh:2 * kh], A[h:2 * h, :kh], A[h:2 * h, kh:2 * kh]
    B11, B12, B21, B22 = B[:kh, :w], B[:kh, w:2 * w], B[kh:2 * kh, :w], B[kh:2 * kh, w:2 * w]
    C11, C12, C21, C22 = out[:h, :w], out[:h, w:2 * w], out[h:2 * h, :w], out[h:2 * h, w:2 * w]
    sba = (4 if sa else 2) * ba
    sbb = (4 if sb else 2) * bb
    X = np.empty((h, kh))
    Y = np.empty((kh, w))
    Z = np.empty((h, w))

    def rec(P, Q, bp, bq, sp, sq, o):
        int_product(P, Q, bp, bq, sp, sq, o, cutoff)

    np.subtract(A11, A21, out=X)                     # S3
    np.subtract(B22, B12, out=Y)                     # T3
    rec(X, Y, sba, sbb, True, True, C21)             # P7
    np.add(A21, A22, out=X)                          # S1
    np.subtract(B12, B11, out=Y)                     # T1
    rec(X, Y, sba, sbb, True, True, C22)             # P5
    np.subtract(X, A11, out=X)                       # S2
    np.subtract(B22, Y, out=Y)                       # T2
    rec(X, Y, sba, sbb, True, True, C12)             # P6
    np.subtract(A12, X, out=X)                       # S4
    rec(X, B22, sba, bb, True, sb, Z)                # P3
    rec(A11, B11, ba, bb, sa, sb, C11)               # P1
    np.add(C11, C12, out=C12)                        # U2 = P1 + P6
    np.add(C12, C21, out=C21)                        # U3 = U2 + P7
    np.add(C12, C22, out=C12)                        # U4 = U2 + P5
    np.add(C21, C22, out=C22)                        # U7 = U3 + P5 = C22
    np.add(C12, Z, out=C12)                          # U5 = U4 + P3 = C12
    np.subtract(Y, B21, out=Y)                       # T4 = T2 - B21
    rec(A22, Y, ba, sbb, sa, True, Z)                # P4
    np.subtract(C21, Z, out=C21)                     # U6 = U3 - P4 = C21
    rec(A12, B21, ba, bb, sa, sb, Z)                 # P2
    np.add(C11, Z, out=C11)                          # U1 = P1 + P2 = C11
    del X, Y, Z
    if k > 2 * kh:
        out[:2 * h, :2 * w] += np.outer(A[:2 * h, 2 * kh], B[2 * kh, :2 * w])
    if n > 2 * w:
        blas_matmul(A[:2 * h], B[:, 2 * w:], out=out[:2 * h, 2 * w:])
    if m > 2 * h:
        blas_matmul(A[2 * h:], B, out=out[2 * h:])
    return out


# ------------------------------------------------------------------ GF(p) and Z/n
def modular_matmul(A, B, n):
    """A B mod n (2 <= n <= 2^64) for uint64 arrays with entries < n."""
    m, k = A.shape
    c = B.shape[1]
    if k == 0 or m == 0 or c == 0:
        return np.zeros((m, c), dtype=np.uint64)
    L, b, kc = limb_plan((n - 1).bit_length(), k)
    A = np.ascontiguousarray(A, dtype=np.uint64)
    B = np.ascontiguousarray(B, dtype=np.uint64)
    if kc >= k:
        return _modular_chunk(A, B, n, L, b)
    out = None
    for s in range(0, k, kc):
        part = _modular_chunk(np.ascontiguousarray(A[:, s:s + kc]), B[s:s + kc], n, L, b)
        out = part if out is None else _addmod(out, part, n)
    return out


def _modular_chunk(A, B, n, L, b):
    from ..kernels import modular
    m, k = A.shape
    c = B.shape[1]
    out = np.empty((m, c), dtype=np.uint64)
    if L == 1:
        Af = np.empty((m, k))
        Bf = np.empty((k, c))
        modular.to_float(A, Af)
        modular.to_float(B, Bf)
        C = int_product(Af, Bf, n - 1, n - 1)
        del Af, Bf
        modular.reduce_float_to_uint(C, float(n), out)
        return out
    sub, M, _ = SCHEMES[L]
    nl = sub.shape[0]
    EA = np.empty((nl, m, k))
    EB = np.empty((nl, k, c))
    modular.limb_leaves(A, b, sub, EA)
    modular.limb_leaves(B, b, sub, EB)
    P = np.empty((nl, m, c))
    bmax = (1 << b) - 1
    for s in range(nl):
        g = int(sub[s].sum())
        int_product(EA[s], EB[s], g * bmax, g * bmax, out=P[s])
    del EA, EB
    modular.limb_combine(P, M, b, np.uint64(n % (1 << 64)), out)
    return out


def _addmod(X, Y, n):
    s = X + Y
    if n == 1 << 64:
        return s
    wrap = (s < X) | (s >= np.uint64(n))
    s[wrap] -= np.uint64(n)
    return s


def float_product(X, Y, p):
    """Unreduced exact product of float64 matrices with entries in [0, p); the caller
    guarantees k (p-1)^2 < 2^52."""
    return int_product(X, Y, p - 1, p - 1)


# ---------------------------------------------------------------------------- GF(2)
def _m4rm(A, B):
    from ..kernels import binary
    C = np.empty((A.shape[0], B.shape[1]), dtype=np.uint64)
    if A.shape[0] * B.shape[0] * 64 * B.shape[1] >= BINARY_PARALLEL_MIN_WORK:
        import numba
        binary.matmul_parallel(A, B, C, numba.get_num_threads())
    else:
        binary.matmul(A, B, C)
    return C


def binary_product(A, B, cutoff=None):
    """Product of bit-packed GF(2) matrices (layout of ``kernels.binary``).

    A is (m, (k + 63) // 64) with k = B.shape[0]. Strassen-Winograd over M4RM while
    m, k and the column count all exceed the cutoff; splits of k and of the columns
    fall on word boundaries, the rest is peeled.
    """
    if cutoff is None:
        cutoff = STRASSEN_BINARY_CUTOFF
    A = np.ascontiguousarray(A, dtype=np.uint64)
    B = np.ascontiguousarray(B, dtype=np.uint64)
    m = A.shape[0]
    k, wn = B.shape
    kw, nw, h = k // 128, wn // 2, m // 2
    if min(m, k, 64 * wn) <= cutoff or kw == 0 or nw == 0 or h == 0:
        return _m4rm(A, B)
    kh = 64 * kw
    c = np.ascontiguousarray
    A11, A12 = c(A[:h, :kw]), c(A[:h, kw:2 * kw])
    A21, A22 = c(A[h:2 * h, :kw]), c(A[h:2 * h, kw:2 * kw])
    B11, B12 = c(B[:kh, :nw]), c(B[:kh, nw:2 * nw])
    B21, B22 = c(B[kh:2 * kh, :nw]), c(B[kh:2 * kh, nw:2 * nw])

    def rec(X, Y):
        return binary_product(X, Y, cutoff)

    C = np.empty((m, wn), dtype=np.uint64)
    S1 = A21 ^ A22
    T1 = B12 ^ B11
    P5 = rec(S1, T1)
    S2 = S1 ^ A11
    T2 = B22 ^ T1
    P6 = rec(S2, T2)
    del S1, T1
    S4 = A12 ^ S2
    P3 = rec(S4, B22)
    del S4, S2
    P1 = rec(A11, B11)
    U2 = P1 ^ P6
    del P6
    C[:h, :nw] = P1 ^ rec(A12, B21)
    del P1
    C[:h, nw:2 * nw] = U2 ^ P5 ^ P3
    del P3
    T4 = T2 ^ B21
    P4 = rec(A22, T4)
    del T4, T2
    U3 = U2 ^ rec(A11 ^ A21, B22 ^ B12)
    C[h:2 * h, :nw] = U3 ^ P4
    C[h:2 * h, nw:2 * nw] = U3 ^ P5
    del U2, U3, P4, P5
    if k > 2 * kh:
        C[:2 * h, :2 * nw] ^= _m4rm(c(A[:2 * h, 2 * kw:]), c(B[2 * kh:, :2 * nw]))
    if wn > 2 * nw:
        C[:2 * h, 2 * nw:] = _m4rm(c(A[:2 * h]), c(B[:, 2 * nw:]))
    if m > 2 * h:
        C[2 * h:] = _m4rm(c(A[2 * h:]), B)
    return C


# -------------------------------------------------------------------------- GF(2^k)
def _ext_method(m, k, n):
    if (min(m, n) < EXTENSION_BITSLICE_MIN or k < EXTENSION_BITSLICE_MIN_INNER
            or m * k * n <= EXTENSION_BITSLICE_MIN_WORK):
        return "table"
    return "bitslice"


def extension_matmul(F, A, B, method="auto"):
    """Product over GF(2^k) (``F`` an ``ExtensionField``) by tables, bit-slicing or
    float64 counting; ``auto`` picks by size (see the module constants)."""
    m, kk = A.shape
    n = B.shape[1]
    if method == "auto":
        method = _ext_method(m, kk, n)
    A = np.ascontiguousarray(A, dtype=np.uint64)
    B = np.ascontiguousarray(B, dtype=np.uint64)
    if method == "table":
        from ..kernels import dense
        C = np.empty((m, n), dtype=np.uint64)
        dense.matmul_table(A, B, F._ctx, C)
        return C
    if method == "bitslice":
        return _ext_bitslice(A, B, F.k, F.modulus)
    if method == "float":
        return _ext_float(A, B, F.k, F.modulus)
    raise InputError(f"unknown GF(2^k) product method {method!r}; choose one of "
                     + ", ".join(EXTENSION_METHODS))


def _reduce_planes(planes, k, modulus):
    """Planes of a polynomial of degree <= 2k-2 reduced modulo the field polynomial, in
    place; returns the k low planes."""
    low = modulus ^ (1 << k)
    taps = [t for t in range(k) if (low >> t) & 1]
    for d in range(planes.shape[0] - 1, k - 1, -1):
        for t in taps:
            planes[d - k + t] ^= planes[d]
    return planes[:k]


def _plane_product(SA, SB):
    """Product of plane polynomials: SA (ka, m, wk) and SB (kb, kk, wn) give the
    ka + kb - 1 planes of sum_{i,j} x^(i+j) A_i B_j, with all ka kb plane products in
    one M4RM product of the stacked A planes by the side-by-side B planes."""
    ka, m, wk = SA.shape
    kb, kk, wn = SB.shape
    Ap = SA.reshape(ka * m, wk)
    Bp = np.ascontiguousarray(SB.transpose(1, 0, 2)).reshape(kk, kb * wn)
    Cp = binary_product(Ap, Bp).reshape(ka, m, kb, wn)
    out = np.zeros((ka + kb - 1, m, wn), dtype=np.uint64)
    for i in range(ka):
        for j in range(kb):
            out[i + j] ^= Cp[i, :, j, :]
    return out


def _plane_karatsuba(SA, SB, m, depth=None):
    """Karatsuba on the plane polynomials while the operands are big enough (3
    half-size plane products instead of 4, ``depth`` levels at most), then the direct
    plane product."""
    if depth is None:
        depth = EXTENSION_KARATSUBA_DEPTH
    k = SA.shape[0]
    if k < 4 or m < EXTENSION_KARATSUBA_MIN or depth <= 0:
        return _plane_product(SA, SB)
    h = (k + 1) // 2
    lo_a, hi_a = SA[:h], SA[h:]
    lo_b, hi_b = SB[:h], SB[h:]
    mid_a = lo_a.copy()
    mid_a[:hi_a.shape[0]] ^= hi_a
    mid_b = lo_b.copy()
    mid_b[:hi_b.shape[0]] ^= hi_b
    P0 = _plane_karatsuba(np.ascontiguousarray(lo_a), np.ascontiguousarray(lo_b), m,
                          depth - 1)
    P2 = _plane_karatsuba(np.ascontiguousarray(hi_a), np.ascontiguousarray(hi_b), m,
                          depth - 1)
    P1 = _plane_karatsuba(mid_a, mid_b, m, depth - 1)
    P1[:P0.shape[0]] ^= P0
    P1[:P2.shape[0]] ^= P2
    out = np.zeros((2 * k - 1,) + P0.shape[1:], dtype=np.uint64)
    out[:P0.shape[0]] ^= P0
    out[h:h + P1.shape[0]] ^= P1
    out[2 * h:2 * h + P2.shape[0]] ^= P2
    return out


def _ext_bitslice(A, B, k, modulus):
    from ..kernels import extension
    m, kk = A.shape
    n = B.shape[1]
    SA = np.empty((k, m, (kk + 63) // 64), dtype=np.uint64)
    SB = np.empty((k, kk, (n + 63) // 64), dtype=np.uint64)
    extension.bitslice(A, k, SA)
    extension.bitslice(B, k, SB)
    planes = _reduce_planes(_plane_karatsuba(SA, SB, m), k, modulus)
    out = np.empty((m, n), dtype=np.uint64)
    extension.unslice(np.ascontiguousarray(planes), n, out)
    return out


def _ext_float(A, B, k, modulus):
    """GF(2^k) product by float64 BLAS: groups of ga planes of A and gb planes of B are
    packed into one float each (plane t at bit s t, Kronecker substitution); every
    coefficient of the integer product of two groups counts at most min(ga, gb) kk
    terms, so slots of s bits keep them apart and the parity of each slot is the GF(2)
    coefficient."""
    m, kk = A.shape
    n = B.shape[1]
    best = None
    for ga in range(1, k + 1):
        for gb in range(1, k + 1):
            s = (min(ga, gb) * kk).bit_length()
            if (ga + gb - 1) * s <= 53:
                cost = -(-k // ga) * -(-k // gb)
                if best is None or cost < best[0]:
                    best = (cost, ga, gb, s)
    if best is None:  # pragma: no cover - kk < 2^26 always fits ga = gb = 1
        raise InputError("inner dimension too large for the float method")
    _, ga, gb, s = best
    one = np.uint64(1)

    def groups(X, g):
        out = []
        for t0 in range(0, k, g):
            P = np.zeros(X.shape)
            for t in range(t0, min(k, t0 + g)):
                P += ((X >> np.uint64(t)) & one).astype(np.float64) * float(1 << (s * (t - t0)))
            out.append((t0, min(k, t0 + g) - t0, P))
        return out

    planes = np.zeros((2 * k - 1, m, n), dtype=np.uint64)
    GB = groups(B, gb)
    for t0, na, PA in groups(A, ga):
        for u0, nb, PB in GB:
            P = blas_matmul(PA, PB).astype(np.int64)
            for v in range(na + nb - 1):
                planes[t0 + u0 + v] ^= ((P >> (s * v)) & 1).astype(np.uint64)
    low = _reduce_planes(planes, k, modulus)
    out = np.zeros((m, n), dtype=np.uint64)
    for t in range(k):
        out |= low[t] << np.uint64(t)
    return out


# ------------------------------------------------------------------------ reporting
def method(F, m, k, n):
    """Short text naming the product method gfla runs for an m x k by k x n product
    over ``F`` (for the benchmark table)."""
    if F.spec == "GF(2)":
        levels = _levels(m, k, n, STRASSEN_BINARY_CUTOFF)
        text = "M4RM"
        if m * k * n >= BINARY_PARALLEL_MIN_WORK:
            text += " on all threads"
        return text + (f" + {levels} Strassen level(s)" if levels else "")
    if int(F._ctx[0]) == 1:
        meth = _ext_method(m, k, n)
        if meth == "table":
            return "log/exp tables"
        kara = F.k >= 4 and m >= EXTENSION_KARATSUBA_MIN and EXTENSION_KARATSUBA_DEPTH
        return f"bit-slicing, {F.k} planes" + (", Karatsuba" if kara else "") + ", M4RM"
    nmod = int(F._ctx[1]) or (1 << 64)
    L, b, kc = limb_plan((nmod - 1).bit_length(), k)
    chunks = -(-k // kc)
    text = ("float64 BLAS, delayed reduction" if L == 1 else
            f"{L} limbs of {b} bits, {SCHEMES[L][0].shape[0]} BLAS products")
    if chunks > 1:
        text += f", k in {chunks} chunks"
    return text


def _levels(m, k, n, cutoff):
    levels = 0
    while min(m, k, n) > cutoff:
        m, k, n = m // 2, k // 2, n // 2
        levels += 1
    return levels
