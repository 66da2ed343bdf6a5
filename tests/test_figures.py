"""The second process of a command (optimizer.output.second_process), the report's SVG charts and the CSV writers."""

from __future__ import annotations

import os
import time

import numpy as np
import pytest
from builders import DEMO
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from tubewright.optimizer.output import svg
from tubewright.optimizer.output.second_process import SecondProcess, TaskFailed
from tubewright.optimizer.output.svg import nice_ticks
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
    with SecondProcess() as helper:
        noisy = helper.run(print, "a figure that talks on stdout")  # its text must not enter the answers
        pid = helper.run(os.getpid)
        failing = helper.run(int, "not a number")
        assert pid.result() not in (None, os.getpid())
        assert noisy.result() is None
        with pytest.raises(ValueError, match="not a number") as raised:
            failing.result()
        assert isinstance(raised.value.__cause__, TaskFailed)  # the helper's traceback comes along
        assert "ValueError" in str(raised.value.__cause__)


def test_a_helper_that_dies_or_cannot_start_is_replaced_by_running_here(monkeypatch):
    with SecondProcess() as helper:
        handed = helper.run(time.sleep, 0.05)
        helper._process.kill()  # still importing matplotlib: it answers nothing
        assert handed.result() is None  # drawn here instead
        assert helper.run(os.getpid).result() == os.getpid()
    with SecondProcess(enabled=False) as helper:
        assert helper.run(os.getpid).result() == os.getpid()

    def no_processes(*args, **kwargs):
        raise OSError("no more processes")

    monkeypatch.setattr("subprocess.Popen", no_processes)
    with SecondProcess() as helper:
        assert helper.run(os.getpid).result() == os.getpid()


def test_the_helper_writes_the_same_figure_as_this_process(tmp_path):
    from tubewright.models import load_case
    from tubewright.optimizer import verbs
    from tubewright.optimizer.output.plots import plot_profiles

    case = load_case(DEMO / "oxidation.toml")
    result = verbs.simulate(case)
    here = plot_profiles(case, result, tmp_path / "here.png")
    with SecondProcess() as helper:
        there = helper.run(plot_profiles, case, result, tmp_path / "there.png").result()
    assert there == tmp_path / "there.png"
    assert there.read_bytes() == here.read_bytes()


@settings(max_examples=200, deadline=None)
@given(st.floats(-1e9, 1e9), st.floats(1e-6, 1e9))
def test_chart_ticks_are_round_and_cover_the_data(low, span):
    assume(span >= 1e-6 * max(1.0, abs(low)))  # below that the float resolution of the values decides
    ticks = nice_ticks(low, low + span)
    steps = np.diff(ticks)
    assert 2 <= len(ticks) <= 11 and np.allclose(steps, steps[0], rtol=1e-9)
    assert ticks[0] <= low + 1e-9 * steps[0] and ticks[-1] >= low + span - 1e-9 * steps[0]  # to a round-off
    mantissa = steps[0] / 10.0 ** np.floor(np.log10(steps[0]))
    assert min(abs(mantissa - m) for m in (1.0, 2.0, 5.0, 10.0)) < 1e-6


def test_charts_are_well_formed_escape_text_and_break_lines_at_missing_values():
    import xml.etree.ElementTree as ET

    text = svg.chart([{"x": [0, 1, 2, 3, 4], "y": [1.0, 2.0, float("nan"), 4.0, 5.0], "label": "<fluid & co>"},
                      {"x": [0, 4], "y": [0.5, 0.5], "mark": "points"}],
                     xlabel="z [m]", ylabel="cost", title="a & b", hlines=[(4.5, "limit")])
    root = ET.fromstring(text)
    assert len(root.findall("polyline")) == 2  # the NaN splits the line
    assert len(root.findall("circle")) == 2
    assert "&lt;fluid &amp; co&gt;" in text and "a &amp; b" in text
    assert any(line.get("stroke") == "#c00" for line in root.findall("line"))
    big = ET.fromstring(svg.chart([{"x": [0, 1], "y": [8e5, 1.6e6]}], ylabel="annual cost"))
    texts = [t.text for t in big.findall("text")]
    assert "annual cost [x 1e6]" in texts and "1.6" in texts and "1600000" not in texts
    narrow = ET.fromstring(svg.chart([{"x": [0, 1], "y": [1e6, 1e6 + 1]}]))
    y_texts = [t.text for t in narrow.findall("text") if t.get("text-anchor") == "end"]
    assert len(set(y_texts)) == len(y_texts)  # ticks 0.2 apart at a million still read apart
    bars = ET.fromstring(svg.bars(["a", "b", "c"], [0.2, float("nan"), 0.05], title="mu_star"))
    assert len(bars.findall("rect")) == 2 and "n/a" in [t.text for t in bars.findall("text")]


def test_arguments_that_do_not_travel_are_drawn_here():
    with SecondProcess() as helper:
        local = helper.run(lambda: os.getpid())  # a lambda does not pickle
        assert local.result() == os.getpid()
        assert helper.run(os.getpid).result() == os.getpid()  # and so is every later figure
