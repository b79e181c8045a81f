"""What a mixing layer is: invertibility, MDS with a certificate, branch numbers, binary
expansion and XOR cost.

Each property comes with how it was decided (``"method"``), so a report can be checked.
Conventions:

* cells: for GF(2^k) a cell is one field element; for a GF(2) matrix a cell is a run of
  ``cell_size`` consecutive bits (bit j belongs to cell j // cell_size);
* binary expansion: bit b of input cell j is column j k + b, bit r of output cell i is
  row i k + r, and bit b of an element is the coefficient of x^b; block (i, j) is the
  k x k matrix of multiplication by M[i, j];
* indices of rows, columns and signals are 0-based.
"""

import math
import time

import numpy as np

from ...errors import InputError, MathError
from . import engine

__all__ = ["analyze_layer", "is_mds", "branch_numbers", "bit_matrix", "multiplication_matrix",
           "xor_count", "naive_xor_count", "evaluate_program", "format_program",
           "check_mixing_field"]

#: above this size the exact branch number of a non-MDS matrix over GF(2^k) is not
#: attempted by ``analyze`` (C(2n, n-1) small eliminations)
BRANCH_FIELD_MAX = 10
#: binary matrices: exact cell branch numbers for at most this many cells (4^cells pairs)
BRANCH_BINARY_MAX_CELLS = 10


def check_mixing_field(F):
    """Refuse fields other than GF(2^k) (k >= 2) and GF(2)."""
    if F.size == 2 and F.is_field:
        return "binary"
    if getattr(F, "modulus", None) is not None and F.is_field and F.characteristic == 2:
        return "extension"
    raise InputError(f"mixing-layer analysis works over GF(2^k) or GF(2), not {F.spec}")


# --------------------------------------------------------------------------- binary expansion

def multiplication_matrix(F, a):
    """The k x k binary matrix of x -> a x in GF(2^k): column b holds the bits of a x^b.

    Examples
    --------
    >>> import gfla
    >>> F = gfla.field("GF(2^8)", modulus=0x11b)
    >>> int(multiplication_matrix(F, 2).sum())
    11
    """
    return bit_matrix(F, [[int(a)]])


def bit_matrix(F, M):
    """The nk x mk binary expansion of an n x m matrix over GF(2^k) (see the module
    docstring for the bit order); a GF(2) matrix is returned unchanged.

    Examples
    --------
    >>> import gfla
    >>> F = gfla.field("GF(2^8)", modulus=0x11b)
    >>> bit_matrix(F, [[2, 3], [1, 1]]).shape
    (16, 16)
    """
    M = F.asarray(M)
    if F.size == 2:
        return M.astype(np.int64)
    k = F.k
    n, m = M.shape
    powers = (1 << np.arange(k, dtype=np.int64))
    P = np.asarray(F.mul(np.broadcast_to(M[:, :, None], (n, m, k)),
                         np.broadcast_to(powers[None, None, :], (n, m, k))), dtype=np.int64)
    bits = (P[..., None] >> np.arange(k)[None, None, None, :]) & 1     # [i, j, b, r]
    return np.ascontiguousarray(bits.transpose(0, 3, 1, 2).reshape(n * k, m * k))


# --------------------------------------------------------------------------- MDS

