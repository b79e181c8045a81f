"""Field-spec text: ``GF(p)``, ``GF(2)``, ``GF(2^k)``, ``Z/n``.

Numbers may be decimal, ``0x`` hex, or small expressions such as ``2^61-1``,
``2^64`` or ``3*2^30+1``.
"""

import re

from ..errors import InputError

__all__ = ["field", "parse_field_spec", "parse_int_expr", "parse_modulus"]

_TOKEN = re.compile(r"\s*(0[xX][0-9a-fA-F]+|[0-9]+|\^|\*\*|[-+*()])")
_MAX_EXPONENT = 1 << 16
# Bounds that keep every expression cheap to evaluate and its number printable:
# nesting (parentheses, signs, ^ chains) and the size of every intermediate value
# (2^65536 is well inside; (2^65536)^65536 is not).
_MAX_DEPTH = 100
_MAX_BITS = 1 << 17
_MAX_DECIMAL_DIGITS = 4000   # Python refuses to convert more than 4300 digits from text
_MAX_LENGTH = 10000


def _show_text(text):
    """The input, quoted and shortened so that a message stays one short line."""
    text = str(text)
    return repr(text if len(text) <= 40 else text[:36] + "...")


def _show_int(value):
    """An integer for a message: digits when short, its size in bits when huge."""
    if abs(value).bit_length() <= 128:
        return str(value)
    return f"{'-' if value < 0 else ''}(a number of {abs(value).bit_length()} bits)"


def parse_int_expr(text, what="number"):
    """Evaluate a non-negative integer expression of +, -, *, ^ (or **) and parentheses.

    Numbers are ASCII decimal digits or ``0x`` hex. Texts of more than 10000
    characters, nesting deeper than 100 levels, exponents above 2^16 and values of
    more than 2^17 bits are refused.

    Raises
    ------
    InputError
        On any malformed, too deeply nested or oversized expression.

    >>> parse_int_expr("2^61-1")
    2305843009213693951
    """
    if not isinstance(text, str):
        raise InputError(f"{what} must be text, got {type(text).__name__}")
    s = text.strip()
    if not s:
        raise InputError(f"{what} is empty")
    if len(s) > _MAX_LENGTH:
        # Evaluation is linear in the length, but a long sum of 2^65536 terms costs
        # about 0.15 ms a term: bound it.
        raise InputError(f"{what} {_show_text(text)}: {len(s)} characters is too long "
                         f"(at most {_MAX_LENGTH})")
    tokens = []
    pos = 0
    while pos < len(s):
        m = _TOKEN.match(s, pos)
        if not m:
            raise InputError(f"{what} {_show_text(text)}: unexpected character "
                             f"{s[pos:].strip()[0]!r}")
        tokens.append(m.group(1))
        pos = m.end()
        while pos < len(s) and s[pos].isspace():
            pos += 1
    tokens = ["^" if t == "**" else t for t in tokens]
    parser = _ExprParser(tokens, text, what)
    val, i = parser.expr(0, 0)
    if i != len(tokens):
        raise InputError(f"{what} {_show_text(text)}: unexpected {tokens[i][:20]!r}")
    return val


