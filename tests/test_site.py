"""Site files: the bundled examples, derived beamwidth, lookup, and every kind of bad field."""
import tomllib

import pytest

from planner.errors import UserError
from planner.site import (HI_WAVELENGTH_M, bundled_sites_dir, load_site, read_site_file,
                          site_from_dict)

EXAMPLES = sorted(bundled_sites_dir().glob("*.toml"))


def _raw(name="hollowmere"):
    return tomllib.loads((bundled_sites_dir() / f"{name}.toml").read_text())


def test_two_example_sites_ship():
    names = {p.stem for p in EXAMPLES}
    assert {"hollowmere", "saltbush-ridge"} <= names
    north, south = load_site("hollowmere"), load_site("saltbush-ridge")
    assert north.latitude_deg > 30 and north.dish.mount == "transit" and north.dish.diameter_m == 3
    assert south.latitude_deg < -30 and south.dish.mount == "altaz" and south.dish.diameter_m == 2


def test_default_site_is_used_without_name():
    assert load_site(None).name == load_site("hollowmere").name


def test_derived_beamwidth_hand_worked():
    # lambda = c / f = 299792458 / 1420405751.768 = 0.211061 m (HI rest frequency, Hellwig 1970).
    # HPBW = 70 deg x lambda / D = 70 x 0.211061 / 3 = 4.9247 deg (NRAO ERA approximation).
    assert abs(HI_WAVELENGTH_M - 0.211061) < 1e-6
    assert abs(load_site("hollowmere").dish.beamwidth_deg - 4.9247) < 1e-3


def test_lookup_by_path_name_and_slug(tmp_path):
    path = bundled_sites_dir() / "saltbush-ridge.toml"
    assert load_site(str(path)).name == "Saltbush Ridge Secondary School"
    assert load_site("Saltbush Ridge").name == "Saltbush Ridge Secondary School"
    with pytest.raises(UserError, match="no site file or site named 'nowhere'"):
        load_site("nowhere")
    with pytest.raises(UserError, match="did you mean 'hollowmere'"):
        load_site("hollowmer")


def test_horizon_mask_interpolates_and_respects_minimum():
    dish = load_site("hollowmere").dish
    # Mask points (170, 12) and (190, 12): flat between them.
    assert dish.horizon_limit_deg(180.0) == pytest.approx(12.0)
    # between 190 deg (12) and 350 deg (15): at 270 deg, 12 + 3 x 80/160 = 13.5
    assert dish.horizon_limit_deg(270.0) == pytest.approx(13.5)


def _mutate(table, key, value, base="hollowmere"):
    raw = _raw(base)
    if value is _DELETE:
        del raw[table][key]
    else:
        raw[table][key] = value
    return raw


_DELETE = object()

