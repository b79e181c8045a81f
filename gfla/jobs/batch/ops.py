"""The operations a batch record can ask for, and how a group of records runs.

Records of the same field, operation and matrix shape form a group. A group of an
operation with a batched path (``inv``, ``det``, ``rank``, ``solve``, ``nullspace``) is
one call into :mod:`gfla.linalg.batched` on the stacked matrices (compiled kernels over
a field, the per-matrix path over Z/n or for matrices larger than 32). The other
operations call the field's method, or the mixing job's function, once per record.

Every operation returns, for each record of the group, either a JSON-ready result or a
:class:`gfla.GflaError`; nothing here raises for one bad record.

Operations provided by other jobs are registered by name and imported on first use
(``mds`` and ``branch_number`` from :mod:`gfla.jobs.mixing`): a record asking for one
whose module is missing gets an error line, not a crash.
"""

import importlib

import numpy as np

from ...errors import InputError

__all__ = ["Operation", "OPERATIONS", "BULK_OPERATIONS", "operation", "register",
           "run_group", "to_json"]


class Operation:
    """One batch operation.

    Parameters
    ----------
    name : str
        The ``op`` of a record.
    square : bool
        The matrix must be square.
    batched : bool
        A group goes through :mod:`gfla.linalg.batched` in one call.
    extras : tuple of str
        Record keys the operation needs besides ``matrix`` (``rhs``, ``exponent``,
        ``right``, ...); ``optional`` names keys it may use.
    provider : (module, attribute) or None
        For operations of other jobs: where the per-record function lives.
    summary : str
        One line for the documentation and ``--help``.
    """

    def __init__(self, name, summary, square=True, batched=False, extras=(),
                 optional=(), provider=None, each=None, bulk_shape=None):
        self.name = name
        self.summary = summary
        self.square = square
        self.batched = batched
        self.extras = tuple(extras)
        self.optional = tuple(optional)
        self.provider = provider
        self.each = each
        self.bulk_shape = bulk_shape

    def __repr__(self):
        return f"Operation({self.name!r})"


OPERATIONS = {}


def register(op):
    """Add (or replace) an operation; returns it."""
    OPERATIONS[op.name] = op
    return op


def operation(name):
    """The :class:`Operation` called ``name``; ``InputError`` naming the known ones."""
    op = OPERATIONS.get(name)
    if op is None:
        known = ", ".join(sorted(OPERATIONS))
        raise InputError(f"unknown op {name!r} (known: {known})")
    return op


def to_json(value):
    """Plain JSON values (ints, lists, dicts, bools, strings) from numpy arrays and
    scalars, tuples, named tuples and dicts with non-string keys."""
    if isinstance(value, np.ndarray):
        return value.tolist()
    if isinstance(value, np.generic):
        return value.item()
    if isinstance(value, dict):
        return {str(k): to_json(v) for k, v in value.items()}
    if hasattr(value, "_asdict"):
        return to_json(value._asdict())
    if isinstance(value, (list, tuple)):
        return [to_json(v) for v in value]
    return value


# --------------------------------------------------------------------------- per record

def _each_charpoly(F, A, rec):
    return [int(c) for c in F.charpoly(A)]


def _each_minpoly(F, A, rec):
    return [int(c) for c in F.minpoly(A)]


def _each_order(F, A, rec):
    return int(F.order(A))


def _each_power(F, A, rec):
    from ...io.spec import parse_int_expr
    e = rec["exponent"]
    if isinstance(e, bool) or not isinstance(e, (int, str)):
        raise InputError("exponent must be an integer or text such as '2^100' or '-1'")
    if isinstance(e, str):
        e = parse_int_expr(e, "exponent")
    return F.power(A, e).tolist()


def _each_mul(F, A, rec):
    from .records import matrix_rows
    B = F.asarray(matrix_rows(rec["right"], "right"), name="right")
    if B.shape[0] != A.shape[1]:
        raise InputError(f"right has {B.shape[0]} rows, matrix has {A.shape[1]} columns")
    return F.matmul(A, B).tolist()


def _without_method(value):
    if isinstance(value, dict):
        return {k: _without_method(v) for k, v in value.items() if k != "method"}
    return value


def _each_mds(fn, F, A, rec):
    return _without_method(to_json(fn(F, A, counts=False)))


