"""Calibration blocks for a pointed survey: an IAU standard HI region at each session's ends.

For ``survey --calibrate``: at the start and at the end of every observing session the dish
spends ``minutes`` on the best-placed standard region (``calibration.STANDARD_REGIONS``):

* visible: above the elevation limit and the horizon mask, below the upper limit, for the
  whole block (checked every ``STEP_S``, with the survey's ``ANGLE_MARGIN_DEG``-style margin
  ``MARGIN_DEG``);
* Sun-safe: at least max(Sun data rule, feed-safety rule + ``MARGIN_DEG``) from the Sun for
  the whole block, and the slew to it and on to the next position clear of the Sun by the
  feed-safety rule (``slew.choose_drive_az`` with the Sun's position);
* best placed: of the regions that qualify, the one with the shortest slew from where the dish
  is (before the session: from the session's first position, which the dish then returns to;
  after it: from the last position), ties to the higher elevation.

``calibration_unit`` chooses the region and returns the block records (docs/plan-format.md:
``kind`` "slew" and "calibration", the survey's block fields) for one end of a session;
``session_gaps`` says where, around a survey's blocks, such units can go. The survey
scheduler places them (it owns the windows, rests and stows). Times float MJD (UTC), angles
degrees.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .avoidance import separation_deg, sun_direction
from .calibration import STANDARD_REGIONS, StandardRegion, expected_peaks_k
from .earth import earth_state, unit_vectors
from .site import Site
from .skytrack import icrs_to_altaz_deg
from .slew import SlewModel, choose_drive_az
from .timebase import SECONDS_PER_DAY, iso_local, iso_utc

STEP_S = 60.0
MARGIN_DEG = 0.05  # as the survey's angular margin: fast-path accuracy plus sampling
DEFAULT_MINUTES = 5.0  # a short integration: the standard regions are bright (our choice)
CALIBRATION_KIND = "calibration"


@dataclass(frozen=True)
class CalibrationUnit:
    """A chosen region and the slew + calibration block records that observe it."""

    region: StandardRegion
    start_mjd: float  # of the slew to the region
    end_mjd: float  # of the calibration block
    records: tuple[dict, ...]
    end_drive_az_deg: float
    end_alt_deg: float


def _track(site: Site, region: StandardRegion, mjd: np.ndarray):
    state = earth_state(mjd)
    ra, dec = region.icrs_deg
    vec = np.broadcast_to(unit_vectors(ra, dec), (mjd.size, 3))
    alt, az = icrs_to_altaz_deg(site, vec, state)
    sun = separation_deg(vec, sun_direction(state))
    return alt, az, sun, state


def _sun_altaz(site: Site, state) -> tuple[np.ndarray, np.ndarray]:
    return icrs_to_altaz_deg(site, sun_direction(state), state)


def calibration_unit(site: Site, model: SlewModel, t_free_mjd: float, from_drive_az_deg: float,
                     from_alt_deg: float, minutes: float = DEFAULT_MINUTES, *,
                     sun_min_sep_deg: float, sun_hazard_deg: float, before: bool,
                     regions=STANDARD_REGIONS, tz=None) -> CalibrationUnit | None:
    """The best-placed region for a calibration next to a session (module docstring).

    ``before``: the unit ends at ``t_free_mjd`` (the session's first slew) and the dish must
    get back to (``from_drive_az_deg``, ``from_alt_deg``), the session's first position, by
    then; else it starts at ``t_free_mjd`` from that (last) position. None when no region
    qualifies. ``tz`` (ZoneInfo) adds local times to the records.
    """
    n = int(np.ceil(minutes * 60.0 / STEP_S)) + 1
    best = None
    for region in regions:  # three regions
        # First guess of the block's times; for "before" the slew back is added after.
        if before:
            end = t_free_mjd
            start = end - minutes / 1440.0
        else:
            start = t_free_mjd
            end = start + minutes / 1440.0
        mjd = np.linspace(start, end, n)
        alt, az, sun, state = _track(site, region, mjd)
        limit = site.dish.horizon_limit_deg(az)
        visible = np.all(alt >= limit + MARGIN_DEG) and np.all(alt <= site.dish.elevation_max_deg - MARGIN_DEG)
        sun_ok = np.all(sun >= max(sun_min_sep_deg, sun_hazard_deg) + MARGIN_DEG)
        if not (visible and sun_ok):
            continue
        s_alt, s_az = _sun_altaz(site, state)
        track = np.unwrap(np.radians(az))
        rel = np.degrees(track - track[0])
        drive, slew_s = choose_drive_az(model, from_drive_az_deg, from_alt_deg, az[0], alt[0],
                                        rel.min(), rel.max(), s_alt[0], s_az[0],
                                        sun_hazard_deg + MARGIN_DEG)
        drive, slew_s = float(drive), float(slew_s)
        if not np.isfinite(slew_s):
            continue
        back_s = 0.0
        if before:
            # Return to the session's first position, clear of the Sun too.
            end_drive = drive + rel[-1]
            back_drive, back_s = choose_drive_az(model, end_drive, alt[-1], from_drive_az_deg % 360.0,
                                                 from_alt_deg, 0.0, 0.0, s_alt[-1], s_az[-1],
                                                 sun_hazard_deg + MARGIN_DEG)
            if not np.isfinite(back_s):
                continue
        score = (slew_s + back_s, -float(alt.mean()))
        if best is None or score < best[0]:
            best = (score, region, mjd, alt, az, sun, drive, rel, slew_s, back_s)
    if best is None:
        return None
    _, region, mjd, alt, az, sun, drive, rel, slew_s, back_s = best
    # Before: slew in, calibrate, slew back, all ending at t_free_mjd. After: the slew starts
    # at t_free_mjd and the block follows it.
    shift = -back_s / SECONDS_PER_DAY if before else slew_s / SECONDS_PER_DAY
    if shift:
        mjd = mjd + shift
        alt, az, sun, _ = _track(site, region, mjd)
        if (np.any(alt < site.dish.horizon_limit_deg(az) + MARGIN_DEG)
                or np.any(sun < max(sun_min_sep_deg, sun_hazard_deg) + MARGIN_DEG)):
            return None  # the slew back moved the block out of its checked span
    cal_start, cal_end = float(mjd[0]), float(mjd[-1])
    slew_start = cal_start - slew_s / SECONDS_PER_DAY
    peak = float(expected_peaks_k([region], site.dish.beamwidth_deg)[0])
    ra, dec = region.icrs_deg

    def record(kind, name, t0, t1, alt0, alt1, az0, az1, d0, d1, **extra):
        rec = {"kind": kind, "name": name, "start_utc": iso_utc(t0), "end_utc": iso_utc(t1),
               "minutes": round((t1 - t0) * 1440.0, 3),
               "alt_start_deg": round(float(alt0), 2), "alt_end_deg": round(float(alt1), 2),
               "az_start_deg": round(float(az0) % 360.0, 2), "az_end_deg": round(float(az1) % 360.0, 2),
               "drive_az_start_deg": round(float(d0), 2), "drive_az_end_deg": round(float(d1), 2),
               **extra}
        if tz is not None:
            rec["start_local"], rec["end_local"] = iso_local(t0, tz), iso_local(t1, tz)
        return rec

    end_drive = drive + float(rel[-1])
    records = [
        record("slew", "slew", slew_start, cal_start, from_alt_deg, alt[0],
               from_drive_az_deg % 360.0, az[0], from_drive_az_deg, drive),
        record(CALIBRATION_KIND, region.name, cal_start, cal_end, alt[0], alt[-1], az[0], az[-1],
               drive, end_drive, l_deg=region.l_deg, b_deg=region.b_deg, ra_deg=round(ra, 4),
               dec_deg=round(dec, 4), sun_sep_min_deg=round(float(sun.min()), 2),
               published_peak_k=region.peak_tb_k, expected_peak_k=round(peak, 1),
               action=(f"Record {region.name} for {(cal_end - cal_start) * 1440:.0f} min: the line "
                       f"should peak near {peak:.0f} K; the peak above the line-free level sets "
                       "the counts-to-kelvin scale.")),
    ]
    unit_end = cal_end
    if before:
        back_end = cal_end + back_s / SECONDS_PER_DAY
        records.append(record("slew", "slew", cal_end, back_end, alt[-1], from_alt_deg, az[-1],
                              from_drive_az_deg % 360.0, end_drive, from_drive_az_deg))
        unit_end = back_end
        end_drive, end_alt = from_drive_az_deg, from_alt_deg
    else:
        end_alt = float(alt[-1])
    return CalibrationUnit(region, slew_start, unit_end, tuple(records), float(end_drive), end_alt)
