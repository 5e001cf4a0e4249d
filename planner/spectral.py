"""HI line frequency <-> velocity conversions and receiver tuning advice.

Conventions:

* Rest frequency: HI hyperfine line, ``HI_REST_FREQUENCY_MHZ`` = 1420.405751768 MHz
  (Hellwig et al. 1970, IEEE Trans. Instrum. Meas. IM-19, 200).
* Radio velocity convention, v = c (f0 - f) / f0: positive velocity (receding) means
  a lower frequency. It is linear in frequency, so a channel has the same width in
  km/s everywhere in the band.
* ``lsr_corr_kms`` is the velocity ADDED to a topocentric radial velocity to give the
  LSR velocity. A line at LSR velocity v_lsr is therefore seen at topocentric velocity
  v_lsr - lsr_corr, i.e. at f = f0 (1 - (v_lsr - lsr_corr) / c).

Tuning advice: SDR spectrometers show a spike at the band centre (DC offset and LO
leakage; common practice), and an I/Q gain/phase mismatch mirrors strong signals
about the centre (common practice). When the usable band is wide enough the
recommended centre frequency is put BELOW the whole line (the line sits in the
upper half of the band), so neither the spike nor the mirror image lands on the
line. The side is fixed so that the advice is deterministic; a symmetric band
works equally well either way.
"""
from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from .errors import UserError
from .site import HI_REST_FREQUENCY_MHZ, SPEED_OF_LIGHT_KMS, Receiver

# Preferred tuning step: SDR front ends tune in 1 Hz or finer, but a 1 kHz value
# is easier to type and to read back from a log; finer steps only as a fallback.
_TUNING_STEPS_MHZ = (1e-3, 1e-6)
# Clearance kept between the band-centre spike and the line (MHz): our choice, about
# 10 km/s, a little more than the spike's width on common SDR receivers.
SPIKE_GUARD_MHZ = 0.05
# Float tolerance when checking that a line lies inside the band (MHz): sums of values
# near 1420 MHz carry rounding errors of ~1e-13 MHz; 1 mHz is far below any channel.
_FIT_TOLERANCE_MHZ = 1e-9


def _check_rest(rest_mhz) -> float:
    rest = float(rest_mhz)
    if not (math.isfinite(rest) and rest > 0):
        raise UserError(f"rest_mhz must be a positive frequency in MHz, got {rest_mhz!r}")
    return rest


def radio_velocity_kms(freq_mhz, rest_mhz=HI_REST_FREQUENCY_MHZ):
    """Radio-convention velocity of frequency ``freq_mhz``.

    Units: MHz in, km/s out (positive = receding). v = c (f0 - f) / f0.
    """
    rest = _check_rest(rest_mhz)
    return SPEED_OF_LIGHT_KMS * (rest - np.asarray(freq_mhz, dtype=float)) / rest


def radio_frequency_mhz(velocity_kms, rest_mhz=HI_REST_FREQUENCY_MHZ):
    """Frequency at which a line of rest frequency ``rest_mhz`` appears at ``velocity_kms``.

    Units: km/s in (radio convention, positive = receding), MHz out. f = f0 (1 - v / c).
    """
    rest = _check_rest(rest_mhz)
    return rest * (1.0 - np.asarray(velocity_kms, dtype=float) / SPEED_OF_LIGHT_KMS)


def topocentric_frequency_mhz(v_lsr_kms, lsr_corr_kms, rest_mhz=HI_REST_FREQUENCY_MHZ):
    """Sky frequency of a line at LSR velocity ``v_lsr_kms`` for a given LSR correction.

    Units: km/s in, MHz out. ``lsr_corr_kms`` is added to a topocentric velocity to give
    the LSR velocity, so f = f0 (1 - (v_lsr - lsr_corr) / c) (radio convention).
    """
    v_topo_kms = np.asarray(v_lsr_kms, dtype=float) - np.asarray(lsr_corr_kms, dtype=float)
    return radio_frequency_mhz(v_topo_kms, rest_mhz)


def channel_velocity_width_kms(channel_width_khz, rest_mhz=HI_REST_FREQUENCY_MHZ):
    """Velocity width of a spectrometer channel: dv = c * dnu / f0 (radio convention).

    Units: kHz in, km/s out. Exact at every frequency, the radio convention being linear.
    """
    rest = _check_rest(rest_mhz)
    width_khz = np.asarray(channel_width_khz, dtype=float)
    if not np.all(np.isfinite(width_khz) & (width_khz > 0)):
        raise UserError(f"channel_width_khz must be positive, got {channel_width_khz!r}")
    return SPEED_OF_LIGHT_KMS * (width_khz * 1e-3) / rest


