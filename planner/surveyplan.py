"""Survey plan records: the settings a survey is scheduled against, its blocks, and the document.

``SurveySettings`` is what to schedule against (period, rules, windows,
references, tuning models); ``Block``, ``Unscheduled`` and ``SurveyPlan`` are
what the scheduler (``planner.survey``) returns; ``survey_document`` turns a
plan into the ``hiplan.survey/1`` JSON document (docs/plan-format.md,
docs/survey.md). A stow (and the slew to it) is a fixed alt/az, not a sky
position. Angles in degrees, times as float MJD (UTC).
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from .avoidance import DEFAULT_NIGHT, NIGHT_SUN_ALTITUDE_DEG
from .galaxy import RotationModel
from .site import DEFAULT_SUN_HAZARD_DEG, Site
from .spectral import TuningAdvice
from .targets import ReferenceSpec, Target
from .timebase import iso_local, iso_utc
from .windows import ALWAYS, Availability

SURVEY_SCHEMA = "hiplan.survey/1"
STEP_S = 60.0  # the default time-grid step (planner.surveyvisibility)
MINUTES_PER_DAY = 1440.0


@dataclass(frozen=True)
class SurveySettings:
    """What to schedule against: period (MJD UTC), rules (deg), windows, references."""

    start_mjd: float
    end_mjd: float
    sun_min_sep_deg: float
    moon_min_sep_deg: float = 0.0
    night_only: bool = False
    night_sun_alt_deg: float = NIGHT_SUN_ALTITUDE_DEG[DEFAULT_NIGHT]  # with night_only
    night: str = DEFAULT_NIGHT  # the name of that limit, for the document
    sun_hazard_deg: float = DEFAULT_SUN_HAZARD_DEG  # feed safety (site rule)
    availability: Availability = ALWAYS
    reference: ReferenceSpec | None = None
    reference_minutes: float | None = None  # None: as long as the target's integration
    lsr_definition: str = "standard"
    rotation: RotationModel = field(default_factory=RotationModel)
    rotation_name: str = "iau1985"
    alarm_minutes: float = 15.0
    step_s: float = STEP_S
    calibrate_minutes: float | None = None  # survey --calibrate: a standard region at each session end


@dataclass(frozen=True)
class Block:
    """One entry of the plan: a target or reference integration, a slew, or a Sun-safe stow.

    A stow (and the slew to it) is a fixed alt/az, not a sky position: its l, b,
    RA and Dec are None and its target index is -1.
    """

    kind: str  # target | reference | calibration | slew | stow
    name: str
    target: int  # index of the target this block serves, -1 for stows
    start_mjd: float
    end_mjd: float
    l_deg: float | None
    b_deg: float | None
    ra_deg: float | None
    dec_deg: float | None
    alt_start_deg: float
    alt_end_deg: float
    az_start_deg: float  # sky azimuth, [0, 360)
    az_end_deg: float
    drive_az_start_deg: float  # cable-wrap (encoder) azimuth
    drive_az_end_deg: float
    sun_sep_min_deg: float | None = None
    moon_sep_min_deg: float | None = None
    repeat: int = 0  # 1-based repeat of the target, 0 for slews
    reference_for: str | None = None
    lsr_corr_min_kms: float | None = None
    lsr_corr_max_kms: float | None = None
    tuning: TuningAdvice | None = None
    # calibration blocks: published_peak_k, expected_peak_k (K) and the operator's action
    calibration: dict | None = None

    @property
    def minutes(self) -> float:
        return (self.end_mjd - self.start_mjd) * MINUTES_PER_DAY


@dataclass(frozen=True)
class Unscheduled:
    """A target (or the rest of its repeats) left out, and why."""

    name: str
    reason: str
    repeats_wanted: int
    repeats_scheduled: int
    repeats_done_before: int


@dataclass(frozen=True)
class SurveyPlan:
    """The scheduler's result."""

    site: Site
    settings: SurveySettings
    targets: tuple[Target, ...]
    blocks: tuple[Block, ...]
    unscheduled: tuple[Unscheduled, ...]
    done_before: tuple[int, ...]  # repeats credited from the observation log, per target
    calibration_missing: tuple[str, ...] = ()  # session ends left without a calibration, why

    def completed(self) -> np.ndarray:
        """Target integrations scheduled, per target."""
        counts = np.zeros(len(self.targets), dtype=int)
        for b in self.blocks:
            if b.kind == "target":
                counts[b.target] += 1
        return counts


# ------------------------------------------------------------------ document

BLOCK_FIELDS = (
    "kind", "name", "start_utc", "end_utc", "start_local", "end_local", "minutes", "l_deg", "b_deg",
    "ra_deg", "dec_deg", "alt_start_deg", "alt_end_deg", "az_start_deg", "az_end_deg",
    "drive_az_start_deg", "drive_az_end_deg", "sun_sep_min_deg", "moon_sep_min_deg",
    "lsr_corr_min_kms", "lsr_corr_max_kms", "repeat", "reference_for", "tuning_centre_mhz",
)


def _r(value, digits):
    return None if value is None else round(float(value), digits)


