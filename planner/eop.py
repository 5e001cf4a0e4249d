"""Earth orientation: UT1-UTC read straight from the installed ``astropy-iers-data`` files.

The same numbers astropy's default table (``IERS_Auto``) gives, without its
table machinery (parsing that takes over a second; this takes about 0.05 s):

* ``finals2000A.all`` (IERS Rapid Service, Bulletin A), fixed columns described
  in its ``ReadMe.finals2000A``: MJD in columns 8-15, UT1-UTC of Bulletin A in
  59-68 (observed and predicted), of Bulletin B in 155-165 where published. Per
  row the Bulletin B value is used where present, else Bulletin A (as astropy's
  ``IERS_A`` reader does).
* ``eopc04.1962-now`` (IERS EOP 20 C04 series, whitespace columns, MJD 5th and
  UT1-UTC 8th): it replaces the values above for the days it covers, as
  astropy's ``IERS_Auto`` does with IERS-B values.

The result spans the finals table (1973 to a few months ahead). Values in
seconds, days in MJD (UTC). Read once per process; nothing is downloaded.
"""
from __future__ import annotations

import os
from importlib import resources

import numpy as np

_cache: tuple[np.ndarray, np.ndarray] | None = None


def data_dir() -> str:
    """Folder of the installed ``astropy-iers-data`` files."""
    return str(resources.files("astropy_iers_data") / "data")


def _finals(path: str) -> tuple[np.ndarray, np.ndarray]:
    """(MJD, UT1-UTC s) rows of finals2000A.all with a value (Bulletin B, else A)."""
    with open(path, "rb") as handle:
        lines = handle.read().splitlines()
    width = 185
    raw = np.frombuffer(b"".join(line[:width].ljust(width) for line in lines), dtype="S1")
    table = raw.reshape(-1, width)

    def column(lo: int, hi: int) -> np.ndarray:
        """Columns lo..hi (1-based, inclusive) as floats, NaN where blank."""
        text = table[:, lo - 1:hi].copy().view(f"S{hi - lo + 1}").ravel()
        blank = np.char.strip(text) == b""
        values = np.zeros(text.size)
        values[~blank] = text[~blank].astype(float)
        values[blank] = np.nan
        return values

    mjd = column(8, 15)
    a, b = column(59, 68), column(155, 165)
    dut = np.where(np.isfinite(b), b, a)
    keep = np.isfinite(mjd) & np.isfinite(dut)
    return mjd[keep], dut[keep]


def _c04(path: str) -> tuple[np.ndarray, np.ndarray]:
    """(MJD, UT1-UTC s) of the C04 series."""
    data = np.loadtxt(path, comments="#", usecols=(4, 7), ndmin=2)
    return data[:, 0], data[:, 1]


def ut1_minus_utc_table() -> tuple[np.ndarray, np.ndarray]:
    """(MJD, UT1-UTC in s) from the installed files, C04 values where they exist."""
    global _cache
    if _cache is None:
        folder = data_dir()
        mjd, dut = _finals(os.path.join(folder, "finals2000A.all"))
        c04_mjd, c04_dut = _c04(os.path.join(folder, "eopc04.1962-now"))
        idx = np.searchsorted(c04_mjd, mjd)
        hit = (idx < c04_mjd.size) & (c04_mjd[np.minimum(idx, c04_mjd.size - 1)] == mjd)
        dut = dut.copy()
        dut[hit] = c04_dut[idx[hit]]
        _cache = (mjd, dut)
    return _cache
