"""What a plan should show: calibration passes as tasks, and the expected spectra.

Adds to a drift plan document (docs/plan-format.md):

* ``days[].calibrations``: every pass of an IAU standard HI region (``calpasses``) through
  the beam of the day's setting, after the day's move, with the Sun at least the data rule
  away, and (when the plan records only inside the windows) inside a window: the recording
  window (the region within half a beamwidth), the expected peak in this beam
  (``calibration.expected_peaks_k``) and the operator's ``action``. ``task`` marks the passes
  worth an operator's visit: the first after every move (or at the start of the plan) and
  then one a week (our choice: a check after each change of setting and a weekly check of the
  receiver's gain are common practice); the calendar and the brief show the tasks;
* ``expected``: the model spectrum (``hidisc``, via ``expected.group_spectra``) at up to four
  recorded longitudes of each setting, and for each wanted bin the expected peak, the
  emission range, the signal-to-noise ratio on the peak before and after the plan and the
  days at the plan's rate to reach ``snr`` (``expected.bin_expectations``).

For a survey plan (``survey_expectations``): ``expected`` with one group per target.
Pure: takes and returns JSON-ready dicts.
"""
from __future__ import annotations

import math
from datetime import date

import numpy as np

from .avoidance import separation_deg, sun_direction
from .calpasses import calibrator_passes, expected_pass_peaks_k
from .earth import earth_nodes
from .expected import CAUTION, DEFAULT_SNR, PLAN_VELOCITY_KMS, bin_expectations, group_spectra
from .hidisc import DiscModel
from .site import Site
from .skytrack import FixedBeams
from .timebase import iso_local, iso_utc, mjd_to_datetime_utc

TASK_EVERY_DAYS = 7


def _half_span_days(beam_dec_deg: float, region_dec_deg: float, radius_deg: float) -> float:
    """Half the time (days) a region spends within ``radius_deg`` of a parked beam's centre:
    cos r = sin d1 sin d2 + cos d1 cos d2 cos H at the edge, H at the sidereal rate."""
    d1, d2, r = (math.radians(x) for x in (beam_dec_deg, region_dec_deg, radius_deg))
    cos_h = (math.cos(r) - math.sin(d1) * math.sin(d2)) / max(math.cos(d1) * math.cos(d2), 1e-12)
    if cos_h >= 1.0:
        return 0.0
    return math.acos(max(cos_h, -1.0)) / (2.0 * math.pi) * (86164.0905 / 86400.0)


def _fmt_hhmm(mjd: float, tz) -> str:
    return mjd_to_datetime_utc(mjd).astimezone(tz).strftime("%H:%M")


def add_drift_calibrations(doc: dict, plan, site: Site, window_intervals=None) -> None:
    """Fill ``days[].calibrations`` of a drift plan document from its ``MonthPlan``."""
    sweep = plan.sweep
    tz = site.tz
    first_day = date.fromisoformat(doc["days"][0]["date"]) if doc["days"] else None
    for day in doc["days"]:
        day["calibrations"] = []
    if not plan.parkings or first_day is None:
        return
    rows = sorted({p.row for p in plan.parkings})
    pointings = [sweep.rows[r].pointing for r in rows]
    nodes = earth_nodes(sweep.start_mjd - 1.0, sweep.end_mjd + 1.0)
    passes = calibrator_passes(site, pointings, sweep.start_mjd, sweep.end_mjd, nodes=nodes)
    if passes.row.size == 0:
        return
    peaks = expected_pass_peaks_k(site, pointings, passes, nodes)
    beams = FixedBeams(site, pointings, nodes)
    state, vec = beams.locate(passes.closest_mjd, passes.row)
    sun_sep = separation_deg(vec, sun_direction(state))
    row_of = {r: k for k, r in enumerate(rows)}
    last_task: dict[int, float] = {}
    for parking in plan.parkings:
        k = row_of[parking.row]
        mine = np.flatnonzero((passes.row == k) & (passes.closest_mjd >= parking.start_mjd)
                              & (passes.closest_mjd < parking.end_mjd))
        for i in mine:  # one per pass: a few a day at most
            t = float(passes.closest_mjd[i])
            if sun_sep[i] < site.rules.sun_min_sep_deg:
                continue
            if window_intervals is not None and len(window_intervals) and not np.any(
                    (np.asarray(window_intervals)[:, 0] <= t) & (t < np.asarray(window_intervals)[:, 1])):
                continue
            reg = passes.regions[int(passes.region[i])]
            half = _half_span_days(pointings[k].dec_deg, reg.icrs_deg[1], site.dish.beamwidth_deg / 2.0)
            # The region's own offset shortens its time inside the half-power circle.
            radius = site.dish.beamwidth_deg / 2.0
            inside = math.sqrt(max(radius**2 - float(passes.sep_deg[i]) ** 2, 0.0)) / radius
            start, end = t - half * inside, t + half * inside
            key = id(parking)
            task = key not in last_task or t - last_task[key] >= TASK_EVERY_DAYS - 0.5
            if task:
                last_task[key] = t
            record = {
                "region": reg.name, "closest_utc": iso_utc(t), "closest_local": iso_local(t, tz),
                "start_utc": iso_utc(start), "end_utc": iso_utc(end),
                "start_local": iso_local(start, tz), "end_local": iso_local(end, tz),
                "sep_deg": round(float(passes.sep_deg[i]), 3),
                "sun_sep_deg": round(float(sun_sep[i]), 1),
                "published_peak_k": reg.peak_tb_k, "expected_peak_k": round(float(peaks[i]), 1),
                "task": bool(task),
                "action": (f"Record the {reg.name} pass at {_fmt_hhmm(t, tz)} (the region is in the "
                           f"beam {_fmt_hhmm(start, tz)}–{_fmt_hhmm(end, tz)}); it should peak near "
                           f"{float(peaks[i]):.0f} K. Use it to set the counts-to-kelvin scale."),
            }
            local_day = (mjd_to_datetime_utc(t).astimezone(tz).date() - first_day).days
            if 0 <= local_day < len(doc["days"]):
                doc["days"][local_day]["calibrations"].append(record)
    for day in doc["days"]:
        day["calibrations"].sort(key=lambda c: c["closest_utc"])