def tuning_record(advice: TuningAdvice | None) -> dict | None:
    """The drift plan's ``tuning`` object (frequencies MHz, velocities km/s)."""
    if advice is None:
        return None
    return {
        "centre_mhz": round(advice.centre_mhz, 6), "line_low_mhz": round(advice.line_low_mhz, 6),
        "line_high_mhz": round(advice.line_high_mhz, 6), "fits": bool(advice.fits),
        "margin_mhz": round(advice.margin_mhz, 6), "spike_clear": bool(advice.spike_clear),
        "channel_width_kms": round(advice.channel_width_kms, 4),
        "v_lsr_min_kms": round(advice.v_lsr_min_kms, 2),
        "v_lsr_max_kms": round(advice.v_lsr_max_kms, 2),
        "lsr_corr_min_kms": round(advice.lsr_corr_min_kms, 3),
        "lsr_corr_max_kms": round(advice.lsr_corr_max_kms, 3),
    }


def block_record(b: Block, tz) -> dict:
    """One block as a JSON-ready dict."""
    return {
        "kind": b.kind, "name": b.name,
        "start_utc": iso_utc(b.start_mjd), "end_utc": iso_utc(b.end_mjd),
        "start_local": iso_local(b.start_mjd, tz), "end_local": iso_local(b.end_mjd, tz),
        "minutes": round(b.minutes, 3),
        "l_deg": _r(b.l_deg, 4), "b_deg": _r(b.b_deg, 4),
        "ra_deg": _r(b.ra_deg, 4), "dec_deg": _r(b.dec_deg, 4),
        "alt_start_deg": round(b.alt_start_deg, 2), "alt_end_deg": round(b.alt_end_deg, 2),
        "az_start_deg": round(b.az_start_deg, 2), "az_end_deg": round(b.az_end_deg, 2),
        "drive_az_start_deg": round(b.drive_az_start_deg, 2),
        "drive_az_end_deg": round(b.drive_az_end_deg, 2),
        "sun_sep_min_deg": _r(b.sun_sep_min_deg, 2), "moon_sep_min_deg": _r(b.moon_sep_min_deg, 2),
        "lsr_corr_min_kms": _r(b.lsr_corr_min_kms, 3), "lsr_corr_max_kms": _r(b.lsr_corr_max_kms, 3),
        "repeat": b.repeat, "reference_for": b.reference_for,
        "tuning": tuning_record(b.tuning) if b.kind in ("target", "reference", "calibration") else None,
        **(b.calibration or {}),
    }


def plan_summary(plan: SurveyPlan) -> dict:
    """Totals: targets, integrations wanted/scheduled, minutes on targets, references, slews, stows."""
    wanted = sum(max(t.repeats - d, 0) for t, d in zip(plan.targets, plan.done_before))
    done = plan.completed()
    minutes = {"target": 0.0, "reference": 0.0, "slew": 0.0, "stow": 0.0, "calibration": 0.0}
    for b in plan.blocks:
        minutes[b.kind] += b.minutes
    weight = sum(t.priority * int(n) for t, n in zip(plan.targets, done))
    return {
        "targets": len(plan.targets),
        "integrations_wanted": int(wanted),
        "integrations_scheduled": int(done.sum()),
        "targets_complete": int(sum(1 for t, n, d in zip(plan.targets, done, plan.done_before)
                                    if n + d >= t.repeats)),
        "priority_weighted": round(float(weight), 3),
        "integration_minutes": round(float(minutes["target"]), 2),
        "reference_minutes": round(float(minutes["reference"]), 2),
        "slew_minutes": round(float(minutes["slew"]), 2),
        "stows": sum(1 for b in plan.blocks if b.kind == "stow"),
        "stow_minutes": round(float(minutes["stow"]), 2),
        "calibrations": sum(1 for b in plan.blocks if b.kind == "calibration"),
        "calibration_minutes": round(float(minutes["calibration"]), 2),
        "done_before": int(sum(plan.done_before)),
        "calibration_missing": list(plan.calibration_missing),
    }


def survey_document(plan: SurveyPlan, period: dict) -> dict:
    """The ``hiplan.survey/1`` document (docs/plan-format.md); ``period`` as in other plans."""
    s = plan.settings
    tz = plan.site.tz
    return {
        "schema": SURVEY_SCHEMA,
        "kind": "survey",
        "site": plan.site.summary(),
        "period": period,
        "settings": {
            "night_only": s.night_only,
            "night": s.night if s.night_only else None,
            "night_sun_alt_deg": s.night_sun_alt_deg if s.night_only else None,
            "windows": s.availability.normalised(),  # machine-readable; [] = any time
            "sun_min_sep_deg": s.sun_min_sep_deg,
            "sun_hazard_deg": s.sun_hazard_deg,
            "moon_min_sep_deg": s.moon_min_sep_deg,
            "alarm_minutes": s.alarm_minutes,
            "lsr_definition": s.lsr_definition,
            "rotation_model": s.rotation_name,
            "reference": None if s.reference is None else s.reference.describe(),
            "reference_minutes": s.reference_minutes,
            "step_s": s.step_s,
            "calibrate_minutes": s.calibrate_minutes,
            # The drive (encoder) azimuth range, which may exceed 360 deg: the cable wrap.
            "azimuth_min_deg": plan.site.dish.azimuth_min_deg,
            "azimuth_max_deg": plan.site.dish.azimuth_max_deg,
        },
        "blocks": [block_record(b, tz) for b in plan.blocks],
        "unscheduled": [{"name": u.name, "reason": u.reason} for u in plan.unscheduled],
        "summary": plan_summary(plan),
    }
