"""Turning results into documents (plain dicts) and rendering them.

Documents are JSON-ready dicts with a versioned ``schema`` field; the same
document feeds the JSON writer, the CSV writer and the rich table, so the three
formats always agree. Rendering never computes astronomy.
"""
from __future__ import annotations

import csv
import io
import json
import math
from zoneinfo import ZoneInfo

import numpy as np

from .passages import Passage, PassageSearch, lsr_range_kms
from .pointing import Pointing
from .site import Site
from .timebase import iso_local, iso_utc, mjd_to_datetime_utc

CROSSINGS_SCHEMA = "hiplan.crossings/1"

# Column order of the crossings CSV; the JSON passage objects carry the same keys.
PASSAGE_FIELDS = (
    "start_utc", "end_utc", "peak_utc", "start_local", "end_local", "peak_local",
    "duration_min", "l_start_deg", "l_peak_deg", "l_end_deg", "b_min_abs_deg", "l_bins",
    "bin_seconds", "alt_deg", "az_deg", "sun_sep_min_deg", "sun_ok", "sun_alt_max_deg",
    "night", "moon_sep_min_deg", "moon_ok", "clipped", "lsr_corr_min_kms", "lsr_corr_max_kms",
)


def period_summary(start_mjd: float, end_mjd: float, tz: ZoneInfo) -> dict:
    """The ``period`` object: its ends (UTC and local) and, for people, its first and last
    local day (the end is the midnight after the last day, so both are inclusive)."""
    return {
        "start_utc": iso_utc(start_mjd), "end_utc": iso_utc(end_mjd),
        "start_local": iso_local(start_mjd, tz), "end_local": iso_local(end_mjd, tz),
        "days": round(end_mjd - start_mjd, 4),
        "first_day_local": mjd_to_datetime_utc(start_mjd).astimezone(tz).date().isoformat(),
        "last_day_local": mjd_to_datetime_utc(end_mjd - 1.0 / 86400).astimezone(tz).date().isoformat(),
    }


def period_days_text(period: dict) -> str:
    """'2027-03-01 – 2027-03-31': first and last local day, both inclusive (one convention
    for every output; older documents without the fields fall back to the end instant)."""
    first = period.get("first_day_local") or period["start_local"][:10]
    last = period.get("last_day_local") or period["end_local"][:10]
    return first if first == last else f"{first} – {last}"


def passage_record(p: Passage, tz: ZoneInfo) -> dict:
    """One passage as a JSON-ready dict (angles in degrees, 3 decimals)."""
    rec = {
        "start_utc": iso_utc(p.start_mjd), "end_utc": iso_utc(p.end_mjd),
        "peak_utc": iso_utc(p.peak_mjd),
        "start_local": iso_local(p.start_mjd, tz), "end_local": iso_local(p.end_mjd, tz),
        "peak_local": iso_local(p.peak_mjd, tz),
        "duration_min": round(p.duration_min, 2),
        "l_start_deg": round(p.l_start_deg, 3), "l_peak_deg": round(p.l_peak_deg, 3),
        "l_end_deg": round(p.l_end_deg, 3), "b_min_abs_deg": round(p.b_min_abs_deg, 3),
        "l_bins": list(p.l_bins), "bin_seconds": [round(s, 1) for s in p.bin_seconds],
        "alt_deg": round(p.alt_deg, 3), "az_deg": round(p.az_deg, 3),
        "sun_sep_min_deg": round(p.sun_sep_min_deg, 2), "sun_ok": p.sun_ok,
        "sun_alt_max_deg": round(p.sun_alt_max_deg, 2), "night": p.night,
        "moon_sep_min_deg": round(p.moon_sep_min_deg, 2), "moon_ok": p.moon_ok,
        "clipped": p.clipped,
        "lsr_corr_min_kms": round(p.lsr_corr_min_kms, 3),
        "lsr_corr_max_kms": round(p.lsr_corr_max_kms, 3),
    }
    return rec


