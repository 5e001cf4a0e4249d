"""hiplan: plan 21-cm HI observations for small radio telescopes.

Importing the package imports nothing heavy: astropy is loaded, and set offline,
only when a computation needs it (``timebase.astropy_offline``).
"""

__version__ = "0.1.0"
