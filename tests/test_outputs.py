"""Atomic writes: complete file or nothing, never clobber without force."""
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
