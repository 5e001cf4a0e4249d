"""Receiver set-up for an observation: where the HI line will fall and how deep we get.

Combines the disc-HI velocity envelope (``galaxy``) over the longitudes
observed, the LSR-correction range over the observing times (``doppler``), the
receiver (``site.Receiver``) and the radiometer equation (``sensitivity``).
Velocities km/s (LSR, radio convention), frequencies MHz, noise in K.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .galaxy import RotationModel, hi_velocity_envelope
from .passages import Passage
from .sensitivity import days_to_reach, radiometer_rms_k
from .site import Receiver
from .spectral import TuningAdvice, shared_centre_mhz, tuning_advice, tuning_at_centre


@dataclass(frozen=True)
class LineSetup:
    """Expected HI velocities, the LSR-correction range and the resulting tuning."""

    v_lsr_min_kms: float
    v_lsr_max_kms: float
    lsr_corr_min_kms: float
    lsr_corr_max_kms: float
    advice: TuningAdvice


def envelope_over_bins_kms(l_bins, bin_width_deg: float, b_abs_max_deg: float,
                           model: RotationModel) -> tuple[float, float]:
    """Widest HI velocity range (km/s) over longitude bins, for |b| <= b_abs_max_deg.

    Each bin is sampled at its edges and centre; b = 0 gives the widest envelope
    (the sight line stays in the gas longest), so it bounds the strip.
    """
    starts = np.asarray(sorted(l_bins), dtype=float)
    if starts.size == 0:
        raise ValueError("no longitude bins")
    l_samples = np.concatenate([starts, starts + 0.5 * bin_width_deg, starts + bin_width_deg])
    env = hi_velocity_envelope(l_samples, 0.0, model)
    return float(np.min(env.v_min_kms)), float(np.max(env.v_max_kms))


def line_setup(l_bins, bin_width_deg: float, b_abs_max_deg: float, lsr_corr_min_kms: float,
               lsr_corr_max_kms: float, receiver: Receiver, model: RotationModel) -> LineSetup:
    """Tuning advice for observing ``l_bins`` with LSR corrections in the given range."""
    v_lo, v_hi = envelope_over_bins_kms(l_bins, bin_width_deg, b_abs_max_deg, model)
    advice = tuning_advice(v_lo, v_hi, lsr_corr_min_kms, lsr_corr_max_kms, receiver)
    return LineSetup(v_lo, v_hi, lsr_corr_min_kms, lsr_corr_max_kms, advice)


def shared_setups(setups) -> list[LineSetup | None]:
    """One receiver centre for each run of consecutive observations (e.g. the days of a plan).

    ``setups``: ``LineSetup`` per observation in time order, ``None`` where nothing is
    observed (such entries neither join nor end a run). A run keeps one centre
    (``spectral.shared_centre_mhz``) as long as that centre serves every observation of the
    run as well as its own advice: a line that fitted the usable band still fits, and a
    band-centre spike that was clear of the line stays clear. The first observation that
    cannot be served so starts a new run, so the receiver is retuned only when it must be.
    Returns the setups with their advice moved to the run's centre.
    """
    setups = list(setups)
    out: list[LineSetup | None] = [None] * len(setups)
    run: list[int] = []
    centre_mhz = None

    def close():
        for j in run:
            out[j] = LineSetup(setups[j].v_lsr_min_kms, setups[j].v_lsr_max_kms,
                               setups[j].lsr_corr_min_kms, setups[j].lsr_corr_max_kms,
                               tuning_at_centre(setups[j].advice, centre_mhz))

    for i, setup in enumerate(setups):  # one per day: tens to hundreds
        if setup is None:
            continue
        trial = shared_centre_mhz([setups[j].advice for j in run] + [setup.advice])
        if trial is None:
            close()
            run, centre_mhz = [i], shared_centre_mhz([setup.advice])
        else:
            run.append(i)
            centre_mhz = trial
    if run:
        close()
    return out


def seconds_per_bin(passages: list[Passage]) -> dict[float, float]:
    """Total seconds the beam centre spends in each longitude bin over ``passages``."""
    total: dict[float, float] = {}
    for p in passages:
        for b, s in zip(p.l_bins, p.bin_seconds):
            total[b] = total.get(b, 0.0) + s
    return dict(sorted(total.items()))


@dataclass(frozen=True)
class BinDepth:
    """Per-bin integration and expected noise for a drift survey."""

    l_bin: float
    seconds_per_day: float
    rms_per_day_k: float  # one day's passages averaged into the bin
    days_to_target: float | None  # days to reach the requested rms, if one was given


def drift_depth(passages: list[Passage], days: float, receiver: Receiver,
                target_rms_k: float | None = None, switching_factor: float = 1.0) -> list[BinDepth]:
    """Expected rms per 1-degree bin per day from the time spent in each bin.

    Radiometer equation per channel (Dicke 1946): sigma = k Tsys / sqrt(dnu tau),
    with tau the mean seconds per day the beam centre spends in the bin.
    """
    out = []
    width_hz = receiver.channel_width_khz * 1e3
    for l_bin, secs in seconds_per_bin(passages).items():
        per_day = secs / days
        if per_day <= 0:
            continue
        rms = float(radiometer_rms_k(receiver.tsys_k, width_hz, per_day, switching_factor))
        need = float(np.ceil(days_to_reach(rms, target_rms_k))) if target_rms_k else None
        out.append(BinDepth(l_bin, per_day, rms, need))
    return out
