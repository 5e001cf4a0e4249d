"""Intensity calibration on the IAU standard HI regions: what they should show, and the gain.

The IAU standard regions for 21-cm intensity calibration (``STANDARD_REGIONS``):

=====  ========  ========  ==================
name   l (deg)   b (deg)   published peak T_B
=====  ========  ========  ==================
S7     132.0     -1.0      about 100 K
S8     207.0     -15.0     about 76 K
S9     356.0     -4.0      about 85 K
=====  ========  ========  ==================

Positions and peaks are from memory, not confirmed against the published tables (Williams
1973, A&AS 8, 505; Kalberla, Mebold & Reich 1982, A&A 106, 190): treat them as good to a
few per cent. They refer to beams far smaller than a small dish's: about 36 arcmin for
Williams 1973 and the 9 arcmin Effelsberg beam for Kalberla, Mebold & Reich 1982 (both from
memory); ``PUBLISHED_BEAM_DEG`` takes 0.6 deg.

Beam dilution. A 2-7 deg beam averages the sky over a much larger patch than the published
beam; where the emission falls off across that patch (S8 lies 15 deg from the plane, S7 and S9
near it) the dish sees a lower peak. ``expected_peak_k`` scales the published peak by the ratio
of the smooth disc model (``hidisc``) seen through the dish's beam, at the beam's actual
position, to the same model through the published beam at the region: it corrects the
large-scale fall-off only. Structure smaller than the model's (the clouds that make the
published peak) dilutes further and cannot be predicted here: the caveat says so when the
dish's beam exceeds ``DILUTION_CAVEAT_RATIO`` times the published one.

Gain (``gain_from_peak``): with the peak measured on a standard region as counts above the
line-free level (and that level itself), or as dB above it, the counts-to-kelvin scale is
expected_peak / peak_counts, and for a total-power receiver whose counts are proportional to
power the system temperature is scale x off-line counts (equivalently expected_peak /
(10^(dB/10) - 1)): the radiometer's own y-factor with the line as the hot load (common
practice).
"""
from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from .errors import UserError
from .galactic import galactic_to_icrs_deg
from .hidisc import DiscModel, expected_spectra


@dataclass(frozen=True)
class StandardRegion:
    name: str
    l_deg: float
    b_deg: float
    peak_tb_k: float  # published peak brightness temperature (see the module doc)

    @property
    def icrs_deg(self) -> tuple[float, float]:
        ra, dec = galactic_to_icrs_deg(self.l_deg, self.b_deg)
        return float(np.atleast_1d(ra)[0]), float(np.atleast_1d(dec)[0])


# IAU standard regions: Williams 1973 (A&AS 8, 505); Kalberla, Mebold & Reich 1982
# (A&A 106, 190). Values from memory, see the module docstring.
STANDARD_REGIONS = (
    StandardRegion("S7", 132.0, -1.0, 100.0),
    StandardRegion("S8", 207.0, -15.0, 76.0),
    StandardRegion("S9", 356.0, -4.0, 85.0),
)
REGION_NAMES = tuple(r.name for r in STANDARD_REGIONS)
SOURCES = "Williams 1973 (A&AS 8, 505); Kalberla, Mebold & Reich 1982 (A&A 106, 190)"
# The beam the published peaks refer to (deg): 0.6 (36 arcmin, from memory).
PUBLISHED_BEAM_DEG = 0.6
# Beams wider than this many times the published one get the dilution caveat (our choice).
DILUTION_CAVEAT_RATIO = 2.0


def region(name: str) -> StandardRegion:
    for r in STANDARD_REGIONS:
        if r.name.lower() == str(name).strip().lower():
            return r
    raise UserError(f"standard region '{name}' is unknown; choose one of {', '.join(REGION_NAMES)}")


def expected_peaks_k(regions, beamwidth_deg: float, l_deg=None, b_deg=None,
                     model: DiscModel | None = None) -> np.ndarray:
    """Peak T_B (K) a dish of ``beamwidth_deg`` should see on each region, its beam centred at
    (l_deg, b_deg) (default: the region itself): the published peak times the model's
    dilution ratio (module docstring)."""
    regions = list(regions)
    l_at = np.array([r.l_deg for r in regions] if l_deg is None else l_deg, dtype=float)
    b_at = np.array([r.b_deg for r in regions] if b_deg is None else b_deg, dtype=float)
    dish = expected_spectra(l_at, b_at, beamwidth_deg, model=model).peak_tb_k
    ref = expected_spectra([r.l_deg for r in regions], [r.b_deg for r in regions],
                           PUBLISHED_BEAM_DEG, model=model).peak_tb_k
    published = np.array([r.peak_tb_k for r in regions])
    return published * np.divide(dish, ref, out=np.ones_like(dish), where=ref > 0)


def dilution_caveat(beamwidth_deg: float) -> str | None:
    """A sentence on beam dilution when the dish's beam is much wider than the published one."""
    if beamwidth_deg <= DILUTION_CAVEAT_RATIO * PUBLISHED_BEAM_DEG:
        return None
    return (f"The published peaks were measured with a beam of about {PUBLISHED_BEAM_DEG:g}° and "
            f"this dish's is {beamwidth_deg:.1f}°: the expected peak allows for the smooth "
            "fall-off of the emission across the wider beam, but not for the small clouds that "
            "make the published peak, so expect the measured peak to be lower by up to a third "
            "and use it as a check of the scale to about 30 %, not better.")


@dataclass(frozen=True)
class Gain:
    """Counts-to-kelvin scale and system temperature from a measured peak on a standard region."""

    region: str
    expected_peak_k: float
    kelvin_per_count: float | None  # None when the peak was given in dB only
    tsys_k: float | None  # None when neither the off-line level nor dB was given
    caveat: str | None


def gain_from_peak(name: str, beamwidth_deg: float, peak_counts: float | None = None,
                   offline_counts: float | None = None, peak_db: float | None = None,
                   model: DiscModel | None = None) -> Gain:
    """Calibrate a receiver on standard region ``name`` (module docstring).

    ``peak_counts``: the line peak above the line-free level, in the receiver's units;
    ``offline_counts``: that line-free level (total power, same units); ``peak_db``: the peak
    in dB above the line-free level (instead of counts). Raises UserError for impossible input.
    """
    std = region(name)
    expected = float(expected_peaks_k([std], beamwidth_deg, model=model)[0])
    scale = tsys = None
    if peak_counts is not None:
        if not (math.isfinite(peak_counts) and peak_counts > 0):
            raise UserError(f"peak: {peak_counts!r} must be a positive number of counts above "
                            "the line-free level")
        scale = expected / peak_counts
        if offline_counts is not None:
            if not (math.isfinite(offline_counts) and offline_counts > 0):
                raise UserError(f"off-line level: {offline_counts!r} must be positive")
            tsys = scale * offline_counts
    if peak_db is not None:
        if not (math.isfinite(peak_db) and peak_db > 0):
            raise UserError(f"peak: {peak_db!r} dB must be above 0 (the line above the baseline)")
        ratio = 10.0 ** (peak_db / 10.0) - 1.0
        tsys_db = expected / ratio
        if tsys is not None and abs(tsys_db - tsys) > 0.05 * tsys:
            raise UserError(f"peak: {peak_db:g} dB gives T_sys {tsys_db:.0f} K but the counts give "
                            f"{tsys:.0f} K; give one or the other")
        tsys = tsys_db if tsys is None else tsys
    if peak_counts is None and peak_db is None:
        raise UserError("give the measured peak, in counts above the line-free level or in dB")
    return Gain(std.name, expected, scale, tsys, dilution_caveat(beamwidth_deg))
