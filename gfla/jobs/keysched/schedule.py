"""Key schedules as affine maps over GF(2): the three ways to describe one, probing,
and fast evaluation of any round.

A schedule, once linearised, is

    state_0 = master key,   state_(r+1) = M state_r + c_r,   round key r = S state_r

with M an n x n GF(2) matrix (the same every round), c_r the round's constant and S the
selection of round-key bits. For a TOML spec the constants come from sequences; every
sequence is a linear generator g_(r+1) = G g_r (an LFSR, a cyclic or a finite one-hot
counter over a listed table) with c_r = c + C g_r, so the whole schedule is the
time-invariant linear recurrence of the augmented matrix

    A = [[M, C, c], [0, G, 0], [0, 0, 1]]   on   z_r = (state_r, g_r, 1),

and z_R = A^R z_0 = p(A) z_0 with p = x^R mod det(xI - A): a round 2^64 costs one
polynomial power modulo the characteristic polynomial and dim(A) matrix-vector products.

Linearisation probes the update: f(0) and f(e_i) give c and the columns of M (for a
spec, the sequence inputs are probed the same way), then the affine claim is checked on
random pairs (seeded): f(x ^ y) = f(x) ^ f(y) ^ f(0) at real rounds, and f(x) against
the probed model at random points. A failure becomes a witness pair
(:class:`NonAffineScheduleError`).

References
----------
.. [1] R. Lidl, H. Niederreiter, "Finite Fields", Cambridge University Press, 2nd ed.
   1997, Chapter 8 (linear recurring sequences and their matrices).
"""

import importlib
import importlib.util
import inspect
import os
import sys

import numpy as np

from ...errors import InputError, int_text
from . import bits as B
from . import gf2poly
from .errors import NonAffineScheduleError, VaryingLinearPartError

__all__ = ["AffineSchedule", "load_schedule", "from_spec", "from_callable", "from_matrix",
           "AFFINE_PAIRS", "PROBE_SEED", "STEP_LIMIT"]

AFFINE_PAIRS = 64          # random pairs (and as many random points) checked
PROBE_SEED = 0x6b73636864  # seed of the affine check: the same pairs every run
STEP_LIMIT = 1 << 20       # rounds computed one by one when no fast form exists
_CHECK_ROUNDS = 64         # the pair check draws its rounds from 0 .. 63


class _Generator:
    """A linear generator of per-round values: g_(r+1) = G g_r, value = T g_r."""

    def __init__(self, name, G, g0, T, kind, limit=None, period=None, description=""):
        self.name = name
        self.G = G.astype(np.uint8)
        self.g0 = g0.astype(np.uint8)
        self.T = T.astype(np.uint8)       # value bits = T g
        self.kind = kind                  # "lfsr", "cyclic", "finite"
        self.limit = limit                # rounds available (finite lists)
        self.period = period
        self.description = description

    @property
    def dim(self):
        return self.G.shape[0]


def _sequence_generator(seq):
    if seq.is_lfsr:
        w = seq.width
        G = seq.lfsr_matrix()
        period = _lfsr_period(seq)
        desc = f"LFSR of {w} bits, taps {seq.taps}, seed {seq.seed:#x}"
        return _Generator(seq.name, G, B.int_to_bits(seq.seed, w), np.eye(w, dtype=np.uint8),
                          "lfsr", None, period, desc)
    L = len(seq.values)
    G = np.zeros((L, L), dtype=np.uint8)
    for i in range(L - 1):
        G[i + 1, i] = 1
    if seq.repeat:
        G[0, L - 1] = 1
    g0 = np.zeros(L, dtype=np.uint8)
    g0[0] = 1
    T = B.ints_to_bits(seq.values, seq.width).T.copy()
    kind = "cyclic" if seq.repeat else "finite"
    desc = f"{L} listed values of {seq.width} bit{'s' if seq.width != 1 else ''}" + (
        ", repeating" if seq.repeat else "")
    return _Generator(seq.name, G, g0, T, kind, None if seq.repeat else L,
                      L if seq.repeat else None, desc)


def _lfsr_period(seq, limit=1 << 20):
    """Period of the seed's orbit, or None if it does not come back within ``limit``."""
    s = seq.seed
    start = s
    for k in range(1, limit + 1):
        s = seq.lfsr_step(s)
        if s == start:
            return k
    return None


