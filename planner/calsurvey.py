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
from .surveyvisibility import slew_sun_margin_deg
from .planfile import SESSION_GAP_MIN
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
    spans_mjd: tuple[tuple[float, float], ...]  # (start, end) of each record, MJD UTC
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


def _slew(model: SlewModel, site: Site, t_mjd: float, from_drive_az, from_alt, to_az, to_alt,
          lo: float, hi: float, clear_deg: float) -> tuple[float, float]:
    """(drive azimuth, seconds) of a Sun-safe move starting at ``t_mjd`` (the Sun then)."""
    s_alt, s_az = _sun_altaz(site, earth_state(np.array([t_mjd])))
    drive, slew_s = choose_drive_az(model, from_drive_az, from_alt, to_az, to_alt, lo, hi,
                                    s_alt[0], s_az[0], clear_deg)
    return float(drive), float(slew_s)


def calibration_unit(site: Site, model: SlewModel, t_free_mjd: float, from_drive_az_deg: float,
                     from_alt_deg: float, minutes: float = DEFAULT_MINUTES, *,
                     sun_min_sep_deg: float, sun_hazard_deg: float, before: bool,
                     back_to: tuple[float, float] | None = None, back_name: str = "rest position",
                     regions=STANDARD_REGIONS, tz=None) -> CalibrationUnit | None:
    """The best-placed region for a calibration next to a session (module docstring).

    ``before``: the unit ends at ``t_free_mjd`` with the dish at ``back_to`` (drive azimuth,
    elevation; default where it started); else it starts at ``t_free_mjd`` from the
    ``from_*`` position and, with ``back_to``, ends with a slew there. Every slew is Sun-safe
    by ``sun_hazard_deg`` plus the survey's slew margin with the Sun at its own start time.
    None when no region qualifies. ``tz`` (ZoneInfo) adds local times to the records.
    """
    if before and back_to is None:
        back_to = (from_drive_az_deg, from_alt_deg)
    clear = sun_hazard_deg + slew_sun_margin_deg(model, STEP_S)
    sun_limit = max(sun_min_sep_deg, sun_hazard_deg) + MARGIN_DEG
    n = int(np.ceil(minutes * 60.0 / STEP_S)) + 1
    span_d = minutes / 1440.0
    best = None
    for region in regions:  # three regions
        slew_s = back_s = 0.0
        def block_track(slew_s, back_s):
            start = (t_free_mjd - back_s / SECONDS_PER_DAY - span_d if before
                     else t_free_mjd + slew_s / SECONDS_PER_DAY)
            mjd = np.linspace(start, start + span_d, n)
            alt, az, sun, _ = _track(site, region, mjd)
            track = np.unwrap(np.radians(az))
            return mjd, alt, az, sun, np.degrees(track - track[0])

        for _ in range(3):  # block times from the slews, slews with the Sun at their times
            mjd, alt, az, sun, rel = block_track(slew_s, back_s)
            drive, new_slew = _slew(model, site, mjd[0] - slew_s / SECONDS_PER_DAY, from_drive_az_deg,
                                    from_alt_deg, az[0], alt[0], rel.min(), rel.max(), clear)
            new_back = 0.0
            if back_to is not None and np.isfinite(new_slew):
                _, new_back = _slew(model, site, mjd[-1], drive + rel[-1], alt[-1],
                                    back_to[0] % 360.0, back_to[1], 0.0, 0.0, clear)
            settled = abs(new_slew - slew_s) < 0.5 and abs(new_back - back_s) < 0.5
            slew_s, back_s = new_slew, new_back
            if not (np.isfinite(slew_s) and np.isfinite(back_s)):
                break
            if settled:  # the block where these slews put it (moves it by under 0.5 s)
                mjd, alt, az, sun, rel = block_track(slew_s, back_s)
                break
        if not (settled and np.isfinite(slew_s) and np.isfinite(back_s)):
            continue
        visible = (np.all(alt >= site.dish.horizon_limit_deg(az) + MARGIN_DEG)
                   and np.all(alt <= site.dish.elevation_max_deg - MARGIN_DEG))
        if not (visible and np.all(sun >= sun_limit)):
            continue
        score = (slew_s + back_s, -float(alt.mean()))
        if best is None or score < best[0]:
            best = (score, region, mjd, alt, az, sun, drive, rel, slew_s, back_s)
    if best is None:
        return None
    _, region, mjd, alt, az, sun, drive, rel, slew_s, back_s = best
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
        record("slew", region.name, slew_start, cal_start, from_alt_deg, alt[0],
               from_drive_az_deg % 360.0, az[0], from_drive_az_deg, drive),
        record(CALIBRATION_KIND, region.name, cal_start, cal_end, alt[0], alt[-1], az[0], az[-1],
               drive, end_drive, l_deg=region.l_deg, b_deg=region.b_deg, ra_deg=round(ra, 4),
               dec_deg=round(dec, 4), sun_sep_min_deg=round(float(sun.min()), 2),
               published_peak_k=region.peak_tb_k, expected_peak_k=round(peak, 1),
               action=calibration_action(region.name, (cal_end - cal_start) * 1440.0, round(peak, 1))),
    ]
    spans = [(slew_start, cal_start), (cal_start, cal_end)]
    unit_end, end_alt = cal_end, float(alt[-1])
    if back_to is not None:
        back_end = t_free_mjd if before else cal_end + back_s / SECONDS_PER_DAY
        records.append(record("slew", back_name, cal_end, back_end, alt[-1], back_to[1], az[-1],
                              back_to[0] % 360.0, end_drive, back_to[0]))
        spans.append((cal_end, back_end))
        unit_end = back_end
        end_drive, end_alt = back_to
    return CalibrationUnit(region, slew_start, unit_end, tuple(records), tuple(spans),
                           float(end_drive), end_alt)


