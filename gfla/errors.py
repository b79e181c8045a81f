"""The exception hierarchy of gfla.

Every error gfla raises on purpose is a :class:`GflaError`. Two branches tell a caller
(and the CLI's exit code) what happened:

* :class:`InputError` -- the input is malformed or out of range (CLI exit code 2);
* :class:`MathError` -- the input is well formed but the mathematics refuses: a singular
  matrix, an element that is not a unit, an inconsistent system (CLI exit code 1). These
  carry a certificate a user can recompute.
"""

__all__ = [
    "int_text",
    "file_error",
    "GflaError",
    "InputError",
    "MathError",
    "SingularMatrixError",
    "NotAUnitError",
    "InconsistentSystemError",
    "MethodNotApplicableError",
    "OrderUnavailableError",
]


def int_text(n, digits=60):
    """An integer for a message: in decimal when it has at most ``digits`` digits, else
    by its size ("a 65537-bit integer"), so a huge value from the input neither floods
    a one-line message nor hits Python's limit on int-to-text conversion."""
    n = int(n)
    if abs(n).bit_length() * 0.30103 <= digits:
        return str(n)
    return f"{'-' if n < 0 else ''}a {abs(n).bit_length()}-bit integer"


def file_error(path, exc):
    """The one-line ``InputError`` for an ``OSError`` (or the ``ValueError`` of a file
    name with a NUL byte or that the file system cannot encode) raised while opening or
    reading ``path``; raise it ``from None``."""
    if isinstance(exc, FileNotFoundError):
        return InputError(f"{path}: no such file")
    if isinstance(exc, IsADirectoryError):
        return InputError(f"{path}: is a directory, not a file")
    if isinstance(exc, PermissionError):
        return InputError(f"{path}: permission denied")
    if isinstance(exc, OSError):
        return InputError(f"{path}: cannot be read ({exc.strerror or exc})")
    return InputError(f"{ascii(path)}: not a usable file name")


class GflaError(Exception):
    """Root of all errors raised by gfla."""


class InputError(GflaError, ValueError):
    """Bad input: malformed text, an entry outside the field, a wrong shape."""


class MethodNotApplicableError(InputError):
    """The requested method does not apply to this field and size (e.g. Csanky when the
    characteristic does not exceed n)."""


class MathError(GflaError):
    """A mathematical refusal. ``certificate()`` returns a JSON-ready dict proving it."""

    def certificate(self):
        return {}


class SingularMatrixError(MathError):
    """The matrix is not invertible.

    Attributes
    ----------
    kernel_vector : list of int or None
        A nonzero vector v with A v = 0 (checked before raising). Over Z/n it is
        (n / p) times a kernel vector modulo the prime p = ``prime``, so A v = 0 mod n
        and v is nonzero mod n.
    prime : int or None
        Over Z/n: a prime dividing both n and det(A).
    """

    def __init__(self, message, kernel_vector=None, prime=None, det=None):
        super().__init__(message)
        self.kernel_vector = None if kernel_vector is None else [int(x) for x in kernel_vector]
        self.prime = prime
        self.det = det

    def certificate(self):
        cert = {}
        if self.kernel_vector is not None:
            cert["kernel_vector"] = self.kernel_vector
        if self.prime is not None:
            cert["prime_dividing_det"] = int(self.prime)
        if self.det is not None:
            cert["det"] = int(self.det)
        return cert


class NotAUnitError(MathError):
    """An element has no multiplicative inverse in the ring."""

    def __init__(self, message, element=None, gcd=None):
        super().__init__(message)
        self.element = element
        self.gcd = gcd

    def certificate(self):
        cert = {}
        if self.element is not None:
            cert["element"] = int(self.element)
        if self.gcd is not None:
            cert["gcd_with_modulus"] = int(self.gcd)
        return cert


class InconsistentSystemError(MathError):
    """A linear system has no solution. ``left_vector`` is y with y A = 0, y b != 0."""

    def __init__(self, message, left_vector=None):
        super().__init__(message)
        self.left_vector = None if left_vector is None else [int(x) for x in left_vector]

    def certificate(self):
        return {} if self.left_vector is None else {"left_vector": self.left_vector}


class OrderUnavailableError(MathError):
    """The exact multiplicative order needs an integer factorisation that could not be
    completed. ``divisor`` is a proven divisor of the order and ``multiple`` a proven
    multiple of it."""

    def __init__(self, message, divisor=None, multiple=None, unfactored=None):
        super().__init__(message)
        self.divisor = divisor
        self.multiple = multiple
        self.unfactored = unfactored or []

    def certificate(self):
        cert = {}
        if self.divisor is not None:
            cert["order_divisor"] = int(self.divisor)
        if self.multiple is not None:
            cert["order_multiple"] = int(self.multiple)
        if self.unfactored:
            cert["unfactored"] = [int(u) for u in self.unfactored]
        return cert
