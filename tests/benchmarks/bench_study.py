"""Benchmark (a script, not a test): wall time of a 40-task simulate sweep with 1 and 2 local workers, the
speed-up, and the runner's overhead per task beyond the task itself.

Run: .venv/bin/python tests/benchmarks/bench_study.py"""

from __future__ import annotations

import sqlite3
import tempfile
import time
from pathlib import Path

from tubewright.optimizer.study.runner import run_study

ROOT = Path(__file__).resolve().parents[2]


def main():
    with tempfile.TemporaryDirectory() as tmp:
        tmp = Path(tmp)
        values = ", ".join(f'"{590.0 + 0.25 * i:.2f} K"' for i in range(40))
        study = tmp / "sweep.toml"
        study.write_text(f'title = "benchmark sweep"\nbase = "{ROOT / "studies" / "demo" / "oxidation.toml"}"\n'
                         f'[[task]]\nname = "feed temperature"\nkind = "sweep"\ngrid = {{ "feed.temperature" = '
                         f"[{values}] }}\n")
        walls = {}
        for workers in (1, 2):
            t0 = time.perf_counter()
            run_study(study, tmp / f"w{workers}", workers=workers, progress=False)
            walls[workers] = time.perf_counter() - t0
            conn = sqlite3.connect(tmp / f"w{workers}" / "results.sqlite")
            inside, first, last = conn.execute("SELECT SUM(seconds), MIN(started), MAX(finished) FROM tasks").fetchone()
            conn.close()
            overhead = (walls[workers] * workers - inside) / 40
            steady = ((last - first) * workers - inside) / 40
            print(f"{workers} worker(s): {walls[workers]:6.2f} s wall, tasks themselves {inside:6.2f} s, runner "
                  f"overhead {overhead * 1000:5.1f} ms per task with the one-time start-up (study validation, "
                  f"imports), {steady * 1000:5.1f} ms per task without")
        print(f"speed-up with 2 workers: {walls[1] / walls[2]:.2f}")


if __name__ == "__main__":
    main()
