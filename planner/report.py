"""Turning results into documents (plain dicts) and rendering them.

Documents are JSON-ready dicts with a versioned ``schema`` field; the same
document feeds the JSON writer, the CSV writer and the rich table, so the three
formats always agree. Rendering never computes astronomy.
"""
from __future__ import annotations

import csv
import io
import json
from zoneinfo import ZoneInfo

from rich import box
from rich.console import Group
from rich.table import Table
from rich.text import Text

from .passages import Passage, PassageSearch
from .pointing import Pointing
from .site import Site
from .timebase import iso_local, iso_utc, mjd_to_datetime_utc

CROSSINGS_SCHEMA = "hiplan.crossings/1"

# Column order of the crossings CSV; the JSON passage objects carry the same keys.
PASSAGE_FIELDS = (
    "start_utc", "end_utc", "peak_utc", "start_local", "end_local", "peak_local",
    "duration_min", "l_start_deg", "l_peak_deg", "l_end_deg", "b_min_abs_deg", "l_bins",
    "bin_seconds", "alt_deg", "az_deg", "sun_sep_min_deg", "sun_ok", "sun_alt_max_deg",
    "night", "moon_sep_min_deg", "moon_ok", "clipped",
)


def period_summary(start_mjd: float, end_mjd: float, tz: ZoneInfo) -> dict:
    return {
        "start_utc": iso_utc(start_mjd), "end_utc": iso_utc(end_mjd),
        "start_local": iso_local(start_mjd, tz), "end_local": iso_local(end_mjd, tz),
        "days": round(end_mjd - start_mjd, 4),
    }


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
    }
    rec.update(p.extras)
    return rec


def crossings_document(site: Site, pointing: Pointing, search: PassageSearch) -> dict:
    """The ``hiplan crossings`` result as a JSON-ready document."""
    tz = site.tz
    return {
        "schema": CROSSINGS_SCHEMA,
        "site": site.summary(),
        "pointing": pointing.summary(site.dish.beamwidth_deg, search.band_deg),
        "period": period_summary(search.start_mjd, search.end_mjd, tz),
        "closest_b_abs_deg": round(search.b_min_abs_deg, 3),
        "passages": [passage_record(p, tz) for p in search.passages],
    }


def to_json(document: dict) -> str:
    return json.dumps(document, indent=2, ensure_ascii=False) + "\n"


def to_csv(records: list[dict], fields: tuple[str, ...]) -> str:
    """CSV with a header row; list values are joined with ';'."""
    buf = io.StringIO()
    writer = csv.DictWriter(buf, fieldnames=list(fields), extrasaction="ignore", lineterminator="\n")
    writer.writeheader()
    for rec in records:
        writer.writerow({k: ";".join(str(v) for v in rec[k]) if isinstance(rec.get(k), list)
                         else rec.get(k) for k in fields})
    return buf.getvalue()


def compact_ranges(values) -> str:
    """Integer bins as compact ranges, e.g. [28, 29, 30, 41] -> '28–30, 41'."""
    nums = sorted({int(v) for v in values})
    if not nums:
        return "—"
    parts, lo, prev = [], nums[0], nums[0]
    for v in nums[1:] + [None]:
        if v is not None and v == prev + 1:
            prev = v
            continue
        parts.append(f"{lo}" if lo == prev else f"{lo}–{prev}")
        if v is not None:
            lo = prev = v
    return ", ".join(parts)


def _clock(mjd: float, tz: ZoneInfo) -> str:
    return mjd_to_datetime_utc(mjd).astimezone(tz).strftime("%H:%M")


def crossings_renderable(site: Site, pointing: Pointing, search: PassageSearch):
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
    head.append(f"Beam {dish.beamwidth_deg:.2f}° HPBW, band |b| ≤ {search.band_deg:g}°, "
                f"Sun limit {site.rules.sun_min_sep_deg:g}°\n")
    head.append(f"Period {first:%Y-%m-%d %H:%M} – {last:%Y-%m-%d %H:%M} local "
                f"({search.end_mjd - search.start_mjd:.1f} days)")
    if not search.passages:
        note = Text(f"\nNo passage: the beam never comes within {search.band_deg:g}° of the "
                    f"galactic plane (closest |b| = {search.b_min_abs_deg:.2f}°).", style="yellow")
        return Group(head, note)

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
        lsr = ""
        if "lsr_corr_min_kms" in p.extras:
            lsr = f"{p.extras['lsr_corr_min_kms']:+.1f}…{p.extras['lsr_corr_max_kms']:+.1f}"
        table.add_row(
            start_local.strftime("%a %d %b"), _clock(p.start_mjd, tz), _clock(p.peak_mjd, tz),
            _clock(p.end_mjd, tz), f"{p.duration_min:.0f}",
            f"{p.l_start_deg:5.1f} → {p.l_end_deg:5.1f}",
            f"{p.b_min_abs_deg:.2f}", Text(sun, style="" if p.sun_ok else "bold red"),
            "night" if p.night else "day", lsr, ", ".join(notes),
            style="dim" if not p.sun_ok else "",
        )
    all_bins = {b for p in search.passages if p.sun_ok for b in p.l_bins}
    foot = Text(f"{len(search.passages)} passages, {blocked} too close to the Sun. "
                f"Usable longitude bins: {compact_ranges(all_bins)}")
    return Group(head, table, foot)
