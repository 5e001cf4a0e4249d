"""Rendering result documents for the terminal with rich: tables, headers, notes.

Every renderable here takes a document built by ``report`` (or a plan, ``planfile``)
and only formats it; nothing here computes astronomy. Kept apart from ``report``
so that commands writing JSON or CSV never load rich.
"""
from __future__ import annotations

from zoneinfo import ZoneInfo

from rich import box
from rich.console import Group
from rich.table import Table
from rich.text import Text

from .passages import PassageSearch, lsr_range_kms
from .pointing import Pointing
from .report import approach_records, compact_ranges, period_days_text
from .site import Site
from .timebase import mjd_to_datetime_utc


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


def crossings_renderable(site: Site, pointing: Pointing, search: PassageSearch, approaches=None,
                         calibrators=None):
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
    cal = calibrator_text(site, calibrators)
    if not search.passages:
        note = Text(f"\nNo passage: the beam never comes within {search.b_max_deg:g}° of the "
                    f"galactic plane (closest |b| = {search.b_min_abs_deg:.2f}°).", style="yellow")
        return Group(head, note, feed, cal)

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
    return Group(head, table, foot, feed, cal)


def calibrator_text(site: Site, calibrators) -> Text:
    """Passes of the IAU standard HI regions through the beam, for calibration (or why none)."""
    from .report import calibrator_pass_records
    out = Text()
    if calibrators is None:
        return out
    records = calibrator_pass_records(*calibrators, site.tz, site.dish.beamwidth_deg)
    if not records:
        out.append("\nNo IAU standard HI region (S7, S8, S9) passes within half a beamwidth of "
                   "this pointing in the period.")
        return out
    out.append(f"\nCalibration passes (IAU standard HI regions within half a beamwidth, "
               f"{site.dish.beamwidth_deg / 2:.2f}°):\n", style="bold")
    for r in records[:10]:
        when = mjd_to_datetime_utc(_mjd(r["closest_utc"])).astimezone(site.tz)
        out.append(f"  {when:%a %d %b %H:%M} {r['region']} at {r['sep_deg']:.2f}°: should peak "
                   f"near {r['expected_peak_k']:.0f} K (published {r['published_peak_k']:g} K)\n")
    if len(records) > 10:
        out.append(f"  … and {len(records) - 10} more (JSON lists them all)\n")
    return out


def _mjd(iso: str) -> float:
    from .timebase import parse_instant
    return parse_instant(iso, "time")


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
                + f", feed safety: Sun ≥ {st.get('sun_hazard_deg', s.get('sun_hazard_deg', 10)):g}° "
                  "from the beam"
                # the log's path on a line of its own: the header wraps the same wherever it lives
                + (f"\nLog: {_log_text(st['log'])}" if st["log"] else ""))
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
    return Group(head, table, legend, reasons, park_calibration_text(doc))


def park_calibration_text(doc: dict) -> Text:
    """Which settings see an IAU standard HI region (a calibration pass), best rank first."""
    out = Text()
    seeing = [r for r in doc["declinations"] if r.get("calibrator_passes")]
    if "calibrators" not in (doc["declinations"][0] if doc["declinations"] else {}):
        return out
    out.append("Calibration: ", style="bold")
    if not seeing:
        out.append("no setting's beam passes within half a beamwidth of an IAU standard HI region "
                   "(S7, S8, S9) in this period.\n")
        return out
    out.append("settings whose beam passes over an IAU standard HI region (record the pass to "
               "check the receiver's scale):\n")
    for r in seeing[:8]:
        side = "" if r["culmination"] == "upper" else " below the pole"
        what = "; ".join(f"{c['region']} {c['passes']}× at {c['sep_deg']:.1f}°, first "
                         f"{c['first_local'][5:10]} {c['first_local'][11:16]}, about "
                         f"{c['expected_peak_k']:.0f} K" for c in r["calibrator_passes"])
        out.append(f"  #{r['rank']} Dec {r['dec_deg']:+.1f}° (elevation {r['elevation_deg']:.1f}° "
                   f"{r['facing']}{side}){'' if r['sun_safe'] else ' SUN HAZARD'}: {what}\n")
    if len(seeing) > 8:
        out.append(f"  … and {len(seeing) - 8} more (see --format json)\n")
    return out


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


