"""Small survey plans for the drive tests, with blocks placed where a test needs them.

A block is given by where the dish points (sky azimuth, elevation) when it
starts; its RA/Dec (and l, b) are the sky position there at that moment, so the
site's own geometry agrees with the plan, as it does for a plan from the survey
planner.
"""
from __future__ import annotations

import numpy as np

from planner.driveplan import drive_azimuth
from planner.earth import earth_state, spherical_deg
from planner.galactic import ICRS_TO_GALACTIC
from planner.pointing import from_altaz
from planner.skytrack import fixed_pointing_icrs
from planner.timebase import iso_local, iso_utc, parse_instant

NIGHT = "2027-03-01T12:00:00Z"  # 22:30 at Saltbush Ridge, the Sun 30 deg below the horizon
MORNING = "2027-01-15T23:00:00Z"  # 09:30 local: the Sun at about 37 deg, azimuth 91 deg


def mjd(text: str) -> float:
    return parse_instant(text, "test")


def sky_at(site, sky_az_deg: float, el_deg: float, when_mjd: float):
    """(ra, dec, l, b) of the direction (el, sky az) at the site at ``when_mjd``."""
    p = from_altaz(site, el_deg, sky_az_deg % 360.0)
    vec = fixed_pointing_icrs(site, p.ha_deg, p.dec_deg, earth_state(np.array([when_mjd])))
    ra, dec = spherical_deg(vec)
    l_deg, b_deg = spherical_deg(vec @ ICRS_TO_GALACTIC.T)
    return float(ra[0]), float(dec[0]), float(l_deg[0]), float(b_deg[0])


def block(site, name: str, sky_az_deg: float, el_deg: float, start_mjd: float,
          minutes: float = 10.0, kind: str = "target", drive_az_deg: float | None = None,
          freq_mhz: float = 1420.5) -> dict:
    """A target (or reference) block of a ``hiplan.survey/1`` plan, as the planner writes it."""
    ra, dec, l_deg, b_deg = sky_at(site, sky_az_deg, el_deg, start_mjd)
    end = start_mjd + minutes / 1440.0
    drive = drive_azimuth(site, sky_az_deg) if drive_az_deg is None else drive_az_deg
    return {"kind": kind, "name": name, "start_utc": iso_utc(start_mjd), "end_utc": iso_utc(end),
            "start_local": iso_local(start_mjd, site.tz), "end_local": iso_local(end, site.tz),
            "minutes": minutes, "l_deg": round(l_deg, 4), "b_deg": round(b_deg, 4),
            "ra_deg": ra, "dec_deg": dec, "alt_start_deg": el_deg, "alt_end_deg": el_deg,
            "az_start_deg": sky_az_deg % 360.0, "az_end_deg": sky_az_deg % 360.0,
            "drive_az_start_deg": drive, "drive_az_end_deg": drive,
            "sun_sep_min_deg": 90.0, "moon_sep_min_deg": None, "lsr_corr_min_kms": 0.0,
            "lsr_corr_max_kms": 0.0, "repeat": 1, "reference_for": None,
            "tuning": {"centre_mhz": freq_mhz}}


def survey_doc(site, blocks: list[dict]) -> dict:
    """A survey plan document around ``blocks``."""
    return {"schema": "hiplan.survey/1", "kind": "survey", "site": site.summary(),
            "period": {}, "settings": {"sun_hazard_deg": site.rules.sun_hazard_deg},
            "blocks": blocks, "unscheduled": [], "summary": {}}


def three_blocks(site, start_mjd: float, minutes: float = 10.0, gap_min: float = 2.0):
    """Three targets a few degrees apart, one after the other, low in the north-east."""
    out = []
    for i, (az, el) in enumerate([(20.0, 30.0), (24.0, 32.0), (28.0, 30.0)]):
        t = start_mjd + i * (minutes + gap_min) / 1440.0
        out.append(block(site, f"T{i}", az, el, t, minutes))
    return out


def drift_doc(site, dish: dict, move_utc: str, recording_utc: tuple[str, str],
              l_range: tuple[float, float]) -> dict:
    """A one-day ``hiplan.plan/1`` drift plan: a re-park to ``dish`` at ``move_utc`` (15 minutes)
    and one recording at that setting."""
    move_end = iso_utc(mjd(move_utc) + 15 / 1440.0)
    return {"schema": "hiplan.plan/1", "kind": "drift", "site": site.summary(), "period": {},
            "settings": {}, "summary": {}, "days": [{
                "date": move_utc[:10],
                "park": {**dish, "move": True, "move_start_utc": move_utc,
                         "move_end_utc": move_end},
                "recordings": [{"start_utc": recording_utc[0], "end_utc": recording_utc[1],
                                "l_start_deg": l_range[0], "l_end_deg": l_range[1],
                                "dish": dish}],
                "tuning": {"centre_mhz": 1420.586}}]}
