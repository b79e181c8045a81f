"""The TOML key-schedule spec: parsing, validation and a batch evaluator.

Format
------
A spec describes the state as words (cells) of given widths, the steps of one round
update, per-round constant sequences, and which state bits form each round key::

    name = "Simon32/64 key schedule"
    rounds = 32                       # optional: rounds of the cipher

    [state]
    widths = [16, 16, 16, 16]         # or: words = 4 and width = 16
    names = ["k0", "k1", "k2", "k3"]  # optional, default w0, w1, ...
    bits = 64                         # optional: the widths must add up to this

    [scratch]                         # optional temporaries, zero at every round start
    widths = [16, 16]
    names = ["t", "u"]                # default t0, t1, ...

    [round_key]                       # optional, default: the whole state
    words = ["k0"]                    # or: bits = [0, 1, "8..15"]

    [constants.z]                     # a per-round constant sequence
    bits = "11111010001001010110000111001101111101000100101011000011100110"
    repeat = true                     # a listed sequence repeats (else it ends)

    [[step]]
    op = "rotate"
    word = "k3"
    right = 3
    into = "t"

Bit numbering: word i occupies the state bits ``offset_i .. offset_i + width_i - 1``
(word 0 first), and bit j of a word is its bit of weight 2^j. A state, key or round key
written in hex is the integer whose bit i is bit i of the state (of the round key), so
word 0 is the least significant word of the hex number.

Round r (r = 0, 1, ...) turns state_r into state_(r+1) by running the steps in order;
round key r is taken from state_r, and state_0 is the master key. Scratch words start
at zero in every round and are not part of the state.

Steps (``op`` and its keys; ``into`` defaults to the source word where it is optional):

``rotate``  word, left|right = amount, into (optional). Left moves bit j to bit j + s.
``shift``   word, left|right = amount, into (optional); zeros come in.
``copy``    word, into.
``xor``     into, words = [...]: into ^= each listed word (same widths).
``xor_constant``   into, value: into ^= value.
``round_constant`` into, sequence (optional when there is one), offset (default 0):
            XOR the sequence's value for this round into the word from bit ``offset``.
``permute`` words (default: all state words), from = [...]: word words[i] receives the
            old value of from[i]; ``from`` is a permutation of ``words``.
``permute_bits``   word (default: the whole state), from = [...]: new bit i = old bit
            from[i]; ``from`` is a permutation of 0 .. width-1.
``gf_mul``  words = [...], by = constant, modulus (optional, default gfla's modulus for
            GF(2^width)): multiply each word, read as an element of GF(2^width).
``lfsr``    words = [...], taps = [...], steps (default 1): each step shifts a word one
            bit towards the top and feeds bit 0 with the XOR of the tap bits (taken
            before the shift).
``sbox``    words = [...], table = [2^width values]: a lookup table (not affine in
            general: gfla then refuses the schedule with a witness pair).

Constant sequences (``[constants.NAME]``): ``bits = "0110..."`` (one bit per round),
``values = [...]`` (one integer per round, ``width`` optional), or
``lfsr = { width = 6, taps = [5, 4], seed = 1 }`` (round r uses the LFSR state after r
steps; a step is the ``lfsr`` step above). Listed sequences end after their last round
unless ``repeat = true``.

Errors name the file, the line and the key (``spec.toml:12: step[2].op: ...``).
"""

import dataclasses
import re

import numpy as np

from .errors import SpecError

__all__ = ["ScheduleSpec", "Word", "Sequence", "parse_spec", "load_spec", "OPERATIONS"]

OPERATIONS = ("rotate", "shift", "copy", "xor", "xor_constant", "round_constant",
              "permute", "permute_bits", "gf_mul", "lfsr", "sbox")

_STEP_KEYS = {
    "rotate": ({"word"}, {"left", "right", "into"}),
    "shift": ({"word"}, {"left", "right", "into"}),
    "copy": ({"word", "into"}, set()),
    "xor": ({"into", "words"}, set()),
    "xor_constant": ({"into", "value"}, set()),
    "round_constant": ({"into"}, {"sequence", "offset"}),
    "permute": ({"from"}, {"words"}),
    "permute_bits": ({"from"}, {"word"}),
    "gf_mul": ({"words", "by"}, {"modulus"}),
    "lfsr": ({"words", "taps"}, {"steps"}),
    "sbox": ({"words", "table"}, set()),
}

