"""Expected LSR velocity range of disc HI along a line of sight (circular rotation).

Gas at Galactocentric radius R moving on a circular orbit at speed Theta(R),
seen from the Sun (radius R0, speed Theta0) at galactic longitude l, latitude b
and distance d, has the line-of-sight velocity relative to the local standard
of rest

    v_lsr = [Theta(R) R0 / R - Theta0] sin l cos b,
    R**2  = R0**2 + p**2 - 2 R0 p cos l,   p = d cos b (in-plane distance),

the standard kinematics of a rotating disc (e.g. Binney & Merrifield 1998,
Galactic Astronomy, ch. 9; from memory). Velocities are in km/s, positive receding; distances in
kpc; angles in degrees. The Sun is placed in the mid-plane and gas moves
parallel to the plane, so every velocity carries the factor cos b.

For |l| < 90 deg the sight line passes closest to the centre at the tangent
point R = R0 |sin l|, where the velocity is the most extreme of the inner
Galaxy (the terminal velocity; for a flat curve Theta0 (1 - |sin l|) with the
sign of sin l). Beyond R0 the sign reverses, most strongly where the sight line
leaves the gas (the disc edge, or the top of the gas layer when b != 0).

This is a planning aid, not a model of the HI sky: non-circular motions (the
bar, spiral streaming, the nuclear disc within a few degrees of l = 0, which
reaches +-250 km/s), the warp and flare of the outer disc and high-velocity
clouds are ignored; the dispersion margin absorbs only the smaller of these.
"""
from __future__ import annotations

import difflib
import math
from dataclasses import dataclass, fields, replace

import numpy as np

from .errors import UserError

CURVES = ("flat", "brand-blitz")

# Brand & Blitz 1993 (A&A 275, 67) fit Theta/Theta0 = a1 (R/R0)**a2 + a3, made
# with R0 = 8.5 kpc, Theta0 = 220 km/s. Coefficients from memory, matching the
# values widely quoted; not re-checked against the paper. The fit is not
# pinned to (R0, Theta0): Theta(R0)/Theta0 = a1 + a3 = 1.0148.
BRAND_BLITZ_A1 = 1.00767
BRAND_BLITZ_A2 = 0.0394
BRAND_BLITZ_A3 = 0.00712

# Sanity limits for model parameters: far outside any published Milky Way value,
# tight enough to catch unit slips (pc for kpc, m/s for km/s).
_LIMITS = {
    "r0_kpc": (0.0, 30.0, True),  # (low, high, low excluded)
    "theta0_kms": (0.0, 500.0, True),
    "disc_radius_kpc": (0.0, 100.0, True),
    "disc_half_thickness_kpc": (0.0, 10.0, True),
    "dispersion_kms": (0.0, 100.0, False),
}


@dataclass(frozen=True)
class RotationModel:
    """Circular-rotation model of the gas disc; validated on construction.

    Distances in kpc, speeds in km/s. ``curve``: "flat" (Theta = Theta0 at all R)
    or "brand-blitz" (Brand & Blitz 1993, A&A 275, 67, scaled to this model's
    R0 and Theta0). Raises UserError naming the offending field.
    """

    # IAU 1985 standard (Kerr & Lynden-Bell 1986, MNRAS 221, 1023).
    r0_kpc: float = 8.5
    theta0_kms: float = 220.0
    curve: str = "flat"
    # HI is traced to roughly 25-30 kpc in the outer disc (Levine, Blitz &
    # Heiles 2006, Science 312, 1773; from memory). A generous edge only widens
    # the planned band, which is the safe side for choosing a frequency span.
    disc_radius_kpc: float = 25.0
    # Inner-Galaxy HI: a core of ~230 pc FWHM plus an exponential tail of
    # ~400 pc scale height (Dickey & Lockman 1990, ARA&A 28, 215; from memory).
    # 0.5 kpc keeps most of the column density in the line of sight.
    disc_half_thickness_kpc: float = 0.5
    # Warm neutral medium dispersion ~9 km/s plus streaming motions of similar
    # size; a 10 km/s margin each side is common practice.
    dispersion_kms: float = 10.0

    def __post_init__(self) -> None:
        for name, (lo, hi, lo_open) in _LIMITS.items():
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, (int, float)):
                raise UserError(f"rotation model {name} must be a number, got {value!r}")
            if not math.isfinite(value):
                raise UserError(f"rotation model {name} must be finite, got {value!r}")
            too_low = value <= lo if lo_open else value < lo
            if too_low or value > hi:
                bracket = "(" if lo_open else "["
                raise UserError(
                    f"rotation model {name} = {value} is out of range {bracket}{lo}, {hi}]")
        if self.curve not in CURVES:
            raise UserError(f"rotation model curve '{self.curve}' is unknown; "
                            f"choose one of {', '.join(CURVES)}{_hint(str(self.curve), CURVES)}")
        if self.disc_radius_kpc <= self.r0_kpc:
            raise UserError(f"rotation model disc_radius_kpc = {self.disc_radius_kpc} must exceed "
                            f"r0_kpc = {self.r0_kpc} (the Sun lies inside the gas disc)")