class AffineSchedule:
    """A linearised key schedule.

    Attributes
    ----------
    name : str
    kind : {"spec", "callable", "matrix"}
    n : int
        State bits.
    M : ndarray of uint8, shape (n, n)
        Linear part of the round update (column convention: state' = M state + c_r).
    c : ndarray of uint8, shape (n,)
        The constant part that is the same every round.
    generators : list
        Per-round constant generators (spec sequences).
    C : ndarray of uint8, shape (n, a)
        How the generator states enter the update.
    round_key_bits : ndarray of int64
        Round-key bit j is state bit ``round_key_bits[j]``.
    rounds : int or None
        The cipher's number of rounds, when the description gives it.
    """

    def __init__(self, name, kind, M, c, round_key_bits, generators=(), C=None,
                 round_constant=None, rounds=None, checked=None):
        self.name = name
        self.kind = kind
        self.M = np.ascontiguousarray(M, dtype=np.uint8)
        self.n = self.M.shape[0]
        self.c = np.ascontiguousarray(c, dtype=np.uint8)
        self.round_key_bits = np.asarray(round_key_bits, dtype=np.int64)
        self.generators = list(generators)
        a = sum(g.dim for g in self.generators)
        self.C = (np.zeros((self.n, 0), dtype=np.uint8) if C is None
                  else np.ascontiguousarray(C, dtype=np.uint8))
        if self.C.shape != (self.n, a):  # pragma: no cover - built consistently below
            raise AssertionError("generator injection has the wrong shape")
        self._round_constant = round_constant   # callable r -> c_r bits (callables only)
        self._const_cache = {}
        self.rounds = rounds
        self.checked = checked or {"probed": False}
        self._packed_M = None
        self._aug = None
        self._aug_charpoly = None

    # ---------------------------------------------------------------- description
    @property
    def key_bits(self):
        return len(self.round_key_bits)

    @property
    def constant_kind(self):
        """"none", "fixed" (the same every round) or "per-round"."""
        if self._round_constant is not None:
            return "per-round"
        if self.generators and self.C.any():
            return "per-round"
        return "fixed" if self.c.any() else "none"

    @property
    def round_limit(self):
        """Highest state index that can be computed (None: unbounded)."""
        limits = [g.limit for g in self.generators if g.limit is not None and
                  self._generator_used(g)]
        if self._round_constant is not None:
            limits.append(STEP_LIMIT)
        return min(limits) if limits else None

    def _generator_used(self, g):
        lo = self._offset(g)
        return bool(self.C[:, lo:lo + g.dim].any())

    def _offset(self, g):
        off = 0
        for h in self.generators:
            if h is g:
                return off
            off += h.dim
        raise KeyError(g.name)  # pragma: no cover

    def has_fast_form(self):
        return self._round_constant is None

    def check_round(self, R, what="round"):
        if isinstance(R, bool) or not isinstance(R, (int, np.integer)):
            raise InputError(f"{what} {R!r} is not an integer")
        R = int(R)
        if R < 0:
            raise InputError(f"{what} {int_text(R)} is negative")
        limit = self.round_limit
        if limit is not None and R > limit:
            if self._round_constant is not None:
                raise InputError(
                    f"{what} {int_text(R)}: a callable that takes the round number is run "
                    f"round by round, up to {limit}")
            names = [g.name for g in self.generators if g.limit is not None]
            raise InputError(
                f"{what} {int_text(R)} is past the end of the listed round constants "
                f"({', '.join(names)}: states 0 .. {limit} are defined; set repeat = true "
                "to cycle the list)")
        return R

    # ---------------------------------------------------------------- constants
    def constants(self, r0, r1):
        """c_r for r0 <= r < r1 as an (r1 - r0, n) uint8 array."""
        count = max(0, r1 - r0)
        if self._round_constant is not None:
            out = np.zeros((count, self.n), dtype=np.uint8)
            for i, r in enumerate(range(r0, r1)):
                if r not in self._const_cache:
                    self._const_cache[r] = self._round_constant(r)
                out[i] = self._const_cache[r]
            return out
        out = np.broadcast_to(self.c, (count, self.n)).copy()
        if not self.generators or count == 0:
            return out
        g = self.generator_state(r0)
        G = self._generator_matrix()
        states = np.zeros((count, g.size), dtype=np.uint8)
        for i in range(count):
            states[i] = g
            g = (G.astype(np.int64) @ g) & 1 if G.size else g
        if self.C.size:
            out ^= B.matmul(states, self.C.T)
        return out

    def _generator_matrix(self):
        a = sum(g.dim for g in self.generators)
        G = np.zeros((a, a), dtype=np.uint8)
        off = 0
        for g in self.generators:
            G[off:off + g.dim, off:off + g.dim] = g.G
            off += g.dim
        return G

    def generator_state(self, r):
        """Concatenated generator states at round r (r steps from the start)."""
        parts = []
        for g in self.generators:
            if g.kind in ("cyclic", "finite"):
                L = g.dim
                v = np.zeros(L, dtype=np.uint8)
                if g.kind == "cyclic":
                    v[r % L] = 1
                elif r < L:
                    v[r] = 1
                parts.append(v)
            else:
                if r < 4096:
                    s = g.g0.copy()
                    for _ in range(r):
                        s = (g.G.astype(np.int64) @ s) & 1
                    parts.append(s.astype(np.uint8))
                else:
                    P = B.power(g.G, r)
                    parts.append(((P.astype(np.int64) @ g.g0) & 1).astype(np.uint8))
        return np.concatenate(parts) if parts else np.zeros(0, dtype=np.uint8)

    # ---------------------------------------------------------------- augmented form
    def augmented(self):
        """(A, z0): the time-invariant linear form, z = (state, generators, 1)."""
        if self._aug is None:
            if self._round_constant is not None:
                raise InputError("a callable that takes the round number has no "
                                 "time-invariant form")
            n = self.n
            a = self.C.shape[1]
            d = n + a + 1
            A = np.zeros((d, d), dtype=np.uint8)
            A[:n, :n] = self.M
            A[:n, n:n + a] = self.C
            A[:n, d - 1] = self.c
            A[n:n + a, n:n + a] = self._generator_matrix()
            A[d - 1, d - 1] = 1
            z0 = np.zeros(d, dtype=np.uint8)
            off = n
            for g in self.generators:
                z0[off:off + g.dim] = g.g0
                off += g.dim
            z0[d - 1] = 1
            self._aug = (A, z0, B.pack(A))
        return self._aug[0], self._aug[1]

    def _aug_poly(self):
        if self._aug_charpoly is None:
            A, _ = self.augmented()
            chains = B.charpoly_chains(A)
            p = 1
            for c in chains:
                p = gf2poly.mul(p, c)
            self._aug_charpoly = p
        return self._aug_charpoly

    def packed_M(self):
        if self._packed_M is None:
            self._packed_M = B.pack(self.M)
        return self._packed_M

    # ---------------------------------------------------------------- states
    def state(self, key, R):
        """state_R for the master key (bits), any R (fast form where there is one)."""
        R = self.check_round(R)
        key = np.asarray(key, dtype=np.uint8)
        if R == 0:
            return key.copy()
        if not self.has_fast_form() or R <= 2 * self.n + 64:
            return self.states(key, R, R)[0]
        A, z0 = self.augmented()
        z = z0.copy()
        z[:self.n] = key
        p = gf2poly.Reducer(self._aug_poly()).powmod_x(R)
        PA = self._aug[2]
        out = B.poly_apply(PA, A.shape[0], p, B.pack(z))
        return B.unpack(out, A.shape[0])[:self.n]

    def states(self, key, R0, R1):
        """states R0 .. R1 (inclusive) as an (R1 - R0 + 1, n) uint8 array."""
        R0 = self.check_round(R0)
        R1 = self.check_round(R1)
        if R1 < R0:
            raise InputError(f"round range {R0}..{R1} runs backwards")
        key = np.asarray(key, dtype=np.uint8)
        if R0 > 0 and (self.has_fast_form() and R0 > 2 * self.n + 64):
            start = self.state(key, R0)
        else:
            start = key
            if R0 > 0:
                C = self.constants(0, R0)
                start = B.unpack(B.affine_orbit(self.packed_M(), self.n, B.pack(C),
                                                B.pack(key))[-1], self.n)
        C = self.constants(R0, R1)
        orbit = B.affine_orbit(self.packed_M(), self.n, B.pack(C) if len(C) else
                               np.zeros((0, (self.n + 63) // 64), dtype=np.uint64),
                               B.pack(start))
        return B.unpack(orbit, self.n)

    def round_key(self, state):
        return np.asarray(state)[..., self.round_key_bits]

    def affine_of_rounds(self, R):
        """(M^R, d_R) with state_R = M^R key + d_R."""
        R = self.check_round(R)
        zero = np.zeros(self.n, dtype=np.uint8)
        d = self.state(zero, R)
        return B.power(self.M, R), d

    def round_constants_vary(self):
        return self.constant_kind == "per-round"


# ---------------------------------------------------------------------- probing

def _witness_from_point(f_eval, x_bits, predicted_fn, n_in):
    """A failing pair (s, e_i) from a point where f(x) differs from the probed model."""
    idx = np.flatnonzero(x_bits)
    partial = np.zeros(n_in, dtype=np.uint8)
    prefixes = [partial.copy()]
    for i in idx:
        partial[i] ^= 1
        prefixes.append(partial.copy())
    outs = f_eval(np.array(prefixes))
    for j in range(1, len(prefixes)):
        if not np.array_equal(outs[j], predicted_fn(prefixes[j])):
            return prefixes[j - 1], _unit(n_in, idx[j - 1])
    return None  # pragma: no cover - the last prefix is x itself


def _unit(n, i):
    e = np.zeros(n, dtype=np.uint8)
    e[i] = 1
    return e


def _raise_pair(f_eval, x, y, n_state, round_index, name):
    outs = f_eval(np.array([np.zeros_like(x), x, y, x ^ y]))
    vals = {"f(0)": B.bits_to_int(outs[0]), "f(x)": B.bits_to_int(outs[1]),
            "f(y)": B.bits_to_int(outs[2]), "f(x^y)": B.bits_to_int(outs[3])}
    xs, ys = B.bits_to_int(x[:n_state]), B.bits_to_int(y[:n_state])
    extra = ""
    if len(x) > n_state and (x[n_state:].any() or y[n_state:].any()):
        extra = " (with round-constant inputs)"
    raise NonAffineScheduleError(
        f"{name}: the round update is not affine over GF(2){extra}: "
        f"f(x ^ y) != f(x) ^ f(y) ^ f(0) for x = {B.hex_of(xs, n_state)}, "
        f"y = {B.hex_of(ys, n_state)} (round {round_index})",
        xs, ys, vals, n_state, round_index)


def _check_affine(f_round, f_combined, n_state, n_in, model, rounds_available, name,
                  rng):
    """The affine claim on AFFINE_PAIRS random pairs at real rounds and as many random
    points of the combined input space; raises NonAffineScheduleError with a witness."""
    # pairs at real rounds
    max_round = _CHECK_ROUNDS if rounds_available is None else max(1, min(
        _CHECK_ROUNDS, rounds_available))
    rounds = rng.integers(0, max_round, AFFINE_PAIRS)
    X = rng.integers(0, 2, (AFFINE_PAIRS, n_state), dtype=np.uint8)
    Y = rng.integers(0, 2, (AFFINE_PAIRS, n_state), dtype=np.uint8)
    Z = np.zeros_like(X)
    stack = np.concatenate([Z, X, Y, X ^ Y])
    rr = np.concatenate([rounds] * 4)
    out = f_round(stack, rr)
    k = AFFINE_PAIRS
    bad = np.flatnonzero((out[3 * k:] ^ out[2 * k:3 * k] ^ out[k:2 * k] ^ out[:k]).any(axis=1))
    if bad.size:
        i = int(bad[0])
        r = int(rounds[i])
        _raise_pair(lambda S: f_round(S, np.full(len(S), r)), X[i], Y[i], n_state, r, name)
    # random points of the combined space against the probed model
    if f_combined is None:
        return
    P = rng.integers(0, 2, (AFFINE_PAIRS, n_in), dtype=np.uint8)
    got = f_combined(P)
    pred = model(P)
    bad = np.flatnonzero((got ^ pred).any(axis=1))
    if bad.size:
        x = P[int(bad[0])]
        pair = _witness_from_point(f_combined, x, lambda v: model(v[None, :])[0], n_in)
        _raise_pair(f_combined, pair[0], pair[1], n_state, 0, name)


def from_spec(spec, seed=PROBE_SEED):
    """Linearise a parsed TOML spec (:class:`~gfla.jobs.keysched.spec.ScheduleSpec`)."""
    n = spec.nbits
    seqs = list(spec.sequences.values())
    widths = [s.width for s in seqs]
    n_in = n + sum(widths)

    def combined(P):
        P = np.asarray(P, dtype=np.uint8)
        vals = {}
        off = n
        for s in seqs:
            vals[s.name] = P[:, off:off + s.width]
            off += s.width
        return spec.evaluate(P[:, :n], vals)

    gens = [_sequence_generator(s) for s in seqs]

    def seq_values_for_rounds(rounds):
        vals = {}
        for s, g in zip(seqs, gens):
            out = np.zeros((len(rounds), s.width), dtype=np.uint8)
            cache = {}
            for i, r in enumerate(rounds):
                r = int(r)
                if r not in cache:
                    cache[r] = _generator_value(g, r)
                out[i] = cache[r]
            vals[s.name] = out
        return vals

    def f_round(S, rounds):
        return spec.evaluate(np.asarray(S, dtype=np.uint8), seq_values_for_rounds(rounds))

    _check_probe_memory(spec.name or "spec", n_in, 3)
    probes = np.zeros((n_in + 1, n_in), dtype=np.uint8)
    probes[1:] = np.eye(n_in, dtype=np.uint8)
    out = combined(probes)
    c = out[0].copy()
    cols = (out[1:] ^ c).T            # (n, n_in)
    M = np.ascontiguousarray(cols[:, :n])
    Cseq = cols[:, n:]

    def model(P):
        return B.matmul(P, cols.T) ^ c

    limits = [g.limit for g in gens if g.limit is not None]
    rng = np.random.default_rng(seed)
    _check_affine(f_round, combined, n, n_in, model, min(limits) if limits else None,
                  spec.name, rng)
    # injection of generator states: value = T g, so C_gen = Cseq_q T_q
    blocks = []
    off = 0
    for s, g in zip(seqs, gens):
        blocks.append(B.matmul(Cseq[:, off:off + s.width], g.T))
        off += s.width
    C = np.concatenate(blocks, axis=1) if blocks else None
    return AffineSchedule(spec.name, "spec", M, c, spec.round_key_bits, gens, C,
                          rounds=spec.rounds,
                          checked={"probed": True, "pairs": AFFINE_PAIRS,
                                   "points": AFFINE_PAIRS, "seed": seed})


def _generator_value(g, r):
    if g.kind in ("cyclic", "finite"):
        L = g.dim
        if g.kind == "finite" and r >= L:
            return np.zeros(g.T.shape[0], dtype=np.uint8)
        return g.T[:, r % L]
    s = g.g0.astype(np.int64)
    if r < 4096:
        for _ in range(r):
            s = (g.G.astype(np.int64) @ s) & 1
    else:
        s = (B.power(g.G, r).astype(np.int64) @ s) & 1
    return ((g.T.astype(np.int64) @ s) & 1).astype(np.uint8)


# ---------------------------------------------------------------------- callables

def _import_callable(target):
    if ":" not in target:
        raise InputError(f"{target!r} is not module:function")
    module_name, _, func_name = target.rpartition(":")
    if not module_name or not func_name:
        raise InputError(f"{target!r} is not module:function")
    try:
        if module_name.endswith(".py") or os.sep in module_name:
            if not os.path.exists(module_name):
                raise InputError(f"{module_name}: no such file")
            spec = importlib.util.spec_from_file_location(
                os.path.splitext(os.path.basename(module_name))[0], module_name)
            module = importlib.util.module_from_spec(spec)
            spec.loader.exec_module(module)
        else:
            added = False
            if os.getcwd() not in sys.path and "" not in sys.path:
                sys.path.insert(0, os.getcwd())
                added = True
            try:
                module = importlib.import_module(module_name)
            finally:
                if added:
                    sys.path.remove(os.getcwd())
    except InputError:
        raise
    except ImportError as exc:
        raise InputError(f"cannot import {module_name!r}: {exc}") from None
    except Exception as exc:
        raise InputError(f"importing {module_name!r} failed: {type(exc).__name__}: {exc}") \
            from None
    fn = getattr(module, func_name, None)
    if fn is None or not callable(fn):
        raise InputError(f"module {module_name!r} has no function {func_name!r}")
    return fn


def _takes_round(fn):
    try:
        sig = inspect.signature(fn)
    except (TypeError, ValueError):
        return False
    params = [p for p in sig.parameters.values()
              if p.kind in (p.POSITIONAL_ONLY, p.POSITIONAL_OR_KEYWORD)]
    return len(params) >= 2 or "round" in sig.parameters


def _check_probe_memory(name, n, arrays):
    """Refuse a state too large to probe (``gfla.limits``): the n + 1 probe states,
    the states they map to and the matrix read off them are arrays of n + 1 x n 0/1
    bytes. A callable holds 7 of them at its peak (peak resident memory measured at
    n = 8192: 7.02 n^2 bytes: the probes, the identity they are filled from, the list
    of images and its array, their sum with the constant and the transposed matrix);
    a spec at least 3 (the probes, their images, the sum)."""
    from ...limits import Workspace
    Workspace(f"{name}: linearising a {n}-bit state").add(arrays, (n + 1, n), 1).check()


def from_callable(fn, state_bits=None, name=None, seed=PROBE_SEED):
    """Linearise a Python callable mapping a state to the next.

    The callable receives the state as an int (bit i = state bit i), or as a 0/1
    numpy array of length n when it has the attribute ``state_form = "bits"``, and
    returns the next state in the same form. A second parameter (or a keyword named
    ``round``) receives the round number. The state size is ``state_bits`` or the
    callable's attribute ``state_bits``; the round key is the whole state unless the
    callable has ``round_key_bits`` (a list of state bit indices).
    """
    if isinstance(fn, str):
        target = fn
        fn = _import_callable(fn)
        name = name or target
    name = name or getattr(fn, "__name__", "callable")
    n = state_bits if state_bits is not None else getattr(fn, "state_bits", None)
    if n is None:
        raise InputError(f"{name}: the state size is unknown: give --state-bits N or set "
                         "the function attribute state_bits")
    if isinstance(n, bool) or not isinstance(n, (int, np.integer)) or n < 1 or n > 1 << 16:
        raise InputError(f"{name}: state_bits must be an integer 1 .. 65536, got {n!r}")
    n = int(n)
    form = getattr(fn, "state_form", "int")
    if form not in ("int", "bits"):
        raise InputError(f"{name}: state_form must be 'int' or 'bits', got {form!r}")
    with_round = _takes_round(fn)
    rk = getattr(fn, "round_key_bits", None)
    if rk is None:
        rk = np.arange(n, dtype=np.int64)
    else:
        rk = np.asarray(list(rk), dtype=np.int64)
        if rk.size == 0 or (rk < 0).any() or (rk >= n).any():
            raise InputError(f"{name}: round_key_bits must be state bit indices 0 .. {n - 1}")

    def call(x_bits, r):
        arg = B.bits_to_int(x_bits) if form == "int" else x_bits.copy()
        try:
            y = fn(arg, r) if with_round else fn(arg)
        except Exception as exc:
            raise InputError(f"{name} raised {type(exc).__name__}: {exc}") from None
        if form == "int":
            if isinstance(y, bool) or not isinstance(y, (int, np.integer)) or y < 0 \
                    or int(y).bit_length() > n:
                raise InputError(f"{name} returned {y!r}, not an integer state of {n} bits")
            return B.int_to_bits(int(y), n)
        arr = np.asarray(y)
        if arr.shape != (n,) or not np.isin(arr, (0, 1)).all():
            raise InputError(f"{name} returned an array that is not {n} bits of 0 and 1")
        return arr.astype(np.uint8)

    def f_round(S, rounds):
        return np.array([call(s, int(r)) for s, r in zip(S, rounds)], dtype=np.uint8)

    _check_probe_memory(name, n, 7)
    probes = np.zeros((n + 1, n), dtype=np.uint8)
    probes[1:] = np.eye(n, dtype=np.uint8)
    out = f_round(probes, np.zeros(n + 1, dtype=np.int64))
    c = out[0].copy()
    M = np.ascontiguousarray((out[1:] ^ c).T)
    rng = np.random.default_rng(seed)

    if with_round:
        const_cache = {0: c}

        def round_constant(r):
            if r not in const_cache:
                const_cache[r] = call(np.zeros(n, dtype=np.uint8), r)
            return const_cache[r]

        def model_round(S, rounds):
            return B.matmul(S, M.T) ^ np.array([round_constant(int(r)) for r in rounds])

        # pairs at random rounds, then points at random rounds against the model
        _check_affine(f_round, None, n, n, None, None, name, rng)
        rounds = rng.integers(0, _CHECK_ROUNDS, AFFINE_PAIRS)
        P = rng.integers(0, 2, (AFFINE_PAIRS, n), dtype=np.uint8)
        got = f_round(P, rounds)
        bad = np.flatnonzero((got ^ model_round(P, rounds)).any(axis=1))
        if bad.size:
            i = int(bad[0])
            r = int(rounds[i])

            def f_at(S, r=r):
                return f_round(S, np.full(len(S), r))

            probe_r = f_at(probes)
            cols_r = (probe_r[1:] ^ probe_r[0]).T
            differ = np.flatnonzero((cols_r ^ M).any(axis=0))
            if differ.size:
                j = int(differ[0])
                raise VaryingLinearPartError(
                    f"{name}: the linear part of the update differs between round 0 and "
                    f"round {r} (state bit {j}); gfla needs the same matrix every round",
                    r, j, B.bits_to_int(M[:, j]), B.bits_to_int(cols_r[:, j]), n)
            pair = _witness_from_point(
                f_at, P[i], lambda v: model_round(v[None, :], [r])[0], n)
            _raise_pair(f_at, pair[0], pair[1], n, r, name)
        return AffineSchedule(name, "callable", M, c, rk, round_constant=round_constant,
                              checked={"probed": True, "pairs": AFFINE_PAIRS,
                                       "points": AFFINE_PAIRS, "seed": seed})

    def combined(P):
        return f_round(P, np.zeros(len(P), dtype=np.int64))

    def model(P):
        return B.matmul(P, M.T) ^ c

    _check_affine(f_round, combined, n, n, model, None, name, rng)
    return AffineSchedule(name, "callable", M, c, rk,
                          checked={"probed": True, "pairs": AFFINE_PAIRS,
                                   "points": AFFINE_PAIRS, "seed": seed})


# ---------------------------------------------------------------------- raw matrices

def from_matrix(M, c=None, name="matrix"):
    """A schedule given as its GF(2) matrix M (n x n) and constant c, or as the n x (n+1)
    matrix [M | c]. The round key is the whole state."""
    F = B.field()
    A = np.asarray(F.asarray(M, name=name), dtype=np.uint8)
    n = A.shape[0]
    if A.shape[1] == n + 1:
        if c is not None:
            raise InputError(f"{name}: the constant is given twice (as the last column "
                             "and separately)")
        c = A[:, n].copy()
        A = A[:, :n]
    elif A.shape[1] != n:
        raise InputError(f"{name}: a schedule matrix is n x n, or n x (n+1) with the "
                         f"constant as the last column; got {A.shape[0]} x {A.shape[1]}")
    if c is None:
        c = np.zeros(n, dtype=np.uint8)
    else:
        c = np.asarray(c)
        if c.ndim == 0 or isinstance(c, (int, np.integer)):
            c = B.int_to_bits(int(c), n)
        c = np.asarray(F.asarray(c, name=f"{name} constant", ndim=1), dtype=np.uint8)
        if c.shape != (n,):
            raise InputError(f"{name}: the constant has {c.shape[0]} bits, the matrix {n}")
    return AffineSchedule(name, "matrix", A, c, np.arange(n, dtype=np.int64))


def load_schedule(source, state_bits=None, seed=PROBE_SEED):
    """The schedule named by ``source``: a ``.toml`` spec path, the name of a built-in
    example, a raw matrix file (``.npy`` or text), or ``module:function``."""
    from . import examples
    from .spec import load_spec, parse_spec
    if not isinstance(source, str):
        if callable(source):
            return from_callable(source, state_bits=state_bits, seed=seed)
        raise InputError(f"schedule source {source!r} is not a path or a name")
    if source in examples.SPECS:
        return from_spec(parse_spec(examples.SPECS[source], f"<built-in {source}>"),
                         seed=seed)
    if source.lower().endswith(".toml"):
        return from_spec(load_spec(source), seed=seed)
    if os.path.exists(source):
        from ...io.matrix_text import load_matrix_file
        return from_matrix(load_matrix_file(source), name=source)
    if ":" in source:
        return from_callable(source, state_bits=state_bits, seed=seed)
    raise InputError(f"{source}: no such file, and not a built-in spec ("
                     + ", ".join(sorted(examples.SPECS)) + ") or module:function")
