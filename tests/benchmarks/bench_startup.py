"""Benchmark (a script, not a test): the verbs as whole processes, started as a user starts them.

Runs each command ROUNDS times, interleaved (one of each per round, so that a slower phase of the machine
falls on all of them alike), and prints the median, the range and the ratio of the median to the target of
the start-up work (issue "time to optimum": status, report and an input error under 0.3 s, simulate under
1 s, the demo optimisation under 2 s, printed alone and with its files). The study folder for status and
report is the demo study, run once first. The first row times the heavy imports alone, as a measure of the
machine's pace; the last column divides each time by it, round by round.

Run: .venv/bin/python tests/benchmarks/bench_startup.py [ROUNDS]"""

from __future__ import annotations

import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
DEMO = ROOT / "studies" / "demo"
COMMAND = [str(Path(sys.executable).with_name("tubewright"))]
PYTHON = "python"  # an argument that starts the interpreter instead of the command (see timed)
# the machine's pace: the same imports every round, no tubewright code (numpy and scipy.integrate, 0.5-0.7 s
# here); this machine's speed drifts by tens of per cent within an hour, so read the targets against this row
REFERENCE = "import numpy, scipy.integrate"


def commands(work: Path) -> list:
    bad = work / "bad.toml"
    bad.write_text(f'include = "{DEMO / "oxidation-design.toml"}"\n[limits]\nmax_temperature = "hot"\n')
    study = work / "study"
    return [  # label, arguments, expected exit code, target [s] or None
        ("reference: the imports", [PYTHON, "-c", REFERENCE], 0, None),
        ("--help", ["--help"], 0, None),
        ("status of the demo study", ["status", str(study)], 0, 0.3),
        ("report of the demo study", ["report", str(study)], 0, 0.3),
        ("an input error", ["simulate", str(bad)], 2, 0.3),
        ("simulate the demo", ["simulate", str(DEMO / "oxidation.toml")], 0, 1.0),
        ("simulate the demo --out", ["simulate", str(DEMO / "oxidation.toml"), "--out", str(work / "s")], 0, None),
        ("optimize the demo", ["optimize", str(DEMO / "oxidation-design.toml")], 0, 2.0),
        ("optimize the demo --out", ["optimize", str(DEMO / "oxidation-design.toml"), "--out", str(work / "o")], 0,
         2.0),
    ]


def timed(args, code) -> float:
    command = [sys.executable, *args[1:]] if args[0] == PYTHON else COMMAND + args
    t0 = time.perf_counter()
    done = subprocess.run(command, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, text=True)
    seconds = time.perf_counter() - t0
    if done.returncode != code:
        raise SystemExit(f"{' '.join(args)}: exit {done.returncode}, expected {code}\n{done.stderr[-2000:]}")
    return seconds


def main(rounds: int) -> None:
    with tempfile.TemporaryDirectory() as folder:
        work = Path(folder)
        subprocess.run(COMMAND + ["run", str(DEMO / "study.toml"), "--out", str(work / "study")], check=True,
                       stdout=subprocess.DEVNULL)
        table = commands(work)
        times = {label: [] for label, *_ in table}
        for _ in range(rounds):
            for label, args, code, _target in table:
                times[label].append(timed(args, code))
    reference = times[table[0][0]]
    print(f"{'command (whole process)':<28}{'median':>8}{'min':>8}{'max':>8}{'target':>8}{'ratio':>8}{'/ ref':>8}")
    for label, _args, _code, target in table:
        t = times[label]
        median = statistics.median(t)
        ratio = f"{median / target:8.2f}" if target else f"{'':8}"
        paced = statistics.median(x / r for x, r in zip(t, reference))
        print(f"{label:<28}{median:8.2f}{min(t):8.2f}{max(t):8.2f}{target or float('nan'):8.2f}{ratio}{paced:8.2f}")
    print(f"\n{rounds} rounds, interleaved; ratio = median / target (at most 1 meets it); / ref = median over the "
          "rounds of the time divided by the reference row's time in the same round (the machine's pace taken out)")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 7)
