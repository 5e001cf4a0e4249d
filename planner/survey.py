"""Pointed-survey scheduling for a steerable dish: the entry point, tuning and reasons.

A survey plan is built in three parts, one module each:

* ``planner.surveyvisibility``: every target and reference position against
  every constraint (elevation and mask, Sun, Moon, night, windows, cable wrap)
  on a time grid, with the angular margins and their reasons;
* ``planner.surveydispatch``: the greedy dispatcher with look-ahead, and feed
  safety for slews and for the resting dish (the Sun-safe stow);
* ``planner.surveyplan``: the settings, the plan records (blocks, unscheduled
  targets) and the ``hiplan.survey/1`` document.

This module ties them together (``plan_survey``), then gives each target block
its LSR-correction range (``doppler``, one-minute samples over the block) and
receiver tuning (``spectral.tuning_advice`` with the disc-HI envelope of
``galaxy`` at the target's l, b); a reference block keeps its target's tuning, since position switching needs the same receiver setting
on and off (common practice). Angles in degrees, times as float MJD (UTC).
"""
from __future__ import annotations

import math
from dataclasses import replace

import numpy as np

from .calsurvey import place_calibrations
from .doppler import velocity_corrections
from .errors import UserError
from .galactic import galactic_to_icrs_deg
from .galaxy import hi_velocity_envelope
from .obslog import LogEntry, coverage_minutes
from .site import Site
from .slew import SlewModel, drive_options_deg, slew_model
from .spectral import TuningAdvice, tuning_advice
from .surveydispatch import (LOOKAHEAD_MIN, REFERENCE_MAX_WAIT_MIN, STOW_NAME,
                             STOW_SEARCH_SAMPLES, _Dispatcher)
from .surveyplan import (BLOCK_FIELDS, MINUTES_PER_DAY, STEP_S, SURVEY_SCHEMA, Block, SurveyPlan,
                         SurveySettings, Unscheduled, block_record, plan_summary, survey_document,
                         tuning_record)
from .surveyvisibility import (ANGLE_MARGIN_DEG, FAST_SUN_DEG, MAX_POSITION_SAMPLES, Visibility,
                               compute_visibility, rest_sun_margin_deg, run_lengths,
                               samples_needed, slew_sun_margin_deg)
from .targets import ReferenceSpec, reference_positions

# The survey's public names, wherever they live, so ``from planner.survey import ...`` serves
# every caller.
__all__ = [
    "ANGLE_MARGIN_DEG", "BLOCK_FIELDS", "Block", "FAST_SUN_DEG", "LOOKAHEAD_MIN",
    "MAX_POSITION_SAMPLES", "REFERENCE_MAX_WAIT_MIN", "STEP_S", "STOW_NAME", "STOW_SEARCH_SAMPLES",
    "SURVEY_SCHEMA", "SurveyPlan", "SurveySettings", "Unscheduled", "Visibility",
    "annotate_blocks", "block_record", "compute_visibility", "plan_summary", "plan_survey",
    "repeats_done_from_log", "rest_sun_margin_deg", "samples_needed", "slew_sun_margin_deg",
    "survey_document", "tuning_record",
    "REASON_DAYLIGHT", "REASON_DONE", "REASON_MOON", "REASON_NEVER_LONG", "REASON_NEVER_UP",
    "REASON_REFERENCE", "REASON_SUN", "REASON_TIME", "REASON_WINDOWS", "REASON_CALIBRATION",
]

REASON_NEVER_UP = "never rises above the elevation limit"
REASON_NEVER_LONG = "never above the elevation limit for a whole integration"
REASON_SUN = "only near the Sun this period"
REASON_MOON = "only near the Moon this period"
REASON_DAYLIGHT = "only in daylight"
REASON_WINDOWS = "outside every window"
REASON_REFERENCE = "no reference position usable alongside it"
REASON_TIME = "not enough time this period"
REASON_DONE = "already observed (observation log)"


def repeats_done_from_log(targets, entries: list[LogEntry], bin_width_deg: float) -> np.ndarray:
    """Whole integrations already in the log, per target: bin minutes // target minutes.

    The log records longitude ranges only, so a target counts as observed when
    the longitude bin holding its l has at least its minutes (any b).
    """
    minutes_per_bin = coverage_minutes(entries, bin_width_deg)
    n_bins = minutes_per_bin.size
    done = []
    for t in targets:
        covered = minutes_per_bin[int(math.floor(t.l_deg / bin_width_deg + 1e-9)) % n_bins]
        done.append(int(min(t.repeats, math.floor(covered / t.minutes + 1e-9))))
    return np.array(done, dtype=int)


