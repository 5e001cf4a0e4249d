"""Radiometer noise: rms per channel, drift time through the beam, averaging over days.

Radiometer equation for a total-power receiver (Dicke 1946, Rev. Sci. Instrum. 17, 268):
sigma_T = k * T_sys / sqrt(dnu * tau), with k = 1. Switched schemes (frequency or
position switching, Dicke switching) spend time off the line or difference two noisy
spectra and give k of about 2 (from memory); k is a parameter here.

Averaging N independent spectra of equal quality lowers the noise as 1/sqrt(N); this
assumes the noise is random and the baselines are stable between days.
"""
from __future__ import annotations

import numpy as np

from .earth import EARTH_OMEGA_RAD_S
from .errors import UserError


def _positive(name: str, value) -> np.ndarray:
    """``value`` as a float array; UserError unless every element is finite and > 0."""
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise UserError(f"{name} must be a number, got {value!r}") from None
    if not np.all(np.isfinite(arr) & (arr > 0)):
        raise UserError(f"{name} must be positive and finite, got {value!r}")
    return arr


def radiometer_rms_k(tsys_k, channel_width_hz, integration_s, switching_factor=1.0):
    """Rms noise per channel: sigma = factor * T_sys / sqrt(dnu * tau).

    Units: K, Hz, s in; K out. ``switching_factor`` is 1 for total power and about 2
    for switched observing (from memory). Dicke 1946, Rev. Sci. Instrum. 17, 268.
    Inputs broadcast against each other.
    """
    tsys = _positive("tsys_k", tsys_k)
    dnu_hz = _positive("channel_width_hz", channel_width_hz)
    tau_s = _positive("integration_s", integration_s)
    factor = _positive("switching_factor", switching_factor)
    return factor * tsys / np.sqrt(dnu_hz * tau_s)


def drift_time_s(beamwidth_deg, dec_deg):
    """Time a source takes to drift across the half-power beam of a parked dish.

    Units: degrees in, seconds out. The beam points at declination ``dec_deg`` and the
    source passes through its centre at the sidereal rate (Earth rotation angle rate,
    IERS Conventions 2010). On the sphere the source stays within HPBW/2 of the beam
    centre for an hour-angle range 2 h with sin(h/2) cos(dec) = sin(HPBW/4); for small
    beams this is the familiar HPBW / (15.041 deg/h * cos dec). Where the source never
    leaves the half-power circle (within HPBW/4 of a pole) the result is ``inf``.
    """
    beam_deg = _positive("beamwidth_deg", beamwidth_deg)
    if np.any(beam_deg > 180):
        raise UserError(f"beamwidth_deg must be at most 180, got {beamwidth_deg!r}")
    dec = np.asarray(dec_deg, dtype=float)
    if not np.all(np.isfinite(dec) & (np.abs(dec) <= 90)):
        raise UserError(f"dec_deg must be within [-90, 90], got {dec_deg!r}")
    cos_dec = np.cos(np.radians(dec))
    sin_quarter = np.sin(np.radians(beam_deg) / 4)
    ratio = np.divide(sin_quarter, cos_dec, out=np.full(np.broadcast(sin_quarter, cos_dec).shape, np.inf),
                      where=cos_dec > 0)
    never_leaves = ratio >= 1
    half_span_rad = 2.0 * np.arcsin(np.where(never_leaves, 1.0, ratio))
    # [()] turns a 0-d result into a numpy scalar, like the other functions here.
    return np.where(never_leaves, np.inf, 2.0 * half_span_rad / EARTH_OMEGA_RAD_S)[()]


def rms_after_days(rms_per_day_k, days):
    """Rms after averaging ``days`` equal daily spectra: rms_day / sqrt(days).

    Units: K, days (may be fractional); K out. Independent random noise assumed.
    """
    return _positive("rms_per_day_k", rms_per_day_k) / np.sqrt(_positive("days", days))


def days_to_reach(rms_per_day_k, target_rms_k):
    """Days of equal daily spectra needed to average down to ``target_rms_k``.

    Units: K in, days out (fractional; round up to plan). (rms_day / target)^2, the
    inverse of ``rms_after_days``.
    """
    return (_positive("rms_per_day_k", rms_per_day_k) / _positive("target_rms_k", target_rms_k)) ** 2
