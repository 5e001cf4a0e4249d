"""The brief's section "What the receiver should show": expected spectra and calibration.

Reads what a plan carries (``expected``, ``days[].calibrations``, calibration blocks; see
docs/plan-format.md) and says it for the volunteer: a small expected-spectrum plot per dish
setting (drift) or group of targets (survey), where the emission should be, the calibration
passes to record and how to turn one into a gain and a system temperature, the signal-to-noise
ratio on the expected peak, and the model's cautions. Listed in
``briefcontent.DRIFT_SECTIONS`` / ``SURVEY_SECTIONS`` after the tuning section. Pure.
"""
from __future__ import annotations

from .briefcontent import Bullets, Figure, Paragraph, Section, _day_label, _float, _num, _text

# The published peaks' beam (calibration.PUBLISHED_BEAM_DEG), repeated here so the brief
# stays a reader of the plan and imports no model code.
_PUBLISHED_BEAM_DEG = 0.6


# Name of the brief's expected-spectrum image (one panel per group).
FIGURE_KEY = "spectra"


def _curve_text(curve: dict) -> str:
    lo, hi = _float(curve.get("v_min_kms")), _float(curve.get("v_max_kms"))
    span = (f"emission above 1 K from {_num(lo, '+.0f')} to {_num(hi, '+.0f')} km/s"
            if lo is not None and hi is not None else "no emission above 1 K")
    return (f"l {_num(curve.get('l_deg'), '.1f')}°: peak about {_num(curve.get('peak_tb_k'), '.0f')} K "
            f"at {_num(curve.get('peak_velocity_kms'), '+.0f')} km/s, {span}")


def _group_blocks(expected: dict, drift: bool) -> list:
    blocks: list = []
    for n, group in enumerate(expected.get("groups") or (), start=1):
        curves = group.get("curves") or []
        if drift:
            first, last = group.get("first_date"), group.get("last_date")
            when = (f" ({_day_label(first, year=False)}" +
                    (f" to {_day_label(last, year=False)})" if last and last != first else ")")
                    if first else "")
            title = f"{_text(group.get('label'))}{when}"
        else:
            title = f"Targets {_text(group.get('label'))}"
        blocks.append(Paragraph(f"{n}. {title}: " + "; ".join(_curve_text(c) for c in curves) + "."))
    if blocks:
        blocks.append(Figure(FIGURE_KEY, "Expected spectra, one panel for each of the groups "
                                         "above in turn (model; brightness temperature against "
                                         "LSR velocity)."))
    return blocks


def _calibration_items(doc: dict) -> list[tuple[str, str]]:
    """One item per standard region the plan passes over (drift) or calibrates on (survey)."""
    per_region: dict[str, list[dict]] = {}
    for day in doc.get("days") or ():
        for cal in day.get("calibrations") or ():
            if isinstance(cal, dict):
                per_region.setdefault(_text(cal.get("region")), []).append(cal)
    for block in doc.get("blocks") or ():
        if block.get("kind") == "calibration":
            per_region.setdefault(_text(block.get("name")), []).append(
                {**block, "closest_local": block.get("start_local"), "task": True})
    items = []
    for name, cals in per_region.items():
        tasks = [c for c in cals if c.get("task")]
        first = cals[0]
        peak = _num(first.get("expected_peak_k"), ".0f")
        published = _num(first.get("published_peak_k"), "g")
        times = ", ".join(f"{_day_label(str(c.get('closest_local'))[:10], year=False)} "
                          f"{str(c.get('closest_local'))[11:16]}" for c in tasks[:6])
        more = f" and {len(tasks) - 6} more" if len(tasks) > 6 else ""
        what = "passes" if doc.get("days") is not None else "calibration blocks"
        items.append((f"{name}:", f"{len(cals)} {what} in this plan; should peak near {peak} K in "
                                  f"this beam (published {published} K for a "
                                  f"{_PUBLISHED_BEAM_DEG:g}° beam). Record: {times}{more}."))
    return items


