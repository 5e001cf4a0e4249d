"""Reading input files safely and refusing control characters in echoed text."""
import os
import time

import pytest

from planner import inputs
from planner.errors import UserError

# Every character the calendar-injection rule names, and a few more C0/C1 controls.
CONTROLS = ["\r", "\n", "\x0b", "\x0c", "\x85", "\u2028", "\u2029", "\x00", "\x1b", "\x7f", "\x9f"]


@pytest.mark.parametrize("ch", CONTROLS)
def test_control_characters_are_found(ch):
    assert inputs.control_character(f"Club{ch}Name") == ch
    with pytest.raises(UserError, match=r"^site\.toml: \[site\] name contains a control character, "
                                        rf"U\+{ord(ch):04X} "):
        inputs.check_plain(f"Club{ch}Name", "site.toml", "[site] name")


def test_tab_only_where_whitespace_is_allowed():
    assert inputs.control_character("Mon\t19:00-20:00") is None
    assert inputs.control_character("G120\t+0", allow_tab=False) == "\t"
    # Ordinary text, including non-ASCII letters and symbols, passes.
    for text in ("Hollowmere Amateur Radio Astronomy Club", "Observatoire de Haute-Provence",
                 "Ørsted 3 m – Σ", "café; A, B"):
        assert inputs.check_plain(text, "x", "name") == text
    assert inputs.describe_character("\r") == "U+000D (carriage return)"
    assert inputs.describe_character("\x85") == "U+0085 (next line)"


def test_devices_fifos_and_folders_are_refused_unread(tmp_path):
    started = time.perf_counter()
    with pytest.raises(UserError, match=r"^/dev/zero: cannot read site file: it is a device"):
        inputs.read_input("/dev/zero", "site file", 100)
    fifo = tmp_path / "rota.txt"
    os.mkfifo(fifo)  # no writer: a plain open() would wait for ever
    with pytest.raises(UserError, match=r"rota\.txt: cannot read windows file: it is a pipe"):
        inputs.read_input(fifo, "windows file", 100)
    with pytest.raises(UserError, match="it is a folder"):
        inputs.read_input(tmp_path, "plan file", 100)
    with pytest.raises(UserError, match=r"nope\.toml: site file not found$"):
        inputs.read_input(tmp_path / "nope.toml", "site file", 100)
    # Refused before reading: far below the time a read of /dev/zero to the limit would take
    # (generous: the machine is shared).
    assert time.perf_counter() - started < 2.0


def test_size_limit_and_bom(tmp_path, monkeypatch):
    assert inputs.MAX_SMALL_FILE_BYTES == 10_000_000  # the documented 10 MB
    path = tmp_path / "a.toml"
    path.write_bytes(b"\xef\xbb\xbfx = 1\n")
    assert inputs.read_input_text(path, "site file") == "x = 1\n"  # the BOM is dropped
    monkeypatch.setattr(inputs, "MAX_SMALL_FILE_BYTES", 5)
    with pytest.raises(UserError, match=r"a\.toml: file is 0\.0 MB, larger than the 5e-06 MB "
                                        r"limit for a site file"):
        inputs.read_input_text(path, "site file")
    path.write_bytes(b"x = 1\n\xe9\n")
    with pytest.raises(UserError, match=r"not UTF-8 text \(byte 0xE9 on line 2\)"):
        inputs.read_input_text(path, "site file", 100)


def test_open_input_checks_like_read_input(tmp_path):
    from planner.inputs import open_input
    path = tmp_path / "x.bin"
    path.write_bytes(b"0123456789")
    with open_input(path, "recording", 10) as handle:
        assert handle.read() == b"0123456789"
    with pytest.raises(UserError, match="x.bin: file is 0.0 MB, larger than the 9e-06 MB limit for a recording"):
        open_input(path, "recording", 9)
    with pytest.raises(UserError, match="cannot read recording: it is a folder"):
        open_input(tmp_path, "recording", 10)