class _ExprParser:
    """Recursive descent over the tokens, with the depth and size bounds above."""

    def __init__(self, tokens, text, what):
        self.t = tokens
        self.text = text
        self.what = what

    def fail(self, problem):
        raise InputError(f"{self.what} {_show_text(self.text)}: {problem}")

    def expr(self, i, depth):
        t = self.t
        v, i = self.term(i, depth)
        while i < len(t) and t[i] in "+-":
            op = t[i]
            w, i = self.term(i + 1, depth)
            v = v + w if op == "+" else v - w
        return v, i

    def term(self, i, depth):
        t = self.t
        v, i = self.power(i, depth)
        while i < len(t) and t[i] == "*":
            w, i = self.power(i + 1, depth)
            if v.bit_length() + w.bit_length() > _MAX_BITS + 1:
                self.fail(f"a product exceeds {_MAX_BITS} bits")
            v = v * w
        return v, i

    def power(self, i, depth):
        if depth > _MAX_DEPTH:
            self.fail(f"nested more than {_MAX_DEPTH} levels deep")
        t = self.t
        v, i = self.atom(i, depth)
        if i < len(t) and t[i] == "^":
            e, i = self.power(i + 1, depth + 1)
            if e < 0 or e > _MAX_EXPONENT:
                self.fail(f"exponent {_show_int(e)} out of range (0 .. {_MAX_EXPONENT})")
            if (abs(v).bit_length() - 1) * e > _MAX_BITS:
                self.fail(f"a power exceeds {_MAX_BITS} bits")
            v = v ** e
        return v, i

    def atom(self, i, depth):
        t = self.t
        if i >= len(t):
            raise InputError(f"{self.what} {_show_text(self.text)} ends too early")
        tok = t[i]
        if tok == "(":
            v, i = self.expr(i + 1, depth + 1)
            if i >= len(t) or t[i] != ")":
                self.fail("missing ')'")
            return v, i + 1
        if tok == "-":
            v, i = self.power(i + 1, depth + 1)
            return -v, i
        if tok[:2].lower() == "0x":
            if (len(tok) - 2) * 4 > _MAX_BITS:
                self.fail(f"a number of more than {_MAX_BITS} bits")
            return int(tok, 16), i + 1
        if tok.isdigit():
            if len(tok) > _MAX_DECIMAL_DIGITS:
                self.fail(f"a number of {len(tok)} digits (at most {_MAX_DECIMAL_DIGITS})")
            return int(tok), i + 1
        self.fail(f"unexpected {tok!r}")


def _split_spec(spec):
    """``("GF", inner)`` or ``("Z", inner)`` for ``GF(inner)`` or ``Z/inner`` (any case,
    blanks allowed around the parts), else None.

    Written without a regular expression: the pattern this replaces had neighbouring
    blank and wildcard parts, and took minutes on a spec of a few thousand blanks.
    """
    s = spec.strip()
    if s[:2].upper() == "GF":
        rest = s[2:].lstrip()
        if len(rest) >= 2 and rest[0] == "(" and rest[-1] == ")" and rest[1:-1].strip():
            return "GF", rest[1:-1].strip()
        return None
    if s[:1].upper() == "Z":
        rest = s[1:].lstrip()
        if rest[:1] == "/" and rest[1:].strip():
            return "Z", rest[1:].strip()
    return None


def parse_field_spec(spec):
    """Parse a spec into ``(family, params)``.

    family is ``"prime"`` (params ``(p,)``), ``"binary"`` (``()``), ``"extension"``
    (``(k,)``) or ``"ring"`` (``(n,)``).
    """
    if not isinstance(spec, str):
        raise InputError(f"field spec must be text such as 'GF(2^8)', got "
                         f"{_show_text(repr(spec))}")
    parts = _split_spec(spec)
    if parts is None:
        raise InputError(f"field spec {_show_text(spec)} not understood: use GF(p), GF(2), "
                         "GF(2^k) or Z/n")
    family, inner = parts
    if family == "GF":
        km = re.fullmatch(r"\s*2\s*(?:\^|\*\*)\s*([0-9]+)\s*", inner)
        if km:
            if len(km.group(1).lstrip("0")) > 6:
                raise InputError(f"GF(2^k) needs 1 <= k <= 16, got k = "
                                 f"{_show_text(km.group(1))} in {_show_text(spec)}")
            k = int(km.group(1))
            if not 1 <= k <= 16:
                raise InputError(f"GF(2^k) needs 1 <= k <= 16, got k = {k} in {_show_text(spec)}")
            return ("binary", ()) if k == 1 else ("extension", (k,))
        q = parse_int_expr(inner, "field order")
        if q.bit_length() > 256:
            raise InputError(f"field order {_show_int(q)} in {_show_text(spec)} is far too "
                             "large: GF(p) needs p < 2^63, GF(2^k) needs k <= 16")
        if q == 2:
            return ("binary", ())
        if q > 2 and q & (q - 1) == 0:
            k = q.bit_length() - 1
            if k > 16:
                raise InputError(f"GF(2^k) needs 1 <= k <= 16, got k = {k} in {_show_text(spec)}")
            return ("extension", (k,))
        if q < 2:
            raise InputError(f"field order {q} in {_show_text(spec)} is not a prime or 2^k")
        return ("prime", (q,))
    n = parse_int_expr(inner, "ring modulus")
    if n.bit_length() > 256:
        raise InputError(f"ring modulus {_show_int(n)} in {_show_text(spec)} is far too "
                         "large: Z/n needs 2 <= n <= 2^64")
    return ("ring", (n,))