def tally_renderable(doc: dict):
    """A tally document (``hiplan.tally/1``): what counted, what not and why, minutes per
    bin as longitude ranges; with a plan, the days planned against recorded."""
    from .tally import REASON_TEXT

    sp, st, site = doc["spectra"], doc["settings"], doc["site"]
    head = Text()
    head.append(site["name"], style="bold")
    files = len(doc["files"])
    head.append(f"  {sp['read']:,} spectra from {files} file{'s' if files != 1 else ''}, "
                f"{sp['first_utc'][:16].replace('T', ' ')} – {sp['last_utc'][:16].replace('T', ' ')} UTC\n")
    head.append(f"Strip |b| ≤ {st['b_max_deg']:g}°, {st['bin_width_deg']:g}° bins, the Sun at least "
                f"{st['sun_min_sep_deg']:g}° from the beam"
                + (f", night only ({st['night']})" if st["night_only"] else "")
                + f"; each time stamp marks the {st['stamp']} of its exposure.\n")
    minutes = sum(b["minutes"] for b in doc["bins"])
    head.append(f"Counted: {sp['counted']:,} spectra, {minutes:,.1f} min in {len(doc['bins'])} bins",
                style="bold")
    if sp.get("lsr_corr_min_kms") is not None:
        head.append(f"; LSR correction {sp['lsr_corr_min_kms']:+.2f} … {sp['lsr_corr_max_kms']:+.2f} km/s")
    head.append(".\n")
    rejected = [(REASON_TEXT[k], v) for k, v in doc["rejected"].items() if v["spectra"]]
    if rejected:
        head.append("Not counted: " + "; ".join(f"{what} {v['spectra']:,} ({v['minutes']:,.1f} min)"
                                                for what, v in rejected) + ".\n")
    table = Table(box=box.SIMPLE_HEAD, header_style="bold", pad_edge=False,
                  title="Minutes per bin", title_justify="left")
    for name in ("Longitudes", "Bins", "Min per bin", "Total min"):
        table.add_column(name, justify="left" if name == "Longitudes" else "right")
    width = st["bin_width_deg"]
    runs: list[list[dict]] = []
    for b in doc["bins"]:  # bins with time, as runs of neighbours
        if runs and abs(b["l_bin"] - runs[-1][-1]["l_bin"] - width) < 1e-9:
            runs[-1].append(b)
        else:
            runs.append([b])
    for run in runs:
        lo, hi = run[0]["l_bin"], run[-1]["l_bin"]
        values = [b["minutes"] for b in run]
        table.add_row(f"{lo:g}" if lo == hi else f"{lo:g}–{hi:g}", str(len(run)),
                      f"{min(values):.1f}" if len(run) == 1 else f"{min(values):.1f}–{max(values):.1f}",
                      f"{sum(values):.1f}")
    parts = [head, table]
    if "per_day" in doc:
        days = Table(box=box.SIMPLE_HEAD, header_style="bold", pad_edge=False,
                     title=f"The plan ({doc['plan']['file']}) against the recordings",
                     title_justify="left")
        for name, just in (("Date", "left"), ("Planned min", "right"), ("Recorded min", "right"),
                           ("Missed (local)", "left")):
            days.add_column(name, justify=just, overflow="fold")
        for day in doc["per_day"]:
            missed = ", ".join(f"{m['start_local'][11:16]}–{m['end_local'][11:16]}" for m in day["missed"])
            days.add_row(day["date"], f"{day['planned_min']:.1f}", f"{day['recorded_min']:.1f}", missed,
                         style="bold" if day["missed"] else "")
        foot = Text()
        ag, at = doc["agreement"], doc["at_target"]
        share = ag["recorded_min"] / ag["planned_min"] if ag["planned_min"] else 0.0
        foot.append(f"Recorded {ag['recorded_min']:,.1f} of {ag['planned_min']:,.1f} planned minutes "
                    f"({share:.0%}) through {doc['plan']['through']}", style="bold")
        if ag["days_with_missed"]:
            foot.append(f"; {ag['missed_min']:,.0f} min missed on {', '.join(ag['days_with_missed'])}")
        foot.append(".\n")
        if ag["max_day_difference_min"] is not None:
            foot.append(f"On the {ag['days_complete']} days recorded in full, recorded and planned "
                        f"minutes agree within {ag['max_day_difference_min']:.1f} min.\n")
        foot.append(f"Wanted bins at {at['target_minutes']:g} min: {at['before']} before the plan, "
                    f"{at['now']} now (the plan foresaw {at['planned_so_far']} by now, "
                    f"{at['planned_by_end']} by its end) of {at['wanted_bins']}.\n")
        parts += [days, foot]
    return Group(*parts)


# ----------------------------------------------------------------- hiplan spectrum