BAD_FIELDS = [
    ("site", "name", _DELETE, r"\[site\] name is missing"),
    ("site", "latitude_deg", _DELETE, r"\[site\] latitude_deg is missing"),
    ("site", "latitude_deg", "north", r"latitude_deg must be a number"),
    ("site", "latitude_deg", 91, r"latitude_deg = 91 is out of range"),
    ("site", "longitude_deg", -181.0, r"longitude_deg = -181.0 is out of range"),
    ("site", "longitude_deg", True, r"longitude_deg must be a number"),
    ("site", "height_m", 20000, r"height_m = 20000 is out of range"),
    ("site", "timezone", "Europe/Lundon", r"timezone 'Europe/Lundon' is not a known IANA"),
    ("site", "timezone", 5, r"timezone must be a str"),
    ("site", "latitude", 5.0, r"unknown field 'latitude' \(did you mean 'latitude_deg'\?\)"),
    ("dish", "diameter_m", 0, r"diameter_m = 0 is out of range"),
    ("dish", "diameter_m", -3, r"diameter_m = -3 is out of range"),
    ("dish", "mount", "equatorial", r"mount 'equatorial' must be one of transit, fixed, altaz"),
    ("dish", "mount", "transt", r"did you mean 'transit'"),
    ("dish", "elevation_min_deg", 95, r"elevation_min_deg = 95 is out of range"),
    ("dish", "elevation_min_deg", 90, r"elevation_min_deg must be below elevation_max_deg"),
    ("dish", "facing", "east", r"facing 'east' must be north, south or either"),
    ("dish", "horizon", [[0, 5], [400, 5]], r"horizon item 2"),
    ("dish", "horizon", [[0, 5], "x"], r"horizon item 2 must be \[azimuth_deg, elevation_deg\]"),
    ("dish", "horizon", [[10, 5], [10, 6]], r"horizon repeats an azimuth"),
    ("dish", "beamwith_deg", 5.0, r"did you mean 'beamwidth_deg'"),
    ("receiver", "bandwidth_mhz", -2.4, r"bandwidth_mhz = -2.4 is out of range"),
    ("receiver", "channels", 1024.5, r"channels must be an integer"),
    ("receiver", "channels", 0, r"channels = 0 is out of range"),
    ("receiver", "tsys_k", 0, r"tsys_k = 0 is out of range"),
    ("receiver", "tsys_k", float("nan"), r"tsys_k must be finite"),
    ("rules", "b_max_deg", 0, r"b_max_deg = 0 is out of range"),
    ("rules", "b_max_deg", 95, r"b_max_deg = 95 is out of range"),
    ("rules", "sun_min_sep_deg", -1, r"sun_min_sep_deg = -1 is out of range"),
    ("rules", "sun_hazard_deg", 0, r"sun_hazard_deg = 0 is out of range \(0, 45\]"),
    ("rules", "sun_hazard_deg", 60, r"sun_hazard_deg = 60 is out of range"),
    ("rules", "sun_hazard", 5, r"did you mean 'sun_hazard_deg'"),
    ("rules", "band_deg", 3, r"\[rules\] band_deg is now called b_max_deg"),
    ("rules", "bin_width_deg", "1", r"bin_width_deg must be a number"),
]


@pytest.mark.parametrize("table,key,value,message", BAD_FIELDS)
def test_bad_field_names_file_table_and_field(table, key, value, message):
    with pytest.raises(UserError, match=message) as info:
        site_from_dict(_mutate(table, key, value), "club.toml")
    text = str(info.value)
    assert text.startswith("club.toml: ") and "\n" not in text


def test_structural_errors():
    raw = _raw()
    del raw["receiver"]
    with pytest.raises(UserError, match=r"table \[receiver\] is missing"):
        site_from_dict(raw, "x.toml")
    raw = _raw()
    raw["dsh"] = {}
    with pytest.raises(UserError, match=r"unknown table \[dsh\] \(did you mean 'dish'\?\)"):
        site_from_dict(raw, "x.toml")
    raw = _raw("saltbush-ridge")
    del raw["dish"]["slew_az_deg_s"]
    with pytest.raises(UserError, match="slew_az_deg_s is required for an altaz mount"):
        site_from_dict(raw, "x.toml")
    raw = _raw()
    raw["pointing"] = {"alt_deg": 40.0}
    with pytest.raises(UserError, match=r"\[pointing\] needs both alt_deg and az_deg"):
        site_from_dict(raw, "x.toml")


def test_file_level_errors(tmp_path):
    missing = tmp_path / "missing.toml"
    with pytest.raises(UserError, match="missing.toml: site file not found"):
        read_site_file(missing)
    broken = tmp_path / "broken.toml"
    broken.write_text("[site\nname = 'x'\n")
    with pytest.raises(UserError, match=r"broken.toml: not valid TOML \(.*line 1"):
        read_site_file(broken)
    binary = tmp_path / "binary.toml"
    binary.write_bytes(b"\xff\xfe\x00garbage")
    with pytest.raises(UserError, match="binary.toml: cannot read site file"):
        read_site_file(binary)


def test_site_file_not_modified(tmp_path):
    src = bundled_sites_dir() / "hollowmere.toml"
    copy = tmp_path / "club.toml"
    copy.write_bytes(src.read_bytes())
    before = (copy.read_bytes(), copy.stat().st_mtime_ns)
    load_site(str(copy))
    assert (copy.read_bytes(), copy.stat().st_mtime_ns) == before