def is_mds(F, M, counts=True, progress=None):
    """Decide whether every square submatrix of M (over GF(2^k)) is nonsingular.

    Parameters
    ----------
    F : GF(2^k) field object
    M : array_like, shape (n, m), n or m at most 20
    counts : bool
        Examine every minor and count the singular ones by size (the default); False
        stops at the first singular minor.
    progress : callable, optional
        ``progress(done, total)`` in units of table look-ups.

    Returns
    -------
    dict
        ``value`` (bool), ``method``, ``square_submatrices`` (how many exist),
        ``singular_minors_by_size`` ({size: count}; only with ``counts``), and when not
        MDS ``singular_submatrix`` = {rows, columns, submatrix, det} for a smallest one,
        its determinant recomputed by the field (0).

    Notes
    -----
    The minors of each column set are obtained from those of the column set without its
    last column by Laplace expansion along that column, for every row set at once, so
    each of the C(n+m, n) - 1 minors costs s table look-ups (s its size) instead of an
    elimination. Column sets are visited depth first; one table of 2^n minors per thread
    serves all sizes, since minors of size s sit at row masks of popcount s.

    References
    ----------
    .. [1] F. J. MacWilliams, N. J. A. Sloane, "The Theory of Error-Correcting Codes",
       North-Holland, 1977, Chapter 11, Theorem 8 (a code [I | A] is MDS iff every
       square submatrix of A is nonsingular).
    .. [2] P. S. Laplace, cofactor expansion of determinants (1772).

    Examples
    --------
    >>> import gfla
    >>> F = gfla.field("GF(2^8)", modulus=0x11b)
    >>> is_mds(F, [[2, 3, 1, 1], [1, 2, 3, 1], [1, 1, 2, 3], [3, 1, 1, 2]])["value"]
    True
    """
    if check_mixing_field(F) != "extension":
        raise InputError("the minors criterion for MDS needs GF(2^k); for GF(2) matrices "
                         "with cells use the branch number")
    M = F.asarray(M)
    n, m = M.shape
    total = sum(math.comb(n, s) * math.comb(m, s) for s in range(1, min(n, m) + 1))
    zeros, cert = engine.mds_scan(F, M, stop_first=not counts, progress=progress)
    value = cert is None
    out = {
        "value": value,
        "method": ("every square minor computed by Laplace expansion along columns with "
                   "the minors of each column prefix memoised"
                   + ("" if counts else "; stopped at the first singular minor")),
        "square_submatrices": total,
    }
    if counts:
        out["singular_minors_by_size"] = {s: int(zeros[s]) for s in range(1, len(zeros))}
    if cert is not None:
        rows, cols = cert
        sub = M[np.ix_(rows, cols)]
        det = int(F.det(sub))
        if det != 0:  # pragma: no cover - a kernel defect, never a user error
            raise AssertionError(f"MDS certificate rows {rows} columns {cols} has det {det}")
        out["singular_submatrix"] = {"rows": rows, "columns": cols,
                                     "submatrix": sub.tolist(), "det": det}
    return out


# --------------------------------------------------------------------------- branch numbers

def _cell_weight_field(v):
    return int(np.count_nonzero(np.asarray(v)))


def _cell_weight_bits(v, cell):
    v = np.asarray(v).reshape(-1, cell)
    return int(np.count_nonzero(v.any(axis=1)))


