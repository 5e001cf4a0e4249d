"""The expected 21-cm spectrum: a smooth model of the Milky Way's HI disc, seen through a beam.

What a receiver should show toward galactic (l, b): brightness temperature against LSR
velocity, from

* rotation: circular orbits with a rotation curve of ``planner.galaxy`` (the presets there);
  the line-of-sight velocity of gas at distance d is ``galaxy.lsr_velocity_kms``;
* the gas density n(R, z) = n_mid(R) exp(-z^2 / (2 h(R)^2)) with an exponential fall of the
  mid-plane density beyond the Sun, n_mid = n0 exp(-(R - R0) / Rn), and a scale height that
  flares outward, h = h0 exp((R - R0) / Rh): the fitted forms of Kalberla & Dedes 2008
  (A&A 487, 951) as reviewed by Kalberla & Kerp 2009 (ARA&A 47, 27). Their constants
  n0 = 0.9 cm^-3, Rn = 3.15 kpc, h0 = 0.15 kpc, Rh = 9.8 kpc are from memory (not re-checked
  against the papers), and so is treating h as the Gaussian's standard deviation. The fitted
  forms hold for R beyond about 5 kpc; inside the Sun's circle the mid-plane density is held at
  n0, and inside ``HOLE_RADIUS_KPC`` it falls off (the inner Galaxy's HI depression, Dickey &
  Lockman 1990, ARA&A 28, 215, from memory; the radius and the fall-off length are our choice).
  The disc ends at ``EDGE_RADIUS_KPC``; the warp and the lopsided outer disc are left out;
* a velocity dispersion ``dispersion_kms`` about the circular velocity (one Gaussian);
* emission from gas of one spin temperature T_s: tau(v) = N(v) / (C T_s) with
  C = 1.823e18 cm^-2 / (K km/s) (Dickey & Lockman 1990, from memory) and N(v) the column per
  km/s summed along the whole sight line, so T_B(v) = T_s (1 - exp(-tau(v))): optically thin
  emission that saturates toward T_s where much gas shares one velocity. No continuum
  background, so no absorption;
* the beam: a circular Gaussian of the dish's half-power beamwidth; T_B is averaged over it
  with a 3 x 3 Gauss-Hermite rule (nodes 0 and +-sqrt(3) sigma, weights 2/3 and 1/6 on each
  axis: exact for a sky that varies as a polynomial of degree up to 5 across the beam).

This is a smooth model: real spectra show clouds, spiral arms, absorption against bright
continuum, high-velocity gas and the bar near l = 0, none of which is here. It answers "does
the line look about right, and where is the emission", not "what is the exact profile".

Method: each sight line is sampled every ``STEP_KPC`` out to the disc edge; the column of
each sample is put in ``FINE_KMS`` velocity channels (one ``np.bincount`` for all sight
lines), convolved with the dispersion Gaussian by FFT, turned into T_B and averaged over the
beam, then interpolated to the velocities asked for. Velocities km/s (LSR, radio convention
applies only to frequencies), distances kpc, angles degrees, temperatures K.
"""
from __future__ import annotations

import math
from collections import OrderedDict
from dataclasses import dataclass, field

import numpy as np

from .errors import UserError
from .galaxy import RotationModel, lsr_velocity_kms

KPC_CM = 3.0857e21  # IAU 2015 parsec (3.0857e18 cm), x 1000
# HI column per unit optical depth and spin temperature (cm^-2 / (K km/s)); Dickey & Lockman
# 1990, ARA&A 28, 215 (from memory).
COLUMN_PER_TAU_KKMS = 1.823e18
# Kalberla & Dedes 2008 / Kalberla & Kerp 2009 fitted forms (from memory, see module doc).
MIDPLANE_DENSITY_CM3 = 0.9
DENSITY_SCALE_LENGTH_KPC = 3.15
SCALE_HEIGHT_KPC = 0.15
FLARE_SCALE_LENGTH_KPC = 9.8
# The HI disc is traced to about 35 kpc (Kalberla & Dedes 2008, abstract).
EDGE_RADIUS_KPC = 35.0
# Inner depression (our choice, after Dickey & Lockman 1990, from memory).
HOLE_RADIUS_KPC = 3.0
HOLE_FALL_KPC = 0.75
# Spin temperature of the emitting gas (K): the inner-Galaxy line saturates near 130-150 K
# (from memory); one value for all gas is the model's biggest simplification.
SPIN_TEMPERATURE_K = 150.0
# One Gaussian between the cold (6.3 km/s) and warm (12.3 km/s) components that
# McClure-Griffiths & Dickey 2007 (ApJ 671, 427, abstract) find beyond the terminal velocity.
DISPERSION_KMS = 9.0