def _start_drive(site: Site, model: SlewModel) -> tuple[float, float]:
    """Where the dish is when the plan starts: the site's [pointing], else high at azimuth 0."""
    point = site.default_pointing
    if "alt_deg" in point and "az_deg" in point:
        alt, az = float(point["alt_deg"]), float(point["az_deg"])
    else:
        alt, az = site.dish.elevation_max_deg, 0.0
    options = drive_options_deg(model, az)
    centre = 0.5 * (model.az_min_deg + model.az_max_deg)
    best = int(np.nanargmin(np.abs(options - centre)))
    return float(options[best]), alt


# ------------------------------------------------------------------ public API


def _reference_table(targets, spec: ReferenceSpec | None):
    """Unique reference positions (l, b, ra, dec) and, per target, their indices (-1 padded)."""
    if spec is None:
        return np.empty((0, 4)), np.full((len(targets), 1), -1)
    index: dict[tuple[float, float], int] = {}
    per_target = []
    for t in targets:
        rows = []
        for l_deg, b_deg in reference_positions(spec, t):
            key = (round(l_deg % 360.0, 9), round(b_deg, 9))
            rows.append(index.setdefault(key, len(index)))
        per_target.append(rows)
    width = max(len(r) for r in per_target)
    options = np.full((len(targets), width), -1)
    for i, rows in enumerate(per_target):
        options[i, :len(rows)] = rows
    lb = np.array(list(index.keys()), dtype=float).reshape(-1, 2)
    ra, dec = galactic_to_icrs_deg(lb[:, 0], lb[:, 1])
    return np.column_stack([lb, ra, dec]), options


def _reasons(d: _Dispatcher, vis: Visibility, targets, wanted, done_before, scheduled):
    """Why each target with repeats still wanted was left out (first failing rule)."""
    out = []
    for i, t in enumerate(targets):
        if wanted[i] == 0:
            if t.repeats > 0 and done_before[i] >= t.repeats:
                out.append(Unscheduled(t.name, REASON_DONE, t.repeats, 0, int(done_before[i])))
            continue
        if scheduled[i] >= wanted[i]:
            continue
        need = d.need[i] + 1

        def fits(mask, need=need) -> bool:
            return bool((run_lengths(mask) >= need).any())

        elev = vis.elevation_ok[i]
        if not elev.any():
            reason = REASON_NEVER_UP
        elif not fits(elev):
            reason = REASON_NEVER_LONG
        elif not fits(elev & vis.sun_ok[i]):
            reason = REASON_SUN
        elif not fits(elev & vis.sun_ok[i] & vis.moon_ok[i]):
            reason = REASON_MOON
        elif not fits(elev & vis.sun_ok[i] & vis.moon_ok[i] & vis.night):
            reason = REASON_DAYLIGHT
        elif not d.target_can_start[i].any():
            reason = REASON_WINDOWS
        elif not d.can_start[i].any() or (d.ref_failed[i] and not d.unit_ok_ever[i]):
            reason = REASON_REFERENCE
        else:
            reason = REASON_TIME
        if scheduled[i] > 0 or t.repeats > 1:
            reason += f" ({int(scheduled[i])} of {int(wanted[i])} repeats scheduled)"
        out.append(Unscheduled(t.name, reason, int(wanted[i]), int(scheduled[i]),
                               int(done_before[i])))
    return tuple(out)


