"""The figures' second process (optimizer.output.figures) and the CSV writer of the profiles."""

from __future__ import annotations

import os
import time

import numpy as np
import pytest
from builders import DEMO
from tubewright.optimizer.output.figures import FigureWorker
from tubewright.optimizer.output.text import safe_frame, write_columns_csv


def test_columns_csv_is_what_pandas_writes(tmp_path):
    # reference: pandas' DataFrame.to_csv(index=False) after safe_frame, which the profiles used before
    pd = pytest.importorskip("pandas")
    columns = {"=z_m": np.array([0.0, 1e-300, -0.0, np.nan, np.inf, 1.2345678901234567e17]),
               "n": np.arange(6), "flag": np.array([True, False] * 3),
               "text": np.array(["a", "-b", "c,d", 'e"f', "+g", "h"], dtype=object)}
    safe_frame(pd.DataFrame(columns)).to_csv(tmp_path / "pandas.csv", index=False)
    write_columns_csv(tmp_path / "ours.csv", columns)
    assert (tmp_path / "ours.csv").read_bytes() == (tmp_path / "pandas.csv").read_bytes()


def test_figures_are_drawn_by_another_process_and_answers_come_back_in_order():
    with FigureWorker() as worker:
        noisy = worker.draw(print, "a figure that talks on stdout")  # its text must not enter the answers
        pid = worker.draw(os.getpid)
        failing = worker.draw(int, "not a number")
        assert pid.result() not in (None, os.getpid())
        assert noisy.result() is None
        with pytest.raises(ValueError, match="not a number"):
            failing.result()


def test_a_worker_that_dies_or_cannot_start_is_replaced_by_drawing_here(monkeypatch):
    with FigureWorker() as worker:
        handed = worker.draw(time.sleep, 0.05)
        worker._process.kill()  # still importing matplotlib: it answers nothing
        assert handed.result() is None  # drawn here instead
        assert worker.draw(os.getpid).result() == os.getpid()
    with FigureWorker(enabled=False) as worker:
        assert worker.draw(os.getpid).result() == os.getpid()

    def no_processes(*args, **kwargs):
        raise OSError("no more processes")

    monkeypatch.setattr("subprocess.Popen", no_processes)
    with FigureWorker() as worker:
        assert worker.draw(os.getpid).result() == os.getpid()


def test_the_worker_writes_the_same_figure_as_this_process(tmp_path):
    from tubewright.models import load_case
    from tubewright.optimizer import verbs
    from tubewright.optimizer.output.plots import plot_profiles

    case = load_case(DEMO / "oxidation.toml")
    result = verbs.simulate(case)
    here = plot_profiles(case, result, tmp_path / "here.png")
    with FigureWorker() as worker:
        there = worker.draw(plot_profiles, case, result, tmp_path / "there.png").result()
    assert there == tmp_path / "there.png"
    assert there.read_bytes() == here.read_bytes()
