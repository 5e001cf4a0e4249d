"""A parked dish's pointing: alt/az, meridian elevation, or hour angle + declination.

A dish that does not move keeps a fixed azimuth/elevation, which is the same as
a fixed topocentric hour angle and declination *of date* (CIRS). That
declination is what ``dec_deg`` means everywhere in hiplan for a parked dish;
it differs from the J2000/ICRS declination of the sky under the beam by the
precession since 2000 (< 0.2 deg until 2030), well inside any small-dish beam.

A declination circle crosses the meridian twice a sidereal day: at *upper*
culmination (hour angle 0) and, 12 h later, *below the pole* (lower
culmination, hour angle 180 deg). A transit dish that can face the pole parks
at either; the sky it sees is the same, 12 hours apart.

Angles in degrees; azimuth from north through east; hour angle positive west.
Refraction is not modelled: these are geometric directions (at 21 cm the
tropospheric bending is below 0.1 deg above 10 deg elevation, common practice).
"""
from __future__ import annotations

from dataclasses import dataclass

import erfa
import numpy as np

from .errors import UserError
from .site import Site


@dataclass(frozen=True)
class Pointing:
    """A fixed beam direction at a site."""

    alt_deg: float
    az_deg: float  # from north through east, [0, 360)
    ha_deg: float  # topocentric hour angle of date, positive west, (-180, 180]
    dec_deg: float  # topocentric declination of date (CIRS)
    given_as: str  # "dec", "elevation", "altaz" or "hadec": how the user specified it

    @property
    def culmination(self) -> str:
        """"upper" for the half of the sky within 6 h of the upper meridian, else "lower"."""
        return "upper" if abs(self.ha_deg) <= 90.0 else "lower"

    @property
    def facing(self) -> str:
        """"zenith", "north", "south" for meridian pointings, else the azimuth as text."""
        if self.alt_deg > 89.999:
            return "zenith"
        if abs(self.az_deg - 180.0) < 1e-6:
            return "south"
        if min(self.az_deg, 360.0 - self.az_deg) < 1e-6:
            return "north"
        return f"azimuth {self.az_deg:.1f}"

    def summary(self, beamwidth_deg: float, b_max_deg: float) -> dict:
        """The ``pointing`` object of JSON outputs."""
        return {
            "alt_deg": round(self.alt_deg, 4),
            "az_deg": round(self.az_deg, 4),
            "ha_deg": round(self.ha_deg, 4),
            "dec_deg": round(self.dec_deg, 4),
            "dec_frame": "CIRS (topocentric declination of date)",
            "given_as": self.given_as,
            "culmination": self.culmination,
            "beamwidth_deg": round(beamwidth_deg, 3),
            "b_max_deg": b_max_deg,
        }


def _wrap180(angle_deg: float) -> float:
    wrapped = (angle_deg + 180.0) % 360.0 - 180.0
    return 180.0 if wrapped == -180.0 else wrapped


def from_altaz(site: Site, alt_deg: float, az_deg: float, given_as: str = "altaz") -> Pointing:
    """Pointing from elevation and azimuth (deg)."""
    ha, dec = erfa.ae2hd(np.radians(az_deg), np.radians(alt_deg), np.radians(site.latitude_deg))
    return Pointing(alt_deg=float(alt_deg), az_deg=float(az_deg) % 360.0,
                    ha_deg=_wrap180(float(np.degrees(ha))), dec_deg=float(np.degrees(dec)),
                    given_as=given_as)


def from_hadec(site: Site, ha_deg: float, dec_deg: float) -> Pointing:
    """Pointing from topocentric hour angle and declination of date (deg)."""
    az, el = erfa.hd2ae(np.radians(ha_deg), np.radians(dec_deg), np.radians(site.latitude_deg))
    return Pointing(alt_deg=float(np.degrees(el)), az_deg=float(np.degrees(az)) % 360.0,
                    ha_deg=_wrap180(float(ha_deg)), dec_deg=float(dec_deg), given_as="hadec")


def on_meridian_at_dec(site: Site, dec_deg: float) -> Pointing:
    """Meridian pointing at upper culmination of declination ``dec_deg``.

    Faces south when dec < latitude, north otherwise; elevation 90 - |lat - dec|.
    """
    if not -90.0 <= dec_deg <= 90.0:
        raise UserError(f"--dec: {dec_deg} is outside [-90, 90]")
    alt = 90.0 - abs(site.latitude_deg - dec_deg)
    az = 180.0 if dec_deg < site.latitude_deg else 0.0
    p = from_altaz(site, alt, az, given_as="dec")
    # ae2hd loses the exact input at the zenith/pole; keep the requested value.
    return Pointing(p.alt_deg, p.az_deg, 0.0, float(dec_deg), "dec")


def below_pole_at_dec(site: Site, dec_deg: float) -> Pointing:
    """Meridian pointing below the pole (lower culmination, HA 180) at declination ``dec_deg``.

    Faces the elevated pole; elevation |dec| + |latitude| - 90 when dec has the
    latitude's sign (negative elevations are returned as they are: below the horizon).
    """
    if not -90.0 <= dec_deg <= 90.0:
        raise UserError(f"--dec: {dec_deg} is outside [-90, 90]")
    p = from_hadec(site, 180.0, dec_deg)
    return Pointing(p.alt_deg, p.az_deg, 180.0, float(dec_deg), "dec")


@dataclass(frozen=True)
class DecRange:
    """A declination interval a meridian dish reaches at one culmination (deg, inclusive)."""

    culmination: str  # "upper" | "lower"
    lo_deg: float
    hi_deg: float