@dataclass(frozen=True)
class TuningAdvice:
    """Where to tune an SDR receiver so the HI line fits its band.

    Frequencies in MHz (topocentric, i.e. as the receiver sees them), velocities
    in km/s (radio convention). ``margin_mhz`` = usable bandwidth minus line span:
    > 0 spare, < 0 by how much the line does not fit. ``offset_mhz`` = centre minus
    the midpoint of the line span. ``spike_clear`` is True when the band-centre
    spike lies outside the line span widened by the guard on both sides.
    ``spike_v_lsr_*`` give the LSR velocities at which the spike appears over the
    LSR-correction range.
    """

    line_low_mhz: float
    line_high_mhz: float
    line_span_mhz: float
    centre_mhz: float
    bandwidth_mhz: float
    usable_bandwidth_mhz: float
    fits: bool
    margin_mhz: float
    offset_mhz: float
    spike_clear: bool
    spike_v_lsr_min_kms: float
    spike_v_lsr_max_kms: float
    channel_width_khz: float
    channel_width_kms: float
    v_lsr_min_kms: float
    v_lsr_max_kms: float
    lsr_corr_min_kms: float
    lsr_corr_max_kms: float
    notes: tuple[str, ...]


def _finite(name: str, value) -> float:
    try:
        out = float(value)
    except (TypeError, ValueError):
        raise UserError(f"{name} must be a number, got {value!r}") from None
    if not math.isfinite(out):
        raise UserError(f"{name} must be finite, got {value!r}")
    return out


def _ordered(name_min: str, lo, name_max: str, hi) -> tuple[float, float]:
    lo, hi = _finite(name_min, lo), _finite(name_max, hi)
    if lo > hi:
        raise UserError(f"{name_min} ({lo:g}) must not exceed {name_max} ({hi:g})")
    return lo, hi


def _centre_within(lo_mhz: float, hi_mhz: float) -> float:
    """A tuning frequency in [lo, hi]: the interval midpoint on the coarsest grid that keeps it inside.

    If a grid point lies in the interval, the one nearest the midpoint does too, so
    rounding the midpoint and checking is enough. Exact midpoint when every grid misses.
    """
    mid_mhz = 0.5 * (lo_mhz + hi_mhz)
    for step_mhz in _TUNING_STEPS_MHZ:
        centre_mhz = round(mid_mhz / step_mhz) * step_mhz
        if lo_mhz <= centre_mhz <= hi_mhz:
            return centre_mhz
    return mid_mhz


def _fmt_mhz(freq_mhz: float) -> str:
    return f"{freq_mhz:.3f}" if abs(freq_mhz * 1e3 - round(freq_mhz * 1e3)) < 1e-6 else f"{freq_mhz:.6f}"