_TOP_KEYS = {"name", "rounds", "state", "scratch", "round_key", "constants", "step",
             "description"}
MAX_BITS = 1 << 16
MAX_SBOX_WIDTH = 16
# An lfsr step's word is a shift register of at most this many bits (the constant
# sequences' LFSRs have the same bound).
MAX_LFSR_WIDTH = 64


@dataclasses.dataclass
class Word:
    name: str
    offset: int
    width: int
    scratch: bool = False

    @property
    def columns(self):
        return np.arange(self.offset, self.offset + self.width)


@dataclasses.dataclass
class Sequence:
    """A per-round constant sequence: listed values or an LFSR."""
    name: str
    width: int
    values: list = None          # listed values (ints)
    repeat: bool = False
    taps: list = None            # LFSR taps
    seed: int = 0

    @property
    def is_lfsr(self):
        return self.taps is not None

    def lfsr_step(self, s):
        fb = 0
        for t in self.taps:
            fb ^= (s >> t) & 1
        return ((s << 1) | fb) & ((1 << self.width) - 1)

    def lfsr_matrix(self):
        """The w x w GF(2) matrix of one LFSR step (column convention)."""
        w = self.width
        A = np.zeros((w, w), dtype=np.uint8)
        for j in range(1, w):
            A[j, j - 1] = 1
        for t in self.taps:
            A[0, t] ^= 1
        return A


@dataclasses.dataclass
class ScheduleSpec:
    """A parsed spec: state layout, steps, sequences, round-key selection."""
    name: str
    path: str
    words: list
    nbits: int                   # state bits
    nscratch: int
    round_key_bits: np.ndarray   # state bit indices, round-key bit j = state bit [j]
    sequences: dict
    steps: list                  # compiled step tuples
    rounds: int = None
    has_sbox: bool = False

    def word(self, name):
        for w in self.words:
            if w.name == name:
                return w
        raise KeyError(name)

    # ------------------------------------------------------------------ evaluation
    def evaluate(self, states, seq_values):
        """One round on a batch.

        Parameters
        ----------
        states : ndarray of uint8, shape (b, nbits)
        seq_values : dict name -> ndarray of uint8, shape (b, width)
            Each sequence's value (as bits) for the round of each row.

        Returns
        -------
        ndarray of uint8, shape (b, nbits)
        """
        b = states.shape[0]
        X = np.zeros((b, self.nbits + self.nscratch), dtype=np.uint8)
        X[:, :self.nbits] = states
        for step in self.steps:
            kind = step[0]
            if kind == "gather":          # dst columns <- src columns (-1: zero)
                _, dst, src = step
                G = X[:, np.maximum(src, 0)]
                if (src < 0).any():
                    G[:, src < 0] = 0
                X[:, dst] = G
            elif kind == "xor":
                _, dst, srcs = step
                for src in srcs:
                    X[:, dst] ^= X[:, src]
            elif kind == "xor_constant":
                _, dst, bits = step
                X[:, dst] ^= bits
            elif kind == "round_constant":
                _, dst, name = step
                X[:, dst] ^= seq_values[name]
            elif kind == "linear":        # per-word k x k matrix on groups of columns
                _, groups, T = step       # groups: (g, k) column indices, T: (k, k)
                for cols in groups:
                    X[:, cols] = (X[:, cols].astype(np.int32) @ T.T.astype(np.int32)) & 1
            elif kind == "sbox":
                _, groups, table_bits = step
                k = groups.shape[1]
                weights = (1 << np.arange(k)).astype(np.int64)
                for cols in groups:
                    idx = X[:, cols].astype(np.int64) @ weights
                    X[:, cols] = table_bits[idx]
            else:  # pragma: no cover - compiled steps are from the list above
                raise AssertionError(kind)
        return X[:, :self.nbits].copy()


# ---------------------------------------------------------------------- line finder

# No two neighbouring parts of the header pattern can match the same characters, so a
# long line that is not a header fails in linear time (the blanks that were matched
# both by a \s* and by the name took seconds for a line of 2000 blanks).
_HEADER = re.compile(r"^\s*(\[\[?)([^\]]+)\]\]?\s*(#.*)?$")
_KEYLINE = re.compile(r"^\s*((?:[A-Za-z0-9_\-]+|\"[^\"]*\"|'[^']*')"
                      r"(?:\s*\.\s*(?:[A-Za-z0-9_\-]+|\"[^\"]*\"|'[^']*'))*)\s*=")


