"""The demo's text outputs are the same as the stored reference (speed work changes nothing).

The reference (``tests/data/demo-reference/*.gz``) was made by ``hiplan demo`` before the
start-up and speed work; every text file the demo writes must match it, apart from the
calendar's DTSTAMP (the time of export), the checkout's own path and the output folder's.
Charts (PNG) and the HTML brief (which embeds them) are left out: their bytes depend on
matplotlib's version.

After a deliberate change of results, remake the reference with
``.venv/bin/python tests/test_demo_reference.py`` and say why in the commit.
"""
import gzip
import re
import sys
from pathlib import Path

import pytest

from planner.cli import main

ROOT = Path(__file__).resolve().parent.parent
REFERENCE = ROOT / "tests" / "data" / "demo-reference"
SKIP = (".png", ".html")


def normalised(path: Path, out: Path) -> str:
    text = path.read_text(encoding="utf-8")
    text = text.replace(str(out), "<demo-output>")  # files that name other demo files
    text = text.replace(str(ROOT), "<checkout>")
    return re.sub(r"DTSTAMP:\d{8}T\d{6}Z", "DTSTAMP:<export time>", text)


def _run_demo(out: Path) -> list[Path]:
    """The demo's text files, as paths relative to its output folder (subfolders included)."""
    assert main(["demo", "--output-dir", str(out), "--force"]) == 0
    return sorted(p.relative_to(out) for p in out.rglob("*")
                  if p.is_file() and not p.name.endswith(SKIP))


def test_demo_outputs_match_the_reference(tmp_path, capsys):
    files = _run_demo(tmp_path)
    capsys.readouterr()
    stored = sorted(str(p.relative_to(REFERENCE))[:-3] for p in REFERENCE.rglob("*.gz"))
    assert [str(p) for p in files] == stored
    for path in files:
        want = gzip.decompress((REFERENCE / f"{path}.gz").read_bytes()).decode("utf-8")
        got = normalised(tmp_path / path, tmp_path)
        if got != want:
            diff = [(i, a, b) for i, (a, b) in enumerate(zip(want.splitlines(), got.splitlines()))
                    if a != b][:3]
            pytest.fail(f"{path.name} differs from the reference, first lines: {diff}")


if __name__ == "__main__":  # remake the reference
    import tempfile
    with tempfile.TemporaryDirectory() as tmp:
        for path in _run_demo(Path(tmp)):
            (REFERENCE / path).parent.mkdir(parents=True, exist_ok=True)
            (REFERENCE / f"{path}.gz").write_bytes(
                gzip.compress(normalised(Path(tmp) / path, Path(tmp)).encode("utf-8"), mtime=0))
    sys.exit(0)