def calibration_action(region: str, minutes: float, peak_k: float) -> str:
    """What the operator does in a calibration block, in one sentence."""
    return (f"Record {region} for {minutes:.0f} min: the line should peak near {peak_k:.0f} K; "
            "the peak above the line-free level sets the counts-to-kelvin scale.")


# ------------------------------------------------------------------ placing units in a plan

# A calibration may take the time of at most this many target integrations at a session end
# (the dispatcher fills sessions to their edges); beyond that the end goes without (our choice).
MAX_DROPPED_TARGETS = 2


def _sessions(blocks) -> list[tuple[int, int]]:
    """(first, last) block indices of each observing session: a gap over SESSION_GAP_MIN
    ends one, as in ``planfile.survey_sessions``, and so does every stow (that rule measures
    the gap from the stow's start; here a session never goes on past the dish being stowed,
    so no calibration is placed against a stow)."""
    out = []
    for i, b in enumerate(blocks):
        gap_min = (b.start_mjd - blocks[i - 1].end_mjd) * 1440.0 if i else None
        if i == 0 or gap_min > SESSION_GAP_MIN or blocks[i - 1].kind == "stow":
            out.append([i, i])
        else:
            out[-1][1] = i
    return [tuple(s) for s in out]


def _allowed(vis, t0: float, t1: float) -> bool:
    """Inside one operator window and (with night_only) at night from t0 to t1: the survey's
    own grid (``Visibility``), every sample the span touches."""
    step = vis.mjd_utc[1] - vis.mjd_utc[0] if vis.mjd_utc.size > 1 else 1.0
    k0 = int(np.floor((t0 - vis.mjd_utc[0]) / step + 1e-9))
    k1 = int(np.ceil((t1 - vis.mjd_utc[0]) / step - 1e-9))
    if k0 < 0 or k1 >= vis.mjd_utc.size:
        return False
    ws, we = vis.window_start_mjd[k0:k1 + 1], vis.window_end_mjd[k0:k1 + 1]
    return bool(np.all(vis.night[k0:k1 + 1]) and np.all(ws == ws[0])
                and ws[0] <= t0 + 1e-9 and t1 <= we[0] + 1e-9)


def _unit_blocks(unit: CalibrationUnit) -> list:
    """The unit's records as survey ``Block`` objects (times from the records' own MJDs)."""
    from .surveyplan import Block
    out = []
    for rec, (t0, t1) in zip(unit.records, unit.spans_mjd):
        cal = rec["kind"] == CALIBRATION_KIND
        out.append(Block(
            kind=rec["kind"], name=rec["name"], target=-1, start_mjd=t0, end_mjd=t1,
            l_deg=rec.get("l_deg"), b_deg=rec.get("b_deg"), ra_deg=rec.get("ra_deg"),
            dec_deg=rec.get("dec_deg"), alt_start_deg=rec["alt_start_deg"],
            alt_end_deg=rec["alt_end_deg"], az_start_deg=rec["az_start_deg"],
            az_end_deg=rec["az_end_deg"], drive_az_start_deg=rec["drive_az_start_deg"],
            drive_az_end_deg=rec["drive_az_end_deg"], sun_sep_min_deg=rec.get("sun_sep_min_deg"),
            calibration={k: rec[k] for k in ("published_peak_k", "expected_peak_k", "action")}
            if cal else None))
    return out