def spectrum_renderable(doc: dict):
    """The expected spectrum: position, peak, emission range, receiver view, a coarse profile."""
    from rich.console import Group
    from rich.table import Table
    from rich.text import Text
    from rich import box
    head = Text()
    many = "positions" in doc
    head.append(f"Expected HI spectrum (model) — {doc['site']['name']}, beam "
                f"{doc['beamwidth_deg']:g}°, rotation {doc['rotation_model']}\n", style="bold")
    if many:
        table = Table(box=box.SIMPLE_HEAD, header_style="bold", pad_edge=False)
        for name in ("Position", "l", "b", "Peak T_B (K)", "at (km/s)", "T_B > 1 K (km/s)",
                     f"Minutes for S/N {doc['snr']:g}"):
            table.add_column(name, justify="right" if name != "Position" else "left")
        for p in doc["positions"]:
            span = ("—" if p["v_min_kms"] is None else f"{p['v_min_kms']:+.0f} … {p['v_max_kms']:+.0f}")
            table.add_row(str(p.get("label", "")), f"{p['l_deg']:.1f}", f"{p['b_deg']:+.1f}",
                          f"{p['peak_tb_k']:.1f}", f"{p['peak_velocity_kms']:+.0f}", span,
                          "—" if p["minutes_for_snr"] is None else f"{p['minutes_for_snr']:.1f}")
        return Group(head, table, Text("\n".join(doc["cautions"]), style="dim"))
    pos = doc["position"]
    head.append(f"l {pos['l_deg']:.2f}°, b {pos['b_deg']:+.2f}° (ICRS RA {pos['ra_deg']:.2f}°, "
                f"Dec {pos['dec_deg']:+.2f}°)\n")
    span = ("no emission above 1 K" if doc["v_min_kms"] is None else
            f"emission above {doc['emission_level_k']:g} K from {doc['v_min_kms']:+.0f} to "
            f"{doc['v_max_kms']:+.0f} km/s (LSR)")
    head.append(f"Peak {doc['peak_tb_k']:.1f} K at {doc['peak_velocity_kms']:+.0f} km/s; {span}.\n")
    if doc["minutes_for_snr"] is not None:
        m = doc["minutes_for_snr"]
        took = f"{m:.1f} min" if m >= 1.0 else f"{m * 60.0:.1f} s"
        head.append(f"S/N {doc['snr']:g} on the peak per channel after {took} of integration "
                    "(the line is strong; its faint wings take far longer).\n")
    rec = doc.get("receiver")
    if rec:
        head.append(f"At {doc['time_local']}: LSR correction {doc['lsr_corr_kms']:+.2f} km/s. "
                    f"Receiver centre {rec['centre_mhz']:.3f} MHz, usable "
                    f"{rec['usable_low_mhz']:.3f}–{rec['usable_high_mhz']:.3f} MHz "
                    f"({rec['usable_low_kms']:+.0f} to {rec['usable_high_kms']:+.0f} km/s LSR, "
                    "reversed: higher frequency is lower velocity).\n")
        head.append("The emission fits the usable band.\n" if rec["emission_fits"] else
                    "The emission does NOT fit the usable band: widen the band or retune.\n",
                    style="" if rec["emission_fits"] else "bold red")
        on = "on the emission" if rec["spike_on_emission"] else "clear of the emission"
        head.append(f"Centre spike at {rec['spike_v_lsr_kms']:+.1f} km/s LSR, {on} "
                    f"(model {rec['spike_tb_k']:.1f} K there).\n")
        free = "; ".join(f"{a:+.0f} to {b:+.0f}" for a, b in rec["line_free_kms"]) or "none"
        head.append(f"Line-free for the baseline fit (km/s LSR): {free}.\n")
    table = Table(box=box.SIMPLE_HEAD, header_style="bold", pad_edge=False,
                  title="Profile every 10 km/s where above 0.5 K", title_justify="left")
    table.add_column("v_LSR (km/s)", justify="right")
    table.add_column("T_B (K)", justify="right")
    if "frequency_mhz" in doc:
        table.add_column("Sky frequency (MHz)", justify="right")
    for i, (v, t) in enumerate(zip(doc["velocity_kms"], doc["tb_k"])):
        if t > 0.5 and abs(v - round(v / 10) * 10) < 1e-6:
            cells = [f"{v:+.0f}", f"{t:.1f}"]
            if "frequency_mhz" in doc:
                cells.append(f"{doc['frequency_mhz'][i]:.4f}")
            table.add_row(*cells)
    return Group(head, table, Text("\n".join(doc["cautions"]), style="dim"))
