"""Earth orientation read straight from the installed files, against astropy's own table."""
import subprocess
import sys

import numpy as np

from planner import eop, timebase


def test_ut1_utc_matches_astropy_table():
    """Every tabulated day: within 0.1 ms of astropy's IERS_Auto (the same files, read by
    astropy's table machinery); the largest difference seen is 0.04 ms, where astropy and
    this reader round the Bulletin A/B columns differently."""
    from astropy.utils import iers
    table = iers.earth_orientation_table.get()
    mjd = np.asarray(table["MJD"].value, dtype=float)
    ref = np.asarray(table["UT1_UTC"].to_value("s"), dtype=float)
    ok = np.isfinite(ref)
    ours_mjd, ours = eop.ut1_minus_utc_table()
    assert ours_mjd[0] == mjd[ok][0]
    got = np.interp(mjd[ok], ours_mjd, ours)
    assert np.max(np.abs(got - ref[ok])) < 1e-4
    # Between table days too (astropy interpolates linearly, as we do).
    from astropy.time import Time
    mid = 0.5 * (mjd[ok][1:] + mjd[ok][:-1])[::53]
    ref_mid = table.ut1_utc(Time(mid, format="mjd", scale="utc")).to_value("s")
    assert np.max(np.abs(timebase.dut1_s(mid) - ref_mid)) < 1e-4


def test_past_the_table_holds_the_last_value():
    mjd, dut = eop.ut1_minus_utc_table()
    assert timebase.dut1_s(np.array([mjd[-1] + 400.0]))[0] == dut[-1]
    assert timebase.dut1_s(np.array([mjd[0] - 400.0]))[0] == dut[0]


def test_importing_the_cli_loads_no_astropy_rich_or_icalendar():
    """Start-up stays light: building the parser imports no computation library."""
    code = ("import sys; from planner.cli import build_parser; build_parser(); "
            "print(sorted(m for m in ('astropy', 'rich', 'icalendar', 'matplotlib', 'highspy') "
            "if m in sys.modules))")
    run = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert run.stdout.strip() == "[]"
