"""Target grids, target files and reference positions."""
import os
import numpy as np
import pytest
from astropy.coordinates import SkyCoord
import astropy.units as u

from planner.errors import UserError
from planner.targets import (galactic_target, icrs_target, parse_grid, parse_reference,
                             parse_targets_csv, parse_targets_toml, position_name, read_targets,
                             reference_positions)


def test_grid_counts_and_names():
    targets = parse_grid("l=20..240/5,b=-4..4/4", 10)
    # (240 - 20) / 5 + 1 = 45 longitudes x (4 - -4) / 4 + 1 = 3 latitudes.
    assert len(targets) == 135
    assert [t.name for t in targets[:4]] == ["G20-4", "G20+0", "G20+4", "G25-4"]
    assert targets[-1].name == "G240+4"
    assert all(t.minutes == 10 and t.priority == 1 and t.repeats == 1 for t in targets)


def test_grid_wraps_through_360():
    ls = [t.l_deg for t in parse_grid("l=300..40/10,b=0", 5)]
    assert ls == [300, 310, 320, 330, 340, 350, 0, 10, 20, 30, 40]
    # 0..360 is the whole circle: 360 is 0 again and is not repeated.
    assert len(parse_grid("l=0..360/10,b=0", 5)) == 36


def test_grid_inclusive_end_and_uneven_step():
    # 20, 27, 34: the next value, 41, passes 40; the end itself is only hit by a dividing step.
    assert [t.l_deg for t in parse_grid("l=20..40/7,b=0", 5)] == [20, 27, 34]
    assert [t.b_deg for t in parse_grid("b=-1..1/0.5,l=100", 5)] == [-1, -0.5, 0, 0.5, 1]
    assert [t.name for t in parse_grid("l=20.5,b=-1.25", 5)] == ["G20.5-1.25"]


def test_grid_coordinates_match_astropy():
    # (l, b) = (0, 0) is RA 266.4051, Dec -28.936175 (astropy's J2000 galactic frame, after Blaauw et al. 1960).
    t = parse_grid("l=0,b=0", 5)[0]
    assert t.ra_deg == pytest.approx(266.4051, abs=1e-3)
    assert t.dec_deg == pytest.approx(-28.936175, abs=1e-3)
    for t in parse_grid("l=30..330/60,b=-30..30/30", 5):
        c = SkyCoord(l=t.l_deg * u.deg, b=t.b_deg * u.deg, frame="galactic").icrs
        # Same pole constants as astropy; planner.galactic leaves out the ICRS/FK5 frame
        # bias (~0.02 arcsec = 6e-6 deg), so allow 2e-5 deg.
        assert c.separation(SkyCoord(t.ra_deg * u.deg, t.dec_deg * u.deg)).deg < 2e-5


@pytest.mark.parametrize("grid, message", [
    ("", "empty"),
    ("l=20..240/5", "b is missing"),
    ("l=20..240/5,b=0,l=3", "twice"),
    ("x=1,b=0", "unknown axis"),
    ("l=20..240,b=0", "needs a step"),
    ("l=20..240/0,b=0", "positive"),
    ("l=20..240/-5,b=0", "positive"),
    ("l=20..abc/5,b=0", "not a number"),
    ("l=20..400/5,b=0", r"\[0, 360\]"),
    ("l=20,b=4..-4/4", "upward"),
    ("l=20,b=-95", r"\[-90, 90\]"),
    ("l=0..360/0.01,b=-90..90/0.01", "more than"),
    ("l20,b=0", "key=range"),
])
def test_grid_errors_name_the_option(grid, message):
    with pytest.raises(UserError, match=message) as err:
        parse_grid(grid, 10)
    assert str(err.value).startswith("--grid")


def test_position_names():
    assert position_name(120.0, 0.0) == "G120+0"
    assert position_name(120.0, -0.0) == "G120+0"
    assert position_name(359.9996, 1.0) == "G0+1"  # rounds to 360.000, i.e. 0
    assert position_name(5.25, -3.5) == "G5.25-3.5"


CSV = """# survey targets
name,l,b,minutes,priority,repeats
Carina,287.6,-0.6,20,3,2
,300,0,,,
"""


def test_csv_targets_and_defaults():
    a, b = parse_targets_csv(CSV, "t.csv", minutes=10, priority=1)
    assert (a.name, a.minutes, a.priority, a.repeats) == ("Carina", 20, 3, 2)
    assert (b.name, b.minutes, b.priority, b.repeats) == ("G300+0", 10, 1, 1)


def test_csv_ra_dec_and_aliases():
    text = "name,ra_deg,dec_deg\nSgrA,266.41683,-29.00781\n"
    (t,) = parse_targets_csv(text, "t.csv", 10)
    # Sgr A* lies at l = 359.944, b = -0.046 (astropy, from the Reid & Brunthaler 2004 position).
    ref = SkyCoord(266.41683 * u.deg, -29.00781 * u.deg).galactic
    # 2e-5 deg: the frame bias left out by planner.galactic (see above).
    assert t.l_deg == pytest.approx(ref.l.deg, abs=2e-5)
    assert t.b_deg == pytest.approx(ref.b.deg, abs=2e-5)


