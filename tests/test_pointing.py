"""Pointing conversions and reachability."""
import dataclasses

import pytest

from planner.errors import UserError
from planner.pointing import (from_altaz, from_hadec, on_meridian_at_dec, on_meridian_at_elevation,
                              reachability_problem, require_reachable)


def test_meridian_dec_hand_worked(club):
    # Latitude 53.42: dec 20 culminates south at 90 - (53.42 - 20) = 56.58 deg.
    p = on_meridian_at_dec(club, 20.0)
    assert p.alt_deg == pytest.approx(56.58) and p.az_deg == 180.0 and p.ha_deg == 0.0
    # dec 70 culminates north of the zenith at 90 - (70 - 53.42) = 73.42 deg, azimuth 0.
    p = on_meridian_at_dec(club, 70.0)
    assert p.alt_deg == pytest.approx(73.42) and p.az_deg == 0.0


def test_elevation_facing_defaults_to_equator(club, school):
    assert on_meridian_at_elevation(club, 40).az_deg == 180.0
    # Southern site faces north by default: dec = lat + 90 - el = -34.93 + 50 = 15.07
    p = on_meridian_at_elevation(school, 40)
    assert p.az_deg == 0.0 and p.dec_deg == pytest.approx(15.07, abs=1e-6)


def test_altaz_hadec_round_trip(club):
    p = from_altaz(club, 35.0, 123.0)
    q = from_hadec(club, p.ha_deg, p.dec_deg)
    assert q.alt_deg == pytest.approx(35.0, abs=1e-9) and q.az_deg == pytest.approx(123.0, abs=1e-9)


def test_reachability(club, school):
    assert reachability_problem(club, on_meridian_at_dec(club, 20.0)) is None
    low = on_meridian_at_dec(club, -30.0)  # 6.58 deg elevation, limit 12
    assert "below the site's limit" in reachability_problem(club, low)
    off_meridian = from_altaz(club, 40.0, 100.0)
    assert "meridian only" in reachability_problem(club, off_meridian)
    north_only = dataclasses.replace(club, dish=dataclasses.replace(club.dish, facing="north"))
    assert "faces north only" in reachability_problem(north_only, on_meridian_at_dec(club, 0.0))
    # School's horizon mask at azimuth 300 is 25 deg: 20 deg elevation there is blocked.
    assert "below the site's limit" in reachability_problem(school, from_altaz(school, 20.0, 300.0))
    assert reachability_problem(school, from_altaz(school, 30.0, 300.0)) is None
    with pytest.raises(UserError, match="pointing not reachable"):
        require_reachable(club, low)