def branch_numbers(F, M, cell_size=None, mds=None):
    """Exact differential and linear branch numbers, each with a witness.

    The differential branch number is min over x != 0 of wt(x) + wt(M x), the linear one
    the same for the transpose, weights counted in cells (field elements over GF(2^k),
    ``cell_size``-bit groups over GF(2)).

    Parameters
    ----------
    F : GF(2^k) or GF(2) field object
    M : array_like, square
    cell_size : int, optional
        GF(2) only (required there, dividing the size).
    mds : bool, optional
        Already known MDS status over GF(2^k); for n > 10 an MDS matrix gets n + 1 from
        the theorem below instead of the enumeration.

    Returns
    -------
    dict
        ``{"differential": {...}, "linear": {...}}``, each with ``value``, ``witness``
        (x), ``image`` (M x or M^T x), ``method``. The witness's weight is recomputed
        with the field before it is returned.

    Notes
    -----
    Over GF(2^k) the set {(x, M x)} is a linear code of length 2n and the branch number
    its minimum distance. A least-weight codeword with support A in x is the unique (up
    to a scalar) vector supported on A that vanishes on the zero rows of M x, hence the
    kernel vector of an (|A|-1) x |A| submatrix of rank |A|-1; all C(2n, n-1) such pairs
    are tried. Over GF(2) with cells the code is only GF(2)-linear; for input cells A
    and output cells Z the vectors on A with image vanishing on Z form a subspace, which
    is nonzero exactly when a rank is deficient, and the least |A| + n - |Z| over those
    pairs is the branch number.

    References
    ----------
    .. [1] J. Daemen, V. Rijmen, "The Design of Rijndael", Springer, 2002, Section 9.3
       (branch numbers; MDS iff branch number n + 1).
    .. [2] F. J. MacWilliams, N. J. A. Sloane, "The Theory of Error-Correcting Codes",
       North-Holland, 1977, Chapter 1 (minimum distance from dependent columns).
    """
    kind = check_mixing_field(F)
    M = F.asarray(M)
    n = M.shape[0]
    if M.shape[0] != M.shape[1]:
        raise InputError(f"branch numbers need a square matrix, got {M.shape[0]} x {M.shape[1]}")
    out = {}
    for name, A in (("differential", M), ("linear", np.ascontiguousarray(M.T))):
        if kind == "extension":
            if cell_size is not None:
                raise InputError("--cell-size applies to GF(2) matrices; over GF(2^k) a "
                                 "cell is one field element")
            if mds and n > BRANCH_FIELD_MAX:
                x = [0] * n
                x[0] = 1
                value = n + 1
                method = "MDS, so n + 1 (Daemen and Rijmen, The Design of Rijndael, 9.3)"
            elif n > BRANCH_FIELD_MAX:
                raise InputError(f"exact branch numbers of a non-MDS {n} x {n} matrix are "
                                 f"limited to n <= {BRANCH_FIELD_MAX}")
            else:
                value, x = engine.branch_field(F, A)
                method = ("minimum distance of the code {(x, Mx)}: kernel vectors of all "
                          "(s-1) x s submatrices of rank s-1")
            image = np.asarray(F.matmul(A, np.asarray(x, dtype=np.int64)[:, None]))[:, 0]
            weight = _cell_weight_field(x) + _cell_weight_field(image)
        else:
            if cell_size is None:
                raise InputError("GF(2) matrices need --cell-size (bits per cell) for "
                                 "branch numbers")
            cell = _check_cell(n, cell_size)
            cells = n // cell
            if cells > BRANCH_BINARY_MAX_CELLS:
                raise InputError(f"exact cell branch numbers are limited to "
                                 f"{BRANCH_BINARY_MAX_CELLS} cells, got {cells}")
            if n > 64:
                raise InputError(f"exact cell branch numbers are limited to 64 bits, got {n}")
            value, x = engine.branch_binary(A, cell)
            method = ("least |A| + n - |Z| over input cells A and output cells Z with a "
                      "rank-deficient restriction (GF(2) elimination)")
            image = np.asarray(F.matmul(A, np.asarray(x, dtype=np.int64)[:, None]))[:, 0]
            weight = _cell_weight_bits(x, cell) + _cell_weight_bits(image, cell)
        if weight != value:  # pragma: no cover - a kernel defect
            raise AssertionError(f"{name} branch witness has weight {weight}, not {value}")
        out[name] = {"value": int(value), "witness": [int(v) for v in x],
                     "image": [int(v) for v in image], "method": method}
    return out


def _check_cell(nbits, cell_size):
    try:
        cell = int(cell_size)
    except (TypeError, ValueError):
        raise InputError(f"cell size {cell_size!r} is not an integer") from None
    if cell < 1:
        raise InputError(f"cell size must be at least 1, got {cell}")
    if nbits % cell:
        raise InputError(f"cell size {cell} does not divide the bit width {nbits}")
    return cell


# --------------------------------------------------------------------------- XOR count

def naive_xor_count(bits):
    """The d-XOR count: for each row, its number of ones minus one (0 for an empty row);
    the ones of the matrix minus its rows when no row is zero."""
    w = np.asarray(bits).sum(axis=1)
    return int(np.maximum(w - 1, 0).sum())


def evaluate_program(nin, xors, outputs, inputs=None):
    """Run an XOR program: every signal is an input (0 .. nin-1) or the XOR of two earlier
    signals; ``outputs[i]`` is the signal of output i (-1 for constant 0).

    ``inputs`` is an (nin, v) 0/1 array of v input vectors as columns; the default, the
    identity, evaluates the program on every unit vector, which gives the matrix the
    program computes. Returns the (len(outputs), v) 0/1 array of outputs.
    """
    if inputs is None:
        inputs = np.eye(nin, dtype=np.uint8)
    inputs = np.asarray(inputs, dtype=np.uint8)
    values = np.zeros((nin + len(xors), inputs.shape[1]), dtype=np.uint8)
    values[:nin] = inputs
    for i, (a, b) in enumerate(xors):
        if not (0 <= a < nin + i and 0 <= b < nin + i):
            raise ValueError(f"XOR {i} reads signal {a} or {b} before it exists")
        values[nin + i] = values[a] ^ values[b]
    out = np.zeros((len(outputs), inputs.shape[1]), dtype=np.uint8)
    for i, s in enumerate(outputs):
        if s >= 0:
            out[i] = values[s]
    return out