def _sides(site: Site) -> set[str]:
    """Meridian sides the mount can face."""
    dish = site.dish
    if dish.mount == "transit" and dish.facing in ("north", "south"):
        return {dish.facing}
    return {"north", "south"}


def meridian_dec_ranges(site: Site) -> list[DecRange]:
    """Declinations reachable on the meridian, by culmination, from the site's limits.

    Closed form. Northern site (latitude p >= 0; the south is mirrored): facing
    south at elevation e the beam is at upper culmination of dec = p - 90 + e;
    facing north at e >= p at upper culmination of dec = p + 90 - e (the pole at
    e = p), and at e < p below the pole at dec = 90 - p + e. The elevation runs
    from the horizon limit on that side (mask and ``elevation_min_deg``) to
    ``elevation_max_deg``. Altaz mounts are also limited by their azimuth range
    (checked by ``reachability_problem`` on each candidate).
    """
    lat = site.latitude_deg
    sign = 1.0 if lat >= 0 else -1.0
    dish = site.dish
    eq_side, pole_side = ("south", "north") if lat >= 0 else ("north", "south")
    az_of = {"south": 180.0, "north": 0.0}
    emax = dish.elevation_max_deg
    sides = _sides(site)
    out = []
    if eq_side in sides:
        lim = float(dish.horizon_limit_deg(az_of[eq_side]))
        ends = sorted((lat - sign * (90.0 - lim), lat - sign * (90.0 - emax)))
        if lim <= emax:
            out.append(DecRange("upper", *ends))
    if pole_side in sides:
        lim = float(dish.horizon_limit_deg(az_of[pole_side]))
        pole_el = abs(lat)
        lo_e = max(pole_el, lim)
        if lo_e <= emax:  # upper culmination between the zenith and the pole
            out.append(DecRange("upper", *sorted((lat + sign * (90.0 - emax), lat + sign * (90.0 - lo_e)))))
        hi_e = min(pole_el, emax)
        if lim < hi_e:  # below the pole (the pole itself belongs to the upper range)
            out.append(DecRange("lower", *sorted((sign * (90.0 - pole_el + lim),
                                                  sign * (90.0 - pole_el + hi_e)))))
    merged: list[DecRange] = []
    for r in sorted(out, key=lambda r: (r.culmination != "upper", r.lo_deg)):
        last = merged[-1] if merged else None
        if last and last.culmination == r.culmination and r.lo_deg <= last.hi_deg + 1e-9:
            merged[-1] = DecRange(r.culmination, last.lo_deg, max(last.hi_deg, r.hi_deg))
        else:
            merged.append(r)
    return merged


def on_meridian_at_elevation(site: Site, elevation_deg: float, facing: str | None = None) -> Pointing:
    """Meridian pointing at ``elevation_deg``, facing north or south.

    Without ``facing`` the site's ``dish.facing`` is used; where that is
    "either", the dish faces the equator (south in the north, north in the south),
    where the galactic plane spends most time.
    """
    if not 0.0 <= elevation_deg <= 90.0:
        raise UserError(f"--elevation: {elevation_deg} is outside [0, 90]")
    facing = facing or site.dish.facing
    if facing == "either":
        facing = "south" if site.latitude_deg >= 0 else "north"
    if facing not in ("north", "south"):
        raise UserError(f"--facing: '{facing}' must be north or south")
    return from_altaz(site, elevation_deg, 180.0 if facing == "south" else 0.0, given_as="elevation")


def reachability_problem(site: Site, pointing: Pointing) -> str | None:
    """Why the site's dish cannot take this pointing, or None if it can."""
    dish = site.dish
    limit = float(dish.horizon_limit_deg(pointing.az_deg))
    if pointing.alt_deg < limit - 1e-9:
        return (f"elevation {pointing.alt_deg:.2f} deg at azimuth {pointing.az_deg:.1f} deg is below "
                f"the site's limit there ({limit:.1f} deg, elevation limit and horizon mask)")
    if pointing.alt_deg > dish.elevation_max_deg + 1e-9:
        return f"elevation {pointing.alt_deg:.2f} deg is above elevation_max_deg {dish.elevation_max_deg}"
    if dish.mount == "transit":
        on_meridian = min(abs(pointing.az_deg - 0.0), abs(pointing.az_deg - 180.0),
                          abs(pointing.az_deg - 360.0)) < 1e-6 or pointing.alt_deg > 90 - 1e-9
        if not on_meridian:
            return "a transit mount points on the meridian only (azimuth 0 or 180 deg)"
        side = "south" if abs(pointing.az_deg - 180.0) < 1e-6 else "north"
        if dish.facing in ("north", "south") and side != dish.facing and pointing.alt_deg < 90 - 1e-9:
            return f"this transit dish faces {dish.facing} only; the pointing faces {side}"
    if dish.mount == "altaz":
        span = dish.azimuth_max_deg - dish.azimuth_min_deg
        if span < 360.0:
            rel = (pointing.az_deg - dish.azimuth_min_deg) % 360.0
            if rel > span + 1e-9:
                return (f"azimuth {pointing.az_deg:.1f} deg is outside the mount's range "
                        f"{dish.azimuth_min_deg}..{dish.azimuth_max_deg} deg")
    return None


def require_reachable(site: Site, pointing: Pointing) -> Pointing:
    """Return ``pointing`` or raise a UserError saying why the dish cannot take it."""
    problem = reachability_problem(site, pointing)
    if problem:
        raise UserError(f"pointing not reachable at {site.name}: {problem}")
    return pointing