def plan_survey(site: Site, targets, settings: SurveySettings,
                done_before=None) -> SurveyPlan:
    """Schedule pointed integrations of ``targets`` at ``site`` (see the module docstring).

    ``done_before``: whole integrations per target already observed (e.g. from
    ``repeats_done_from_log``); they are subtracted from each target's repeats.
    """
    targets = tuple(targets)
    model = slew_model(site)  # refuses non-steerable mounts first
    if not targets:
        raise UserError("no targets: give --grid or --targets")
    if not settings.end_mjd > settings.start_mjd:
        raise ValueError("empty period")
    done = (np.zeros(len(targets), dtype=int) if done_before is None
            else np.asarray(done_before, dtype=int))
    wanted = np.maximum(np.array([t.repeats for t in targets]) - done, 0)
    ref_table, ref_options = _reference_table(targets, settings.reference)
    ra = np.concatenate([[t.ra_deg for t in targets], ref_table[:, 2]])
    dec = np.concatenate([[t.dec_deg for t in targets], ref_table[:, 3]])
    vis = compute_visibility(site, ra, dec, settings)
    ref_rows = np.where(ref_options >= 0, ref_options + len(targets), -1)
    dispatcher = _Dispatcher(site, targets, settings, vis, ref_table, ref_rows, wanted)
    start_az, start_el = _start_drive(site, model)
    blocks = dispatcher.run(start_az, start_el)
    dispatched = _scheduled(blocks, len(targets))
    missing: list[str] = []
    if settings.calibrate_minutes:
        blocks, missing = place_calibrations(site, model, blocks, settings, vis,
                                             settings.calibrate_minutes)
    blocks = annotate_blocks(site, targets, blocks, settings)
    scheduled = _scheduled(blocks, len(targets))
    index: dict[str, int] = {}  # a target's index by name (the first, should names repeat)
    for i, t in enumerate(targets):
        index.setdefault(t.name, i)
    unscheduled = tuple(
        replace(u, reason=f"{REASON_CALIBRATION} ({u.repeats_scheduled} of {u.repeats_wanted} "
                          "repeats scheduled)")
        if dispatched[index[u.name]] > scheduled[index[u.name]] else u
        for u in _reasons(dispatcher, vis, targets, wanted, done, scheduled))
    return SurveyPlan(site=site, settings=settings, targets=targets, blocks=tuple(blocks),
                      unscheduled=unscheduled, done_before=tuple(int(x) for x in done),
                      calibration_missing=tuple(missing))


REASON_CALIBRATION = "its time went to a session's calibration (--calibrate)"


def _scheduled(blocks, n: int) -> np.ndarray:
    counts = np.zeros(n, dtype=int)
    for b in blocks:
        if b.kind == "target":
            counts[b.target] += 1
    return counts


def annotate_blocks(site: Site, targets, blocks: list[Block], settings: SurveySettings):
    """Blocks with LSR-correction ranges (target/reference) and tuning (target, and its reference).

    LSR corrections are sampled each minute through the block (end included), all
    blocks in one ``velocity_corrections`` call.
    """
    observed = [i for i, b in enumerate(blocks) if b.kind in ("target", "reference", "calibration")]
    if not observed:
        return list(blocks)
    mjd_parts, ra_parts, dec_parts, counts = [], [], [], []
    for i in observed:  # per block, building its sample list
        b = blocks[i]
        n = int(math.ceil(b.minutes - 1e-9))
        times = b.start_mjd + np.minimum(np.arange(n + 1), b.minutes) / MINUTES_PER_DAY
        mjd_parts.append(times)
        ra_parts.append(np.full(times.size, b.ra_deg))
        dec_parts.append(np.full(times.size, b.dec_deg))
        counts.append(times.size)
    mjd = np.concatenate(mjd_parts)
    corr = velocity_corrections(site.latitude_deg, site.longitude_deg, site.height_m,
                                np.concatenate(ra_parts), np.concatenate(dec_parts), mjd,
                                solar_motion=settings.lsr_definition).lsr_corr_kms
    offsets = np.concatenate([[0], np.cumsum(counts)[:-1]])
    lo = np.minimum.reduceat(corr, offsets)
    hi = np.maximum.reduceat(corr, offsets)
    # a calibration block is tuned for its own region's line, as a target is
    target_blocks = [i for i in observed if blocks[i].kind in ("target", "calibration")]
    env = hi_velocity_envelope(np.array([blocks[i].l_deg for i in target_blocks]),
                               np.array([blocks[i].b_deg for i in target_blocks]),
                               settings.rotation)
    out = list(blocks)
    range_of = dict(zip(observed, zip(lo, hi)))
    last_tuning: dict[int, TuningAdvice] = {}
    env_of = {i: j for j, i in enumerate(target_blocks)}
    for i in observed:  # per block: scalar tuning advice
        b = blocks[i]
        corr_lo, corr_hi = (float(v) for v in range_of[i])
        if b.kind in ("target", "calibration"):
            j = env_of[i]
            tuning = tuning_advice(float(env.v_min_kms[j]), float(env.v_max_kms[j]), corr_lo,
                                   corr_hi, site.receiver)
            if b.kind == "target":
                last_tuning[b.target] = tuning
        else:
            tuning = last_tuning.get(b.target)
        out[i] = replace(b, lsr_corr_min_kms=corr_lo, lsr_corr_max_kms=corr_hi, tuning=tuning)
    return out