def _split_key(text):
    parts = []
    for piece in re.findall(r"\"[^\"]*\"|'[^']*'|[A-Za-z0-9_\-]+", text):
        parts.append(piece[1:-1] if piece[0] in "\"'" else piece)
    return tuple(parts)


class KeyLines:
    """Line numbers of keys and tables in TOML text (tomllib reports none for keys)."""

    def __init__(self, text):
        self.lines = {}
        counters = {}
        path = ()
        depth = 0
        for number, line in enumerate(text.splitlines(), start=1):
            stripped = line.strip()
            if depth == 0:
                m = _HEADER.match(line)
                if m and not stripped.startswith("#"):
                    name = _split_key(m.group(2))
                    if m.group(1) == "[[":
                        idx = counters.get(name, 0)
                        counters[name] = idx + 1
                        path = name[:-1] + ((name[-1], idx),)
                    else:
                        path = name
                    self.lines.setdefault(self._norm(path), number)
                    continue
                m = _KEYLINE.match(line)
                if m:
                    key = _split_key(m.group(1))
                    self.lines.setdefault(self._norm(path + key), number)
            depth += _bracket_balance(line)
            depth = max(depth, 0)

    @staticmethod
    def _norm(path):
        out = []
        for p in path:
            if isinstance(p, tuple):
                out.extend(p)
            else:
                out.append(p)
        return tuple(out)

    def find(self, path):
        path = tuple(path)
        while path:
            if path in self.lines:
                return self.lines[path]
            path = path[:-1]
        return None


def _bracket_balance(line):
    """Net open brackets of a line outside strings and comments (multi-line arrays)."""
    depth = 0
    quote = None
    for ch in line:
        if quote:
            if ch == quote:
                quote = None
            continue
        if ch in "\"'":
            quote = ch
        elif ch == "#":
            break
        elif ch in "[{":
            depth += 1
        elif ch in "]}":
            depth -= 1
    stripped = line.strip()
    if depth and (_HEADER.match(line) and not stripped.startswith("#")):
        return 0
    return depth


def _key_text(path):
    out = ""
    for p in path:
        if isinstance(p, int):
            out += f"[{p}]"
        else:
            out += ("." if out else "") + str(p)
    return out


# ---------------------------------------------------------------------- parsing

class _Ctx:
    def __init__(self, path, text):
        self.path = path
        self.lines = KeyLines(text)

    def fail(self, key_path, problem):
        line = self.lines.find(key_path)
        raise SpecError(problem, self.path, line, _key_text(key_path))


def load_spec(path):
    """Read and parse a ``.toml`` spec file."""
    import os
    path = os.fspath(path)
    try:
        with open(path, "rb") as fh:
            data = fh.read()
    except FileNotFoundError:
        raise SpecError("no such file", path) from None
    except IsADirectoryError:
        raise SpecError("is a directory, not a spec file", path) from None
    except OSError as exc:
        raise SpecError(f"cannot be read ({exc.strerror or exc})", path) from None
    except ValueError:  # a NUL byte, or a name the file system cannot encode
        raise SpecError("not a usable file name", ascii(path)) from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError:
        raise SpecError("is not UTF-8 text", path) from None
    return parse_spec(text, path)


