"""Run every benchmark in this folder and print one table of ratios.

Each ``bench_*.py`` module exposes ``run() -> dict(case, ours_s, baseline_s,
ratio, agreement)`` (or a list of them); baselines are measured in the same run.
"""
from __future__ import annotations

import importlib.util
import platform
import sys
from datetime import date
from pathlib import Path

from rich.console import Console
from rich.table import Table

HERE = Path(__file__).resolve().parent


def main() -> int:
    table = Table(title=f"hiplan benchmarks, {date.today()}, {platform.machine()}, "
                        f"Python {platform.python_version()}")
    for col in ("case", "ours", "baseline", "ratio", "agreement"):
        table.add_column(col, justify="right" if col in ("ours", "baseline", "ratio") else "left")
    for path in sorted(HERE.glob("bench_*.py")):
        spec = importlib.util.spec_from_file_location(path.stem, path)
        module = importlib.util.module_from_spec(spec)
        spec.loader.exec_module(module)
        result = module.run()
        for r in result if isinstance(result, list) else [result]:  # some report several rows
            table.add_row(r["case"], f"{r['ours_s'] * 1e3:.1f} ms", f"{r['baseline_s'] * 1e3:.0f} ms",
                          r.get("ratio_text", f"{r['ratio']:.0f}×"), r["agreement"])
    Console(width=160).print(table)
    return 0


if __name__ == "__main__":
    sys.exit(main())
