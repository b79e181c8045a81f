"""gfla: exact linear algebra over finite fields and modular rings.

>>> import gfla
>>> F = gfla.field("GF(2^8)", modulus=0x11b)
>>> F.det([[2, 3], [1, 1]])
1

Importing gfla compiles nothing: kernels compile on first use and are cached on disk.
Nothing in gfla is constant-time; it is an analysis tool, not a cryptographic
implementation.
"""

from .errors import (GflaError, InconsistentSystemError, InputError, MathError,
                     MethodNotApplicableError, NotAUnitError, OrderUnavailableError,
                     SingularMatrixError)
from .io.spec import field

__version__ = "0.1.0"

__all__ = ["field", "GflaError", "InputError", "MathError", "SingularMatrixError",
           "NotAUnitError", "InconsistentSystemError", "MethodNotApplicableError",
           "OrderUnavailableError", "__version__"]