def approach_records(approaches, tz: ZoneInfo, hazards_only: bool = False) -> list[dict]:
    """Sun approaches closer than the feed-safety limit as JSON-ready dicts, in time order."""
    sel = approaches.hazard if hazards_only else approaches.within
    out = []
    for i in np.flatnonzero(sel):
        out.append({
            "closest_utc": iso_utc(approaches.closest_mjd[i]),
            "closest_local": iso_local(approaches.closest_mjd[i], tz),
            "sep_deg": round(float(approaches.sep_deg[i]), 3),
            "within_from_utc": iso_utc(approaches.enter_mjd[i]),
            "within_to_utc": iso_utc(approaches.exit_mjd[i]),
            "within_from_local": iso_local(approaches.enter_mjd[i], tz),
            "within_to_local": iso_local(approaches.exit_mjd[i], tz),
            "sun_alt_max_deg": round(float(approaches.sun_alt_max_deg[i]), 2),
            "hazard": bool(approaches.hazard[i]),
        })
    return out


def crossings_document(site: Site, pointing: Pointing, search: PassageSearch,
                       approaches=None, calibrators=None) -> dict:
    """The ``hiplan crossings`` result as a JSON-ready document.

    ``approaches``: ``sunsafety.sun_approaches`` for the pointing over the period;
    those closer than ``sun_hazard_deg`` are listed as ``sun_approaches``.
    ``calibrators``: (``calpasses.CalibratorPasses``, expected peaks in K) for the pointing,
    listed as ``calibrator_passes``.
    """
    tz = site.tz
    rng = lsr_range_kms(search)
    return {
        "schema": CROSSINGS_SCHEMA,
        "site": site.summary(),
        "pointing": pointing.summary(site.dish.beamwidth_deg, search.b_max_deg),
        "period": period_summary(search.start_mjd, search.end_mjd, tz),
        "closest_b_abs_deg": round(search.b_min_abs_deg, 3),
        "lsr_corr_min_kms": None if rng is None else round(rng[0], 3),
        "lsr_corr_max_kms": None if rng is None else round(rng[1], 3),
        "sun_hazard_deg": site.rules.sun_hazard_deg,
        "sun_approaches": [] if approaches is None else approach_records(approaches, tz),
        "calibrator_passes": ([] if calibrators is None else
                              calibrator_pass_records(*calibrators, tz, site.dish.beamwidth_deg)),
        "passages": [passage_record(p, tz) for p in search.passages],
    }


def to_json(document: dict) -> str:
    return json.dumps(document, indent=2, ensure_ascii=False) + "\n"


def to_csv(records: list[dict], fields: tuple[str, ...]) -> str:
    """CSV with a header row; list values are joined with ';'.

    Text cells that start like a spreadsheet formula (a target named ``=cmd``) get a
    leading apostrophe (``outputs.csv_text``); numbers, and lists of numbers, never do.
    """
    from .outputs import csv_text

    def cell(value):
        if isinstance(value, list):
            text = ";".join(str(v) for v in value)
            numeric = all(isinstance(v, (int, float)) and not isinstance(v, bool) for v in value)
            return text if numeric else csv_text(text)
        return csv_text(value) if isinstance(value, str) else value

    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=list(fields), extrasaction="ignore", lineterminator="\n")
    writer.writeheader()
    for rec in records:
        writer.writerow({k: cell(rec.get(k)) for k in fields})
    return buf.getvalue()


def compact_ranges(values_deg, bin_width_deg: float = 1.0) -> str:
    """Bin starts (deg) as compact ranges, e.g. [28, 29, 30, 41] -> '28–30, 41'."""
    from .park import compact_bins
    text = compact_bins([round(v / bin_width_deg) for v in values_deg], bin_width_deg)
    return "—" if text == "none" else text


# ------------------------------------------------------------------ hiplan lsr

LSR_SCHEMA = "hiplan.lsr/1"
LSR_FIELDS = ("time_utc", "time_local", "ra_deg", "dec_deg", "l_deg", "b_deg",
              "lsr_corr_kms", "bary_corr_kms")


