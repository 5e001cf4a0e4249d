"""Frequency/velocity conversions and tuning advice against hand-worked values and astropy."""
import math

import astropy.units as u
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from planner.errors import UserError
from planner.site import Receiver
from planner.spectral import (
    channel_velocity_width_kms,
    radio_frequency_mhz,
    radio_velocity_kms,
    shared_centre_mhz,
    topocentric_frequency_mhz,
    tuning_advice,
    tuning_at_centre,
)

# HI rest frequency, Hellwig et al. 1970, IEEE Trans. Instrum. Meas. IM-19, 200.
F0_MHZ = 1420.405751768
C_KMS = 299792.458  # SI definition of the metre
# f0 / c = 1420.405751768 / 299792.458 = 0.004737963594 MHz per km/s.
MHZ_PER_KMS = 0.004737963594
# Float64 at ~1420 MHz resolves 2e-13 MHz; 1e-9 MHz (1 mHz) leaves room for a few
# roundings while staying far below any tuning step that matters.
FLOAT_MHZ = 1e-9

HOLLOWMERE_RX = Receiver(bandwidth_mhz=2.4, channels=1024, tsys_k=110.0)


def test_hand_worked_plus_100_kms():
    # v = +100 km/s: 100 / 299792.458 = 3.3356409520e-4;
    # 1420.405751768 * 3.3356409520e-4 = 0.4737963594 MHz;
    # f = 1420.405751768 - 0.4737963594 = 1419.9319554086 MHz.
    # Tolerance: the hand value is carried to 10 decimals (1e-10 MHz).
    assert radio_frequency_mhz(100.0) == pytest.approx(1419.9319554086, abs=2e-10)
    assert radio_velocity_kms(1419.9319554086) == pytest.approx(100.0, abs=1e-7)


def test_agrees_with_astropy_doppler_radio():
    # astropy's radio-convention equivalency is an independent implementation;
    # both are the same closed formula, so agreement to float rounding (1e-9 MHz).
    v_kms = np.array([-300.0, -50.0, 0.0, 12.5, 250.0])
    expected = (v_kms * u.km / u.s).to(u.MHz, equivalencies=u.doppler_radio(F0_MHZ * u.MHz)).value
    assert np.allclose(radio_frequency_mhz(v_kms), expected, rtol=0, atol=FLOAT_MHZ)
    back = (expected * u.MHz).to(u.km / u.s, equivalencies=u.doppler_radio(F0_MHZ * u.MHz)).value
    # 1e-9 MHz corresponds to 2e-7 km/s; allow 1e-6 km/s.
    assert np.allclose(radio_velocity_kms(expected), back, rtol=0, atol=1e-6)


@settings(max_examples=200, deadline=None)
@given(st.floats(-1000.0, 1000.0))
def test_round_trip_velocity(v_kms):
    # Two float operations at ~1e3 scale: rounding below 1e-8 km/s.
    assert radio_velocity_kms(radio_frequency_mhz(v_kms)) == pytest.approx(v_kms, abs=1e-8)


@settings(max_examples=200, deadline=None)
@given(st.floats(1410.0, 1430.0))
def test_round_trip_frequency(f_mhz):
    assert radio_frequency_mhz(radio_velocity_kms(f_mhz)) == pytest.approx(f_mhz, abs=FLOAT_MHZ)


def test_higher_velocity_is_lower_frequency():
    v_kms = np.linspace(-400.0, 400.0, 81)
    f_mhz = radio_frequency_mhz(v_kms)
    assert np.all(np.diff(f_mhz) < 0)
    assert radio_frequency_mhz(0.0) == F0_MHZ


def test_topocentric_frequency_hand_worked():
    # lsr_corr = +20 km/s is added to the topocentric velocity, so a line at
    # v_lsr = +100 km/s is seen at v_topo = 100 - 20 = 80 km/s:
    # f = 1420.405751768 - 80 * 0.004737963594 = 1420.405751768 - 0.3790370875 = 1420.0267146805.
    # Tolerance: MHZ_PER_KMS is rounded at 1e-12, times 80 -> < 1e-10 MHz.
    assert topocentric_frequency_mhz(100.0, 20.0) == pytest.approx(1420.0267146805, abs=2e-10)
    assert topocentric_frequency_mhz(100.0, 20.0) == radio_frequency_mhz(80.0)