# Sampling (our choice): 0.1 kpc along the sight line moves the gas velocity by under 2 km/s,
# well inside the dispersion; 1 km/s channels before interpolation to the velocities asked for.
STEP_KPC = 0.1
FINE_KMS = 1.0
FINE_LIMIT_KMS = 400.0
FWHM_PER_SIGMA = 2.0 * math.sqrt(2.0 * math.log(2.0))
# Emission counted as "seen" above this brightness (K): the definition of v_min/v_max.
EMISSION_LEVEL_K = 1.0


@dataclass(frozen=True)
class DiscModel:
    """The HI disc: rotation, density, flare, dispersion and spin temperature (see module doc)."""

    rotation: RotationModel = field(default_factory=RotationModel)
    midplane_density_cm3: float = MIDPLANE_DENSITY_CM3
    density_scale_length_kpc: float = DENSITY_SCALE_LENGTH_KPC
    scale_height_kpc: float = SCALE_HEIGHT_KPC
    flare_scale_length_kpc: float = FLARE_SCALE_LENGTH_KPC
    edge_radius_kpc: float = EDGE_RADIUS_KPC
    dispersion_kms: float = DISPERSION_KMS
    spin_temperature_k: float = SPIN_TEMPERATURE_K

    def __post_init__(self) -> None:
        for name in ("midplane_density_cm3", "density_scale_length_kpc", "scale_height_kpc",
                     "flare_scale_length_kpc", "edge_radius_kpc", "dispersion_kms",
                     "spin_temperature_k"):
            value = getattr(self, name)
            if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
                raise UserError(f"HI disc model {name} must be a positive number, got {value!r}")

    def midplane_density_cm3_at(self, r_kpc) -> np.ndarray:
        r = np.asarray(r_kpc, dtype=float)
        r0 = self.rotation.r0_kpc
        outer = self.midplane_density_cm3 * np.exp(-(r - r0) / self.density_scale_length_kpc)
        n = np.where(r > r0, outer, self.midplane_density_cm3)
        n = np.where(r < HOLE_RADIUS_KPC, n * np.exp(-(HOLE_RADIUS_KPC - r) / HOLE_FALL_KPC), n)
        return np.where(r > self.edge_radius_kpc, 0.0, n)

    def scale_height_kpc_at(self, r_kpc) -> np.ndarray:
        r = np.asarray(r_kpc, dtype=float)
        return self.scale_height_kpc * np.exp((r - self.rotation.r0_kpc) / self.flare_scale_length_kpc)

    def density_cm3(self, r_kpc, z_kpc) -> np.ndarray:
        h = self.scale_height_kpc_at(r_kpc)
        return self.midplane_density_cm3_at(r_kpc) * np.exp(-0.5 * (np.asarray(z_kpc) / h) ** 2)


@dataclass(frozen=True)
class Spectrum:
    """Expected brightness temperature (K) at LSR velocities (km/s), one row per direction."""

    l_deg: np.ndarray  # (P,)
    b_deg: np.ndarray  # (P,)
    beamwidth_deg: float
    velocity_kms: np.ndarray  # (V,)
    tb_k: np.ndarray  # (P, V)

    @property
    def peak_tb_k(self) -> np.ndarray:
        return self.tb_k.max(axis=1)

    @property
    def peak_velocity_kms(self) -> np.ndarray:
        return self.velocity_kms[np.argmax(self.tb_k, axis=1)]

    def emission_range_kms(self, level_k: float = EMISSION_LEVEL_K) -> tuple[np.ndarray, np.ndarray]:
        """(lowest, highest) velocity with T_B above ``level_k``; NaN where it never is."""
        above = self.tb_k > level_k
        any_ = above.any(axis=1)
        first = np.argmax(above, axis=1)
        last = above.shape[1] - 1 - np.argmax(above[:, ::-1], axis=1)
        v = self.velocity_kms
        return np.where(any_, v[first], np.nan), np.where(any_, v[last], np.nan)