def lsr_document(site: Site, what: str, lsr_definition: str, mjd, ra_deg, dec_deg,
                 lsr_kms, bary_kms) -> dict:
    """LSR corrections at sample times as a JSON-ready document."""
    from .galactic import icrs_to_galactic_deg
    l_deg, b_deg = icrs_to_galactic_deg(ra_deg, dec_deg)
    tz = site.tz
    samples = [
        {"time_utc": iso_utc(t), "time_local": iso_local(t, tz), "ra_deg": round(float(r), 4),
         "dec_deg": round(float(d), 4), "l_deg": round(float(gl), 4), "b_deg": round(float(gb), 4),
         "lsr_corr_kms": round(float(v), 4), "bary_corr_kms": round(float(w), 4)}
        for t, r, d, gl, gb, v, w in zip(mjd, ra_deg, dec_deg, l_deg, b_deg, lsr_kms, bary_kms)
    ]
    return {
        "schema": LSR_SCHEMA, "site": site.summary(), "position": what,
        "lsr_definition": lsr_definition,
        "sign_convention": "lsr_corr_kms is added to a topocentric radial velocity to give the "
                           "LSR velocity; positive when the observer moves toward the position",
        "samples": samples,
    }


# ----------------------------------------------------------------- hiplan tune

TUNE_SCHEMA = "hiplan.tune/1"


def _round_floats(obj, digits=4):
    if isinstance(obj, float):
        return round(obj, digits)
    if isinstance(obj, dict):
        return {k: _round_floats(v, digits) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_round_floats(v, digits) for v in obj]
    return obj


def tune_document(site: Site, setup, model, lsr_definition: str, start_mjd: float, end_mjd: float,
                  pointing: Pointing | None = None, b_max_deg: float | None = None, l_bins=None,
                  depth=None, drift_s: float | None = None, target=None, pointed=None,
                  plan_source=None, passage=None) -> dict:
    """Receiver set-up advice as a JSON-ready document (frequencies MHz, velocities km/s).

    ``passage``: (number, count, Passage) when the advice is for one passage only
    (``hiplan tune --passage N``); the document then says which one (``passage``).
    """
    from dataclasses import asdict
    advice = asdict(setup.advice)
    doc = {
        "schema": TUNE_SCHEMA,
        "site": site.summary(),
        "period": period_summary(start_mjd, end_mjd, site.tz),
        "rotation_model": asdict(model),
        "lsr_definition": lsr_definition,
        "hi_rest_mhz": 1420.405751768,
        "envelope": {"v_lsr_min_kms": setup.v_lsr_min_kms, "v_lsr_max_kms": setup.v_lsr_max_kms},
        "lsr_corr_min_kms": setup.lsr_corr_min_kms,
        "lsr_corr_max_kms": setup.lsr_corr_max_kms,
        "tuning": advice,
    }
    if pointing is not None:
        doc["pointing"] = pointing.summary(site.dish.beamwidth_deg, b_max_deg)
        doc["l_bins"] = list(l_bins)
        doc["l_ranges"] = compact_ranges(l_bins)
        doc["sensitivity"] = {
            "equation": "sigma = k Tsys / sqrt(channel_width * time) (Dicke 1946)",
            "drift_time_through_beam_s": drift_s,
            "bins": [{"l_bin": d.l_bin, "seconds_per_day": d.seconds_per_day,
                      "rms_per_day_k": d.rms_per_day_k, "days_to_target": d.days_to_target}
                     for d in depth],
        }
    if passage is not None:
        number, count, p = passage
        doc["passage"] = {"number": number, "of": count,
                          **{k: v for k, v in passage_record(p, site.tz).items()
                             if k in ("start_utc", "end_utc", "start_local", "end_local",
                                      "peak_local", "duration_min", "l_start_deg", "l_end_deg")}}
    if plan_source is not None:
        path, count, bins, bw = plan_source
        doc["plan"] = {"file": path, "recordings": count}
        doc["l_bins"] = [b * bw for b in bins]
        doc["l_ranges"] = compact_ranges([b * bw for b in bins], bw)
    if target is not None:
        ra, dec, l, b = target
        doc["target"] = {"ra_deg": ra, "dec_deg": dec, "l_deg": l, "b_deg": b}
        if pointed is not None:
            doc["sensitivity"] = {"equation": "sigma = k Tsys / sqrt(channel_width * time) (Dicke 1946)",
                                  **pointed}
    return _round_floats(doc)


