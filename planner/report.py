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
from rich import box
from rich.console import Group
from rich.table import Table
from rich.text import Text

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
                       approaches=None) -> dict:
    """The ``hiplan crossings`` result as a JSON-ready document.

    ``approaches``: ``sunsafety.sun_approaches`` for the pointing over the period;
    those closer than ``sun_hazard_deg`` are listed as ``sun_approaches``.
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


def _clock(mjd: float, tz: ZoneInfo) -> str:
    return mjd_to_datetime_utc(mjd).astimezone(tz).strftime("%H:%M")


def sun_approach_text(site: Site, approaches) -> Text:
    """One line (or a few) on the Sun's approaches to a parked beam: the feed-safety check."""
    limit = site.rules.sun_hazard_deg
    if approaches is None:
        return Text("")
    recs = approach_records(approaches, site.tz)
    hazards = [r for r in recs if r["hazard"]]
    if not hazards:
        extra = (f" (it passes within {limit:g}° {len(recs)} times, always below the horizon)"
                 if recs else "")
        return Text(f"Feed safety: the Sun never comes within {limit:g}° of the beam in this "
                    f"period{extra}.", style="green")
    closest = min(hazards, key=lambda r: r["sep_deg"])
    days = ", ".join(f"{r['closest_local'][5:10]} {r['closest_local'][11:16]} ({r['sep_deg']:.1f}°)"
                     for r in hazards[:6])
    more = f" and {len(hazards) - 6} more" if len(hazards) > 6 else ""
    return Text(f"SUN HAZARD: the Sun passes within {limit:g}° of the beam on {len(hazards)} "
                f"day{'s' if len(hazards) != 1 else ''} (closest {closest['sep_deg']:.1f}°): {days}{more} "
                "local. Do not leave the dish parked here then: cover the feed or move it first.",
                style="bold red")


def crossings_renderable(site: Site, pointing: Pointing, search: PassageSearch, approaches=None):
    """A rich renderable: header lines and a table of passages in local time."""
    tz = site.tz
    dish = site.dish
    first = mjd_to_datetime_utc(search.start_mjd).astimezone(tz)
    last = mjd_to_datetime_utc(search.end_mjd).astimezone(tz)
    head = Text()
    head.append(f"{site.name}", style="bold")
    head.append(f"  ({site.latitude_deg:+.3f}°, {site.longitude_deg:+.3f}°, {site.timezone})\n")
    head.append(f"Pointing: elevation {pointing.alt_deg:.2f}° azimuth {pointing.az_deg:.1f}°"
                f" = HA {pointing.ha_deg:+.2f}°, Dec {pointing.dec_deg:+.2f}° (of date)\n")
    head.append(f"Beam {dish.beamwidth_deg:.2f}° HPBW, strip |b| ≤ {search.b_max_deg:g}°, "
                f"Sun limit {site.rules.sun_min_sep_deg:g}°\n")
    head.append(f"Period {first:%Y-%m-%d %H:%M} – {last:%Y-%m-%d %H:%M} local "
                f"({search.end_mjd - search.start_mjd:.1f} days)")
    feed = sun_approach_text(site, approaches)
    if not search.passages:
        note = Text(f"\nNo passage: the beam never comes within {search.b_max_deg:g}° of the "
                    f"galactic plane (closest |b| = {search.b_min_abs_deg:.2f}°).", style="yellow")
        return Group(head, note, feed)

    table = Table(box=box.SIMPLE_HEAD, header_style="bold", pad_edge=False)
    for name, justify in [("Date", "left"), ("Start", "right"), ("Peak", "right"),
                          ("End", "right"), ("Min", "right"), ("l start→end °", "right"),
                          ("|b|min", "right"), ("Sun°", "right"), ("Sky", "left"),
                          ("LSR km/s", "right"), ("Note", "left")]:
        table.add_column(name, justify=justify, no_wrap=True)
    blocked = 0
    for p in search.passages:
        start_local = mjd_to_datetime_utc(p.start_mjd).astimezone(tz)
        sun = f"{p.sun_sep_min_deg:.0f}"
        if not p.sun_ok:
            blocked += 1
        notes = []
        if not p.sun_ok:
            notes.append("Sun too close")
        if not p.moon_ok:
            notes.append("Moon close")
        if p.clipped:
            notes.append("clipped")
        lsr = f"{p.lsr_corr_min_kms:+.2f}…{p.lsr_corr_max_kms:+.2f}"
        table.add_row(
            start_local.strftime("%a %d %b"), _clock(p.start_mjd, tz), _clock(p.peak_mjd, tz),
            _clock(p.end_mjd, tz), f"{p.duration_min:.0f}",
            f"{p.l_start_deg:5.1f} → {p.l_end_deg:5.1f}",
            f"{p.b_min_abs_deg:.2f}", Text(sun, style="" if p.sun_ok else "bold red"),
            "night" if p.night else "day", lsr, ", ".join(notes),
            style="dim" if not p.sun_ok else "",
        )
    all_bins = {b for p in search.passages if p.sun_ok for b in p.l_bins}
    lo, hi = lsr_range_kms(search)
    foot = Text(f"{len(search.passages)} passages, {blocked} too close to the Sun. "
                f"Usable longitude bins: {compact_ranges(all_bins)}\n"
                f"LSR correction over the period: {lo:+.2f} to {hi:+.2f} km/s "
                "(add to topocentric velocity to get LSR velocity)")
    return Group(head, table, foot, feed)


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