def parse_spec(text, path="<spec>"):
    """Parse spec text into a :class:`ScheduleSpec` (``SpecError`` on any problem)."""
    import tomllib
    try:
        doc = tomllib.loads(text)
    except RecursionError:
        raise SpecError("not valid TOML: arrays or tables nested too deeply", path) from None
    except tomllib.TOMLDecodeError as exc:
        msg = str(exc)
        m = re.search(r"\(at line (\d+), column (\d+)\)", msg)
        line = int(m.group(1)) if m else None
        msg = re.sub(r"\s*\(at line \d+, column \d+\)", "", msg)
        msg = re.sub(r"\s*\(at end of document\)", " (at the end)", msg)
        raise SpecError(f"not valid TOML: {msg}", path, line) from None
    except ValueError:
        # tomllib converts integers with int(), which stops at 4300 digits.
        raise SpecError("not valid TOML for a spec: an integer of more than 4300 digits",
                        path) from None
    ctx = _Ctx(path, text)
    for key in doc:
        if key not in _TOP_KEYS:
            ctx.fail((key,), f"unknown key {key!r}; expected one of "
                     + ", ".join(sorted(_TOP_KEYS)))
    name = doc.get("name", None)
    if name is not None and not isinstance(name, str):
        ctx.fail(("name",), "must be text")
    rounds = doc.get("rounds")
    if rounds is not None:
        rounds = _int(ctx, ("rounds",), rounds, lo=1)
    if "state" not in doc:
        ctx.fail(("state",), "missing [state] table (the words of the key state)")
    words = _words(ctx, "state", doc["state"], 0, scratch=False, default_prefix="w")
    nbits = sum(w.width for w in words)
    if nbits > MAX_BITS:
        ctx.fail(("state",), f"state of {nbits} bits is larger than {MAX_BITS}")
    scratch = []
    if "scratch" in doc:
        scratch = _words(ctx, "scratch", doc["scratch"], nbits, scratch=True,
                         default_prefix="t")
        nscratch = sum(w.width for w in scratch)
        if nscratch > MAX_BITS:
            ctx.fail(("scratch",), f"scratch words of {nscratch} bits in all are more than "
                     f"{MAX_BITS}")
    all_words = words + scratch
    names = {}
    for w in all_words:
        if w.name in names:
            table = "scratch" if w.scratch else "state"
            ctx.fail((table, "names"), f"word name {w.name!r} is used twice")
        names[w.name] = w
    sequences = _sequences(ctx, doc.get("constants", {}))
    rk_bits = _round_key(ctx, doc.get("round_key"), names, nbits)
    steps_doc = doc.get("step", [])
    if not isinstance(steps_doc, list):
        ctx.fail(("step",), "must be an array of tables: write each step as [[step]]")
    steps = []
    has_sbox = False
    for i, st in enumerate(steps_doc):
        compiled = _step(ctx, i, st, names, words, nbits, sequences)
        has_sbox = has_sbox or compiled[0] == "sbox"
        steps.append(compiled)
    return ScheduleSpec(name=name or path, path=path, words=all_words, nbits=nbits,
                        nscratch=sum(w.width for w in scratch), round_key_bits=rk_bits,
                        sequences=sequences, steps=steps, rounds=rounds, has_sbox=has_sbox)


def _int(ctx, key, value, lo=None, hi=None, what="an integer"):
    if isinstance(value, bool) or not isinstance(value, int):
        ctx.fail(key, f"must be {what}, got {_show(value)}")
    if lo is not None and value < lo:
        ctx.fail(key, f"must be at least {lo}, got {_show_int(value)}")
    if hi is not None and value > hi:
        ctx.fail(key, f"must be at most {hi}, got {_show_int(value)}")
    return value


def _show_int(value):
    text = str(value)
    return text if len(text) <= 40 else f"a number of {len(text)} digits"


def _show(value):
    text = repr(value)
    return text if len(text) <= 40 else text[:37] + "..."


def _words(ctx, table, doc, offset, scratch, default_prefix):
    if not isinstance(doc, dict):
        ctx.fail((table,), "must be a table")
    allowed = {"widths", "words", "width", "names", "bits"}
    for key in doc:
        if key not in allowed:
            ctx.fail((table, key), f"unknown key {key!r}; expected one of "
                     + ", ".join(sorted(allowed)))
    if "widths" in doc:
        if "words" in doc or "width" in doc:
            ctx.fail((table, "widths"), "give either widths = [...] or words and width, not both")
        widths = doc["widths"]
        if not isinstance(widths, list) or not widths:
            ctx.fail((table, "widths"), "must be a non-empty list of word widths")
        widths = [_int(ctx, (table, "widths"), w, lo=1, hi=MAX_BITS) for w in widths]
    elif "words" in doc:
        count = _int(ctx, (table, "words"), doc["words"], lo=1, hi=MAX_BITS)
        if "width" not in doc:
            ctx.fail((table, "words"), "needs width = bits per word")
        width = _int(ctx, (table, "width"), doc["width"], lo=1, hi=MAX_BITS)
        widths = [width] * count
    else:
        ctx.fail((table,), "needs widths = [...] or words = count and width = bits")
    if "names" in doc:
        names = doc["names"]
        if (not isinstance(names, list) or len(names) != len(widths)
                or not all(isinstance(n, str) and n for n in names)):
            ctx.fail((table, "names"), f"must be a list of {len(widths)} non-empty names "
                     "(one per word)")
    else:
        names = [f"{default_prefix}{i}" for i in range(len(widths))]
    total = sum(widths)
    if "bits" in doc:
        bits = _int(ctx, (table, "bits"), doc["bits"], lo=1)
        if bits != total:
            ctx.fail((table, "bits"), f"the word widths add up to {total} bits, not {bits}")
    out = []
    for name, width in zip(names, widths):
        out.append(Word(name, offset, width, scratch))
        offset += width
    return out