def test_channel_width_hand_worked():
    # 2.4 MHz / 1024 channels = 2.34375 kHz; dv = c dnu / f0
    # = 299792.458 * 0.00234375 / 1420.405751768 = 702.6385734 / 1420.405751768 = 0.4946745 km/s.
    # Tolerance: the hand value is carried to 7 decimals.
    assert HOLLOWMERE_RX.channel_width_khz == 2.34375
    assert channel_velocity_width_kms(2.34375) == pytest.approx(0.4946745, abs=1e-7)


def test_channel_width_rejects_non_positive():
    with pytest.raises(UserError, match="channel_width_khz"):
        channel_velocity_width_kms(0.0)


def test_line_span_covers_every_combination():
    advice = tuning_advice(-120.0, 80.0, -15.0, 25.0, HOLLOWMERE_RX)
    v_kms, corr_kms = np.meshgrid(np.linspace(-120, 80, 21), np.linspace(-15, 25, 21))
    f_mhz = topocentric_frequency_mhz(v_kms, corr_kms)
    # Corners are the extremes; a grid including them must reproduce low/high exactly
    # up to float rounding.
    assert f_mhz.min() == pytest.approx(advice.line_low_mhz, abs=FLOAT_MHZ)
    assert f_mhz.max() == pytest.approx(advice.line_high_mhz, abs=FLOAT_MHZ)
    # Lowest frequency: the largest LSR velocity with the smallest correction.
    assert advice.line_low_mhz == pytest.approx(F0_MHZ - (80 + 15) * MHZ_PER_KMS, abs=1e-9)


def test_offset_tuning_hand_worked():
    # v_lsr -100..+50, lsr_corr -10..+10 -> v_topo -110..+60 km/s.
    # Line: f0 - 60 k .. f0 + 110 k with k = 0.004737963594: span = 170 k = 0.8054538 MHz.
    # Usable = 2.4 * (1 - 2 * 0.1) = 1.92 MHz, half = 0.96 MHz; span + guard = 0.8554538 <= 0.96,
    # so the centre goes below the line, in [f0 + 110 k - 0.96, f0 - 60 k - 0.05];
    # its midpoint is f0 + 25 k - 0.505 = 1420.405751768 + 0.1184491 - 0.505 = 1420.0192009,
    # rounded to 1 kHz: 1420.019 MHz.
    advice = tuning_advice(-100.0, 50.0, -10.0, 10.0, HOLLOWMERE_RX)
    assert advice.line_span_mhz == pytest.approx(0.8054538, abs=1e-7)  # hand value to 7 decimals
    assert advice.usable_bandwidth_mhz == pytest.approx(1.92, abs=FLOAT_MHZ)
    assert advice.centre_mhz == pytest.approx(1420.019, abs=FLOAT_MHZ)
    assert advice.fits and advice.spike_clear
    # margin = 1.92 - 0.8054538 = 1.1145462 MHz.
    assert advice.margin_mhz == pytest.approx(1.1145462, abs=1e-7)
    assert advice.offset_mhz < 0  # centre below the line
    # Spike at v_topo = c (f0 - 1420.019) / f0 = 0.386751768 / 0.004737963594 = 81.628 km/s;
    # LSR 71.63 .. 91.63 km/s, outside -100..+50. Hand value to 3 decimals.
    assert advice.spike_v_lsr_min_kms == pytest.approx(71.628, abs=1e-3)
    assert advice.spike_v_lsr_max_kms == pytest.approx(91.628, abs=1e-3)


def test_centred_when_half_band_too_small_hand_worked():
    # v_lsr -150..+150, corr -20..+20 -> v_topo -170..+170, span = 340 k = 1.6109076 MHz.
    # Fits 1.92 MHz (margin 0.3090924 MHz) but not half of it, so the line is centred:
    # midpoint = f0 exactly, rounded to 1 kHz = 1420.406 MHz.
    # Spike at v_topo = (1420.405751768 - 1420.406) / k = -0.000248232 / 0.004737963594 = -0.05239 km/s,
    # i.e. LSR -20.052 .. +19.948 km/s.
    advice = tuning_advice(-150.0, 150.0, -20.0, 20.0, HOLLOWMERE_RX)
    assert advice.fits and not advice.spike_clear
    assert advice.centre_mhz == pytest.approx(1420.406, abs=FLOAT_MHZ)
    assert advice.margin_mhz == pytest.approx(0.3090924, abs=1e-7)  # hand value to 7 decimals
    assert advice.spike_v_lsr_min_kms == pytest.approx(-20.05239, abs=1e-5)
    assert advice.spike_v_lsr_max_kms == pytest.approx(19.94761, abs=1e-5)
    assert any("-20.1 to 19.9 km/s" in note for note in advice.notes)