def lsr_renderable(doc: dict):
    head = Text()
    head.append(doc["site"]["name"], style="bold")
    head.append(f"\n{doc['position']}; LSR definition: {doc['lsr_definition']}\n")
    head.append(doc["sign_convention"], style="dim")
    table = Table(box=box.SIMPLE_HEAD, header_style="bold", pad_edge=False)
    for name in ("Local time", "UTC", "RA °", "Dec °", "l °", "b °", "LSR corr km/s", "Bary corr km/s"):
        table.add_column(name, justify="right", no_wrap=True)
    for s in doc["samples"]:
        table.add_row(s["time_local"][:16].replace("T", " "), s["time_utc"][11:16],
                      f"{s['ra_deg']:.2f}", f"{s['dec_deg']:+.2f}", f"{s['l_deg']:.2f}",
                      f"{s['b_deg']:+.2f}", f"{s['lsr_corr_kms']:+.3f}", f"{s['bary_corr_kms']:+.3f}")
    return Group(head, table)


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


def tune_renderable(doc: dict):
    t = doc["tuning"]
    head = Text()
    head.append(doc["site"]["name"], style="bold")
    if "pointing" in doc:
        p = doc["pointing"]
        head.append(f"\nParked beam: elevation {p['alt_deg']:.2f}°, azimuth {p['az_deg']:.1f}°, "
                    f"Dec {p['dec_deg']:+.2f}°; longitudes {doc['l_ranges']}")
        if "passage" in doc:
            from datetime import datetime

            from .planfile import shown_span  # planfile imports this module
            g = doc["passage"]
            start, end = shown_span(*(datetime.fromisoformat(g[k]) for k in ("start_local", "end_local")))
            ends = f"{end:%H:%M}" if end.date() == start.date() else f"{end:%a} {end.day} {end:%b %H:%M}"
            offset = start.strftime("%z")
            head.append(f"\nPassage {g['number']} of {g['of']} only: {start:%a} {start.day} "
                        f"{start:%b %Y %H:%M}–{ends} local (UTC{offset[:3]}:{offset[3:]}), "
                        f"l {g['l_start_deg']:.1f}° → {g['l_end_deg']:.1f}°")
    elif "plan" in doc:
        head.append(f"\nPlan {doc['plan']['file']}: {doc['plan']['recordings']} recordings, "
                    f"longitudes {doc['l_ranges']}")
    else:
        g = doc["target"]
        head.append(f"\nPosition: l {g['l_deg']:.2f}°, b {g['b_deg']:+.2f}° "
                    f"(RA {g['ra_deg']:.3f}°, Dec {g['dec_deg']:+.3f}°)")
    head.append(f"\nPeriod {period_days_text(doc['period'])}, "
                f"LSR definition {doc['lsr_definition']}, rotation model r0 "
                f"{doc['rotation_model']['r0_kpc']} kpc, Θ0 {doc['rotation_model']['theta0_kms']} km/s")
    table = Table(box=box.SIMPLE_HEAD, show_header=False, pad_edge=False)
    table.add_column("what", style="bold")
    table.add_column("value")
    env = doc["envelope"]
    rows = [
        ("Receiver centre", f"{t['centre_mhz']:.6f} MHz"),
        ("HI velocities (LSR)", f"{env['v_lsr_min_kms']:+.1f} to {env['v_lsr_max_kms']:+.1f} km/s"),
        ("LSR correction", f"{doc['lsr_corr_min_kms']:+.2f} to {doc['lsr_corr_max_kms']:+.2f} km/s"),
        ("Line on the sky", f"{t['line_low_mhz']:.4f} – {t['line_high_mhz']:.4f} MHz "
                            f"({t['line_span_mhz'] * 1e3:.0f} kHz)"),
        ("Usable band", f"{t['usable_bandwidth_mhz']:.3f} of {t['bandwidth_mhz']:.3f} MHz"),
        ("Fits", ("yes" if t["fits"] else "NO") + f", margin {t['margin_mhz'] * 1e3:+.0f} kHz"),
        ("Centre spike", "clear of the line" if t["spike_clear"] else
         f"inside the line at {t['spike_v_lsr_min_kms']:+.1f}…{t['spike_v_lsr_max_kms']:+.1f} km/s"),
        ("Channel", f"{t['channel_width_khz']:.3f} kHz = {t['channel_width_kms']:.3f} km/s"),
    ]
    sens = doc.get("sensitivity")
    if sens and "bins" in sens and sens["bins"]:
        rms = sorted(b["rms_per_day_k"] for b in sens["bins"])
        rows.append(("Drift through beam", f"{sens['drift_time_through_beam_s'] / 60:.1f} min"))
        rows.append(("Noise per bin per day", f"{rms[0]:.3f} – {rms[-1]:.3f} K "
                                               f"(median {rms[len(rms) // 2]:.3f} K)"))
        need = [b["days_to_target"] for b in sens["bins"] if b["days_to_target"] is not None]
        if need:
            rows.append(("Days to target rms", f"{min(need):.0f} – {max(need):.0f} days"))
    elif sens and "rms_k" in sens:
        rows.append(("Noise per pointing", f"{sens['rms_k']:.3f} K in {sens['minutes']:g} min"))
        if sens.get("repeats_to_target"):
            rows.append(("Repeats to target rms", f"{sens['repeats_to_target']}"))
    for k, v in rows:
        table.add_row(k, v)
    notes = Text("\n".join(t["notes"]), style="dim")
    return Group(head, table, notes)


