"""Fuzz script (not a test): N mutations of the demo cases (tests/case_mutations.py), each judged in this
process under a time limit. Prints the counts of clean refusals, finished runs, hangs, tracebacks and runs
that accepted a non-finite or out-of-range value (a finished run whose mutation inserted NaN, infinity or a
magnitude above 1e100 or below 1e-100).

Run: .venv/bin/python tests/benchmarks/fuzz_cases.py [N] [SEED]"""

from __future__ import annotations

import math
import random
import sys
import traceback
from collections import Counter
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from case_mutations import DEMOS, Hang, demo_data, judge, mutate, time_limit  # noqa: E402

LIMIT_S = 30.0


def _suspicious(value) -> bool:
    if isinstance(value, float):
        return not math.isfinite(value) or (value != 0 and not 1e-100 < abs(value) < 1e100)
    return isinstance(value, str) and any(w in value for w in ("nan", "inf", "1e300", "1e-300", "**"))


def main(n: int = 800, seed: int = 0):
    rng = random.Random(seed)
    counts = Counter()
    examples = {}
    bases = {name: demo_data(name) for name in DEMOS}
    for i in range(n):
        name = DEMOS[i % len(DEMOS)]
        data, what = mutate(bases[name], rng)
        try:
            with time_limit(LIMIT_S):
                outcome = judge(data)
        except Hang:
            outcome = "hang"
        except AssertionError as err:
            outcome = f"wrong answer ({err})"
        except Exception:  # a traceback: a bug
            outcome = "traceback"
            examples.setdefault("traceback", []).append((what, traceback.format_exc().splitlines()[-1]))
        if outcome == "ran" and what.startswith("nasty") and what.split(" ", 1)[1] not in ("title", "note"):
            leaf = data
            for part in what.split(" ", 1)[1].split("."):
                leaf = leaf.get(part) if isinstance(leaf, dict) else None
            if _suspicious(leaf):
                outcome = "accepted a non-finite or out-of-range value"
                examples.setdefault(outcome, []).append((what, repr(leaf)[:60]))
        counts[outcome.split(" (")[0] if outcome.startswith("wrong") else outcome] += 1
        if outcome.startswith("wrong"):
            examples.setdefault("wrong answer", []).append((what, outcome))
    print(f"{n} mutated cases (seed {seed}):")
    for key in ("refused", "ran", "hang", "traceback", "wrong answer", "accepted a non-finite or out-of-range value"):
        print(f"  {key:<45} {counts.get(key, 0)}")
    for key, rows in examples.items():
        print(f"\n{key}, first examples:")
        for what, detail in rows[:8]:
            print(f"  {what}: {detail}")


if __name__ == "__main__":
    main(int(sys.argv[1]) if len(sys.argv) > 1 else 800, int(sys.argv[2]) if len(sys.argv) > 2 else 0)