def _beam_offsets(beamwidth_deg: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """(dx, dy, weight): the 3 x 3 Gauss-Hermite rule for a Gaussian beam (weights sum to 1)."""
    if beamwidth_deg <= 0:
        return np.zeros(1), np.zeros(1), np.ones(1)
    sigma = beamwidth_deg / FWHM_PER_SIGMA
    nodes = np.array([-math.sqrt(3.0), 0.0, math.sqrt(3.0)]) * sigma
    weights = np.array([1.0, 4.0, 1.0]) / 6.0
    dx, dy = (a.ravel() for a in np.meshgrid(nodes, nodes))
    wx, wy = (a.ravel() for a in np.meshgrid(weights, weights))
    return dx, dy, wx * wy


def _offset_directions(l_deg, b_deg, dx_deg, dy_deg) -> tuple[np.ndarray, np.ndarray]:
    """Galactic (l, b) of points offset (dx along l, dy along b; tangent plane) from (l, b)."""
    l0, b0 = np.radians(l_deg)[:, None], np.radians(b_deg)[:, None]
    x, y = np.radians(dx_deg)[None, :], np.radians(dy_deg)[None, :]
    # Gnomonic offsets turned back to the sphere (exact for any offset).
    rho = np.hypot(x, y)
    c = np.arctan(rho)
    with np.errstate(invalid="ignore", divide="ignore"):
        sin_b = np.cos(c) * np.sin(b0) + np.where(rho > 0, y * np.sin(c) * np.cos(b0) / rho, 0.0)
        b = np.arcsin(np.clip(sin_b, -1.0, 1.0))
        l = l0 + np.arctan2(x * np.sin(c), rho * np.cos(b0) * np.cos(c) - y * np.sin(b0) * np.sin(c))
    return np.degrees(l) % 360.0, np.degrees(b)


def _fine_velocities() -> np.ndarray:
    n = int(round(2 * FINE_LIMIT_KMS / FINE_KMS)) + 1
    return np.linspace(-FINE_LIMIT_KMS, FINE_LIMIT_KMS, n)


def _sightline_tb_k(l_deg: np.ndarray, b_deg: np.ndarray, model: DiscModel) -> np.ndarray:
    """T_B (K) on the fine velocity grid for single (pencil) sight lines, shape (S, F)."""
    rot = model.rotation
    # The farthest the disc reaches along any sight line from the Sun.
    d_max = rot.r0_kpc + model.edge_radius_kpc
    d = np.arange(0.5, d_max / STEP_KPC) * STEP_KPC  # sample mid-points
    l_rad, b_rad = np.radians(l_deg)[:, None], np.radians(b_deg)[:, None]
    p = d[None, :] * np.cos(b_rad)
    z = d[None, :] * np.sin(b_rad)
    r = np.hypot(p - rot.r0_kpc * np.cos(l_rad), rot.r0_kpc * np.sin(l_rad))
    column = model.density_cm3(r, z) * (STEP_KPC * KPC_CM)  # cm^-2 per sample
    v = lsr_velocity_kms(l_deg[:, None], d[None, :], b_deg[:, None], rot)
    fine = _fine_velocities()
    n_fine = fine.size
    idx = np.rint((v + FINE_LIMIT_KMS) / FINE_KMS).astype(np.int64)
    ok = (idx >= 0) & (idx < n_fine) & (column > 0)
    rows = np.broadcast_to(np.arange(l_deg.size)[:, None], idx.shape)
    flat = (rows[ok] * n_fine + idx[ok])
    per_channel = np.bincount(flat, weights=column[ok], minlength=l_deg.size * n_fine)
    per_kms = per_channel.reshape(l_deg.size, n_fine) / FINE_KMS  # column per km/s
    # Convolve with the dispersion Gaussian (unit area) by FFT, zero-padded against wrap-round.
    size = 1 << int(math.ceil(math.log2(2 * n_fine)))
    offsets = (np.arange(size) + size // 2) % size - size // 2
    kernel = np.exp(-0.5 * (offsets * FINE_KMS / model.dispersion_kms) ** 2)
    kernel /= kernel.sum()
    spread = np.fft.irfft(np.fft.rfft(per_kms, size, axis=1) * np.fft.rfft(kernel), size, axis=1)
    spread = np.maximum(spread[:, :n_fine], 0.0)
    tau = spread / (COLUMN_PER_TAU_KKMS * model.spin_temperature_k)
    return model.spin_temperature_k * -np.expm1(-tau)


# Beam-averaged fine-grid spectra already computed, by (l, b, beam, model): plans of one
# network, their briefs and calibration checks ask for the same bin centres again and again.
# A few thousand rows of 801 channels (6 kB each); the oldest go first.
_CACHE_ROWS = 4096
_cache: OrderedDict = OrderedDict()


def _beam_tb_fine(l_deg: np.ndarray, b_deg: np.ndarray, beam: float,
                  model: DiscModel) -> np.ndarray:
    """(P, F) T_B (K) on the fine grid averaged over the beam, each direction computed once."""
    keys = [(float(l), float(b), beam, model) for l, b in zip(l_deg, b_deg)]
    todo = sorted({k: i for i, k in enumerate(keys) if k not in _cache}.values())
    if todo:
        dx, dy, weight = _beam_offsets(beam)
        l_all, b_all = _offset_directions(l_deg[todo], b_deg[todo], dx, dy)
        b_all = np.clip(b_all, -90.0, 90.0)
        tb = _sightline_tb_k(l_all.ravel(), b_all.ravel(), model)
        tb = np.einsum("psf,s->pf", tb.reshape(len(todo), weight.size, -1), weight)
        for i, row in zip(todo, tb):
            row.setflags(write=False)
            _cache[keys[i]] = row
    rows = []
    for k in keys:
        _cache.move_to_end(k)
        rows.append(_cache[k])
    while len(_cache) > _CACHE_ROWS:
        _cache.popitem(last=False)
    return np.stack(rows)


def expected_spectra(l_deg, b_deg, beamwidth_deg: float, velocity_kms=None,
                     model: DiscModel | None = None) -> Spectrum:
    """Expected T_B (K) toward each (l, b) (degrees, arrays of one length) through a Gaussian
    beam of half-power width ``beamwidth_deg`` (0: a pencil beam), at ``velocity_kms`` (LSR;
    default -250..+250 km/s every 1 km/s). See the module docstring for the model."""
    model = model or DiscModel()
    l_deg = np.atleast_1d(np.asarray(l_deg, dtype=float)) % 360.0
    b_deg = np.atleast_1d(np.asarray(b_deg, dtype=float))
    if l_deg.shape != b_deg.shape or l_deg.ndim != 1:
        raise UserError("l and b must be lists of the same length")
    if not np.all(np.isfinite(l_deg)) or not np.all(np.abs(b_deg) <= 90.0):
        raise UserError("galactic latitude b must lie in [-90, 90] and l must be finite")
    beam = float(beamwidth_deg)
    if not (math.isfinite(beam) and 0.0 <= beam <= 60.0):
        raise UserError(f"beamwidth must be between 0 and 60 degrees, got {beamwidth_deg!r}")
    velocity = (np.arange(-250.0, 250.0 + 0.5, 1.0) if velocity_kms is None
                else np.asarray(velocity_kms, dtype=float))
    tb_fine = _beam_tb_fine(l_deg, b_deg, beam, model)
    fine = _fine_velocities()
    tb = np.vstack([np.interp(velocity, fine, row, left=0.0, right=0.0) for row in tb_fine])
    return Spectrum(l_deg=l_deg, b_deg=b_deg, beamwidth_deg=beam, velocity_kms=velocity, tb_k=tb)


def terminal_edge_kms(spectrum: Spectrum, row: int = 0, side: int = +1) -> float:
    """Velocity of the steepest fall of T_B on the high (side +1) or low (-1) velocity side of a
    spectrum: how an inner-Galaxy terminal velocity is read off the emission's edge."""
    v, tb = spectrum.velocity_kms, spectrum.tb_k[row]
    grad = np.gradient(tb, v)
    return float(v[np.argmin(grad)] if side > 0 else v[np.argmax(grad)])