GAIN_TEXT = ("On the recorded pass, read the line's peak above the line-free level in your "
             "receiver's units. Counts-to-kelvin scale = expected peak (K) / peak (counts); "
             "system temperature = scale × the line-free level (counts), for a total-power "
             "receiver. With the peak in dB above the line-free level: system temperature = "
             "expected peak / (10^(dB/10) − 1).")


def _sensitivity_blocks(expected: dict) -> list:
    """Signal-to-noise on the expected peak after the plan (bins the plan integrates)."""
    bins = [b for b in expected.get("bins") or () if _float(b.get("snr_after")) is not None]
    target = _float(expected.get("snr")) or 10.0
    observed = [b for b in bins if _float(b.get("snr_after")) > 0]
    if not observed:
        return []
    worst = min(observed, key=lambda b: _float(b.get("snr_after")))
    text = (f"Signal-to-noise ratio on the expected peak, per channel, in the bins this plan and "
            f"the log integrate: at least {_num(worst.get('snr_after'), '.0f')} (l "
            f"{_num(worst.get('l_deg'), 'g')}°, peak {_num(worst.get('peak_tb_k'), '.0f')} K).")
    short = [b for b in observed if _float(b.get("snr_after")) < target]
    if short:
        days = [x for x in (_float(b.get("days_to_snr")) for b in short) if x is not None]
        text += (f" {len(short)} of them stay below {target:g}"
                 + (f"; at this plan's rate they need up to {max(days):.0f} more days." if days else "."))
    else:
        text += (f" Every one passes {target:g}: the line's peak is strong, the noise figures "
                 "above matter for its faint wings.")
    unseen = len(bins) - len(observed)
    if unseen:
        text += f" {unseen} wanted bins get no integration at all."
    return [Paragraph(text)]


def expected_section(doc: dict) -> Section | None:
    """The section, or None when the plan carries neither spectra nor calibration."""
    expected = doc.get("expected") if isinstance(doc.get("expected"), dict) else {}
    drift = doc.get("kind") == "drift"
    blocks: list = []
    if expected.get("groups"):
        beam = _num(expected.get("beamwidth_deg"), ".1f")
        blocks.append(Paragraph(
            f"What the hydrogen line should look like, from a model of the Galaxy's HI disc seen "
            f"through this dish's {beam}° beam: brightness temperature against LSR velocity, "
            + ("at a few of the longitudes each dish setting records (b = 0)." if drift else
               "for each target.")))
        blocks += _group_blocks(expected, drift)
        blocks += _sensitivity_blocks(expected)
    cal_items = _calibration_items(doc)
    if cal_items:
        blocks.append(Paragraph("Calibration: the IAU standard HI regions are patches of sky "
                                "whose line brightness is published; recording one checks the "
                                "receiver's scale. The passes marked CALIBRATE in the table are "
                                "the ones to record."))
        blocks.append(Bullets(tuple(cal_items) + (("Gain and system temperature:", GAIN_TEXT),)))
        beam = _float((doc.get("site") or {}).get("beamwidth_deg"))
        if beam is not None and beam > 2 * _PUBLISHED_BEAM_DEG:
            blocks.append(Paragraph(
                f"Beam dilution: the published peaks were measured with a beam of about "
                f"{_PUBLISHED_BEAM_DEG:g}°, this dish's is {beam:.1f}°. The expected peaks allow for "
                "the smooth fall-off of the emission across the wider beam, not for the small "
                "clouds that make the published peak: expect up to a third less, and trust the "
                "scale to about 30 %.", "note"))
    if not blocks:
        return None
    caution = expected.get("caution") or ("A smooth model: real spectra show clouds and absorption "
                                          "it leaves out.")
    blocks.append(Paragraph(f"Caution: {caution}", "note"))
    return Section("expected", "What the receiver should show", tuple(blocks), new_page=True)
