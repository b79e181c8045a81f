"""Field-spec text: ``GF(p)``, ``GF(2)``, ``GF(2^k)``, ``Z/n``.

Numbers may be decimal, ``0x`` hex, or small expressions such as ``2^61-1``,
``2^64`` or ``3*2^30+1``.
"""

import re

from ..errors import InputError

__all__ = ["field", "parse_field_spec", "parse_int_expr", "parse_modulus"]

_TOKEN = re.compile(r"\s*(0[xX][0-9a-fA-F]+|\d+|\^|\*\*|[-+*()])")
_MAX_EXPONENT = 1 << 16


def parse_int_expr(text, what="number"):
    """Evaluate a non-negative integer expression of +, -, *, ^ (or **) and parentheses.

    >>> parse_int_expr("2^61-1")
    2305843009213693951
    """
    if not isinstance(text, str):
        raise InputError(f"{what} must be text, got {type(text).__name__}")
    s = text.strip()
    if not s:
        raise InputError(f"{what} is empty")
    tokens = []
    pos = 0
    while pos < len(s):
        m = _TOKEN.match(s, pos)
        if not m:
            raise InputError(f"{what} {text!r}: unexpected character {s[pos:].strip()[0]!r}")
        tokens.append(m.group(1))
        pos = m.end()
        while pos < len(s) and s[pos].isspace():
            pos += 1
    tokens = ["^" if t == "**" else t for t in tokens]
    val, i = _expr(tokens, 0, text, what)
    if i != len(tokens):
        raise InputError(f"{what} {text!r}: unexpected {tokens[i]!r}")
    return val


def _expr(t, i, text, what):
    v, i = _term(t, i, text, what)
    while i < len(t) and t[i] in "+-":
        op = t[i]
        w, i = _term(t, i + 1, text, what)
        v = v + w if op == "+" else v - w
    return v, i


def _term(t, i, text, what):
    v, i = _power(t, i, text, what)
    while i < len(t) and t[i] == "*":
        w, i = _power(t, i + 1, text, what)
        v = v * w
    return v, i


def _power(t, i, text, what):
    v, i = _atom(t, i, text, what)
    if i < len(t) and t[i] == "^":
        e, i = _power(t, i + 1, text, what)
        if e < 0 or e > _MAX_EXPONENT:
            raise InputError(f"{what} {text!r}: exponent {e} out of range")
        v = v ** e
    return v, i


def _atom(t, i, text, what):
    if i >= len(t):
        raise InputError(f"{what} {text!r} ends too early")
    tok = t[i]
    if tok == "(":
        v, i = _expr(t, i + 1, text, what)
        if i >= len(t) or t[i] != ")":
            raise InputError(f"{what} {text!r}: missing ')'")
        return v, i + 1
    if tok == "-":
        v, i = _power(t, i + 1, text, what)
        return -v, i
    if tok[:2].lower() == "0x":
        return int(tok, 16), i + 1
    if tok.isdigit():
        return int(tok), i + 1
    raise InputError(f"{what} {text!r}: unexpected {tok!r}")


_SPEC = re.compile(r"^\s*(?:(GF)\s*\(\s*(.+?)\s*\)|(Z)\s*/\s*\(?\s*(.+?)\s*\)?)\s*$",
                   re.IGNORECASE)


def parse_field_spec(spec):
    """Parse a spec into ``(family, params)``.

    family is ``"prime"`` (params ``(p,)``), ``"binary"`` (``()``), ``"extension"``
    (``(k,)``) or ``"ring"`` (``(n,)``).
    """
    if not isinstance(spec, str):
        raise InputError(f"field spec must be text such as 'GF(2^8)', got {spec!r}")
    m = _SPEC.match(spec)
    if not m:
        raise InputError(f"field spec {spec!r} not understood: use GF(p), GF(2), "
                         "GF(2^k) or Z/n")
    if m.group(1):
        inner = m.group(2)
        km = re.fullmatch(r"\s*2\s*(?:\^|\*\*)\s*(\d+)\s*", inner)
        if km:
            k = int(km.group(1))
            if not 1 <= k <= 16:
                raise InputError(f"GF(2^k) needs 1 <= k <= 16, got k = {k} in {spec!r}")
            return ("binary", ()) if k == 1 else ("extension", (k,))
        q = parse_int_expr(inner, "field order")
        if q == 2:
            return ("binary", ())
        if q > 2 and q & (q - 1) == 0:
            k = q.bit_length() - 1
            if k > 16:
                raise InputError(f"GF(2^k) needs 1 <= k <= 16, got k = {k} in {spec!r}")
            return ("extension", (k,))
        if q < 2:
            raise InputError(f"field order {q} in {spec!r} is not a prime or 2^k")
        return ("prime", (q,))
    n = parse_int_expr(m.group(4), "ring modulus")
    return ("ring", (n,))


def parse_modulus(modulus):
    """A GF(2^k) modulus given as an int or as hexadecimal text (``0x11b`` or ``11b``)."""
    if modulus is None:
        return None
    if isinstance(modulus, bool):
        raise InputError(f"modulus {modulus!r} is not an integer")
    if isinstance(modulus, int):
        return modulus
    if isinstance(modulus, str):
        # Text is hexadecimal, with or without 0x (the CLI's --modulus HEX convention).
        s = modulus.strip()
        try:
            return int(s, 16)
        except ValueError:
            raise InputError(f"modulus {modulus!r} is not a hexadecimal integer") from None
    try:
        import numbers
        if isinstance(modulus, numbers.Integral):
            return int(modulus)
    except Exception:  # pragma: no cover
        pass
    raise InputError(f"modulus {modulus!r} is not an integer")


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
