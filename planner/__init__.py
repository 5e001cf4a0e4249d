"""hiplan: plan 21-cm HI observations for small radio telescopes.

Importing the package configures astropy for offline use (see ``timebase``).
"""
from . import timebase as _timebase  # noqa: F401  (side effect: offline IERS)

__version__ = "0.1.0"