def test_guard_decides_between_offset_and_centred():
    # v_lsr -100..+96, no correction: span = 196 k = 0.9286409 MHz; half the usable band 0.96 MHz.
    # Guard 0.05: 0.9786 > 0.96, the line must be centred. Guard 0.02: 0.9486 <= 0.96, offset:
    # centre in [f0 + 100 k - 0.96, f0 - 96 k - 0.02], midpoint f0 + 2 k - 0.49
    # = 1420.405751768 + 0.0094759 - 0.49 = 1419.9252277, rounded to 1 kHz: 1419.925 MHz.
    centred = tuning_advice(-100.0, 96.0, 0.0, 0.0, HOLLOWMERE_RX, spike_guard_mhz=0.05)
    assert centred.fits and not centred.spike_clear
    offset = tuning_advice(-100.0, 96.0, 0.0, 0.0, HOLLOWMERE_RX, spike_guard_mhz=0.02)
    assert offset.spike_clear
    assert offset.centre_mhz == pytest.approx(1419.925, abs=FLOAT_MHZ)
    assert offset.centre_mhz <= offset.line_low_mhz - 0.02


def test_tight_fit_keeps_line_inside_after_rounding():
    # Usable band exactly the span plus 0.4 kHz: rounding the centre to 1 kHz could push an
    # edge out, so the advice must fall back to a finer step and keep both edges inside.
    span_mhz = 200 * MHZ_PER_KMS
    rx = Receiver(bandwidth_mhz=(span_mhz + 0.0004) / 0.8, channels=1024, tsys_k=100.0)
    a = tuning_advice(-100.0, 100.0, 3.3, 3.3, rx)
    half_mhz = a.usable_bandwidth_mhz / 2
    # v_topo -103.3..+96.7: midpoint f0 + 3.3 k = 1420.405751768 + 0.0156353 = 1420.4213870 MHz;
    # centres allowed within +-0.2 kHz of it, which holds no whole kHz, so 1 Hz steps: 1420.421387.
    assert a.centre_mhz == pytest.approx(1420.421387, abs=FLOAT_MHZ)
    assert a.fits and a.margin_mhz == pytest.approx(0.0004, abs=1e-8)  # MHZ_PER_KMS rounding
    assert a.centre_mhz - half_mhz <= a.line_low_mhz + FLOAT_MHZ
    assert a.line_high_mhz <= a.centre_mhz + half_mhz + FLOAT_MHZ


def test_does_not_fit_shortfall_hand_worked():
    # v_topo -220..+220: span = 440 k = 440 * 0.004737963594 = 2.0847040 MHz;
    # usable 1.92 MHz, so short by 2.0847040 - 1.92 = 0.1647040 MHz.
    advice = tuning_advice(-200.0, 200.0, -20.0, 20.0, HOLLOWMERE_RX)
    assert not advice.fits
    assert advice.margin_mhz == pytest.approx(-0.1647040, abs=1e-7)  # hand value to 7 decimals
    assert not advice.spike_clear
    assert any("short by 0.165 MHz" in note for note in advice.notes)
    # Needed bandwidth = 2.0847040 / 0.8 = 2.6058800 MHz.
    assert any("2.606 MHz" in note for note in advice.notes)


def test_edge_fraction_zero_uses_whole_band():
    # A single frequency f0 with no roll-off: half band 1.2 MHz, centre in [f0 - 1.2, f0 - 0.05],
    # midpoint f0 - 0.625 = 1419.780751768, rounded to 1 kHz: 1419.781 MHz.
    advice = tuning_advice(0.0, 0.0, 0.0, 0.0, HOLLOWMERE_RX, edge_fraction=0.0)
    assert advice.usable_bandwidth_mhz == 2.4
    assert advice.centre_mhz == pytest.approx(1419.781, abs=FLOAT_MHZ)
    assert advice.spike_clear


