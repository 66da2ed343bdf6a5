"""The figures of one command, drawn by a second process.

Importing matplotlib costs 0.3-0.5 s and drawing the profiles 0.2-0.25 s: about a third of a demo
``optimize``. A ``FigureWorker`` started when the command begins imports matplotlib on the other core while
this process loads the case and solves; ``draw`` hands it a figure as soon as the figure's data are known
(the optimum's profiles before the 2-D check) and ``Drawing.result()`` collects the file written.

The worker is a fresh interpreter running ``serve`` (never a fork: the command may hold IPOPT's and BLAS's
threads by then; and not multiprocessing's spawn, which runs the caller's main script again). Tasks and
answers are pickles over its standard input and output; its prints go to standard error. A figure that
raises raises from ``result()`` as it would here (its traceback in the worker as the cause); a figure that a
worker cannot take (none started, it died, its arguments do not pickle) is drawn in this process when its
result is asked, so the figures are written either way."""

from __future__ import annotations

import contextlib
import os
import pickle
import subprocess
import sys
import traceback

_SERVE = "from tubewright.optimizer.output.figures import serve; serve()"


class FigureFailed(Exception):
    """The traceback, in the worker, of a figure that raised: the cause of the exception ``result()`` raises."""


class Drawing:
    """A figure on its way: ``result()`` returns what the plotting function returned (the path written). A
    figure not handed over to the worker (none, or lost) is drawn here when its result is asked."""

    def __init__(self, worker, call):
        self._worker, self._call = worker, call
        self._answer = None  # (returned, value, worker traceback) once the worker's answer is read

    def result(self):
        if self._answer is None and self in self._worker._waiting:
            self._worker._collect(self)
        if self._answer is None:
            fn, args, kwargs = self._call
            return fn(*args, **kwargs)
        returned, value, trace = self._answer
        if not returned:
            raise value from FigureFailed(trace)
        return value


class FigureWorker:
    """One process that draws the command's figures (see the module docstring). ``enabled=False`` (or a
    worker that cannot start) draws each figure in this process, when its result is asked. Use as a context
    manager, or call ``close()``."""

    def __init__(self, enabled: bool = True):
        self._process = None
        self._waiting = []  # Drawings handed over, in order, not yet answered
        if not enabled:
            return
        env = dict(os.environ, PYTHONPATH=os.pathsep.join(p for p in sys.path if p))
        try:
            self._process = subprocess.Popen([sys.executable, "-c", _SERVE], stdin=subprocess.PIPE,
                                             stdout=subprocess.PIPE, env=env)
        except OSError:  # no process can be started here: draw in this process
            self._process = None

    def draw(self, fn, *args, **kwargs) -> Drawing:
        """``fn(*args, **kwargs)`` (a module-level plotting function, picklable arguments) in the worker."""
        drawing = Drawing(self, (fn, args, kwargs))
        if self._process is not None:
            try:
                pickle.dump(drawing._call, self._process.stdin, protocol=pickle.HIGHEST_PROTOCOL)
                self._process.stdin.flush()
            except (OSError, pickle.PicklingError, TypeError, AttributeError):
                self._lose()  # a broken pipe, or arguments that do not pickle: this process draws from now on
            else:
                self._waiting.append(drawing)
        return drawing

    def _collect(self, drawing: Drawing) -> None:
        """Read answers in order until ``drawing`` has its own."""
        while drawing in self._waiting:
            try:
                answer = pickle.load(self._process.stdout)
            except (EOFError, OSError, pickle.UnpicklingError, AttributeError, ImportError, TypeError):
                self._lose()  # the worker ended, or an answer does not unpickle: the rest is drawn here
            else:
                self._waiting.pop(0)._answer = answer

    def _lose(self) -> None:
        """The worker is gone: every figure still waiting, and every later one, is drawn here."""
        self._waiting = []
        self._end()

    def close(self) -> None:
        """Collects the figures handed over, then ends the worker."""
        if self._waiting:
            self._collect(self._waiting[-1])
        self._end()

    def _end(self) -> None:
        process, self._process = self._process, None
        if process is None:
            return
        with contextlib.suppress(OSError):
            process.stdin.close()
        process.kill()  # every answer is read: nothing of the worker's is left to wait for
        process.wait()
        process.stdout.close()

    def __enter__(self):
        return self

    def __exit__(self, *exc):
        self.close()
        return False


def _warm_up(channel) -> None:
    """Everything a first figure pays once, paid before the first task arrives: the plotting modules and
    those of its arguments, matplotlib's figure, axes, text and Agg canvas, the font, a PNG written (to
    memory). The drawing is skipped when a task is already waiting (a short verb): that figure pays it."""
    import io
    import select

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


def serve() -> None:
    """The worker's loop: import the plotting modules, then draw each task read from standard input and
    answer (True, result, None) or (False, exception, traceback) on standard output, until standard input
    closes."""
    channel_in = os.fdopen(os.dup(0), "rb")
    channel_out = os.fdopen(os.dup(1), "wb")
    os.dup2(2, 1)  # whatever the figures print goes to standard error, never into the answers
    sys.stdout = sys.stderr
    _warm_up(channel_in)
    while True:
        try:
            fn, args, kwargs = pickle.load(channel_in)
        except EOFError:
            break
        try:
            answer = (True, fn(*args, **kwargs), None)
        except Exception as error:  # whatever the figure raises travels back, with its traceback, and raises there
            answer = (False, error, traceback.format_exc())
        try:
            data = pickle.dumps(answer, protocol=pickle.HIGHEST_PROTOCOL)
        except (pickle.PicklingError, TypeError, AttributeError) as error:  # an answer that cannot travel: its text
            data = pickle.dumps((False, RuntimeError(f"{type(error).__name__}: {error}"), answer[2]))
        channel_out.write(data)
        channel_out.flush()
    channel_out.close()
    sys.stderr.flush()
    os._exit(0)  # nothing left to tidy: the figures are written and closed
