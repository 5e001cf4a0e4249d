"""Atomic writes: complete file or nothing, never clobber without force."""
import errno
import os

import pytest

from planner import outputs
from planner.errors import UserError


def test_write_and_refuse_overwrite(tmp_path):
    target = tmp_path / "a.txt"
    outputs.write_atomic(target, "one")
    with pytest.raises(UserError, match="already exists"):
        outputs.write_atomic(target, "two")
    outputs.write_atomic(target, "two", force=True)
    assert target.read_text() == "two"


def test_interrupted_write_leaves_nothing(tmp_path, monkeypatch):
    target = tmp_path / "b.txt"
    target.write_text("old")

    def boom(fd):
        raise KeyboardInterrupt  # as if the user pressed Ctrl-C mid-write

    monkeypatch.setattr(os, "fsync", boom)
    with pytest.raises(KeyboardInterrupt):
        outputs.write_atomic(target, "new", force=True)
    assert target.read_text() == "old"
    assert [p.name for p in tmp_path.iterdir()] == ["b.txt"]


def test_unwritable_targets(tmp_path):
    with pytest.raises(UserError, match="is a folder"):
        outputs.write_atomic(tmp_path, "x")
    with pytest.raises(UserError, match="does not exist"):
        outputs.write_atomic(tmp_path / "missing" / "x.txt", "x")
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        if os.access(locked, os.W_OK):
            pytest.skip("running as a user that can write anywhere (root)")
        with pytest.raises(UserError, match="not writable"):
            outputs.write_atomic(locked / "x.txt", "x")
    finally:
        locked.chmod(0o700)


def test_full_disk_is_one_line_and_leaves_nothing(tmp_path, full_disk):
    target = tmp_path / "plan.json"
    target.write_text("old")
    with pytest.raises(UserError, match=rf"^{target}: cannot write the file: the disk is full "
                                        r"\(no space left on the device\); nothing was written$"):
        outputs.write_atomic(target, "new" * 1000, force=True)
    assert target.read_text() == "old"
    assert [p.name for p in tmp_path.iterdir()] == ["plan.json"]  # no temporary file left


def test_several_outputs_are_written_all_or_none(tmp_path, monkeypatch):
    first, second = tmp_path / "plan.json", tmp_path / "plan.ics"
    real_write, calls = os.write, []

    def second_fails(fd, data):  # the first file goes through, the second hits a full disk
        if fd > 2:
            calls.append(fd)
            if len(calls) > 1:
                raise OSError(errno.ENOSPC, "No space left on device")
        return real_write(fd, data)

    monkeypatch.setattr(os, "write", second_fails)
    with pytest.raises(UserError, match=r"plan\.ics: cannot write the file: the disk is full"):
        outputs.write_all([(first, "{}"), (second, b"BEGIN:VCALENDAR")])
    assert list(tmp_path.iterdir()) == []  # the complete first file was not put in place either
    monkeypatch.setattr(os, "write", real_write)
    assert outputs.write_all([(first, "{}"), (second, b"X")]) == [first, second]
    assert first.read_text() == "{}" and second.read_bytes() == b"X"


def test_read_only_and_missing_places_are_one_line(tmp_path, monkeypatch):
    def read_only(*args, **kwargs):
        raise OSError(errno.EROFS, "Read-only file system")

    monkeypatch.setattr(outputs.tempfile, "mkstemp", read_only)
    with pytest.raises(UserError, match=r"x\.txt: cannot write the file: the file system is "
                                        "read-only; nothing was written"):
        outputs.write_atomic(tmp_path / "x.txt", "x")


def test_dash_is_standard_output(tmp_path, capsysbinary):
    outputs.check_writable("-", force=False)  # never "already exists"
    outputs.write_all([(tmp_path / "a.txt", "file"), ("-", b"\x00binary\r\n")])
    assert capsysbinary.readouterr().out == b"\x00binary\r\n"
    assert (tmp_path / "a.txt").read_text() == "file"


@pytest.mark.parametrize("text,cell", [
    ("=HYPERLINK(\"http://x\")", "'=HYPERLINK(\"http://x\")"), ("+1+2", "'+1+2"),
    ("-1+2", "'-1+2"), ("@SUM(A1)", "'@SUM(A1)"), ("\tx", "'\tx"), ("\r=x", "'\r=x"),
    ("'=x", "''=x"), ("-2.5", "-2.5"), ("+3", "+3"), ("1e-3", "1e-3"), ("Carina", "Carina"),
    ("", ""), ("'quoted'", "'quoted'"), ("-", "'-"),
])
def test_csv_text_guards_formulas_but_not_numbers(text, cell):
    assert outputs.csv_text(text) == cell
    assert outputs.csv_untext(cell) == text  # reads back exactly