@settings(max_examples=300, deadline=None)
@given(
    v_lo=st.floats(-400.0, 400.0), v_width=st.floats(0.0, 600.0),
    corr_lo=st.floats(-40.0, 40.0), corr_width=st.floats(0.0, 60.0),
    bandwidth_mhz=st.floats(0.25, 10.0), channels=st.integers(1, 8192),
    edge=st.floats(0.0, 0.3), guard_mhz=st.floats(0.0, 0.2),
)
def test_spike_and_fit_properties(v_lo, v_width, corr_lo, corr_width, bandwidth_mhz, channels,
                                  edge, guard_mhz):
    rx = Receiver(bandwidth_mhz=bandwidth_mhz, channels=channels, tsys_k=100.0)
    a = tuning_advice(v_lo, v_lo + v_width, corr_lo, corr_lo + corr_width, rx,
                      edge_fraction=edge, spike_guard_mhz=guard_mhz)
    assert a.line_low_mhz <= a.line_high_mhz
    assert a.margin_mhz == pytest.approx(a.usable_bandwidth_mhz - a.line_span_mhz, abs=FLOAT_MHZ)
    assert a.fits == (a.margin_mhz >= 0)
    if a.spike_clear:
        # The documented side: centre below the line by at least the guard.
        assert a.centre_mhz <= a.line_low_mhz - guard_mhz
    else:
        assert a.line_low_mhz - guard_mhz < a.centre_mhz < a.line_high_mhz + guard_mhz
    half_mhz = a.usable_bandwidth_mhz / 2
    if a.line_span_mhz + guard_mhz <= half_mhz - FLOAT_MHZ:
        assert a.spike_clear
    if a.fits:
        assert a.centre_mhz - half_mhz <= a.line_low_mhz + FLOAT_MHZ
        assert a.line_high_mhz <= a.centre_mhz + half_mhz + FLOAT_MHZ
    else:
        # Not fitting: centred on the line to the nearest kHz.
        assert abs(a.offset_mhz) <= 0.5e-3 + FLOAT_MHZ
    # Spike LSR velocities are the centre's topocentric velocity plus the correction range.
    v_spike_kms = C_KMS * (F0_MHZ - a.centre_mhz) / F0_MHZ
    assert a.spike_v_lsr_min_kms == pytest.approx(v_spike_kms + a.lsr_corr_min_kms, abs=1e-6)
    assert a.channel_width_khz == pytest.approx(bandwidth_mhz * 1e3 / channels, rel=1e-12)


def test_shared_centre_hand_worked():
    # a: v -100..+50, corr -10..+10 -> line f0 - 60 k .. f0 + 110 k = 1420.12147395 .. 1420.92692768
    #    (k = 0.004737963594 MHz per km/s); alone it is tuned to 1420.019 (test above), spike clear.
    # b: corr up to +14 -> line up to f0 + 114 k = 1420.94587962 MHz; span 174 k + 0.05 < 0.96: clear.
    # Shared: the centre must keep both lines inside +-0.96 MHz and the spike 0.05 MHz below both:
    # [1420.94587962 - 0.96, 1420.12147395 - 0.05] = [1419.98587962, 1420.07147395];
    # midpoint 1420.02867678, on the 1 kHz grid 1420.029 MHz.
    a = tuning_advice(-100.0, 50.0, -10.0, 10.0, HOLLOWMERE_RX)
    b = tuning_advice(-100.0, 50.0, -10.0, 14.0, HOLLOWMERE_RX)
    assert shared_centre_mhz([a]) == pytest.approx(a.centre_mhz, abs=FLOAT_MHZ)
    assert shared_centre_mhz([a, b]) == pytest.approx(1420.029, abs=FLOAT_MHZ)
    # c: corr +60..+80 -> v_topo -180..-10 -> line f0 + 10 k .. f0 + 180 k = 1420.4531 .. 1421.2586:
    # the band must start below 1421.2586 - 0.96 = 1420.2986 but the spike must stay under
    # 1420.1215 - 0.05 for a: no common centre.
    c = tuning_advice(-100.0, 50.0, 60.0, 80.0, HOLLOWMERE_RX)
    assert shared_centre_mhz([a, c]) is None
    # Lines that do not fit even alone add no condition: a stays served.
    wide = tuning_advice(-300.0, 300.0, -20.0, 20.0, HOLLOWMERE_RX)
    assert not wide.fits and shared_centre_mhz([a, wide]) == pytest.approx(a.centre_mhz, abs=FLOAT_MHZ)
    with pytest.raises(ValueError):
        shared_centre_mhz([])