_HEX_MODULUS = re.compile(r"\s*(?:0[xX])?([0-9a-fA-F]+(?:_[0-9a-fA-F]+)*)\s*")
# A GF(2^k) modulus has degree k <= 16; anything beyond this is refused without
# building a message around a huge number.
_MAX_MODULUS_BITS = 1024


def parse_modulus(modulus):
    """A GF(2^k) modulus given as an int or as hexadecimal text (``0x11b`` or ``11b``).

    Raises
    ------
    InputError
        For text that is not ASCII hexadecimal (an optional ``0x``, digits, single
        underscores between digits), a negative number, a value of more than 1024
        bits, or a value that is not an integer.
    """
    if modulus is None:
        return None
    if isinstance(modulus, bool):
        raise InputError(f"modulus {modulus!r} is not an integer")
    if isinstance(modulus, str):
        # Text is hexadecimal, with or without 0x (the CLI's --modulus HEX convention).
        m = _HEX_MODULUS.fullmatch(modulus)
        if not m:
            raise InputError(f"modulus {_show_text(modulus)} is not a hexadecimal integer")
        if len(m.group(1)) > _MAX_MODULUS_BITS // 4 + 1:
            raise InputError(f"modulus {_show_text(modulus)} is far too large for "
                             "GF(2^k), k <= 16")
        value = int(m.group(1), 16)
    elif isinstance(modulus, int):
        value = modulus
    else:
        import numbers
        if not isinstance(modulus, numbers.Integral):
            raise InputError(f"modulus {_show_text(repr(modulus))} is not an integer")
        value = int(modulus)
    if value < 0:
        raise InputError(f"modulus {_show_int(value)} is negative; it is a polynomial "
                         "over GF(2) written as a non-negative integer")
    if value.bit_length() > _MAX_MODULUS_BITS:
        raise InputError(f"modulus {_show_int(value)} is far too large for GF(2^k), "
                         "k <= 16")
    return value


_FIELDS = {}


def field(spec, modulus=None):
    """Return the field or ring named by ``spec``.

    Parameters
    ----------
    spec : str
        ``GF(p)`` (p prime < 2^63), ``GF(2)``, ``GF(2^k)`` (1 <= k <= 16), ``Z/n``
        (2 <= n <= 2^64). Numbers may be written ``2^61-1``.
    modulus : int or str, optional
        For GF(2^k): the irreducible polynomial as an integer whose bit i is the
        coefficient of x^i (``0x11b``). Default: the smallest primitive polynomial.

    Returns
    -------
    gfla.fields.Field

    Raises
    ------
    InputError
        For an unknown spec, a composite p, a reducible modulus, or a modulus given for
        a family that has none.

    Examples
    --------
    >>> import gfla
    >>> F = gfla.field("GF(2^8)", modulus=0x11b)
    >>> F.spec, hex(F.modulus)
    ('GF(2^8)', '0x11b')
    """
    from ..fields import BinaryField, ExtensionField, PrimeField, ResidueRing

    family, params = parse_field_spec(spec)
    mod = parse_modulus(modulus)
    if family != "extension" and mod is not None:
        if not (family == "binary" and mod == 0x3):
            raise InputError(f"a modulus applies only to GF(2^k) with k >= 2, not {spec!r}")
    key = (family, params, mod)
    F = _FIELDS.get(key)
    if F is None:
        if family == "prime":
            F = PrimeField(*params)
        elif family == "binary":
            F = BinaryField()
        elif family == "extension":
            F = ExtensionField(params[0], mod)
        else:
            F = ResidueRing(*params)
        _FIELDS[key] = F
    return F