# ----------------------------------------------------------------- hiplan park

PARK_SCHEMA = "hiplan.park/1"
PARK_FIELDS = ("rank", "dec_deg", "elevation_deg", "az_deg", "facing", "culmination", "sun_safe",
               "sun_closest_deg", "sun_closest_utc", "sun_hazard_dates", "l_ranges", "passages_per_day",
               "passage_times_local", "duration_min", "sun_lost_fraction", "daylight_lost_fraction",
               "window_lost_fraction", "usable_hours", "lsr_corr_min_kms", "lsr_corr_max_kms",
               "rms_per_bin_day_k", "needed_bins_served", "score", "reason", "calibrators")


def park_document(sweep, advice, want_text: str, target_minutes: float, log_source: str | None,
                  windows_text: list[str], night: str | None = None, calibrators=None) -> dict:
    """Ranked declination advice as a JSON-ready document.

    ``recommended`` lists the ranks worth recommending (Sun-safe and serving a
    still-needed bin); empty when nothing wanted can be served safely. ``calibrators``
    (``calpasses.CalibratorPasses`` over the sweep's pointings, expected peaks in K): each
    setting lists the IAU standard HI regions its beam passes over (``calibrator_passes``).
    """
    from .park import _facing, compact_bins, recommended
    site = sweep.site
    tz = site.tz
    rows = []
    for rank, a in enumerate(advice, start=1):
        p, c = a.pointing, a.coverage
        times = ", ".join(a.times_first_day)
        if a.times_last_day and a.times_last_day != a.times_first_day:
            times += " → " + ", ".join(a.times_last_day)
        rows.append({
            "rank": rank, "dec_deg": round(p.dec_deg, 3), "elevation_deg": round(p.alt_deg, 3),
            "az_deg": round(p.az_deg, 1), "facing": _facing(p), "culmination": p.culmination,
            "sun_safe": a.sun_safe,
            "sun_closest_deg": None if not math.isfinite(a.sun_closest_deg) else round(a.sun_closest_deg, 2),
            "sun_closest_utc": None if not math.isfinite(a.sun_closest_mjd) else iso_utc(a.sun_closest_mjd),
            "sun_closest_local": (None if not math.isfinite(a.sun_closest_mjd)
                                  else iso_local(a.sun_closest_mjd, tz)),
            "sun_hazard_dates": list(a.hazard_dates),
            "l_ranges": compact_bins(a.usable_bins, sweep.bin_width_deg),
            "l_bins": [_tidy(b * sweep.bin_width_deg) for b in a.usable_bins],
            "passages_per_day": round(a.passages_per_day, 3), "passage_times_local": times,
            "duration_min": round(a.duration_min, 1),
            "sun_lost_fraction": round(c.sun_lost_fraction, 4),
            "daylight_lost_fraction": round(c.daylight_lost_fraction, 4),
            "window_lost_fraction": round(c.window_lost_fraction, 4),
            "usable_hours": round(a.usable_hours, 3),
            "lsr_corr_min_kms": None if c.lsr_corr_min_kms is None else round(c.lsr_corr_min_kms, 3),
            "lsr_corr_max_kms": None if c.lsr_corr_max_kms is None else round(c.lsr_corr_max_kms, 3),
            "rms_per_bin_day_k": None if a.rms_per_bin_day_k is None else round(a.rms_per_bin_day_k, 4),
            "needed_bins_served": a.needed_bins_served, "score": round(a.score, 3), "reason": a.reason,
        })
    if calibrators is not None:
        seen = park_calibrators(sweep, *calibrators)
        for row, a in zip(rows, advice):
            row["calibrator_passes"] = seen.get(_setting_key(a.pointing), [])
            row["calibrators"] = ";".join(c["region"] for c in row["calibrator_passes"])
    ranks = {id(a): rank for rank, a in enumerate(advice, start=1)}
    return {
        "schema": PARK_SCHEMA, "site": site.summary(),
        "period": period_summary(sweep.start_mjd, sweep.end_mjd, site.tz),
        "settings": {"b_max_deg": sweep.b_max_deg, "bin_width_deg": sweep.bin_width_deg,
                     "want": want_text or "0-360", "target_minutes": target_minutes,
                     "log": log_source, "night_only": sweep.night_only,
                     "night": night if sweep.night_only else None,
                     "night_sun_alt_deg": sweep.night_sun_alt_deg if sweep.night_only else None,
                     "windows": windows_text, "beamwidth_deg": round(site.dish.beamwidth_deg, 3),
                     "sun_hazard_deg": site.rules.sun_hazard_deg},
        "recommended": [ranks[id(a)] for a in recommended(advice)],
        "declinations": rows,
    }


