"""Benchmark: whole commands, CPU seconds, as a ratio to a bare ``import numpy, erfa``.

Every command is run as a user runs it (a fresh process, the README's options, Python's
bytecode cache on as after an installation; one untimed run first) and its
CPU time (user + system, of the child process) is compared with the CPU time of
``python -c "import numpy, erfa"`` measured in the same run: the floor any command
pays. Median of three each. "Cold" is that fresh process (imports and the
Earth-orientation table read included); "warm" is the same command run a second time
inside one process (only the work itself). Targets from the start-up work:
``--help`` <= 2, ``crossings`` 7 days <= 3.5, one-point ``lsr`` <= 3, the README
``survey`` <= 4, ``park`` for a year at 1 deg <= 7, ``demo`` <= 25.

Run from the repository root: ``.venv/bin/python benchmarks/bench_commands.py``.
"""
from __future__ import annotations

import os
import resource
import statistics
import subprocess
import sys
import tempfile
from pathlib import Path

ROOT = Path(__file__).resolve().parent.parent
REPEATS = 3

COMMANDS = (  # (name, hiplan arguments, target ratio or None)
    ("--help", ["--help"], 2.0),
    ("crossings, 7 days", ["crossings", "--dec", "20", "--start", "2027-03-01", "--days", "7"], 3.5),
    ("lsr, one point", ["lsr", "--l", "30", "--b", "0", "--time", "2027-03-01T21:00:00Z"], 3.0),
    ("survey (README)", ["survey", "--site", "saltbush-ridge", "--grid", "l=240..340/10,b=-4..4/4",
                         "--start", "2027-03-01", "--days", "3", "--minutes", "15", "--night-only",
                         "--format", "json"], 4.0),
    ("park, a year at 1 deg", ["park", "--start", "2027-01-01", "--days", "365", "--step", "1"], 7.0),
    ("park (README, with plots)", ["park", "--start", "2027-03-01", "--days", "30", "--want",
                                   "30-90,120-140", "--log", "examples/observation-log.csv",
                                   "--night-only", "--plot", "{tmp}/atlas.png", "--force"], None),
    ("month (README)", ["month", "--month", "2027-03", "--want", "30-90,120-200", "--log",
                        "examples/observation-log.csv", "--windows", "examples/windows.txt",
                        "--format", "json", "-o", "{tmp}/plan.json", "--force"], None),
    ("tune, 30 days", ["tune", "--dec", "20", "--start", "2027-03-01", "--days", "30"], None),
    ("demo", ["demo", "--output-dir", "{tmp}/demo", "--force"], 25.0),
)

# Runs one command twice in one process and prints the CPU seconds of the second run.
WARM = """
import io, sys, time, contextlib
from planner.cli import main
argv = {argv!r}
with contextlib.redirect_stdout(io.StringIO()), contextlib.redirect_stderr(io.StringIO()):
    main(argv)
    t0 = time.process_time()
    main(argv)
print(time.process_time() - t0)
"""


# Children run as after an installation: Python's bytecode cache on (some sandboxes set
# PYTHONDONTWRITEBYTECODE, which would make every run recompile hiplan but not numpy).
ENV = {k: v for k, v in os.environ.items() if k != "PYTHONDONTWRITEBYTECODE"}


def _child_cpu(cmd: list[str]) -> float:
    """CPU seconds (user + system) of one child process running ``cmd``."""
    before = resource.getrusage(resource.RUSAGE_CHILDREN)
    subprocess.run(cmd, cwd=ROOT, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL, check=True,
                   env=ENV)
    after = resource.getrusage(resource.RUSAGE_CHILDREN)
    return (after.ru_utime - before.ru_utime) + (after.ru_stime - before.ru_stime)


def _median(cmd: list[str]) -> float:
    _child_cpu(cmd)  # once untimed: bytecode caches written, files in the page cache
    return statistics.median(_child_cpu(cmd) for _ in range(REPEATS))


def measure() -> list[dict]:
    python = sys.executable
    hiplan = [python, "-m", "planner.cli"]
    bare = _median([python, "-c", "import numpy, erfa"])
    rows = []
    with tempfile.TemporaryDirectory() as tmp:
        for name, argv, target in COMMANDS:  # a few commands, three runs each
            argv = [a.replace("{tmp}", tmp) for a in argv]
            cold = _median(hiplan + argv)
            warm = None
            if argv[0] not in ("--help", "demo"):
                out = subprocess.run([python, "-c", WARM.format(argv=argv)], cwd=ROOT,
                                     capture_output=True, text=True, check=True, env=ENV)
                warm = float(out.stdout.strip().splitlines()[-1])
            rows.append({"name": name, "cold_s": cold, "warm_s": warm, "bare_s": bare,
                         "ratio": cold / bare, "target": target})
    return rows


def run() -> list[dict]:
    """Rows for ``run_all``: ours = the command (cold), baseline = the bare import."""
    out = []
    for r in measure():
        target = "" if r["target"] is None else f" (target <= {r['target']:g}x)"
        warm = "" if r["warm_s"] is None else f"; warm {r['warm_s']:.2f} s"
        out.append({"case": f"Whole command: hiplan {r['name']}", "ours_s": r["cold_s"],
                    "baseline_s": r["bare_s"], "ratio": r["ratio"],
                    "ratio_text": f"{r['ratio']:.1f}x of bare import",
                    "agreement": f"cold {r['cold_s']:.2f} s CPU{warm}{target}"})
    return out


if __name__ == "__main__":
    os.environ.setdefault("PYTHONHASHSEED", "0")
    rows = measure()
    print(f"bare 'import numpy, erfa': {rows[0]['bare_s']:.3f} s CPU (median of {REPEATS})")
    print(f"{'command':28s} {'cold s':>7s} {'warm s':>7s} {'cold / bare':>11s} {'target':>7s}")
    for r in rows:
        warm = "" if r["warm_s"] is None else f"{r['warm_s']:.2f}"
        target = "" if r["target"] is None else f"<= {r['target']:g}"
        print(f"{r['name']:28s} {r['cold_s']:7.2f} {warm:>7s} {r['ratio']:10.1f}x {target:>7s}")
