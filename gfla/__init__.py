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


def _find_cli_in_source_checkout():
    # Installed, the command line lives in gfla/cli. In a source checkout it is the
    # top-level folder cli/ beside gfla/; let ``import gfla.cli`` find it there too, so
    # that code run from the checkout (``python -c``, ``python -m pytest``) works.
    import os
    here = os.path.dirname(__file__)
    root = os.path.dirname(here)
    if (not os.path.isdir(os.path.join(here, "cli"))
            and os.path.isfile(os.path.join(root, "cli", "__init__.py"))
            and root not in __path__):
        __path__.append(root)


_find_cli_in_source_checkout()

__all__ = ["field", "GflaError", "InputError", "MathError", "SingularMatrixError",
           "NotAUnitError", "InconsistentSystemError", "MethodNotApplicableError",
           "OrderUnavailableError", "__version__"]