PRESETS: dict[str, RotationModel] = {
    # Kerr & Lynden-Bell 1986, MNRAS 221, 1023 (IAU 1985 standard).
    "iau1985": RotationModel(r0_kpc=8.5, theta0_kms=220.0),
    # Reid et al. 2014, ApJ 783, 130.
    "reid2014": RotationModel(r0_kpc=8.34, theta0_kms=240.0),
    # Reid et al. 2019, ApJ 885, 131.
    "reid2019": RotationModel(r0_kpc=8.15, theta0_kms=236.0),
    # Brand & Blitz 1993, A&A 275, 67, with the constants its fit assumed.
    "brand-blitz1993": RotationModel(r0_kpc=8.5, theta0_kms=220.0, curve="brand-blitz"),
}


def _hint(word: str, choices) -> str:
    close = difflib.get_close_matches(word, list(choices), n=1, cutoff=0.6)
    return f" (did you mean '{close[0]}'?)" if close else ""


def model_from_name(name: str, **overrides) -> RotationModel:
    """The preset ``name`` (case-insensitive) with any field replaced by ``overrides``.

    Raises UserError for an unknown preset, an unknown field or a bad value.
    """
    key = str(name).strip().lower()
    if key not in PRESETS:
        raise UserError(f"rotation model '{name}' is unknown; choose one of "
                        f"{', '.join(PRESETS)}{_hint(key, PRESETS)}")
    known = {f.name for f in fields(RotationModel)}
    for field_name in overrides:
        if field_name not in known:
            raise UserError(f"rotation model has no parameter '{field_name}'"
                            f"{_hint(field_name, known)}")
    return replace(PRESETS[key], **overrides)


def rotation_speed_kms(r_kpc, model: RotationModel = RotationModel()) -> np.ndarray:
    """Circular speed Theta(R) in km/s at Galactocentric radius ``r_kpc`` (kpc, >= 0)."""
    r_kpc = np.asarray(r_kpc, dtype=float)
    if model.curve == "flat":
        return np.full_like(r_kpc, model.theta0_kms)
    shape = BRAND_BLITZ_A1 * (r_kpc / model.r0_kpc) ** BRAND_BLITZ_A2 + BRAND_BLITZ_A3
    return model.theta0_kms * shape


def _velocity_at_radius_kms(r_kpc, sin_l, cos_b, model: RotationModel) -> np.ndarray:
    """v_lsr of gas at radius ``r_kpc`` on a sight line with the given sin l, cos b."""
    # R0 sin l / R lies in [-1, 1] (R >= R0 |sin l| on the line); R = 0 only
    # when sin l = 0, where the velocity is zero whatever Theta does there.
    s_kpc = model.r0_kpc * sin_l
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(r_kpc > 0.0, s_kpc / r_kpc, 0.0)
    return (rotation_speed_kms(r_kpc, model) * ratio - model.theta0_kms * sin_l) * cos_b


def _radius_kpc(p_kpc, sin_l, cos_l, model: RotationModel) -> np.ndarray:
    # (p - R0 cos l)^2 + (R0 sin l)^2: the cosine rule written so the tangent
    # point gives exactly R0 |sin l| (no cancellation near the centre).
    return np.hypot(p_kpc - model.r0_kpc * cos_l, model.r0_kpc * sin_l)


def _angles(l_deg, b_deg):
    l_deg = np.asarray(l_deg, dtype=float)
    b_deg = np.asarray(b_deg, dtype=float)
    if not np.all(np.isfinite(l_deg)):
        raise UserError("galactic longitude l_deg must be finite")
    if not np.all(np.isfinite(b_deg)) or np.any(np.abs(b_deg) > 90.0):
        raise UserError("galactic latitude b_deg must lie in [-90, 90]")
    l_deg, b_deg = np.broadcast_arrays(l_deg, b_deg)
    # Longitude folded into (-180, 180] so that |l| < 90 marks the inner Galaxy.
    return 180.0 - np.mod(180.0 - l_deg, 360.0), b_deg


def lsr_velocity_kms(l_deg, d_kpc, b_deg=0.0, model: RotationModel = RotationModel()) -> np.ndarray:
    """LSR velocity (km/s, + receding) of gas in circular rotation at (l, b, d).

    ``d_kpc`` is the distance along the sight line from the Sun (kpc, >= 0);
    arguments broadcast. Formula: module docstring (circular rotation, Sun in
    the mid-plane, gas moving parallel to the plane).
    """
    l_deg, b_deg = _angles(l_deg, b_deg)
    d_kpc = np.asarray(d_kpc, dtype=float)
    if np.any(~np.isfinite(d_kpc)) or np.any(d_kpc < 0.0):
        raise UserError("distance d_kpc must be finite and >= 0")
    l_rad, b_rad = np.deg2rad(l_deg), np.deg2rad(b_deg)
    sin_l, cos_l, cos_b = np.sin(l_rad), np.cos(l_rad), np.cos(b_rad)
    r_kpc = _radius_kpc(d_kpc * cos_b, sin_l, cos_l, model)
    return _velocity_at_radius_kms(r_kpc, sin_l, cos_b, model)