def _observed(b) -> bool:
    return b.kind in ("target", "reference")


def place_calibrations(site: Site, model: SlewModel, blocks: list, settings, vis,
                       minutes: float) -> tuple[list, list[str]]:
    """``blocks`` with a calibration unit at the start and the end of every session.

    Start: the dish goes from where it rests to the region and back, ending as the session's
    first slew begins; if the session starts right at the edge of its window (or of the
    night), the unit takes the time of its first target integrations instead (at most
    ``MAX_DROPPED_TARGETS``) and ends by slewing on to the first one kept. End: the same
    after the last integration, the dish returning to where the plan leaves it. Every unit
    lies in one window (at night with night_only), clear of the blocks around it; a longer
    rest it causes is checked against the Sun. Returns the new blocks and one line per
    session end left without a calibration.
    """
    from .driveplan import rest_danger_mjd
    rules = {"sun_min_sep_deg": settings.sun_min_sep_deg, "sun_hazard_deg": settings.sun_hazard_deg,
             "tz": site.tz}
    out: list = []
    missing: list[str] = []
    sessions = _sessions(blocks)
    for n, (i0, i1) in enumerate(sessions):  # sessions: a few per night
        label = f"session {n + 1} ({iso_local(blocks[i0].start_mjd, site.tz)[:16]})"
        prev_end = out[-1].end_mjd if out else settings.start_mjd
        next_start = blocks[i1 + 1].start_mjd if i1 + 1 < len(blocks) else settings.end_mjd
        session = list(blocks[i0:i1 + 1])
        rest = (session[0].drive_az_start_deg, session[0].alt_start_deg)

        # ---- before: round trip into the first slew, or replace the first integrations
        placed = None
        starts = [0] + [k for k in range(1, len(session) - 1)
                        if session[k].kind == "slew" and session[k + 1].kind == "target"]
        for k in starts[:MAX_DROPPED_TARGETS + 1]:
            if k == 0:
                unit = calibration_unit(site, model, session[0].start_mjd, *rest, minutes,
                                        before=True, **rules)
            else:
                target = session[k + 1]
                unit = calibration_unit(site, model, target.start_mjd, *rest, minutes, before=True,
                                        back_to=(target.drive_az_start_deg, target.alt_start_deg),
                                        back_name=target.name, **rules)
            if unit is None or unit.start_mjd < prev_end or not _allowed(vis, unit.start_mjd, unit.end_mjd):
                continue
            if k and rest_danger_mjd(site, rest[0], rest[1], session[0].start_mjd, unit.start_mjd) is not None:
                continue  # the dish would wait longer where it rests, and the Sun comes there
            placed = (k + 1 if k else 0, unit)
            break
        if placed is None:
            missing.append(f"{label}: no standard region could be observed before it")
        else:
            session = _unit_blocks(placed[1]) + session[placed[0]:]

        # ---- after: round trip from the last integration, or give up the last ones
        placed = None
        if session[-1].kind == "stow":
            missing.append(f"{label}: ends with the dish stowed from the Sun, no calibration after it")
        else:
            last = session[-1]
            home = (last.drive_az_end_deg, last.alt_end_deg)
            ends = [k for k in range(len(session) - 1, -1, -1) if _observed(session[k])
                    and not any(b.kind == "reference" for b in session[k + 1:k + 3])]
            for k in ends[:MAX_DROPPED_TARGETS + 1]:
                b = session[k]
                unit = calibration_unit(site, model, b.end_mjd, b.drive_az_end_deg, b.alt_end_deg,
                                        minutes, before=False, back_to=home, **rules)
                if unit is None or unit.end_mjd > next_start or not _allowed(vis, unit.start_mjd, unit.end_mjd):
                    continue
                if unit.end_mjd < last.end_mjd and rest_danger_mjd(
                        site, home[0], home[1], unit.end_mjd, last.end_mjd) is not None:
                    continue
                placed = (k + 1, unit)
                break
            if placed is None:
                missing.append(f"{label}: no standard region could be observed after it")
            else:
                session = session[:placed[0]] + _unit_blocks(placed[1])
        out.extend(session)
    return out, missing