# ----------------------------------------------------------------- hiplan park

PARK_SCHEMA = "hiplan.park/1"
PARK_FIELDS = ("rank", "dec_deg", "elevation_deg", "az_deg", "facing", "culmination", "sun_safe",
               "sun_closest_deg", "sun_closest_utc", "sun_hazard_dates", "l_ranges", "passages_per_day",
               "passage_times_local", "duration_min", "sun_lost_fraction", "daylight_lost_fraction",
               "window_lost_fraction", "usable_hours", "lsr_corr_min_kms", "lsr_corr_max_kms",
               "rms_per_bin_day_k", "needed_bins_served", "score", "reason")


def park_document(sweep, advice, want_text: str, target_minutes: float, log_source: str | None,
                  windows_text: list[str], night: str | None = None) -> dict:
    """Ranked declination advice as a JSON-ready document.

    ``recommended`` lists the ranks worth recommending (Sun-safe and serving a
    still-needed bin); empty when nothing wanted can be served safely.
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


def _log_text(log) -> str:
    """The log file(s) a result used: one name, or several joined."""
    return ", ".join(log) if isinstance(log, list) else str(log)


PARK_LEGEND = (
    "Elev°: elevation on the meridian and the side the dish faces (N/S/Z = zenith); \"low\" = "
    "below the pole, where the declination passes 12 h after its highest point. Feed: ok, or HAZARD when the Sun passes within the site's sun_hazard_deg of "
    "the beam this period (dates below: never park there then). /day: passages a day. Min: mean passage "
    "minutes. Sun lost: passages too near the Sun to record (data-quality rule). Use h: usable "
    "hours in wanted and other bins over the period. K/bin/day: noise per channel per 1° bin "
    "from one day (median). Score: wanted bins this setting alone brings to the target depth "
    "(partial bins count their fraction)."
)


def park_renderable(doc: dict, top: int):
    from .windows import describe_window_texts
    s, st = doc["site"], doc["settings"]
    head = Text()
    head.append(s["name"], style="bold")
    head.append(f"  ({s['latitude_deg']:+.2f}°, {s['longitude_deg']:+.2f}°)  "
                f"{period_days_text(doc['period'])}\n")
    night = st.get("night") or "horizon"
    head.append(f"Beam {st['beamwidth_deg']:.2f}°, strip |b| ≤ {st['b_max_deg']:g}°, wanted l {st['want']}, "
                f"target {st['target_minutes']:g} min per bin"
                + (f", night only ({night})" if st["night_only"] else "")
                + (f", windows: {'; '.join(describe_window_texts(st['windows']))}"
                   if st["windows"] else "")
                + (f", log {_log_text(st['log'])}" if st["log"] else "")
                + f", feed safety: Sun ≥ {st.get('sun_hazard_deg', s.get('sun_hazard_deg', 10)):g}° "
                  "from the beam")
    table = Table(box=box.SIMPLE_HEAD, header_style="bold", pad_edge=False)
    for name, just in [("#", "right"), ("Dec°", "right"), ("Elev°", "right"), ("Feed", "left"), ("Usable l°", "left"), ("/day", "right"),
                       ("Starts (local)", "left"), ("Min", "right"), ("Sun lost", "right"),
                       ("Use h", "right"), ("LSR km/s", "right"), ("K/bin/day", "right"), ("Score", "right")]:
        table.add_column(name, justify=just, overflow="fold")
    from .park import date_ranges
    for r in doc["declinations"][:top]:
        lsr = ("" if r["lsr_corr_min_kms"] is None
               else f"{r['lsr_corr_min_kms']:+.0f}…{r['lsr_corr_max_kms']:+.0f}")
        feed = Text("ok") if r["sun_safe"] else Text("HAZARD", style="bold red")
        table.add_row(str(r["rank"]), f"{r['dec_deg']:+.1f}", f"{r['elevation_deg']:.1f}{r['facing'][0].upper()}"
                      + ("" if r["culmination"] == "upper" else " low"), feed,
                      r["l_ranges"], f"{r['passages_per_day']:.1f}", r["passage_times_local"],
                      f"{r['duration_min']:.0f}", f"{r['sun_lost_fraction']:.0%}", f"{r['usable_hours']:.1f}",
                      lsr, "" if r["rms_per_bin_day_k"] is None else f"{r['rms_per_bin_day_k']:.3f}",
                      f"{r['score']:.1f}", style="" if r["sun_safe"] else "dim")
    legend = Text(PARK_LEGEND + "\n", style="dim")
    reasons = Text()
    reasons.append("Recommendation\n", style="bold")
    by_rank = {r["rank"]: r for r in doc["declinations"]}
    picks = [by_rank[k] for k in doc.get("recommended", [])][:3]
    if picks:
        for r in picks:
            reasons.append(f"{r['rank']}. {r['reason']}\n")
    else:
        reasons.append("None: no Sun-safe setting serves a wanted bin that still needs time in this "
                       "period" + (" at night" if st["night_only"] else "") + ". Try another period, "
                       "wider --want, or without --night-only / --windows. The first settings:\n",
                       style="yellow")
        for r in doc["declinations"][:min(top, 3)]:
            reasons.append(f"  {r['reason']}\n")
    unsafe = [r for r in doc["declinations"] if not r["sun_safe"]]
    if unsafe:
        reasons.append(f"SUN HAZARD: {len(unsafe)} setting{'s' if len(unsafe) != 1 else ''} this period "
                       "put the Sun on the feed; never park there on these dates:\n", style="bold red")
        for r in unsafe[:top]:
            side = "" if r["culmination"] == "upper" else " below the pole"
            reasons.append(f"  Dec {r['dec_deg']:+.1f}° (elevation {r['elevation_deg']:.1f}° "
                           f"{r['facing']}{side}): Sun {r['sun_closest_deg']:.1f}° from the beam, "
                           f"{date_ranges(tuple(r['sun_hazard_dates']))}\n", style="red")
        if len(unsafe) > top:
            reasons.append(f"  … and {len(unsafe) - top} more (see --format json)\n", style="red")
    return Group(head, table, legend, reasons)


# ---------------------------------------------------------------- hiplan month

def _hhmm(iso_local_text: str) -> str:
    return iso_local_text[11:16]


def month_renderable(doc: dict):
    """Day-by-day table and coverage summary of a drift plan.

    Times are rounded as in the brief and the calendar (``planfile.shown_span``): recordings
    outward, move windows inward; a receiver centre to set anew is marked "retune".
    """
    from datetime import datetime

    from .planfile import shown_span  # planfile imports this module
    from .windows import describe_window_texts

    def span(start: str, end: str, outward: bool = True) -> str:
        a, b = shown_span(datetime.fromisoformat(start), datetime.fromisoformat(end), outward)
        return f"{a:%H:%M}–{b:%H:%M}"

    s, st, summ = doc["site"], doc["settings"], doc["summary"]
    head = Text()
    head.append(s["name"], style="bold")
    head.append(f"  {period_days_text(doc['period'])}  "
                f"(target {st['target_minutes']:g} min per bin"
                + (f", night only ({st.get('night') or 'horizon'})" if st["night_only"] else "")
                + (f"; windows: {'; '.join(describe_window_texts(st['windows']))}"
                   if st["windows"] else "") + ")")
    head.append(f"\nFeed safety: no setting or move brings the Sun within "
                f"{st.get('sun_hazard_deg', s.get('sun_hazard_deg', 10)):g}° of the beam"
                + (" (overridden: --allow-sun-hazard)" if st.get("allow_sun_hazard") else "") + ".")
    table = Table(box=box.SIMPLE_HEAD, header_style="bold", pad_edge=False)
    for name, just in [("Date", "left"), ("Dish", "left"), ("Move", "left"), ("Recordings (local)", "left"),
                       ("New at target", "left"), ("Centre MHz", "right"), ("Skipped", "left")]:
        table.add_column(name, justify=just, overflow="fold")
    previous = None
    for day in doc["days"]:
        park = day["park"]
        if park is None:
            dish = "not parked"
        else:
            low = " (below pole)" if park.get("culmination") == "lower" else ""
            dish = f"Dec {park['dec_deg']:+.1f} = el {park['alt_deg']:.1f}° {park['facing']}{low}"
            before = (day["recordings"][0].get("dish") if day["recordings"] else None) or previous
            if park["move"] and before is not None and before["dec_deg"] != park["dec_deg"]:
                dish = f"Dec {before['dec_deg']:+.1f} → " + dish
        previous = park or previous
        move = (span(park["move_start_local"], park["move_end_local"], outward=False)
                if park and park["move"] else "")
        recs = "\n".join(f"{span(r['start_local'], r['end_local'])} "
                         f"l {r['l_start_deg']:.0f}→{r['l_end_deg']:.0f}" for r in day["recordings"])
        new = compact_ranges([b for r in day["recordings"] for b in r["new_bins"]])
        tune = f"{day['tuning']['centre_mhz']:.3f}" if day["tuning"] else ""
        if tune and day["tuning"].get("retune"):
            tune = f"retune {tune}"
        skipped = ", ".join(f"{_hhmm(k['start_local'])} {k['reason']}" for k in day["skipped"])
        hazards = day.get("sun_hazards") or []
        if hazards:
            recs = "\n".join([f"SUN HAZARD: {h['action']}" for h in hazards] + ([recs] if recs else []))
        table.add_row(day["date"][5:], dish, move, recs or "—", "" if new == "—" else new, tune, skipped,
                      style="bold red" if hazards else ("bold" if park and park["move"] else ""))
    foot = Text()
    for warning in doc.get("warnings") or []:
        foot.append(warning + "\n", style="bold red")
    foot.append(f"Wanted bins at target depth: {summ['done_before']} before → {summ['done_after']} after "
                f"of {summ['wanted_bins']}, with {summ['moves']} moves.\n", style="bold")
    if summ.get("upper_bound") is not None:
        opt = summ.get("optimizer") or {}
        foot.append(f"No plan under these rules brings more than {summ['upper_bound']} to target "
                    f"(bound from the {opt.get('bound_source', 'solver')}); the greedy alone "
                    f"reached {opt.get('greedy_bins', '?')}, {opt.get('method', '')}: "
                    f"{summ['done_after']}.\n")
    for gap in summ["gaps"]:
        foot.append(f"Still short: l {gap['l_range']} — {gap['reason']}\n")
    trade = summ.get("tradeoff")
    if trade:
        table2 = Table(box=box.SIMPLE_HEAD, header_style="bold", pad_edge=False,
                       title="Moves against bins at target", title_justify="left")
        for name in ("At most … moves", "Bins at target", "Moves used", "Bound"):
            table2.add_column(name, justify="right")
        for t in trade:
            table2.add_row("any" if t["max_moves"] is None else str(t["max_moves"]), str(t["bins"]),
                           str(t["moves"]), str(t["upper_bound"]))
        return Group(head, table, foot, table2)
    return Group(head, table, foot)