def _tidy(value: float):
    return int(value) if float(value).is_integer() else float(value)


def _setting_key(pointing) -> tuple[float, float]:
    return (round(pointing.dec_deg, 6), round(pointing.ha_deg, 6))


def park_calibrators(sweep, passes, peaks_k) -> dict:
    """Per setting (``_setting_key``): one summary per standard region its beam passes over
    in the period: how many passes, the closest, the first local time, the expected peak."""
    tz = sweep.site.tz
    out: dict = {}
    for r, row in enumerate(sweep.rows):  # the settings that see a region are few
        idx = passes.for_row(r)
        if idx.size == 0:
            continue
        items = []
        for k in sorted(set(int(x) for x in passes.region[idx])):
            mine = idx[passes.region[idx] == k]
            first = mine[np.argmin(passes.closest_mjd[mine])]
            items.append({"region": passes.regions[k].name, "passes": int(mine.size),
                          "sep_deg": round(float(passes.sep_deg[mine].min()), 2),
                          "first_local": iso_local(passes.closest_mjd[first], tz),
                          "published_peak_k": passes.regions[k].peak_tb_k,
                          "expected_peak_k": round(float(peaks_k[first]), 1)})
        out[_setting_key(row.pointing)] = items
    return out


# ---------------------------------------------------------------- hiplan month


# ----------------------------------------------------------------- hiplan spectrum

SPECTRUM_SCHEMA = "hiplan.spectrum/1"
SPECTRUM_FIELDS = ("velocity_kms", "tb_k", "frequency_mhz")