def _bit_list(ctx, key, items, n, what):
    if not isinstance(items, list) or not items:
        ctx.fail(key, f"must be a non-empty list of {what} (integers or 'a..b' ranges)")
    out = []
    for item in items:
        if isinstance(item, str):
            m = re.fullmatch(r"\s*([0-9]+)\s*\.\.\s*([0-9]+)\s*", item)
            if not m:
                ctx.fail(key, f"{item!r} is not a bit index or an 'a..b' range")
            if max(len(m.group(1)), len(m.group(2))) > 12:
                ctx.fail(key, f"range {_show(item)} is out of range: {what} are 0 .. {n - 1}")
            a, b = int(m.group(1)), int(m.group(2))
            if b < a:
                ctx.fail(key, f"range {item!r} runs backwards")
            if b >= n:
                # Checked before the range is listed: 0..10^11 must not build a list.
                ctx.fail(key, f"bit {b} is out of range: {what} are 0 .. {n - 1}")
            out.extend(range(a, b + 1))
        else:
            out.append(_int(ctx, key, item, lo=0))
    for v in out:
        if v >= n:
            ctx.fail(key, f"bit {v} is out of range: {what} are 0 .. {n - 1}")
    return out


def _round_key(ctx, doc, names, nbits):
    if doc is None:
        return np.arange(nbits, dtype=np.int64)
    if not isinstance(doc, dict):
        ctx.fail(("round_key",), "must be a table")
    for key in doc:
        if key not in ("words", "bits"):
            ctx.fail(("round_key", key), f"unknown key {key!r}; expected words or bits")
    if ("words" in doc) == ("bits" in doc):
        ctx.fail(("round_key",), "give exactly one of words = [...] or bits = [...]")
    if "words" in doc:
        items = doc["words"]
        if not isinstance(items, list) or not items:
            ctx.fail(("round_key", "words"), "must be a non-empty list of state word names")
        bits = []
        for item in items:
            w = names.get(item) if isinstance(item, str) else None
            if w is None or w.scratch:
                ctx.fail(("round_key", "words"), f"{_show(item)} is not a state word")
            bits.extend(range(w.offset, w.offset + w.width))
    else:
        bits = _bit_list(ctx, ("round_key", "bits"), doc["bits"], nbits, "state bits")
    return np.array(bits, dtype=np.int64)