def _verified(bits, xors, outputs):
    nin = bits.shape[1]
    got = evaluate_program(nin, xors, outputs)
    return bool(np.array_equal(got, np.asarray(bits, dtype=np.uint8)))


def xor_count(bits, bp_runs=8, seconds=20.0, paar_runs=8, program=False, bp=True,
              node_budget=None, seed=0):
    """Naive and optimized XOR counts of a binary matrix (the linear map y = B x).

    Parameters
    ----------
    bits : array_like of 0/1, shape (r, c), r and c at most 64 for the optimized count
    bp_runs : int
        Runs of the Boyar-Peralta heuristic: the first breaks ties deterministically,
        the others at random (seeds 1, 2, ... for ``seed`` 0).
    seconds : float
        No new Boyar-Peralta run starts after this much time (the first always runs).
    paar_runs : int
        Runs of Paar's heuristic (first deterministic, then random ties).
    program : bool
        Include the shortest program found.
    bp : bool
        Run the Boyar-Peralta heuristic at all.
    node_budget : int, optional
        Sets of base elements searched per target and step by the Boyar-Peralta
        heuristic (default: 200 000, less above 32 outputs); distances are exact while
        the budget covers them, upper bounds otherwise.
    seed : int
        Seed of the random tie-breaking runs of both heuristics (0 <= seed < 2^31): run
        i >= 1 uses ``i + seed * 2^32``; the same seed gives the same programs.

    Returns
    -------
    dict
        ``naive``; ``optimized`` (the shorter of the two heuristics), ``method``,
        ``paar``, ``boyar_peralta`` (None when not run), ``bp_exact_distances``,
        ``verified`` (the program was run on every unit vector and reproduced the
        matrix before being reported), and ``program`` = {inputs, xors, outputs} on
        request. For matrices wider or taller than 64 only ``naive`` is given, with
        ``optimized`` None and a ``note``.

    References
    ----------
    .. [1] C. Paar, "Optimized arithmetic for Reed-Solomon encoders", IEEE ISIT 1997.
    .. [2] J. Boyar, R. Peralta, "A new combinational logic minimization technique with
       applications to cryptology", SEA 2010, LNCS 6049, pp. 178-189.
    .. [3] T. Kranz, G. Leander, K. Stoffelen, F. Wiemer, "Shorter linear straight-line
       programs for MDS matrices", IACR ToSC 2017(4) (the d-XOR count and these
       heuristics applied to mixing layers).
    """
    bits = np.asarray(bits, dtype=np.int64)
    if bits.ndim != 2 or not np.isin(bits, (0, 1)).all():
        raise InputError("the XOR count needs a 0/1 matrix")
    out = {"naive": naive_xor_count(bits),
           "naive_method": "d-XOR count: ones minus rows of the binary matrix"}
    r, c = bits.shape
    if r > engine.MAX_PROGRAM_BITS or c > engine.MAX_PROGRAM_BITS:
        out.update(optimized=None, method=None, paar=None, boyar_peralta=None,
                   verified=None,
                   note=f"XOR programs are searched for binary matrices up to "
                        f"{engine.MAX_PROGRAM_BITS} x {engine.MAX_PROGRAM_BITS}; this one "
                        f"is {r} x {c}")
        return out
    best = None
    paar_best = None
    for run in range(max(1, paar_runs)):
        xors, outs = engine.paar(bits, seed=_run_seed(seed, run))
        if paar_best is None or len(xors) < len(paar_best[0]):
            paar_best = (xors, outs)
    candidates = [("paar", paar_best[0], paar_best[1])]
    bp_best = None
    bp_exact = None
    if bp:
        start = time.perf_counter()
        for run in range(max(1, bp_runs)):
            if run and time.perf_counter() - start > seconds:
                break
            xors, outs, exact = engine.boyar_peralta(bits, seed=_run_seed(seed, run),
                                                     node_budget=node_budget)
            if bp_best is None or len(xors) < len(bp_best[0]):
                bp_best = (xors, outs)
                bp_exact = exact
        candidates.append(("boyar-peralta", bp_best[0], bp_best[1]))
    for method, xors, outs in sorted(candidates, key=lambda t: len(t[1])):
        if _verified(bits, xors, outs):
            best = (method, xors, outs)
            break
    if best is None:  # pragma: no cover - a kernel defect
        raise AssertionError("no XOR program reproduced the matrix")
    out.update(optimized=len(best[1]), method=best[0], paar=len(paar_best[0]),
               boyar_peralta=None if bp_best is None else len(bp_best[0]),
               bp_exact_distances=bp_exact, verified=True)
    if program:
        out["program"] = {"inputs": c, "xors": [list(p) for p in best[1]],
                          "outputs": list(best[2])}
    return out


