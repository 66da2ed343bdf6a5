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


class Phases:
    """Phases and IPOPT iterations of an optimisation, on stderr when it is a terminal (``enabled`` and a
    TTY), with the elapsed time: "building", "compiling", iterations, "verifying", "start k of N"... The
    design layer calls it as ``progress(text)`` and ``progress.iteration(k, objective, infeasibility)``."""

    def __init__(self, enabled: bool = True, stream=None):
        self.stream = stream or sys.stderr
        self.enabled = enabled and (stream is not None or sys.stderr.isatty())
        self.t0 = time.perf_counter()
        self.open_line = False
        self.last = -1.0

    def __call__(self, text: str):
        if not self.enabled:
            return
        self._end_line()
        self.stream.write(f"  [{time.perf_counter() - self.t0:6.1f} s] {text}\n")
        self.stream.flush()

    def iteration(self, k: int, objective: float, infeasibility: float):
        now = time.perf_counter()
        if not self.enabled or now - self.last < 0.2:  # a few updates a second are enough to see it move
            return
        self.last = now
        self.stream.write(f"\r  [{time.perf_counter() - self.t0:6.1f} s]   IPOPT iteration {k:4d}, objective "
                          f"{objective:.6g}, infeasibility {infeasibility:.2e} ")
        self.stream.flush()
        self.open_line = True

    def _end_line(self):
        if self.open_line:
            self.stream.write("\n")
            self.open_line = False

    def close(self):
        if self.enabled:
            self._end_line()