@pytest.mark.parametrize("text, message", [
    ("name,x\nA,1\n", "t.csv:1: unknown column 'x'"),
    ("name,minutes\nA,1\n", "t.csv:1: the header needs"),
    ("name,l,b\nA,1\n", "t.csv:2: 2 fields"),
    ("name,l,b\nA,1,\n", "t.csv:2: l and b must be given together"),
    ("name,l,b,ra,dec\nA,1,2,3,4\n", "t.csv:2: give l/b or ra/dec"),
    ("name,l,b\n# c\nA,400,0\n", r"t.csv:3: l = 400 is outside \[0, 360\]"),
    ("name,l,b,minutes\nA,10,0,0\n", r"t.csv:2: minutes = 0 is outside \(0"),
    ("name,l,b,repeats\nA,10,0,1.5\n", "t.csv:2: repeats = 1.5 must be a whole number"),
    ("name,l,b\nA,10,0\nA,20,0\n", "t.csv:3: target name 'A' is already used"),
    ("# nothing\n", "t.csv:1: no header"),
    ("name,l,b\n", "no targets"),
])
def test_csv_errors_give_file_and_line(text, message):
    with pytest.raises(UserError, match=message):
        parse_targets_csv(text, "t.csv", 10)


TOML = """
[defaults]
minutes = 15

[[target]]
name = "A"
l = 300
b = 0

[[target]]
ra = 83.8
dec = -5.4
priority = 2
"""


def test_toml_targets_with_defaults():
    a, b = parse_targets_toml(TOML, "t.toml", 10)
    assert (a.name, a.minutes, a.l_deg) == ("A", 15, 300)
    assert b.priority == 2 and b.minutes == 15 and b.ra_deg == pytest.approx(83.8)


def test_toml_errors_give_the_table_line():
    bad = TOML.replace("dec = -5.4", "dec = -95")
    with pytest.raises(UserError, match=r"t.toml:10: dec = -95 is outside"):
        parse_targets_toml(bad, "t.toml", 10)
    with pytest.raises(UserError, match="t.toml:5: unknown key 'lon'"):
        parse_targets_toml(TOML.replace("l = 300", "lon = 300"), "t.toml", 10)
    with pytest.raises(UserError, match="not valid TOML"):
        parse_targets_toml("[[target]\n", "t.toml", 10)


def test_read_targets_files(tmp_path):
    path = tmp_path / "list.csv"
    path.write_text(CSV)
    assert len(read_targets(path, 10)) == 2
    with pytest.raises(UserError, match="not found"):
        read_targets(tmp_path / "none.csv", 10)
    with pytest.raises(UserError, match=".csv or .toml"):
        read_targets(tmp_path / "list.txt", 10)


def test_example_file_reads():
    from pathlib import Path
    example = Path(__file__).resolve().parent.parent / "examples" / "targets.csv"
    targets = read_targets(example, 10)
    assert len(targets) >= 5
    assert len({t.name for t in targets}) == len(targets)


def test_references():
    assert parse_reference("high-b").mode == "high-b"
    fixed = parse_reference("l=180,b=-60")
    assert (fixed.mode, fixed.l_deg, fixed.b_deg) == ("fixed", 180.0, -60.0)
    for bad in ("low-b", "l=180", "l=180,b=100", "b=1,b=2"):
        with pytest.raises(UserError, match="--reference"):
            parse_reference(bad)
    south = galactic_target(None, 300.0, -2.0, 10)
    options = reference_positions(parse_reference("high-b"), south)
    assert options[:4] == [(300.0, -30.0), (300.0, -40.0), (300.0, -50.0), (300.0, -60.0)]
    assert options[4:] == [(300.0, 30.0), (300.0, 40.0), (300.0, 50.0), (300.0, 60.0)]
    assert reference_positions(fixed, south) == [(180.0, -60.0)]


def test_icrs_and_galactic_targets_agree():
    g = galactic_target("x", 45.0, 10.0, 5)
    i = icrs_target("x", g.ra_deg, g.dec_deg, 5)
    assert i.l_deg == pytest.approx(45.0, abs=1e-9) and i.b_deg == pytest.approx(10.0, abs=1e-9)
    assert np.isfinite([g.ra_deg, g.dec_deg]).all()


@pytest.mark.parametrize("ch", ["\r", "\x0b", "\x0c", "\x85", "\u2028", "\u2029", "\x1b", "\t"])
def test_control_characters_in_names_are_refused(ch):
    """Target names go into calendars and CSV files: a line break or any other control
    character (TAB too: a name has no room for one) is refused at its file and line."""
    csv_text = CSV.replace("Carina,", f'"Car{ch}ina",')
    with pytest.raises(UserError, match=rf"^t\.csv:3: name contains a control character, "
                                        rf"U\+{ord(ch):04X}"):
        parse_targets_csv(csv_text, "t.csv", 10)
    toml_text = TOML.replace('name = "A"', f'name = "A\\u{ord(ch):04X}B"')
    with pytest.raises(UserError, match=rf"^t\.toml:5: name contains a control character, "
                                        rf"U\+{ord(ch):04X}"):
        parse_targets_toml(toml_text, "t.toml", 10)


def test_csv_lines_end_only_at_line_feeds():
    # CRLF files read as before; a bare CR inside a line is not a line break.
    assert len(parse_targets_csv(CSV.replace("\n", "\r\n"), "t.csv", 10)) == 2
    with pytest.raises(UserError, match=r"^t\.csv:3: "):
        parse_targets_csv(CSV.replace("Carina,", "Car\rina,"), "t.csv", 10)


def test_target_files_with_a_bom_and_devices(tmp_path):
    for name, text in (("list.csv", CSV), ("list.toml", TOML)):
        path = tmp_path / name
        path.write_bytes(b"\xef\xbb\xbf" + text.encode())
        assert len(read_targets(path, 10)) == 2
    deep = tmp_path / "deep.toml"
    deep.write_text("x = " + "[" * 100_000 + "]" * 100_000 + "\n")
    with pytest.raises(UserError, match=r"deep\.toml: not a target file \(arrays or tables"):
        read_targets(deep, 10)
    fifo = tmp_path / "pipe.csv"
    os.mkfifo(fifo)
    with pytest.raises(UserError, match=r"pipe\.csv: cannot read target file: it is a pipe"):
        read_targets(fifo, 10)