def tuning_advice(v_lsr_min_kms, v_lsr_max_kms, lsr_corr_min_kms, lsr_corr_max_kms,
                  receiver: Receiver, edge_fraction=0.1,
                  spike_guard_mhz=SPIKE_GUARD_MHZ) -> TuningAdvice:
    """Recommend a receiver centre frequency for an HI velocity envelope.

    Units: velocities km/s (LSR, radio convention), frequencies MHz. The line span
    covers every combination of LSR velocity in [v_lsr_min, v_lsr_max] and LSR
    correction in [lsr_corr_min, lsr_corr_max] (the dates of the observation).
    ``edge_fraction`` of the bandwidth is lost to filter roll-off at EACH edge
    (common practice: about 10 % for SDR anti-alias filters). ``spike_guard_mhz``
    is the clearance kept between the band-centre spike and the line.

    If the line plus guard fits in the upper half of the usable band, the centre is
    put below the line, halfway through the allowed range; otherwise the line is
    centred in the band and the notes give the LSR velocity of the spike. The
    centre is rounded to 1 kHz when that keeps the line where it was placed.
    """
    v_lo_kms, v_hi_kms = _ordered("v_lsr_min_kms", v_lsr_min_kms, "v_lsr_max_kms", v_lsr_max_kms)
    corr_lo_kms, corr_hi_kms = _ordered("lsr_corr_min_kms", lsr_corr_min_kms,
                                        "lsr_corr_max_kms", lsr_corr_max_kms)
    bandwidth_mhz = _finite("receiver bandwidth_mhz", receiver.bandwidth_mhz)
    if bandwidth_mhz <= 0:
        raise UserError(f"receiver bandwidth_mhz must be positive, got {receiver.bandwidth_mhz!r}")
    channels = receiver.channels
    if isinstance(channels, bool) or not isinstance(channels, (int, np.integer)) or channels < 1:
        raise UserError(f"receiver channels must be a positive integer, got {channels!r}")
    edge = _finite("edge_fraction", edge_fraction)
    if not 0 <= edge < 0.5:
        raise UserError(f"edge_fraction must be in [0, 0.5), got {edge_fraction!r}")
    guard_mhz = _finite("spike_guard_mhz", spike_guard_mhz)
    if guard_mhz < 0:
        raise UserError(f"spike_guard_mhz must not be negative, got {spike_guard_mhz!r}")

    # Radio convention is linear in velocity, so the extremes are at the corners:
    # highest topocentric velocity (lowest frequency) = largest v_lsr, smallest correction.
    line_low_mhz = float(topocentric_frequency_mhz(v_hi_kms, corr_lo_kms))
    line_high_mhz = float(topocentric_frequency_mhz(v_lo_kms, corr_hi_kms))
    if line_low_mhz <= 0:
        raise UserError(f"v_lsr_max_kms ({v_hi_kms:g}) gives a non-positive frequency")
    span_mhz = line_high_mhz - line_low_mhz
    mid_mhz = 0.5 * (line_low_mhz + line_high_mhz)
    usable_mhz = bandwidth_mhz * (1.0 - 2.0 * edge)
    half_mhz = 0.5 * usable_mhz
    margin_mhz = usable_mhz - span_mhz
    fits = margin_mhz >= 0

    def clear(c_mhz: float) -> bool:
        return c_mhz <= line_low_mhz - guard_mhz or c_mhz >= line_high_mhz + guard_mhz

    if span_mhz + guard_mhz <= half_mhz:
        # Line in the upper half: centre in [high - usable/2, low - guard].
        centre_mhz = _centre_within(line_high_mhz - half_mhz, line_low_mhz - guard_mhz)
    elif fits:
        centre_mhz = _centre_within(line_high_mhz - half_mhz, line_low_mhz + half_mhz)
    else:
        # Overflows both edges equally: plain rounding to the nearest kHz.
        step_mhz = _TUNING_STEPS_MHZ[0]
        centre_mhz = _centre_within(mid_mhz - step_mhz / 2, mid_mhz + step_mhz / 2)
    spike_clear = clear(centre_mhz)
    spike_v_topo_kms = float(radio_velocity_kms(centre_mhz))
    spike_lo_kms, spike_hi_kms = spike_v_topo_kms + corr_lo_kms, spike_v_topo_kms + corr_hi_kms

    channel_khz = receiver.channel_width_khz
    channel_kms = float(channel_velocity_width_kms(channel_khz))

    notes = [f"Tune the receiver centre to {_fmt_mhz(centre_mhz)} MHz."]
    line_text = (f"The line spans {line_low_mhz:.3f} to {line_high_mhz:.3f} MHz "
                 f"({span_mhz:.3f} MHz) over the velocity and LSR-correction ranges")
    if not fits:
        needed_mhz = span_mhz / (1.0 - 2.0 * edge)
        notes.append(f"{line_text}, but only {usable_mhz:.3f} MHz of the band is usable: "
                     f"short by {-margin_mhz:.3f} MHz.")
        notes.append(f"Use at least {needed_mhz:.3f} MHz of bandwidth, narrow the velocity range, "
                     "or split the observation into two tunings.")
    else:
        notes.append(f"{line_text}; {usable_mhz:.3f} MHz is usable, leaving {margin_mhz:.3f} MHz spare.")
    spike_text = (f"the centre spike appears at LSR velocity {spike_lo_kms:.1f} to "
                  f"{spike_hi_kms:.1f} km/s")
    if spike_clear:
        notes.append(f"The line sits above the centre frequency, so {spike_text}, "
                     "outside the line.")
    else:
        notes.append(f"The line plus guard ({span_mhz + guard_mhz:.3f} MHz) does not fit in half "
                     f"the usable band ({half_mhz:.3f} MHz), so the line is centred and "
                     f"{spike_text}: blank or interpolate the channels there.")
    notes.append(f"Each channel is {channel_khz:.3f} kHz = {channel_kms:.3f} km/s wide.")

    return TuningAdvice(
        line_low_mhz=line_low_mhz, line_high_mhz=line_high_mhz, line_span_mhz=span_mhz,
        centre_mhz=centre_mhz, bandwidth_mhz=bandwidth_mhz, usable_bandwidth_mhz=usable_mhz,
        fits=bool(fits), margin_mhz=margin_mhz, offset_mhz=centre_mhz - mid_mhz,
        spike_clear=spike_clear, spike_v_lsr_min_kms=spike_lo_kms, spike_v_lsr_max_kms=spike_hi_kms,
        channel_width_khz=channel_khz, channel_width_kms=channel_kms,
        v_lsr_min_kms=v_lo_kms, v_lsr_max_kms=v_hi_kms,
        lsr_corr_min_kms=corr_lo_kms, lsr_corr_max_kms=corr_hi_kms,
        notes=tuple(notes),
    )


