"""The progress bar of long verbs: on stderr, only when stderr is a terminal, never in --json output."""

from __future__ import annotations

import sys
import time


class ProgressBar:
    """Call with (done, total, failed); drawn once ``delay`` seconds have passed (short runs stay quiet)."""

    def __init__(self, unit: str, enabled: bool = True, delay: float = 0.0):
        self.unit, self.delay = unit, delay
        self.enabled = enabled and sys.stderr.isatty()
        self.t0 = time.perf_counter()
        self.shown = False

    def __call__(self, done: int, total: int, failed: int):
        if not self.enabled:
            return
        elapsed = time.perf_counter() - self.t0
        if elapsed < self.delay and done < total:
            return
        eta = elapsed / max(done, 1) * (total - done)
        bar = "#" * int(30 * done / max(total, 1))
        sys.stderr.write(f"\r  [{bar:<30}] {done}/{total} {self.unit}, {failed} failed, ETA {eta:5.0f} s ")
        sys.stderr.flush()
        self.shown = True

    def close(self):
        if self.shown:
            sys.stderr.write("\n")
