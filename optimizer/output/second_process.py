"""A command's second process: it draws the figures and, when there are none to draw, runs the optimum's 2-D
check beside the checks of the optimum.

Importing matplotlib costs 0.3-0.5 s and drawing the profiles 0.2-0.25 s: about a third of a demo
``optimize``. A ``SecondProcess`` started early in the command imports matplotlib (or, without figures, the
simulator and the 2-D model) on the other core while this process loads the case and solves; ``run`` hands
it a module-level function as soon as its arguments are known (the optimum's profiles before its checks) and
``Pending.result()`` collects the answer.

The helper is a fresh interpreter running ``serve`` (never a fork: the command may hold IPOPT's and BLAS's
threads by then; and not multiprocessing's spawn, which runs the caller's main script again). Tasks and
answers are pickles over its standard input and output; its prints go to standard error. A task that
raises raises from ``result()`` as it would here (its traceback in the helper as the cause); a task that the
helper cannot take (none started, it died, its arguments do not pickle) runs in this process when its
result is asked, so the answer is the same either way."""

from __future__ import annotations

import contextlib
import os
import pickle
import subprocess
import sys
import traceback

_SERVE = "from tubewright.optimizer.output.second_process import serve; serve({figures!r})"


class TaskFailed(Exception):
    """The traceback, in the helper, of a task that raised: the cause of the exception ``result()`` raises."""


class Pending:
    """A task on its way: ``result()`` returns what the function returned (for a figure, the path written). A
    task not handed over to the helper (none, or lost) runs here when its result is asked."""

    def __init__(self, helper, call):
        self._helper, self._call = helper, call
        self._answer = None  # (returned, value, helper's traceback) once the helper's answer is read

    def result(self):
        if self._answer is None and self in self._helper._waiting:
            self._helper._collect(self)
        if self._answer is None:
            fn, args, kwargs = self._call
            return fn(*args, **kwargs)
        returned, value, trace = self._answer
        if not returned:
            raise value from TaskFailed(trace)
        return value


class SecondProcess:
    """One process that runs the command's figures and other tasks (see the module docstring); ``figures``:
    whether it prepares for drawing (matplotlib) or for simulating. ``enabled=False`` (or a helper that
    cannot start) runs each task in this process, when its result is asked. Use as a context manager, or
    call ``close()``."""

    def __init__(self, enabled: bool = True, figures: bool = True):
        self._process = None
        self._waiting = []  # Pending tasks handed over, in order, not yet answered
        if not enabled:
            return
        env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
        try:
            self._process = subprocess.Popen([sys.executable, "-c", _SERVE.format(figures=bool(figures))],
                                             stdin=subprocess.PIPE, stdout=subprocess.PIPE, env=env)
        except OSError:  # no process can be started here: every task runs in this process
            self._process = None

    def run(self, fn, *args, **kwargs) -> Pending:
        """``fn(*args, **kwargs)`` (a module-level function, picklable arguments) in the helper."""
        pending = Pending(self, (fn, args, kwargs))
        if self._process is not None:
            try:
                pickle.dump(pending._call, self._process.stdin, protocol=pickle.HIGHEST_PROTOCOL)
                self._process.stdin.flush()
            except (OSError, pickle.PicklingError, TypeError, AttributeError):
                self._lose()  # a broken pipe, or arguments that do not pickle: this process runs them from now on
            else:
                self._waiting.append(pending)
        return pending

    def _collect(self, pending: Pending) -> None:
        """Read answers in order until ``pending`` has its own."""
        while pending in self._waiting:
            try:
                answer = pickle.load(self._process.stdout)
            except (EOFError, OSError, pickle.UnpicklingError, AttributeError, ImportError, TypeError):
                self._lose()  # the helper ended, or an answer does not unpickle: the rest runs here
            else:
                self._waiting.pop(0)._answer = answer

    def _lose(self) -> None:
        """The helper is gone: every task still waiting, and every later one, runs here."""
        self._waiting = []
        self._end()

    def close(self) -> None:
        """Collects the answers of the tasks handed over, then ends the helper."""
        if self._waiting:
            self._collect(self._waiting[-1])
        self._end()

    def _end(self) -> None:
        process, self._process = self._process, None
        if process is None:
            return
        with contextlib.suppress(OSError):
            process.stdin.close()
        process.kill()  # every answer is read: nothing of the helper's is left to wait for
        process.wait()
        process.stdout.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
        return False


def _warm_up(channel, figures: bool) -> None:
    """Everything a first task pays once, paid before it arrives. Without figures: the 2-D check's modules
    (the simulator and its integrators). With figures: the plotting modules and those of their arguments,
    matplotlib's figure, axes, text and Agg canvas, the font, a PNG written (to memory); the drawing is
    skipped when a task is already waiting (a short verb): that figure pays it."""
    import io
    import select

    if not figures:
        import tubewright.models.radial  # noqa: F401
        import tubewright.optimizer.design.radial_check  # noqa: F401
        return
    import tubewright.models.checks  # noqa: F401 - what the figures' arguments unpickle into (20-30 ms)
    import tubewright.models.results  # noqa: F401
    import tubewright.optimizer.design.outcome  # noqa: F401
    import tubewright.optimizer.output.plots  # noqa: F401
    from tubewright.optimizer.output.canvas import new_figure

    try:
        if select.select([channel], [], [], 0.0)[0]:
            return
    except (OSError, ValueError):  # pipes cannot be polled on Windows: warm up anyway
        pass
    fig = new_figure((2.0, 2.0))
    ax = fig.subplots()
    ax.plot([0.0, 1.0], [0.0, 1.0], label="warm-up")
    ax.axhline(0.5, ls=":")
    ax.set_xlabel("z")
    ax.legend(fontsize=8)
    fig.tight_layout()
    fig.savefig(io.BytesIO(), format="png")


def serve(figures: bool = True) -> None:
    """The helper's loop: warm up, then run each task read from standard input and answer (True, result,
    None) or (False, exception, traceback) on standard output, until standard input closes."""
    channel_in = os.fdopen(os.dup(0), "rb")
    channel_out = os.fdopen(os.dup(1), "wb")
    os.dup2(2, 1)  # whatever the tasks print goes to standard error, never into the answers
    sys.stdout = sys.stderr
    _warm_up(channel_in, figures)
    while True:
        try:
            fn, args, kwargs = pickle.load(channel_in)
        except EOFError:
            break
        try:
            answer = (True, fn(*args, **kwargs), None)
        except Exception as error:  # whatever the task raises travels back, with its traceback, and raises there
            answer = (False, error, traceback.format_exc())
        try:
            data = pickle.dumps(answer, protocol=pickle.HIGHEST_PROTOCOL)
        except (pickle.PicklingError, TypeError, AttributeError) as error:  # an answer that cannot travel: its text
            data = pickle.dumps((False, RuntimeError(f"{type(error).__name__}: {error}"), answer[2]))
        channel_out.write(data)
        channel_out.flush()
    channel_out.close()
    sys.stderr.flush()
    os._exit(0)  # nothing left to tidy: the figures are written and closed, the answers sent