def _run_seed(seed, run):
    """Kernel seed of heuristic run ``run`` (0: the deterministic tie-breaking)."""
    if not 0 <= int(seed) < 1 << 31:
        raise InputError(f"the seed must be 0 .. 2^31 - 1, got {seed}")
    return 0 if run == 0 else run + (int(seed) << 32)


def format_program(program):
    """Lines ``t0 = x3 ^ x7`` ... ``y0 = t12`` of an XOR program."""
    nin = program["inputs"]

    def name(s):
        return f"x{s}" if s < nin else f"t{s - nin}"

    lines = [f"t{i} = {name(a)} ^ {name(b)}" for i, (a, b) in enumerate(program["xors"])]
    lines += [f"y{i} = {name(s) if s >= 0 else '0'}" for i, s in enumerate(program["outputs"])]
    return lines


# --------------------------------------------------------------------------- everything

PARTS = ("order", "branch", "xor", "minor-counts", "program")


def _attempt(fn):
    try:
        return fn(), None
    except MathError as exc:
        if isinstance(exc, InputError):
            raise
        cert = exc.certificate() if callable(getattr(exc, "certificate", None)) else {}
        return None, {"refused": str(exc), "kind": type(exc).__name__, "certificate": cert}


def analyze_layer(F, M, cell_size=None, skip=(), xor_seconds=20.0, bp_runs=8, progress=None,
                  seed=0):
    """Everything about a square mixing matrix, each property with how it was decided.

    Parameters
    ----------
    F : GF(2^k) or GF(2) field object
    M : array_like, square
    cell_size : int, optional
        Bits per cell of a GF(2) matrix (branch numbers and MDS are about cells).
    skip : iterable of str
        Parts to leave out: ``"order"``, ``"branch"``, ``"xor"`` (the optimized XOR
        program; the naive count stays), ``"minor-counts"`` (stop the MDS decision at
        the first singular minor). ``"program"`` in ``skip`` drops the XOR list only.
    xor_seconds, bp_runs, seed : see :func:`xor_count`
    progress : callable, optional
        For the MDS decision: ``progress(done, total)``.

    Returns
    -------
    dict
        Keys ``n``, ``cells``, ``cell_bits``, ``invertible``, ``det``, ``inverse``,
        ``methods``, ``involutory``, ``orthogonal``, ``order``, ``charpoly``,
        ``minpoly``, ``mds``, ``branch_number``, ``bit_matrix``, ``xor_count``; see the
        module docstring for conventions.

    Examples
    --------
    >>> import gfla
    >>> F = gfla.field("GF(2^8)", modulus=0x11b)
    >>> r = analyze_layer(F, [[2, 3, 1, 1], [1, 2, 3, 1], [1, 1, 2, 3], [3, 1, 1, 2]],
    ...             skip=("xor",))
    >>> r["mds"]["value"], r["branch_number"]["differential"]["value"]
    (True, 5)
    """
    kind = check_mixing_field(F)
    skip = set(skip)
    unknown = skip - set(PARTS)
    if unknown:
        raise InputError(f"unknown part to skip: {sorted(unknown)[0]!r} "
                         f"(choose from {', '.join(PARTS)})")
    M = F.asarray(M)
    n, m = M.shape
    if n != m:
        raise InputError(f"a mixing matrix must be square, got {n} x {m}")
    if kind == "binary" and cell_size is None:
        cell_size = 1
    if kind == "extension" and cell_size is not None:
        raise InputError("--cell-size applies to GF(2) matrices; over GF(2^k) a cell is "
                         "one field element")
    cell = _check_cell(n, cell_size) if kind == "binary" else F.k
    cells = n // cell if kind == "binary" else n
    report = {"n": n, "cells": cells, "cell_bits": cell}

    det = int(F.det(M))
    report["det"] = det
    report["invertible"] = {"value": det != 0,
                            "method": "determinant by Gauss-Jordan elimination"}
    inverse = None
    I = F.identity(n)
    if det != 0:
        inverse = F.inv(M)
        if not np.array_equal(F.matmul(inverse, M), I):  # pragma: no cover - core defect
            raise AssertionError("the inverse times the matrix is not the identity")
    report["inverse"] = None if inverse is None else inverse.tolist()
    report["methods"] = {
        "inverse": "Gauss-Jordan elimination, checked by multiplying back to I",
        "charpoly": "characteristic polynomial by the field's default method",
        "minpoly": "minimal polynomial by the field's default method",
    }
    square = F.matmul(M, M)
    report["involutory"] = {"value": bool(np.array_equal(square, I)),
                            "method": "M M compared with the identity"}
    report["orthogonal"] = {"value": bool(np.array_equal(F.matmul(M, M.T), I)),
                            "method": "M M^T compared with the identity"}
    if "order" in skip:
        report["order"] = None
    elif det == 0:
        report["order"] = {"value": None, "note": "singular: no multiplicative order"}
    else:
        value, refusal = _attempt(lambda: int(F.order(M)))
        report["order"] = ({"value": value, "method": "from the factorised minimal "
                            "polynomial, checked by M^order = I"} if refusal is None
                           else {"value": None, **refusal})
    report["charpoly"] = [int(c) for c in F.charpoly(M)]
    report["minpoly"] = [int(c) for c in F.minpoly(M)]

    branch = None
    if kind == "extension":
        mds = is_mds(F, M, counts="minor-counts" not in skip, progress=progress)
    if "branch" not in skip or kind == "binary":
        if kind == "binary" and (cells > BRANCH_BINARY_MAX_CELLS or n > 64):
            branch = None
        elif kind == "extension" and n > BRANCH_FIELD_MAX and not mds["value"]:
            branch = None
        else:
            branch = branch_numbers(F, M, cell_size=cell_size if kind == "binary" else None,
                                    mds=mds["value"] if kind == "extension" else None)
    if kind == "binary":
        if branch is None:
            mds = {"value": None, "note": "cell branch number not computed for this size"}
        else:
            d = branch["differential"]
            mds = {"value": d["value"] == cells + 1,
                   "method": f"differential branch number {d['value']} compared with "
                             f"cells + 1 = {cells + 1}"}
            if d["value"] != cells + 1:
                mds["low_weight_input"] = d["witness"]
    report["mds"] = mds
    if "branch" in skip:
        report["branch_number"] = None
    elif branch is None:
        report["branch_number"] = {"note": "exact branch numbers not attempted at this size"}
    else:
        report["branch_number"] = branch

    bits = bit_matrix(F, M)
    report["bit_matrix"] = {"rows": bits.shape[0], "columns": bits.shape[1],
                            "rank": int(_gf2().rank(bits)), "ones": int(bits.sum()),
                            "matrix": bits.tolist()}
    if "xor" in skip:
        report["xor_count"] = {"naive": naive_xor_count(bits),
                               "naive_method": "d-XOR count: ones minus rows of the "
                                               "binary matrix",
                               "optimized": None, "note": "optimized count skipped"}
    else:
        report["xor_count"] = xor_count(bits, bp_runs=bp_runs, seconds=xor_seconds,
                                        program="program" not in skip, seed=seed)
    return report


def _gf2():
    import gfla
    return gfla.field("GF(2)")