def _sequences(ctx, doc):
    if not isinstance(doc, dict):
        ctx.fail(("constants",), "must hold tables [constants.NAME]")
    out = {}
    for name, sd in doc.items():
        key = ("constants", name)
        if not isinstance(sd, dict):
            ctx.fail(key, "must be a table with bits, values or lfsr")
        allowed = {"bits", "values", "lfsr", "width", "repeat"}
        for k in sd:
            if k not in allowed:
                ctx.fail(key + (k,), f"unknown key {k!r}; expected one of "
                         + ", ".join(sorted(allowed)))
        kinds = [k for k in ("bits", "values", "lfsr") if k in sd]
        if len(kinds) != 1:
            ctx.fail(key, "give exactly one of bits = \"...\", values = [...] or lfsr = {...}")
        kind = kinds[0]
        repeat = sd.get("repeat", False)
        if not isinstance(repeat, bool):
            ctx.fail(key + ("repeat",), "must be true or false")
        if kind == "bits":
            text = sd["bits"]
            if not isinstance(text, str) or not re.fullmatch(r"[01_ ]+", text) \
                    or not text.replace("_", "").replace(" ", ""):
                ctx.fail(key + ("bits",), "must be a string of 0 and 1 (one per round)")
            values = [int(c) for c in text if c in "01"]
            width = 1
            if "width" in sd:
                ctx.fail(key + ("width",), "a bits sequence has width 1")
            out[name] = Sequence(name, width, values=values, repeat=repeat)
        elif kind == "values":
            values = sd["values"]
            if not isinstance(values, list) or not values:
                ctx.fail(key + ("values",), "must be a non-empty list of integers")
            values = [_int(ctx, key + ("values",), v, lo=0) for v in values]
            need = max(1, max(v.bit_length() for v in values))
            width = need
            if "width" in sd:
                width = _int(ctx, key + ("width",), sd["width"], lo=1, hi=MAX_BITS)
                if need > width:
                    ctx.fail(key + ("values",), f"a value needs {need} bits, more than "
                             f"width = {width}")
            out[name] = Sequence(name, width, values=values, repeat=repeat)
        else:
            ld = sd["lfsr"]
            lkey = key + ("lfsr",)
            if not isinstance(ld, dict):
                ctx.fail(lkey, "must be a table { width = ..., taps = [...], seed = ... }")
            for k in ld:
                if k not in ("width", "taps", "seed"):
                    ctx.fail(lkey, f"unknown key {k!r}; expected width, taps, seed")
            if "width" not in ld or "taps" not in ld:
                ctx.fail(lkey, "needs width and taps")
            width = _int(ctx, lkey, ld["width"], lo=1, hi=64)
            taps = ld["taps"]
            if not isinstance(taps, list) or not taps:
                ctx.fail(lkey, "taps must be a non-empty list of bit positions")
            taps = [_int(ctx, lkey, t, lo=0, hi=width - 1) for t in taps]
            seed = _int(ctx, lkey, ld.get("seed", 1), lo=0, hi=(1 << width) - 1)
            if repeat:
                ctx.fail(key + ("repeat",), "an LFSR sequence needs no repeat")
            if "width" in sd:
                ctx.fail(key + ("width",), "give the width inside lfsr = {...}")
            out[name] = Sequence(name, width, taps=taps, seed=seed)
    return out


def _word_ref(ctx, key, value, names, allow_scratch=True):
    if not isinstance(value, str):
        ctx.fail(key, f"must be a word name, got {_show(value)}")
    w = names.get(value)
    if w is None:
        ctx.fail(key, f"no word named {value!r} (words: {', '.join(names)})")
    if w.scratch and not allow_scratch:
        ctx.fail(key, f"{value!r} is a scratch word; a state word is needed here")
    return w


def _word_list(ctx, key, value, names):
    if not isinstance(value, list) or not value:
        ctx.fail(key, "must be a non-empty list of word names")
    return [_word_ref(ctx, key, v, names) for v in value]


def _amount(ctx, key, st):
    has_left, has_right = "left" in st, "right" in st
    if has_left == has_right:
        ctx.fail(key, "give exactly one of left = n or right = n")
    side = "left" if has_left else "right"
    s = _int(ctx, key + (side,), st[side], lo=0)
    return s if has_left else -s