def _each_branch_number(fn, F, A, rec):
    cell = rec.get("cell_size")
    if cell is not None and (isinstance(cell, bool) or not isinstance(cell, int)):
        raise InputError("cell_size must be an integer")
    return _without_method(to_json(fn(F, A, cell_size=cell)))


def _resolve(op):
    module, attribute = op.provider
    try:
        mod = importlib.import_module(module)
    except ImportError as exc:
        raise InputError(f"op {op.name!r} needs {module}, which is not available "
                         f"({exc})") from None
    fn = getattr(mod, attribute, None)
    if fn is None:
        raise InputError(f"op {op.name!r}: {module} has no {attribute}")
    return fn


register(Operation("inv", "inverse (rows)", batched=True, bulk_shape="matrix"))
register(Operation("det", "determinant (an integer)", batched=True, bulk_shape="scalar"))
register(Operation("rank", "rank (any shape)", square=False, batched=True,
                   bulk_shape="scalar"))
register(Operation("solve", "A x = rhs: {consistent, solution, nullspace}", square=False,
                   batched=True, extras=("rhs",), bulk_shape="vector"))
register(Operation("nullspace", "basis rows of {x : A x = 0} (any shape)", square=False,
                   batched=True))
register(Operation("charpoly", "characteristic polynomial, highest degree first",
                   each=_each_charpoly, bulk_shape="poly"))
register(Operation("minpoly", "minimal polynomial, highest degree first",
                   each=_each_minpoly))
register(Operation("order", "multiplicative order (an integer)", each=_each_order))
register(Operation("power", "matrix ** exponent (exponent: integer or '2^100')",
                   extras=("exponent",), each=_each_power, bulk_shape="matrix"))
register(Operation("mul", "matrix times the matrix 'right'", square=False,
                   extras=("right",), each=_each_mul))
register(Operation("mds", "is every square submatrix nonsingular (mixing job)",
                   square=False, each=_each_mds,
                   provider=("gfla.jobs.mixing", "is_mds")))
register(Operation("branch_number", "differential and linear branch numbers (mixing job)",
                   optional=("cell_size",), each=_each_branch_number,
                   provider=("gfla.jobs.mixing", "branch_numbers")))

BULK_OPERATIONS = tuple(name for name, op in OPERATIONS.items() if op.bulk_shape)


# --------------------------------------------------------------------------- groups

def run_group(F, op, stack, records, rhs=None):
    """Run ``op`` on a validated stack.

    Parameters
    ----------
    F : field object
    op : Operation
    stack : uint64 ndarray (K, m, n)
        The validated matrices of the group.
    records : list of dict
        The K records (for the keys an operation needs besides the matrix).
    rhs : uint64 ndarray (K, m), optional
        Validated right-hand sides for ``solve``.

    Returns
    -------
    values : ndarray or list
        An integer array (K, ...) for ``inv``, ``det`` and ``rank`` (entries of failed
        records are zero), else a list of K JSON-ready values (None where failed).
    errors : dict
        ``{k: exception}`` for the records that failed.
    """
    from ...linalg import batched
    K = stack.shape[0]
    if op.name == "inv":
        r = batched.inv(F, stack)
        return r.inverse, {int(k): batched.singular_error(F, r, k)
                           for k in np.flatnonzero(r.singular)}
    if op.name == "det":
        return batched.det(F, stack), {}
    if op.name == "rank":
        return batched.rank(F, stack), {}
    if op.name == "solve":
        s = batched.solve(F, stack, rhs)
        x = s.particular.tolist()
        null = s.nullspace.tolist()
        nullity = s.nullity.tolist()
        return [{"consistent": bool(s.consistent[k]),
                 "solution": x[k] if s.consistent[k] else None,
                 "nullspace": null[k][:nullity[k]]} for k in range(K)], {}
    if op.name == "nullspace":
        null, nullity = batched.nullspace(F, stack)
        rows = null.tolist()
        counts = nullity.tolist()
        return [rows[k][:counts[k]] for k in range(K)], {}
    if op.provider is not None:
        try:
            fn = _resolve(op)
        except InputError as exc:
            return [None] * K, {k: exc for k in range(K)}
        each = lambda F_, A_, rec_: op.each(fn, F_, A_, rec_)  # noqa: E731
    else:
        each = op.each
    values = [None] * K
    errors = {}
    Fout = F._out
    for k in range(K):
        try:
            values[k] = each(F, Fout(stack[k]), records[k])
        except Exception as exc:  # one record's failure never stops the group
            errors[k] = exc
    return values, errors