def spectrum_document(site: Site, spectrum, rotation_name: str, lsr_definition: str,
                      mjd_utc: float | None = None, view=None, snr: float = 10.0,
                      labels=None) -> dict:
    """An expected HI spectrum (``hidisc.Spectrum``) as a JSON-ready document.

    One position: ``velocity_kms``, ``tb_k`` and the summary at the top level; with ``view``
    (``expected.ReceiverView``, needs ``mjd_utc``) also ``frequency_mhz`` and ``receiver``.
    Several positions (a plan's bins or targets): ``positions``, each with its ``tb_k``.
    """
    from dataclasses import asdict
    from .calibration import dilution_caveat
    from .expected import CAUTION, lsr_velocity_of_sky_kms, minutes_for_snr, spectrum_summaries
    from .galactic import galactic_to_icrs_deg
    from .hidisc import EMISSION_LEVEL_K, DiscModel
    tz = site.tz
    ra, dec = galactic_to_icrs_deg(spectrum.l_deg, spectrum.b_deg)
    minutes = minutes_for_snr(spectrum.peak_tb_k, site.receiver.tsys_k,
                              site.receiver.channel_width_khz, snr)
    model = {k: v for k, v in asdict(DiscModel()).items() if k != "rotation"}
    doc = {
        "schema": SPECTRUM_SCHEMA, "site": site.summary(),
        "beamwidth_deg": round(float(spectrum.beamwidth_deg), 3),
        "rotation_model": rotation_name, "disc_model": model, "lsr_definition": lsr_definition,
        "emission_level_k": EMISSION_LEVEL_K, "snr": snr,
        "cautions": [c for c in (CAUTION, dilution_caveat(float(spectrum.beamwidth_deg))) if c],
        "velocity_kms": [round(float(v), 3) for v in spectrum.velocity_kms],
    }
    rows = []
    summaries = spectrum_summaries(spectrum)
    for i in range(spectrum.l_deg.size):
        row = {"l_deg": round(float(spectrum.l_deg[i]), 4), "b_deg": round(float(spectrum.b_deg[i]), 4),
               "ra_deg": round(float(np.atleast_1d(ra)[i]), 4),
               "dec_deg": round(float(np.atleast_1d(dec)[i]), 4),
               **summaries[i],
               "minutes_for_snr": None if not np.isfinite(minutes[i]) else round(float(minutes[i]), 4)}
        if labels is not None:
            row = {"label": labels[i], **row}
        rows.append((row, [round(float(t), 3) for t in spectrum.tb_k[i]]))
    if len(rows) == 1 and labels is None:
        row, tb = rows[0]
        doc["position"] = {k: row[k] for k in ("l_deg", "b_deg", "ra_deg", "dec_deg")}
        doc.update({k: row[k] for k in row if k not in doc["position"]})
        doc["tb_k"] = tb
    else:
        doc["positions"] = [{**row, "tb_k": tb} for row, tb in rows]
    if mjd_utc is not None:
        doc["time_utc"] = iso_utc(mjd_utc)
        doc["time_local"] = iso_local(mjd_utc, tz)
    if view is not None:
        a = view.advice
        def kms(f_mhz):
            return round(float(lsr_velocity_of_sky_kms(f_mhz, view.factor)), 2)

        doc["frequency_mhz"] = [round(float(f), 6) for f in view.frequency_mhz]
        doc["lsr_corr_kms"] = round(view.lsr_corr_kms, 4)
        doc["receiver"] = {
            "centre_mhz": round(a.centre_mhz, 6), "bandwidth_mhz": a.bandwidth_mhz,
            "band_low_mhz": round(view.band_low_mhz, 6), "band_high_mhz": round(view.band_high_mhz, 6),
            "usable_low_mhz": round(view.usable_low_mhz, 6),
            "usable_high_mhz": round(view.usable_high_mhz, 6),
            "band_low_kms": kms(view.band_low_mhz), "band_high_kms": kms(view.band_high_mhz),
            "usable_low_kms": kms(view.usable_low_mhz), "usable_high_kms": kms(view.usable_high_mhz),
            "channel_width_khz": round(a.channel_width_khz, 4),
            "emission_fits": view.emission_fits,
            "spike_v_lsr_kms": round(view.spike_v_lsr_kms, 2), "spike_tb_k": round(view.spike_tb_k, 2),
            "spike_on_emission": view.spike_tb_k > EMISSION_LEVEL_K,
            "line_free_kms": [[round(x, 1), round(y, 1)] for x, y in view.line_free_kms],
            "line_free_mhz": [[round(x, 4), round(y, 4)] for x, y in view.line_free_mhz],
        }
    return doc


def calibrator_pass_records(passes, peaks_k, tz: ZoneInfo, beamwidth_deg: float) -> list[dict]:
    """Passes of the IAU standard HI regions (``calpasses``) as JSON-ready dicts, in time order."""
    out = []
    for i in range(passes.row.size):
        reg = passes.regions[int(passes.region[i])]
        out.append({
            "region": reg.name, "region_l_deg": reg.l_deg, "region_b_deg": reg.b_deg,
            "closest_utc": iso_utc(passes.closest_mjd[i]),
            "closest_local": iso_local(passes.closest_mjd[i], tz),
            "sep_deg": round(float(passes.sep_deg[i]), 3),
            "half_beamwidth_deg": round(beamwidth_deg / 2.0, 3),
            "published_peak_k": reg.peak_tb_k,
            "expected_peak_k": round(float(peaks_k[i]), 1),
        })
    return out