def _dish_label(dish: dict) -> str:
    side = " below the pole" if dish.get("culmination") == "lower" else ""
    return (f"Dec {dish['dec_deg']:+.1f}° (elevation {dish['alt_deg']:.1f}° "
            f"{dish.get('facing') or ''}{side})").replace(" )", ")")


def add_drift_expectations(doc: dict, site: Site, model: DiscModel, snr: float = DEFAULT_SNR,
                           with_bins: bool = True) -> None:
    """Fill ``expected`` of a drift plan document (see the module docstring); ``with_bins``
    False leaves the per-bin figures out (they need the receiver)."""
    settings = doc.get("settings") or {}
    width = float(settings.get("bin_width_deg", 1.0))
    groups: dict[tuple, dict] = {}
    for day in doc["days"]:
        for rec in day.get("recordings") or ():
            dish = rec.get("dish") or day.get("park") or {}
            key = (round(float(dish.get("dec_deg", 0.0)), 4), dish.get("culmination"))
            g = groups.setdefault(key, {"label": _dish_label(dish), "dec_deg": dish.get("dec_deg"),
                                        "culmination": dish.get("culmination"),
                                        "first_date": day["date"], "last_date": day["date"],
                                        "positions": []})
            g["last_date"] = day["date"]
            g["positions"] += [(float(b) + width / 2.0, 0.0) for b in rec.get("l_bins") or ()]
    summary = doc.get("summary") or {}
    before = summary.get("depth_before_min") or {}
    after = summary.get("depth_after_min") or {}
    keys = sorted(after, key=float)
    days = float((doc.get("period") or {}).get("days") or len(doc["days"]) or 1.0)
    bins = (bin_expectations([float(k) for k in keys], width, site.dish.beamwidth_deg, model,
                             site.receiver.tsys_k, site.receiver.channel_width_khz,
                             [float(before.get(k, 0.0)) for k in keys],
                             [float(after[k]) for k in keys], days, snr) if with_bins else [])
    doc["expected"] = {
        "model": "hidisc", "beamwidth_deg": round(site.dish.beamwidth_deg, 3), "b_deg": 0.0,
        "snr": snr, "caution": CAUTION,
        "velocity_kms": [float(v) for v in PLAN_VELOCITY_KMS],
        "groups": group_spectra(list(groups.values()), site.dish.beamwidth_deg, model),
        "bins": bins,
    }


def survey_expectations(doc: dict, site: Site, model: DiscModel, snr: float = DEFAULT_SNR,
                        most_groups: int = 6) -> dict:
    """The ``expected`` object of a survey plan: targets in at most ``most_groups`` groups of
    consecutive targets (at least four a group), each plotted with up to four curves."""
    targets: dict[str, tuple[float, float]] = {}
    for block in doc.get("blocks") or ():
        if block.get("kind") == "target" and block.get("l_deg") is not None:
            targets.setdefault(str(block["name"]), (float(block["l_deg"]), float(block["b_deg"])))
    names = list(targets)
    per_group = max(4, -(-len(names) // most_groups))
    groups = []
    for i in range(0, len(names), per_group):
        chunk = names[i:i + per_group]
        groups.append({"label": ", ".join(chunk), "targets": chunk,
                       "positions": [targets[n] for n in chunk]})
    return {"model": "hidisc", "beamwidth_deg": round(site.dish.beamwidth_deg, 3), "snr": snr,
            "caution": CAUTION, "velocity_kms": [float(v) for v in PLAN_VELOCITY_KMS],
            "groups": group_spectra(groups, site.dish.beamwidth_deg, model), "bins": []}


class _PlanSite:
    """The little of a ``Site`` the expectations need, read from a plan's ``site`` object."""

    def __init__(self, summary: dict):
        from types import SimpleNamespace
        self.dish = SimpleNamespace(beamwidth_deg=float(summary["beamwidth_deg"]))


def expected_from_document(doc: dict, model: DiscModel) -> dict:
    """``expected`` for a plan document that lacks it, from its ``site`` object alone (the
    spectra; no signal-to-noise figures, which need the receiver)."""
    site = _PlanSite(doc["site"])
    if doc.get("kind") == "survey":
        return survey_expectations(doc, site, model)
    copy = {**doc, "days": doc.get("days") or []}
    add_drift_expectations(copy, site, model, with_bins=False)
    return copy["expected"]