def shared_centre_mhz(advices, spike_guard_mhz=SPIKE_GUARD_MHZ) -> float | None:
    """One receiver centre (MHz) serving several tunings of one receiver, or None.

    The centre must keep every line that fits its usable band (``fits``) inside that band,
    and keep the band-centre spike at least ``spike_guard_mhz`` below every line whose own
    advice had it clear (``spike_clear``: ``tuning_advice`` puts such a line in the upper
    half of the band), so no observation is served worse than by its own advice. Of the
    frequencies allowed, the midpoint of the range on the coarsest tuning grid that stays
    inside it is taken, as ``tuning_advice`` does: one advice gives back its own centre.
    Lines that do not fit even alone add no condition; when none fits, the midpoint of all
    the lines together is taken (rounded to 1 kHz). None when no frequency serves them all.
    """
    advices = list(advices)
    if not advices:
        raise ValueError("no tunings to share a centre")
    fitting = [a for a in advices if a.fits]
    if not fitting:
        mid_mhz = 0.5 * (min(a.line_low_mhz for a in advices) + max(a.line_high_mhz for a in advices))
        step_mhz = _TUNING_STEPS_MHZ[0]
        return _centre_within(mid_mhz - step_mhz / 2, mid_mhz + step_mhz / 2)
    half_mhz = 0.5 * min(a.usable_bandwidth_mhz for a in advices)
    lo_mhz = max(a.line_high_mhz for a in fitting) - half_mhz
    hi_mhz = min(a.line_low_mhz for a in fitting) + half_mhz
    clear = [a for a in advices if a.spike_clear]
    if clear:
        hi_mhz = min(hi_mhz, min(a.line_low_mhz for a in clear) - spike_guard_mhz)
    if lo_mhz > hi_mhz:
        return None
    return _centre_within(lo_mhz, hi_mhz)


def tuning_at_centre(advice: TuningAdvice, centre_mhz: float,
                     spike_guard_mhz=SPIKE_GUARD_MHZ) -> TuningAdvice:
    """The same line and receiver as ``advice``, with the receiver tuned to ``centre_mhz`` (MHz).

    ``fits`` is True when the line lies inside the usable band around the new centre;
    ``margin_mhz`` stays the spare bandwidth (usable minus line span) when it does, and is
    otherwise minus how far the line runs past a band edge (or the shortfall of a line wider
    than the band, whichever is worse). The spike fields follow the new centre.
    """
    centre = _finite("centre_mhz", centre_mhz)
    half_mhz = 0.5 * advice.usable_bandwidth_mhz
    overhang_mhz = max((centre - half_mhz) - advice.line_low_mhz,
                       advice.line_high_mhz - (centre + half_mhz))
    spare_mhz = advice.usable_bandwidth_mhz - advice.line_span_mhz
    fits = overhang_mhz <= _FIT_TOLERANCE_MHZ
    margin_mhz = spare_mhz if fits else min(spare_mhz, -overhang_mhz)
    spike_clear = (centre <= advice.line_low_mhz - spike_guard_mhz
                   or centre >= advice.line_high_mhz + spike_guard_mhz)
    spike_v_topo_kms = float(radio_velocity_kms(centre))
    spike_lo_kms = spike_v_topo_kms + advice.lsr_corr_min_kms
    spike_hi_kms = spike_v_topo_kms + advice.lsr_corr_max_kms
    line_text = (f"The line spans {advice.line_low_mhz:.3f} to {advice.line_high_mhz:.3f} MHz "
                 f"({advice.line_span_mhz:.3f} MHz) over the velocity and LSR-correction ranges")
    notes = [f"Tune the receiver centre to {_fmt_mhz(centre)} MHz."]
    if fits:
        notes.append(f"{line_text}; it lies inside the {advice.usable_bandwidth_mhz:.3f} MHz usable "
                     f"band, leaving {spare_mhz:.3f} MHz spare.")
    else:
        notes.append(f"{line_text}; at this centre it runs {-margin_mhz:.3f} MHz past the usable band.")
    where = "outside" if spike_clear else "inside"
    notes.append(f"The centre spike appears at LSR velocity {spike_lo_kms:.1f} to {spike_hi_kms:.1f} "
                 f"km/s, {where} the line" + ("." if spike_clear else
                                              ": blank or interpolate the channels there."))
    notes.append(f"Each channel is {advice.channel_width_khz:.3f} kHz = "
                 f"{advice.channel_width_kms:.3f} km/s wide.")
    return replace(advice, centre_mhz=centre, fits=bool(fits), margin_mhz=margin_mhz,
                   offset_mhz=centre - 0.5 * (advice.line_low_mhz + advice.line_high_mhz),
                   spike_clear=bool(spike_clear), spike_v_lsr_min_kms=spike_lo_kms,
                   spike_v_lsr_max_kms=spike_hi_kms, notes=tuple(notes))
