"""Field and ring families. Each module defines one class implementing the protocol of
``base.Field``; ``gfla.field`` (in ``gfla.io.spec``) picks the class from a spec text."""

from .base import Field, Solution
from .binary import BinaryField
from .extension import ExtensionField, DEFAULT_MODULI
from .prime import PrimeField
from .ring import ResidueRing

__all__ = ["Field", "Solution", "PrimeField", "BinaryField", "ExtensionField",
           "ResidueRing", "DEFAULT_MODULI"]
