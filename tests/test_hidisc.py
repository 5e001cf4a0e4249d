"""The HI disc model against published terminal velocities, peaks and a hand-worked limit."""
import numpy as np
import pytest

from planner.galaxy import PRESETS
from planner.hidisc import (COLUMN_PER_TAU_KKMS, KPC_CM, DiscModel, expected_spectra,
                            terminal_edge_kms)

# McClure-Griffiths & Dickey 2016 (ApJ 831, 124; VizieR J/ApJ/831/124): first-quadrant HI
# terminal velocities, averaged in 2-degree bins of longitude (values as binned in a public
# copy of the catalogue, not re-derived from it here).
MD16_FIRST_QUADRANT_KMS = {31: 113.67, 35: 101.03, 41: 79.18, 45: 71.22, 51: 68.42, 55: 50.48,
                           61: 38.55, 65: 27.52, 67: 21.87}


def md07_terminal_kms(l_deg):
    """McClure-Griffiths & Dickey 2007 (ApJ 671, 427) joint rotation curve
    Theta/Theta0 = 0.186 R/R0 + 0.887 (R0 = 8.5 kpc, Theta0 = 220 km/s, valid 3-8 kpc), turned
    into the terminal velocity Theta(R0 |sin l|) - Theta0 |sin l| with the sign of sin l."""
    s = np.sin(np.radians(l_deg))
    return np.sign(s) * 220.0 * (0.887 + 0.186 * np.abs(s) - np.abs(s))


def test_first_quadrant_edge_above_the_tangent_velocity():
    # Flat IAU 1985 curve (Kerr & Lynden-Bell 1986): v_t = Theta0 (1 - sin l), Theta0 = 220.
    l_deg = np.arange(20.0, 71.0, 5.0)
    spec = expected_spectra(l_deg, np.zeros_like(l_deg), 0.0, model=DiscModel())
    _, v_max = spec.emission_range_kms()
    tangent = 220.0 * (1.0 - np.sin(np.radians(l_deg)))
    above = v_max - tangent
    print("1 K edge above Theta0 (1 - sin l):", dict(zip(l_deg, above.round(1))))
    # The edge is the tangent-point gas's Gaussian wing: 0-30 km/s for a 9 km/s dispersion.
    assert np.all(above >= 0.0) and np.all(above <= 30.0)


@pytest.mark.parametrize("rotation", ["iau1985", "reid2019"])
def test_terminal_edge_matches_mcclure_griffiths_dickey_2016(rotation):
    l_deg = np.array(sorted(MD16_FIRST_QUADRANT_KMS), dtype=float)
    spec = expected_spectra(l_deg, np.zeros_like(l_deg), 0.0, model=DiscModel(rotation=PRESETS[rotation]))
    edge = np.array([terminal_edge_kms(spec, i, +1) for i in range(l_deg.size)])
    diff = edge - np.array([MD16_FIRST_QUADRANT_KMS[int(x)] for x in l_deg])
    print(rotation, "edge - MD16:", dict(zip(l_deg.astype(int), diff.round(1))))
    # 15 km/s: streaming motions of ~10 km/s peak to peak (MD07) that a circular model lacks,
    # plus the 1 km/s velocity grid.
    assert np.max(np.abs(diff)) <= 15.0


def test_fourth_quadrant_edge_matches_mcclure_griffiths_dickey_2007():
    # |sin l| >= 0.5 (tangent points at R >= 4.25 kpc), the radii of the first-quadrant data
    # above; nearer l = 0 the bar's non-circular motions rule (l = 335, R = 3.6 kpc, is 16.5
    # km/s off with the flat curve, whose inner rotation is too fast).
    l_deg = np.arange(290.0, 331.0, 5.0)
    spec = expected_spectra(l_deg, np.zeros_like(l_deg), 0.0, model=DiscModel())
    edge = np.array([terminal_edge_kms(spec, i, -1) for i in range(l_deg.size)])
    diff = edge - md07_terminal_kms(l_deg)
    print("edge - MD07:", dict(zip(l_deg.astype(int), diff.round(1))))
    assert np.max(np.abs(diff)) <= 15.0  # as for the first quadrant


def test_standard_region_peaks_within_a_factor_1_5_of_the_published_values():
    # Published peaks (from memory; Williams 1973, A&AS 8, 505; Kalberla, Mebold & Reich 1982,
    # A&A 106, 190): S7 100 K, S8 76 K, S9 85 K, for a beam of about 0.6 deg.
    spec = expected_spectra([132.0, 207.0, 356.0], [-1.0, -15.0, -4.0], 0.6)
    s7, s8, s9 = spec.peak_tb_k
    print(f"model peaks, 0.6 deg beam: S7 {s7:.1f} K, S8 {s8:.1f} K, S9 {s9:.1f} K")
    # A smooth model against single pointings on clouds: a factor 1.5 either way.
    assert 100.0 / 1.5 <= s7 <= 100.0 * 1.5
    assert 85.0 / 1.5 <= s9 <= 85.0 * 1.5
    assert s8 > 0  # reported only: 15 deg off the plane the smooth disc is too thin


def test_optically_thin_limit_gives_the_column_density():
    # With a very hot gas (tau << 1) the line integral is N_HI / C: hand-check with the density
    # integrated straight along the sight line (l = 90, b = 30).
    model = DiscModel(spin_temperature_k=1e7)
    spec = expected_spectra([90.0], [30.0], 0.0, np.arange(-400.0, 400.5, 1.0), model)
    integral = spec.tb_k[0].sum() * 1.0  # K km/s
    d = np.arange(0.0, 60.0, 0.001) + 0.0005
    r = np.hypot(d * np.cos(np.radians(30)) - 8.5 * np.cos(np.radians(90)), 8.5)
    n = model.density_cm3(r, d * np.sin(np.radians(30)))
    column = n.sum() * 0.001 * KPC_CM
    # 2 %: the model's 0.1 kpc steps against this 1 pc sum.
    assert integral * COLUMN_PER_TAU_KKMS == pytest.approx(column, rel=0.02)


def test_saturation_and_inputs():
    spec = expected_spectra([30.0], [0.0], 5.0)
    assert spec.peak_tb_k[0] < DiscModel().spin_temperature_k
    with pytest.raises(Exception, match="latitude"):
        expected_spectra([30.0], [95.0], 5.0)
    with pytest.raises(Exception, match="beamwidth"):
        expected_spectra([30.0], [0.0], -1.0)


def test_spectra_kept_for_reuse_are_the_ones_computed_afresh():
    """Directions already computed are taken from the cache; a mixed request (some kept, some
    new, one twice, in another order) gives what a cold computation gives (1e-12 K: the same
    sums, batched differently)."""
    import planner.hidisc as hidisc
    l = np.array([10.5, 47.5, 133.5, 215.5, 300.5])
    b = np.array([0.0, 1.0, -2.0, 0.0, 0.5])
    hidisc._cache.clear()
    cold = expected_spectra(l, b, 3.0).tb_k
    partly = expected_spectra(np.r_[l[[3, 0]], 77.5, l[3]], np.r_[b[[3, 0]], 0.0, b[3]], 3.0).tb_k
    assert np.abs(partly[[0, 1, 3]] - cold[[3, 0, 3]]).max() < 1e-12
    hidisc._cache.clear()
    alone = expected_spectra([77.5], [0.0], 3.0).tb_k
    assert np.abs(partly[2] - alone[0]).max() < 1e-12
    other_beam = expected_spectra(l[:1], b[:1], 1.0).tb_k  # another beam: not the kept row
    assert np.abs(other_beam[0] - cold[0]).max() > 0.01
