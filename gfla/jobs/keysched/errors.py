"""Errors of the key-schedule job.

Input problems are :class:`gfla.errors.InputError` subclasses (CLI exit code 2); the
mathematical refusals carry a certificate a user can recompute (CLI exit code 1).
"""

from ...errors import InputError, MathError

__all__ = ["SpecError", "NonAffineScheduleError", "VaryingLinearPartError",
           "InconsistentKnownBitsError"]


class SpecError(InputError):
    """A key-schedule spec is malformed. The message names the file, line and key.

    Attributes
    ----------
    path : str or None
    line : int or None
        1-based line of the offending key (or of its table header).
    key : str or None
        Dotted key path, e.g. ``step[3].op``.
    """

    def __init__(self, problem, path=None, line=None, key=None):
        where = path or "<spec>"
        if line is not None:
            where += f":{line}"
        if key:
            where += f": {key}"
        super().__init__(f"{where}: {problem}")
        self.path = path
        self.line = line
        self.key = key
        self.problem = problem


def _hex(value, bits):
    digits = max(1, (bits + 3) // 4)
    return "0x" + format(int(value), f"0{digits}x")


class NonAffineScheduleError(MathError):
    """The schedule is not affine over GF(2): f(x ^ y) != f(x) ^ f(y) ^ f(0).

    Attributes
    ----------
    x, y : int
        The witness pair (states, bit i = state bit i).
    values : dict
        f(0), f(x), f(y) and f(x ^ y) as integers.
    round : int
        The round whose update was probed.
    """

    def __init__(self, message, x, y, values, bits, round=0):
        super().__init__(message)
        self.x = int(x)
        self.y = int(y)
        self.values = {k: int(v) for k, v in values.items()}
        self.bits = int(bits)
        self.round = int(round)

    def certificate(self):
        cert = {"round": self.round, "x": _hex(self.x, self.bits), "y": _hex(self.y, self.bits)}
        for key in ("f(0)", "f(x)", "f(y)", "f(x^y)"):
            cert[key] = _hex(self.values[key], self.bits)
        lhs = self.values["f(x^y)"]
        rhs = self.values["f(x)"] ^ self.values["f(y)"] ^ self.values["f(0)"]
        cert["difference"] = _hex(lhs ^ rhs, self.bits)
        return cert


class VaryingLinearPartError(MathError):
    """A callable's update is affine in each round, but its linear part changes with
    the round number: column ``bit`` of round ``round``'s matrix differs from round 0's.
    """

    def __init__(self, message, round, bit, column0, column_r, bits):
        super().__init__(message)
        self.round = int(round)
        self.bit = int(bit)
        self.column0 = int(column0)
        self.column_r = int(column_r)
        self.bits = int(bits)

    def certificate(self):
        return {"round": self.round, "state_bit": self.bit,
                "f_0(e_i)^f_0(0)": _hex(self.column0, self.bits),
                "f_r(e_i)^f_r(0)": _hex(self.column_r, self.bits)}


class InconsistentKnownBitsError(MathError):
    """The known round-key bits contradict each other for every master key.

    ``equations`` lists the known bits (round, bit, value, source line) whose sum is
    the contradiction: the XOR of their round-key bits is the same affine function of
    the master key for every key, but their values XOR to the other constant.
    """

    def __init__(self, message, equations):
        super().__init__(message)
        self.equations = list(equations)

    def certificate(self):
        return {"conflicting_equations": [
            {k: v for k, v in eq.items() if v is not None} for eq in self.equations]}
