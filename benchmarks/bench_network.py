"""Benchmark: a network of 20 invented stations planned together for a month.

Twenty site files are written from the bundled examples with the latitude, longitude and
time zone changed (stations spread from 60 deg S to 60 deg N round the world, transit and
alt-az dishes alternating), each with at most 4 moves, the whole plane wanted at 60 min per
bin, March 2027. Ours: the whole ``hiplan network`` command (planning, plans, calendars,
briefs without charts), CPU seconds. Baseline, measured in the same run: ``hiplan month`` for
each station alone with the same want and cap (what the stations would do without
coordination), CPU seconds summed. Agreement: the wanted bins at target, together and alone.
The goal for the network command is 30 s CPU on the 2-core development machine.

Run from the repository root: ``.venv/bin/python benchmarks/bench_network.py``.
"""
from __future__ import annotations

import contextlib
import io
import json
import re
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent.parent))

from planner.cli import main  # noqa: E402

ROOT = Path(__file__).resolve().parent.parent
STATIONS = 20
WANT = "0-360"
MONTH = "2027-03"
ZONES = ("Pacific/Auckland", "Australia/Sydney", "Asia/Tokyo", "Asia/Kolkata", "Africa/Nairobi",
         "Europe/Berlin", "Europe/London", "America/Sao_Paulo", "America/New_York",
         "America/Los_Angeles")


def write_sites(folder: Path) -> list[Path]:
    """Twenty invented stations: latitudes -60..60, longitudes round the world."""
    templates = [(ROOT / "sites" / "hollowmere.toml").read_text(encoding="utf-8"),
                 (ROOT / "sites" / "saltbush-ridge.toml").read_text(encoding="utf-8")]
    out = []
    for k in range(STATIONS):
        lat = -60.0 + 120.0 * k / (STATIONS - 1)
        lon = -180.0 + 360.0 * ((k * 7) % STATIONS) / STATIONS + 9.0
        text = templates[k % 2]
        text = re.sub(r'name = ".*"', f'name = "Bench Station {k + 1:02d}"', text, count=1)
        text = re.sub(r"latitude_deg = [-0-9.]+", f"latitude_deg = {lat:.2f}", text)
        text = re.sub(r"longitude_deg = [-0-9.]+", f"longitude_deg = {lon:.2f}", text)
        text = re.sub(r'timezone = "[^"]+"', f'timezone = "{ZONES[k % len(ZONES)]}"', text)
        text = re.sub(r"\[pointing\][^\[]*$", "", text, flags=re.S)  # start setting unknown
        path = folder / f"bench-{k + 1:02d}.toml"
        path.write_text(text, encoding="utf-8")
        out.append(path)
    return out


def _quiet(argv: list[str]) -> None:
    with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
        assert main(argv) == 0, argv


def run() -> dict:
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        sites = write_sites(folder)
        t0 = time.process_time()
        for k, site in enumerate(sites):  # the baseline: each station alone
            _quiet(["month", "--site", str(site), "--month", MONTH, "--want", WANT,
                    "--max-moves", "4", "--format", "json", "-o", str(folder / f"alone-{k}.json")])
        baseline_s = time.process_time() - t0
        t0 = time.process_time()
        _quiet(["network", *[a for s in sites for a in ("--station", f"{s},max-moves=4")],
                "--month", MONTH, "--want", WANT, "--output-dir", str(folder / "net")])
        ours_s = time.process_time() - t0
        summary = json.loads((folder / "net" / "network.json").read_text(encoding="utf-8"))
    return {"case": f"network of {STATIONS} stations, {MONTH}, l {WANT}, at most 4 moves each",
            "ours_s": ours_s, "baseline_s": baseline_s, "ratio": baseline_s / ours_s,
            "ratio_text": f"{baseline_s / ours_s:.2f}×",
            "agreement": (f"bins at target: {summary['done_after']} together, "
                          f"{summary['done_alone']} alone (bound {summary['upper_bound']} of "
                          f"{summary['wanted_bins']}); whole network command {ours_s:.1f} s CPU "
                          f"(goal 30 s)")}


if __name__ == "__main__":
    result = run()
    for key, value in result.items():
        print(f"{key}: {value}")