def test_tuning_at_centre_hand_worked():
    a = tuning_advice(-100.0, 50.0, -10.0, 10.0, HOLLOWMERE_RX)
    shared = tuning_at_centre(a, 1420.029)
    # Band 1420.029 +- 0.96 holds 1420.1215 .. 1420.9269; spike 0.0925 MHz below the line.
    assert shared.fits and shared.spike_clear and shared.centre_mhz == 1420.029
    assert shared.margin_mhz == pytest.approx(a.margin_mhz, abs=FLOAT_MHZ)  # spare bandwidth kept
    # Spike at v_topo = (f0 - 1420.029) / k = 0.376751768 / 0.004737963594 = 79.518 km/s.
    assert shared.spike_v_lsr_min_kms == pytest.approx(79.518 - 10.0, abs=1e-3)
    # Centred on the line: still inside the band, the spike inside the line.
    inside = tuning_at_centre(a, 1420.5)
    assert inside.fits and not inside.spike_clear
    # 1421.1 - 0.96 = 1420.14 > 1420.12147395: the line's low end sticks out by 0.01852605 MHz.
    out = tuning_at_centre(a, 1421.1)
    assert not out.fits and out.margin_mhz == pytest.approx(-0.01852605, abs=1e-7)
    assert out.notes[0] == "Tune the receiver centre to 1421.100 MHz."


@settings(max_examples=200, deadline=None)
@given(v_lo=st.floats(-400.0, 400.0), v_width=st.floats(0.0, 600.0),
       corr_lo=st.floats(-40.0, 40.0), corr_width=st.floats(0.0, 60.0),
       bandwidth_mhz=st.floats(0.25, 10.0))
def test_one_advice_shares_its_own_centre(v_lo, v_width, corr_lo, corr_width, bandwidth_mhz):
    rx = Receiver(bandwidth_mhz=bandwidth_mhz, channels=1024, tsys_k=100.0)
    a = tuning_advice(v_lo, v_lo + v_width, corr_lo, corr_lo + corr_width, rx)
    assert shared_centre_mhz([a]) == a.centre_mhz
    same = tuning_at_centre(a, a.centre_mhz)
    assert (same.fits, same.spike_clear) == (a.fits, a.spike_clear)
    if a.fits:
        assert same.margin_mhz == pytest.approx(a.margin_mhz, abs=FLOAT_MHZ)
    else:
        # The worse of the shortfall and the overhang past one edge: the 1 kHz rounding of a
        # centred line can push one end out by up to 0.5 kHz more than half the shortfall.
        assert same.margin_mhz <= a.margin_mhz + FLOAT_MHZ


@pytest.mark.parametrize(
    "kwargs, rx, name",
    [
        ({}, Receiver(bandwidth_mhz=-2.4, channels=1024, tsys_k=110), "bandwidth_mhz"),
        ({}, Receiver(bandwidth_mhz=2.4, channels=0, tsys_k=110), "channels"),
        ({"v_lsr_min_kms": 50.0, "v_lsr_max_kms": -50.0}, HOLLOWMERE_RX, "v_lsr_min_kms"),
        ({"lsr_corr_min_kms": 5.0, "lsr_corr_max_kms": -5.0}, HOLLOWMERE_RX, "lsr_corr_min_kms"),
        ({"edge_fraction": 0.5}, HOLLOWMERE_RX, "edge_fraction"),
        ({"spike_guard_mhz": -0.1}, HOLLOWMERE_RX, "spike_guard_mhz"),
        ({"v_lsr_max_kms": math.nan}, HOLLOWMERE_RX, "v_lsr_max_kms"),
    ],
)
def test_bad_input_names_parameter(kwargs, rx, name):
    args = {"v_lsr_min_kms": -100.0, "v_lsr_max_kms": 100.0,
            "lsr_corr_min_kms": -10.0, "lsr_corr_max_kms": 10.0, "receiver": rx}
    args.update(kwargs)
    with pytest.raises(UserError, match=name):
        tuning_advice(**args)