def _step(ctx, i, st, names, state_words, nbits, sequences):
    key = ("step", i)
    if not isinstance(st, dict):
        ctx.fail(key, "must be a table")
    if "op" not in st:
        ctx.fail(key, "missing op = \"...\" (one of " + ", ".join(OPERATIONS) + ")")
    op = st["op"]
    if not isinstance(op, str) or op not in _STEP_KEYS:
        ctx.fail(key + ("op",), f"unknown operation {_show(op)}; expected one of "
                 + ", ".join(OPERATIONS))
    required, optional = _STEP_KEYS[op]
    for k in st:
        if k != "op" and k not in required and k not in optional:
            ctx.fail(key + (k,), f"unknown key {k!r} for op {op!r}; expected "
                     + ", ".join(sorted(required | optional)))
    for k in sorted(required):
        if k not in st:
            ctx.fail(key, f"op {op!r} needs {k}")

    if op in ("rotate", "shift"):
        src = _word_ref(ctx, key + ("word",), st["word"], names)
        dst = _word_ref(ctx, key + ("into",), st["into"], names) if "into" in st else src
        if dst.width != src.width:
            ctx.fail(key + ("into",), f"{dst.name!r} has {dst.width} bits, {src.name!r} "
                     f"has {src.width}")
        s = _amount(ctx, key, st)
        k = src.width
        # Reduced before numpy sees it (a huge amount would overflow int64): a rotation
        # by s is one by s mod k, a shift by k or more bits leaves zeros.
        s = (s % k) if op == "rotate" else max(-k, min(k, s))
        j = np.arange(k)
        if op == "rotate":
            gather = src.offset + (j - s) % k
        else:
            old = j - s
            gather = np.where((old >= 0) & (old < k), src.offset + old, -1)
        return ("gather", dst.columns, gather.astype(np.int64))
    if op == "copy":
        src = _word_ref(ctx, key + ("word",), st["word"], names)
        dst = _word_ref(ctx, key + ("into",), st["into"], names)
        if dst.width != src.width:
            ctx.fail(key + ("into",), f"{dst.name!r} has {dst.width} bits, {src.name!r} "
                     f"has {src.width}")
        return ("gather", dst.columns, src.columns)
    if op == "xor":
        dst = _word_ref(ctx, key + ("into",), st["into"], names)
        srcs = _word_list(ctx, key + ("words",), st["words"], names)
        for w in srcs:
            if w.width != dst.width:
                ctx.fail(key + ("words",), f"{w.name!r} has {w.width} bits, {dst.name!r} "
                         f"has {dst.width}")
        return ("xor", dst.columns, [w.columns for w in srcs])
    if op == "xor_constant":
        dst = _word_ref(ctx, key + ("into",), st["into"], names)
        v = _int(ctx, key + ("value",), st["value"], lo=0)
        if v.bit_length() > dst.width:
            ctx.fail(key + ("value",), f"{v:#x} does not fit the {dst.width} bits of "
                     f"{dst.name!r}")
        return ("xor_constant", dst.columns, _int_bits(v, dst.width))
    if op == "round_constant":
        dst = _word_ref(ctx, key + ("into",), st["into"], names)
        if not sequences:
            ctx.fail(key, "no constant sequence is defined ([constants.NAME])")
        if "sequence" in st:
            seq = st["sequence"]
            if not isinstance(seq, str) or seq not in sequences:
                ctx.fail(key + ("sequence",), f"no sequence named {_show(seq)} (sequences: "
                         + ", ".join(sequences) + ")")
        else:
            if len(sequences) > 1:
                ctx.fail(key, "name the sequence: sequence = \"...\" (there are several)")
            seq = next(iter(sequences))
        offset = _int(ctx, key + ("offset",), st.get("offset", 0), lo=0)
        width = sequences[seq].width
        if offset + width > dst.width:
            ctx.fail(key, f"sequence {seq!r} ({width} bits) from bit {offset} does not fit "
                     f"the {dst.width} bits of {dst.name!r}")
        return ("round_constant", dst.columns[offset:offset + width], seq)
    if op == "permute":
        if "words" in st:
            targets = _word_list(ctx, key + ("words",), st["words"], names)
        else:
            targets = list(state_words)
        sources = _word_list(ctx, key + ("from",), st["from"], names)
        tn = [w.name for w in targets]
        sn = [w.name for w in sources]
        if len(set(tn)) != len(tn):
            ctx.fail(key + ("words",), "lists a word twice")
        if len(sn) != len(tn) or sorted(sn) != sorted(tn):
            ctx.fail(key + ("from",), "is not a permutation of the words "
                     f"{', '.join(tn)}: every word must appear exactly once")
        for t, s in zip(targets, sources):
            if t.width != s.width:
                ctx.fail(key + ("from",), f"{t.name!r} ({t.width} bits) cannot receive "
                         f"{s.name!r} ({s.width} bits)")
        dst = np.concatenate([w.columns for w in targets])
        src = np.concatenate([w.columns for w in sources])
        return ("gather", dst, src)
    if op == "permute_bits":
        if "word" in st:
            w = _word_ref(ctx, key + ("word",), st["word"], names)
            base, width = w.offset, w.width
        else:
            base, width = 0, nbits
        perm = st["from"]
        if not isinstance(perm, list) or not all(
                isinstance(p, int) and not isinstance(p, bool) for p in perm):
            ctx.fail(key + ("from",), "must be a list of bit positions")
        if len(perm) != width or sorted(perm) != list(range(width)):
            ctx.fail(key + ("from",), f"is not a permutation of 0 .. {width - 1} "
                     + _perm_problem(perm, width))
        dst = np.arange(base, base + width)
        return ("gather", dst, base + np.array(perm, dtype=np.int64))
    if op == "gf_mul":
        targets = _word_list(ctx, key + ("words",), st["words"], names)
        k = targets[0].width
        for w in targets:
            if w.width != k:
                ctx.fail(key + ("words",), "all words of one gf_mul must have the same width")
        if k < 2 or k > 16:
            ctx.fail(key + ("words",), f"GF(2^k) needs 2 <= k <= 16; the words have {k} bits")
        by = _int(ctx, key + ("by",), st["by"], lo=0, hi=(1 << k) - 1)
        modulus = st.get("modulus")
        if modulus is not None:
            modulus = _int(ctx, key + ("modulus",), modulus, lo=0)
        T = _gf_mul_matrix(ctx, key, k, by, modulus)
        groups = np.stack([w.columns for w in targets])
        return ("linear", groups, T)
    if op == "lfsr":
        targets = _word_list(ctx, key + ("words",), st["words"], names)
        k = targets[0].width
        for w in targets:
            if w.width != k:
                ctx.fail(key + ("words",), "all words of one lfsr step must have the same width")
        taps = st["taps"]
        if not isinstance(taps, list) or not taps:
            ctx.fail(key + ("taps",), "must be a non-empty list of bit positions")
        if k > MAX_LFSR_WIDTH:
            ctx.fail(key + ("words",), f"an lfsr step takes words of at most "
                     f"{MAX_LFSR_WIDTH} bits; the words have {k}")
        taps = [_int(ctx, key + ("taps",), t, lo=0, hi=k - 1) for t in taps]
        steps = _int(ctx, key + ("steps",), st.get("steps", 1), lo=1, hi=1 << 16)
        A = np.zeros((k, k), dtype=np.int64)
        for j in range(1, k):
            A[j, j - 1] = 1
        for t in taps:
            A[0, t] ^= 1
        # A^steps over GF(2) by repeated squaring (common practice): 16 squarings at
        # most, where one product per step took seconds for 2^16 steps.
        T = np.eye(k, dtype=np.int64)
        power = A
        e = steps
        while e:
            if e & 1:
                T = (power @ T) & 1
            e >>= 1
            if e:
                power = (power @ power) & 1
        groups = np.stack([w.columns for w in targets])
        return ("linear", groups, T.astype(np.uint8))
    if op == "sbox":
        targets = _word_list(ctx, key + ("words",), st["words"], names)
        k = targets[0].width
        for w in targets:
            if w.width != k:
                ctx.fail(key + ("words",), "all words of one sbox must have the same width")
        if k > MAX_SBOX_WIDTH:
            ctx.fail(key + ("words",), f"an sbox takes words of at most {MAX_SBOX_WIDTH} bits")
        table = st["table"]
        if not isinstance(table, list) or len(table) != (1 << k):
            ctx.fail(key + ("table",), f"must list {1 << k} values (one per {k}-bit input)")
        values = [_int(ctx, key + ("table",), v, lo=0, hi=(1 << k) - 1) for v in table]
        bits = np.array([_int_bits(v, k) for v in values], dtype=np.uint8)
        groups = np.stack([w.columns for w in targets])
        return ("sbox", groups, bits)
    raise AssertionError(op)  # pragma: no cover


def _perm_problem(perm, width):
    seen = set()
    for p in perm:
        if p < 0 or p >= width:
            return f"({p} is out of range)"
        if p in seen:
            return f"({p} appears twice)"
        seen.add(p)
    return f"(it has {len(perm)} entries, not {width})"


def _int_bits(v, k):
    return np.array([(v >> j) & 1 for j in range(k)], dtype=np.uint8)


def _gf_mul_matrix(ctx, key, k, by, modulus):
    """k x k GF(2) matrix of multiplication by ``by`` in GF(2^k) (column j = by * x^j),
    computed with gfla's GF(2^k) arithmetic."""
    import gfla
    from ...errors import InputError
    try:
        F = gfla.field(f"GF(2^{k})", modulus=modulus)
    except InputError as exc:
        ctx.fail(key + ("modulus",), str(exc))
    products = F.mul(np.full(k, by, dtype=np.int64), (1 << np.arange(k)).astype(np.int64))
    T = np.zeros((k, k), dtype=np.uint8)
    for j, p in enumerate(products):
        T[:, j] = _int_bits(int(p), k)
    return T