def test_feed_safety_rule_default_and_echo(tmp_path):
    """sun_hazard_deg: 10 deg by default (common practice), configurable, in every site object."""
    club = load_site("hollowmere")
    assert club.rules.sun_hazard_deg == 10.0 and club.summary()["sun_hazard_deg"] == 10.0
    raw = _raw("hollowmere")
    raw["rules"]["sun_hazard_deg"] = 15
    assert site_from_dict(raw, "x.toml").rules.sun_hazard_deg == 15.0


# TOML escapes for every character the calendar-injection rule names, and ESC.
_ESCAPES = {"\r": r"\r", "\n": r"\n", "\x0b": r"\u000B", "\x0c": r"\f", "\x85": r"\u0085",
            "\u2028": r"\u2028", "\u2029": r"\u2029", "\x1b": r"\u001B"}


def _named(tmp_path, escaped_name: str, prefix: bytes = b"") -> str:
    text = (bundled_sites_dir() / "hollowmere.toml").read_text()
    lines = [f'name = "{escaped_name}"' if line.startswith("name = ") else line
             for line in text.splitlines()]
    path = tmp_path / "club.toml"
    path.write_bytes(prefix + "\n".join(lines).encode())
    return str(path)


@pytest.mark.parametrize("ch", sorted(_ESCAPES))
def test_control_characters_in_the_name_are_refused(tmp_path, ch):
    """A CR in a site name used to forge events in calendars; every line-breaking or control
    character is refused, naming the file and the field."""
    path = _named(tmp_path, f"Evil{_ESCAPES[ch]}END:VEVENT")
    with pytest.raises(UserError, match=rf"^{path}: \[site\] name contains a control character, "
                                        rf"U\+{ord(ch):04X}") as info:
        read_site_file(path)
    assert "\n" not in str(info.value)
    raw = _raw()
    raw["site"]["name"] = f"Club{ch}"
    with pytest.raises(UserError, match=r"^x\.toml: \[site\] name contains a control"):
        site_from_dict(raw, "x.toml")


def test_tab_in_the_name_and_a_bom_are_accepted(tmp_path):
    site = read_site_file(_named(tmp_path, r"Hollowmere\tClub", prefix=b"\xef\xbb\xbf"))
    assert site.name == "Hollowmere\tClub"


def test_devices_pipes_and_deep_nesting_are_one_line_errors(tmp_path):
    with pytest.raises(UserError, match=r"^/dev/zero: cannot read site file: it is a device"):
        load_site("/dev/zero")
    deep = tmp_path / "deep.toml"
    deep.write_text("x = " + "[" * 100_000 + "]" * 100_000 + "\n")
    with pytest.raises(UserError, match=r"deep\.toml: not a site file \(arrays or tables nested"):
        read_site_file(deep)


def test_drive_fields_park_and_pointing_tolerance():
    dish = site_from_dict(_raw("saltbush-ridge"), "x.toml").dish
    assert (dish.park_alt_deg, dish.park_az_deg, dish.pointing_tolerance_deg) == (None, None, 0.5)
    raw = _raw("saltbush-ridge")
    raw["dish"].update(park_alt_deg=80, park_az_deg=-90, pointing_tolerance_deg=0.2)
    dish = site_from_dict(raw, "x.toml").dish
    assert (dish.park_alt_deg, dish.park_az_deg, dish.pointing_tolerance_deg) == (80.0, -90.0, 0.2)


@pytest.mark.parametrize("fields, message", [
    ({"park_alt_deg": 80}, "park_alt_deg and park_az_deg go together"),
    ({"park_alt_deg": 89, "park_az_deg": 0}, "above elevation_max_deg"),  # saltbush: 88
    ({"park_alt_deg": 40, "park_az_deg": 355}, "outside the drive range"),  # -170..350
    ({"park_alt_deg": -1, "park_az_deg": 0}, r"park_alt_deg = -1 is out of range \[0, 90\]"),
    ({"pointing_tolerance_deg": 0}, r"pointing_tolerance_deg = 0 is out of range \(0, 10\]"),
    ({"park_azimuth_deg": 0}, "did you mean 'park_az_deg'"),
])
def test_drive_field_mistakes(fields, message):
    raw = _raw("saltbush-ridge")
    raw["dish"].update(fields)
    with pytest.raises(UserError, match=message) as info:
        site_from_dict(raw, "x.toml")
    assert str(info.value).startswith("x.toml: [dish] ")
