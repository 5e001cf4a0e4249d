"""What the receiver should show: the model HI spectrum (``hidisc``) at a site, time and setting.

For a position and an instant: the expected brightness temperature against LSR velocity and
against topocentric (sky) frequency, with the receiver setting (``spectral.tuning_advice``, or
a centre the caller gives), its usable band, where the band-centre spike falls and which parts
of the band are free of line emission for fitting the baseline.

LSR velocity to sky frequency. A line at LSR radio velocity v has the frequency
f_LSR = f0 (1 - v / c) in the LSR frame; the observer sees it Doppler shifted by the factor

    D = (1 + bary_corr / c) (1 + phi / c^2) (1 + (lsr_corr - bary_corr) / c),

``bary_corr`` and ``lsr_corr`` from ``doppler.velocity_corrections``: 1 + bary_corr / c is the
special-relativistic factor gamma (1 + beta . n) of the observer's motion times the
gravitational term 1 / (1 + phi / c^2), which the product divides out again; the solar motion
relative to the LSR is a second, first-order factor. Leaving out the observer's gravitational potential phi follows astropy's
``SpectralCoord.with_observer_stationary_relative_to``, which has no such term: the two agree
to 1.5 m/s (tests/test_expected.py; that is also how far SpectralCoord and astropy's own
``radial_velocity_correction`` differ on those cases, and ``doppler`` follows the latter to
0.03 m/s); the simpler additive form f0 (1 - (v - lsr_corr) / c) used
for tuning advice (``spectral.topocentric_frequency_mhz``) differs by v * lsr_corr / c, up to
about 20 m/s, far below a channel.

Line-free channels: inside the usable band, where the model is below ``LINE_FREE_K`` and the
channel is more than ``spectral.SPIKE_GUARD_MHZ`` from the centre spike (common practice: the
baseline is fitted where there is no line and no spike). Pure computation: no files.
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from .doppler import AU_M, GM_EARTH_M3_S2, GM_SUN_M3_S2, velocity_corrections
from .earth import site_itrs_m
from .galactic import galactic_to_icrs_deg
from .galaxy import hi_velocity_envelope
from .hidisc import EMISSION_LEVEL_K, DiscModel, Spectrum, expected_spectra
from .sensitivity import radiometer_rms_k
from .site import HI_REST_FREQUENCY_MHZ, SPEED_OF_LIGHT_KMS, Site
from .spectral import SPIKE_GUARD_MHZ, TuningAdvice, tuning_advice

# Below this model brightness (K) a channel counts as free of line emission (our choice: a
# tenth of the "emission seen" level, so the baseline fit stays clear of the line wings).
LINE_FREE_K = 0.1
# Signal-to-noise ratio on the expected peak used for "days to reach" (our choice).
DEFAULT_SNR = 10.0


def doppler_factor(site: Site, ra_deg, dec_deg, mjd_utc, solar_motion: str = "standard") -> np.ndarray:
    """f_topocentric / f_LSR for a site, ICRS direction(s) and time(s) (see the module doc)."""
    corr = velocity_corrections(site.latitude_deg, site.longitude_deg, site.height_m, ra_deg,
                                dec_deg, mjd_utc, solar_motion)
    radius_m = float(np.linalg.norm(site_itrs_m(site.latitude_deg, site.longitude_deg, site.height_m)))
    phi_over_c2 = -(GM_SUN_M3_S2 / AU_M + GM_EARTH_M3_S2 / radius_m) / (SPEED_OF_LIGHT_KMS * 1e3) ** 2
    c = SPEED_OF_LIGHT_KMS
    return ((1.0 + corr.bary_corr_kms / c) * (1.0 + phi_over_c2)
            * (1.0 + (corr.lsr_corr_kms - corr.bary_corr_kms) / c))


def sky_frequency_mhz(v_lsr_kms, factor) -> np.ndarray:
    """Topocentric frequency (MHz) of HI at LSR radio velocity ``v_lsr_kms`` (Doppler ``factor``)."""
    return HI_REST_FREQUENCY_MHZ * (1.0 - np.asarray(v_lsr_kms, dtype=float) / SPEED_OF_LIGHT_KMS) * factor


def lsr_velocity_of_sky_kms(freq_mhz, factor) -> np.ndarray:
    """The inverse: LSR radio velocity (km/s) seen at topocentric ``freq_mhz``."""
    return SPEED_OF_LIGHT_KMS * (1.0 - np.asarray(freq_mhz, dtype=float) / factor / HI_REST_FREQUENCY_MHZ)


@dataclass(frozen=True)
class ReceiverView:
    """The expected spectrum as one receiver setting sees it (frequencies MHz, velocities km/s)."""

    frequency_mhz: np.ndarray  # topocentric, one per velocity of the spectrum
    lsr_corr_kms: float
    factor: float  # f_topocentric / f_LSR (``doppler_factor``)
    advice: TuningAdvice  # the setting (centre) and the line span it was made for
    band_low_mhz: float
    band_high_mhz: float
    usable_low_mhz: float
    usable_high_mhz: float
    emission_fits: bool  # every velocity with T_B above 1 K lies in the usable band
    spike_v_lsr_kms: float  # LSR velocity at the centre frequency
    spike_tb_k: float  # model brightness there
    line_free_kms: tuple[tuple[float, float], ...]  # LSR velocity ranges for the baseline fit
    line_free_mhz: tuple[tuple[float, float], ...]


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    padded = np.concatenate([[False], mask, [False]])
    edges = np.flatnonzero(np.diff(padded.astype(np.int8)))
    return list(zip(edges[0::2], edges[1::2] - 1))


def receiver_view(site: Site, spectrum: Spectrum, row: int, mjd_utc: float,
                  solar_motion: str = "standard", centre_mhz: float | None = None,
                  rotation=None) -> ReceiverView:
    """Row ``row`` of ``spectrum`` seen from ``site`` at ``mjd_utc``, with the receiver tuned as
    ``hiplan tune`` advises for that position (the disc-HI envelope of ``galaxy``) or to
    ``centre_mhz``."""
    l_deg, b_deg = float(spectrum.l_deg[row]), float(spectrum.b_deg[row])
    ra, dec = galactic_to_icrs_deg(l_deg, b_deg)
    ra, dec = float(np.atleast_1d(ra)[0]), float(np.atleast_1d(dec)[0])
    corr = float(velocity_corrections(site.latitude_deg, site.longitude_deg, site.height_m, ra,
                                      dec, mjd_utc, solar_motion).lsr_corr_kms[0])
    factor = float(doppler_factor(site, ra, dec, mjd_utc, solar_motion)[0])
    env = hi_velocity_envelope(l_deg, b_deg, rotation) if rotation is not None else \
        hi_velocity_envelope(l_deg, b_deg)
    advice = tuning_advice(float(env.v_min_kms), float(env.v_max_kms), corr, corr, site.receiver)
    if centre_mhz is not None:
        from .spectral import tuning_at_centre
        advice = tuning_at_centre(advice, centre_mhz)
    centre = advice.centre_mhz
    half_band, half_usable = advice.bandwidth_mhz / 2.0, advice.usable_bandwidth_mhz / 2.0
    freq = sky_frequency_mhz(spectrum.velocity_kms, factor)
    tb = spectrum.tb_k[row]
    lo_use, hi_use = centre - half_usable, centre + half_usable
    seen = tb > EMISSION_LEVEL_K
    fits = bool(np.all((freq[seen] >= lo_use) & (freq[seen] <= hi_use))) if seen.any() else True
    # A fine frequency grid across the usable band for the line-free ranges.
    grid = np.linspace(lo_use, hi_use, 2001)
    v_grid = lsr_velocity_of_sky_kms(grid, factor)
    tb_grid = np.interp(v_grid, spectrum.velocity_kms, tb, left=0.0, right=0.0)
    free = (tb_grid < LINE_FREE_K) & (np.abs(grid - centre) > SPIKE_GUARD_MHZ)
    runs = [(a, b) for a, b in _runs(free) if b > a]
    free_mhz = tuple((float(grid[a]), float(grid[b])) for a, b in runs)
    free_kms = tuple(sorted((float(min(v_grid[a], v_grid[b])), float(max(v_grid[a], v_grid[b])))
                            for a, b in runs))
    spike_v = float(lsr_velocity_of_sky_kms(centre, factor))
    return ReceiverView(
        frequency_mhz=freq, lsr_corr_kms=corr, factor=factor, advice=advice,
        band_low_mhz=centre - half_band, band_high_mhz=centre + half_band,
        usable_low_mhz=lo_use, usable_high_mhz=hi_use, emission_fits=fits,
        spike_v_lsr_kms=spike_v,
        spike_tb_k=float(np.interp(spike_v, spectrum.velocity_kms, tb, left=0.0, right=0.0)),
        line_free_kms=free_kms, line_free_mhz=tuple(sorted(free_mhz)))


def minutes_for_snr(peak_tb_k, tsys_k: float, channel_width_khz: float, snr: float = DEFAULT_SNR,
                    switching_factor: float = 1.0) -> np.ndarray:
    """Integration (minutes) for ``snr`` on a line peak of ``peak_tb_k`` (K) per channel.

    Radiometer equation (Dicke 1946): sigma = k T_sys / sqrt(dnu tau), so
    tau = (k T_sys snr / (peak sqrt(dnu)))^2. Inf where the peak is 0.
    """
    peak = np.asarray(peak_tb_k, dtype=float)
    width_hz = channel_width_khz * 1e3
    with np.errstate(divide="ignore"):
        tau_s = (switching_factor * tsys_k * snr / np.where(peak > 0, peak, 0.0)) ** 2 / width_hz
    return tau_s / 60.0


def snr_after(peak_tb_k, tsys_k: float, channel_width_khz: float, minutes) -> np.ndarray:
    """Signal-to-noise ratio on the peak per channel after ``minutes`` of integration."""
    minutes = np.asarray(minutes, dtype=float)
    rms = np.where(minutes > 0, radiometer_rms_k(tsys_k, channel_width_khz * 1e3,
                                                 np.maximum(minutes, 1e-9) * 60.0), np.inf)
    return np.asarray(peak_tb_k, dtype=float) / rms


def spectrum_summaries(spectrum: Spectrum) -> list[dict]:
    """Per row: peak_tb_k, peak_velocity_kms, v_min_kms / v_max_kms (T_B above 1 K)."""
    lo, hi = spectrum.emission_range_kms()
    peak, at = spectrum.peak_tb_k, spectrum.peak_velocity_kms
    return [{"peak_tb_k": round(float(peak[row]), 2),
             "peak_velocity_kms": round(float(at[row]), 1),
             "v_min_kms": None if np.isnan(lo[row]) else round(float(lo[row]), 1),
             "v_max_kms": None if np.isnan(hi[row]) else round(float(hi[row]), 1)}
            for row in range(peak.size)]



# ------------------------------------------------------------------ plans

# Velocities stored in plans: every 2 km/s (our choice: plots and the brief need no more).
PLAN_VELOCITY_KMS = np.arange(-200.0, 200.0 + 1.0, 2.0)
# A plan's spectra per setting: at most this many longitudes of what it records (our choice:
# enough to see how the line changes along the recorded strip, few enough to read a plot).
CURVES_PER_GROUP = 4

CAUTION = ("A smooth model of the Galaxy's HI disc (circular rotation, exponential flared "
           "disc, one spin temperature): real spectra show clouds, spiral arms, absorption "
           "against bright continuum and gas the model leaves out. Use it to check the line is "
           "about where and about as strong as expected, not as a template.")


def _representative(positions: list[tuple[float, float]], most: int = CURVES_PER_GROUP):
    """Up to ``most`` distinct (l, b) positions, spread evenly through them in l, then b."""
    values = sorted({(round(float(l), 3), round(float(b), 3)) for l, b in positions})
    if len(values) <= most:
        return values
    pick = np.linspace(0, len(values) - 1, most).round().astype(int)
    return [values[i] for i in pick]


def group_spectra(groups: list[dict], beamwidth_deg: float, model: DiscModel) -> list[dict]:
    """Expected spectra for groups of positions (one plot each in the brief).

    ``groups``: dicts with ``label`` and ``positions`` ([(l, b), ...]); each gets ``curves``
    (l, b, tb_k and the summary) at up to ``CURVES_PER_GROUP`` positions, on
    ``PLAN_VELOCITY_KMS``. One model evaluation for all groups.
    """
    chosen = [_representative(g["positions"]) for g in groups]
    flat = [p for ps in chosen for p in ps]
    if not flat:
        return []
    spec = expected_spectra([p[0] for p in flat], [p[1] for p in flat], beamwidth_deg,
                            PLAN_VELOCITY_KMS, model)
    summaries = spectrum_summaries(spec)
    out, k = [], 0
    for g, ps in zip(groups, chosen):
        curves = []
        for l_deg, b_deg in ps:
            curves.append({"l_deg": l_deg, "b_deg": b_deg,
                           "tb_k": [round(float(x), 2) for x in spec.tb_k[k]],
                           **summaries[k]})
            k += 1
        out.append({**{key: v for key, v in g.items() if key != "positions"}, "curves": curves})
    return out


def bin_expectations(l_bins, bin_width_deg: float, beamwidth_deg: float, model: DiscModel,
                     tsys_k: float, channel_width_khz: float, minutes_before, minutes_after,
                     days: float, snr: float = DEFAULT_SNR) -> list[dict]:
    """Per longitude bin (at its centre, b = 0): the expected peak and emission range, the
    signal-to-noise ratio on the peak before and after a plan, and the days at the plan's
    rate to reach ``snr`` (None when the plan adds nothing to the bin)."""
    starts = np.asarray(list(l_bins), dtype=float)
    if starts.size == 0:
        return []
    spec = expected_spectra(starts + bin_width_deg / 2.0, np.zeros(starts.size), beamwidth_deg,
                            PLAN_VELOCITY_KMS, model)
    peak = spec.peak_tb_k
    need_min = minutes_for_snr(peak, tsys_k, channel_width_khz, snr)
    before = np.asarray(minutes_before, dtype=float)
    after = np.asarray(minutes_after, dtype=float)
    snr_before = snr_after(peak, tsys_k, channel_width_khz, before)
    snr_then = snr_after(peak, tsys_k, channel_width_khz, after)
    rate = (after - before) / days
    out = []
    for i, (start, summary) in enumerate(zip(starts, spectrum_summaries(spec))):
        remaining = max(need_min[i] - after[i], 0.0)
        days_more = (0.0 if remaining == 0 else (remaining / rate[i] if rate[i] > 0 else None))
        out.append({"l_deg": float(start), **summary,
                    "snr_before": round(float(snr_before[i]), 1),
                    "snr_after": round(float(snr_then[i]), 1),
                    "minutes_for_snr": round(float(need_min[i]), 2),
                    "days_to_snr": None if days_more is None else round(float(days_more), 1)})
    return out