@dataclass(frozen=True)
class VelocityEnvelope:
    """LSR velocities (km/s) the disc HI spans on each sight line; arrays shaped like l, b.

    ``v_min_kms``/``v_max_kms``: model extremes widened by the dispersion margin,
    always including 0 (local gas). ``terminal_kms``: velocity at the tangent
    point, NaN for |l| >= 90 deg or where the sight line leaves the gas before
    reaching it. ``outer_extreme_kms``: velocity where the sight line leaves the
    gas (disc edge or top of the layer), at distance ``d_max_kpc``.
    ``l_deg`` is returned folded into (-180, 180].
    """

    l_deg: np.ndarray
    b_deg: np.ndarray
    v_min_kms: np.ndarray
    v_max_kms: np.ndarray
    terminal_kms: np.ndarray
    outer_extreme_kms: np.ndarray
    d_max_kpc: np.ndarray
    model: RotationModel


def hi_velocity_envelope(l_deg, b_deg=0.0, model: RotationModel = RotationModel()) -> VelocityEnvelope:
    """Range of v_lsr (km/s) of disc HI toward galactic (l, b) in degrees; vectorized.

    The sight line is followed from the Sun to d_max, where it reaches the disc
    radius or |z| = the layer half-thickness, whichever is nearer. Both curves
    offered have angular velocity Theta/R falling outward, so v_lsr is monotonic
    in R along the line and its extremes sit at the smallest R (the tangent
    point if it lies within d_max, else an end of the path) and the largest R
    (the far end, or the Sun's own radius). Exact, no sampling in distance.
    """
    l_deg, b_deg = _angles(l_deg, b_deg)
    l_rad, b_rad = np.deg2rad(l_deg), np.deg2rad(b_deg)
    sin_l, cos_l = np.sin(l_rad), np.cos(l_rad)
    cos_b, sin_abs_b = np.cos(b_rad), np.abs(np.sin(b_rad))
    r0_kpc = model.r0_kpc

    # Far intersection with the cylinder R = disc radius (in-plane distance);
    # the root is real and positive because the Sun lies inside the disc.
    p_disc_kpc = r0_kpc * cos_l + np.sqrt(model.disc_radius_kpc**2 - (r0_kpc * sin_l) ** 2)
    # b = 0 (or a subnormal b) means the layer never ends the path: +inf.
    with np.errstate(divide="ignore", over="ignore"):
        d_layer_kpc = np.where(sin_abs_b > 0.0, model.disc_half_thickness_kpc / sin_abs_b, np.inf)
        d_disc_kpc = np.where(cos_b > 0.0, p_disc_kpc / cos_b, np.inf)
    d_max_kpc = np.minimum(d_disc_kpc, d_layer_kpc)
    p_max_kpc = d_max_kpc * cos_b

    p_tangent_kpc = r0_kpc * cos_l
    r_inner_kpc = _radius_kpc(np.clip(p_tangent_kpc, 0.0, p_max_kpc), sin_l, cos_l, model)
    r_end_kpc = _radius_kpc(p_max_kpc, sin_l, cos_l, model)
    v_inner_kms = _velocity_at_radius_kms(r_inner_kpc, sin_l, cos_b, model)
    v_end_kms = _velocity_at_radius_kms(r_end_kpc, sin_l, cos_b, model)

    # The largest R is the far end or the Sun's own circle (v = 0), so the
    # zero that local gas puts in the range also covers the second case.
    low_kms = np.minimum(np.minimum(v_inner_kms, v_end_kms), 0.0)
    high_kms = np.maximum(np.maximum(v_inner_kms, v_end_kms), 0.0)
    inner_galaxy = (np.abs(l_deg) < 90.0) & (p_tangent_kpc <= p_max_kpc)
    terminal_kms = np.where(inner_galaxy, v_inner_kms, np.nan)
    return VelocityEnvelope(
        l_deg=np.asarray(l_deg),
        b_deg=np.asarray(b_deg),
        v_min_kms=np.asarray(low_kms - model.dispersion_kms),
        v_max_kms=np.asarray(high_kms + model.dispersion_kms),
        terminal_kms=np.asarray(terminal_kms),
        outer_extreme_kms=np.asarray(v_end_kms),
        d_max_kpc=np.asarray(d_max_kpc),
        model=model,
    )
