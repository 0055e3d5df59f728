"""Tests of stringcheck.report.waveform (text plot and CSV of one trial's turn-off).

Checks of layout and round trips, on hand-made traces whose drawing is known in advance and on
one simulated string. The plot's geometry is checked against the linear map from value to row
that the module documents; the CSV against pandas' reader. Circuit values are invented.
"""

from __future__ import annotations

import io
import re
from functools import lru_cache

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from stringcheck.errors import StringcheckError
from stringcheck.units import format_quantity
from stringcheck.report.waveform import TrialWaveform, trial_waveform, waveform_csv, waveform_plot
from stringcheck.solvers.transient import TurnOffTrace, simulate_turn_off

GUTTER = 10  # eight label characters, a space and the axis


def _trace(time, current, voltage, accepted=None):
    """A trace of one trial from arrays (samples,), (samples,), (samples, n)."""
    time, current, voltage = (np.asarray(x, dtype=float) for x in (time, current, voltage))
    if accepted is None:
        accepted = np.ones(time.size, dtype=bool)
    nan = np.where(accepted, 1.0, np.nan)
    return TurnOffTrace(accepted=accepted[:, None], time=(time * nan)[:, None],
                        current=(current * nan)[:, None], voltage=(voltage * nan[:, None])[:, None],
                        capacitor_voltage=(0.5 * voltage * nan[:, None])[:, None],
                        stored_charge=np.zeros_like(voltage)[:, None])


@lru_cache(maxsize=1)
def _simulated():
    """Twelve invented stages with different lifetimes, R-C graded, recorded (about 1 s)."""
    lifetime = 0.5e-6 * np.exp(np.random.default_rng(1).normal(0.0, 0.15, 12))
    return simulate_turn_off(12e3, 240e-6, 100.0, lifetime, 0.1e-6, 20e-12, 10e6, 4.7e-9, 47.0,
                             record=True)


def test_csv_round_trips_through_pandas():
    result = _simulated()
    trace = result.trace
    rows = trace.accepted[:, 0]
    text = waveform_csv(trace)
    table = pd.read_csv(io.StringIO(text))
    assert list(table.columns) == (["time_s", "current_A"] + [f"v{k}_V" for k in range(1, 13)])
    assert table.shape == (rows.sum(), 14)
    assert (np.diff(table["time_s"]) > 0.0).all()
    # Shortest round-trip text: pandas reads back the very floats of the trace.
    np.testing.assert_array_equal(table["time_s"], trace.time[rows, 0])
    np.testing.assert_array_equal(table["current_A"], trace.current[rows, 0])
    np.testing.assert_array_equal(table.iloc[:, 2:], trace.voltage[rows, 0])
    assert text.endswith("\n") and "\r" not in text
    both = pd.read_csv(io.StringIO(waveform_csv(trace, capacitor_voltages=True)))
    assert both.shape == (rows.sum(), 26)
    assert list(both.columns[14:]) == [f"vc{k}_V" for k in range(1, 13)]
    np.testing.assert_array_equal(both.iloc[:, 14:], trace.capacitor_voltage[rows, 0])


def test_one_trial_out_of_a_batch_and_rejected_rows_left_out():
    # Rows not accepted for the trial (NaN in the trace) are not samples of it.
    accepted = np.array([True, False, True, True])
    trace = _trace([0.0, np.nan, 1e-6, 2e-6], [5.0, 0.0, 1.0, -1.0],
                   [[1.0, 2.0], [0.0, 0.0], [3.0, 4.0], [5.0, 6.0]], accepted)
    waveform = trial_waveform(trace)
    assert isinstance(waveform, TrialWaveform)
    np.testing.assert_array_equal(waveform.time, [0.0, 1e-6, 2e-6])
    table = pd.read_csv(io.StringIO(waveform_csv(trace)))
    assert table.shape == (3, 4) and not table.isna().any().any()
    two = simulate_turn_off(1000.0, 10e-6, 0.0, 1e-6, 1e-7, 1e-9, np.inf, 10e-9,
                            np.array([[5.0], [50.0]]), record=True, duration=2e-6)
    second = pd.read_csv(io.StringIO(waveform_csv(two.trace, trial=1)))
    rows = two.trace.accepted[:, 1]
    np.testing.assert_array_equal(second["v1_V"], two.trace.voltage[rows, 1, 0])


def _plot_lines(text, width, height):
    lines = text.split("\n")
    assert lines[-1] == "" and len(lines) == height + 1, text
    lines = lines[:-1]
    assert all(len(line) == width for line in lines), text
    assert all(ord(c) < 128 for c in text)
    return lines


@settings(max_examples=30, deadline=None)
@given(st.integers(min_value=40, max_value=160), st.integers(min_value=12, max_value=60))
def test_plot_has_the_requested_size(width, height):
    trace = _trace(np.linspace(0.0, 3e-6, 50), np.linspace(10.0, -4.0, 50),
                   np.sin(np.linspace(0.0, 9.0, 50))[:, None] * [100.0, 80.0, 60.0])
    _plot_lines(waveform_plot(trace, width=width, height=height), width, height)


def test_plot_draws_a_ramp_on_the_rows_the_linear_map_gives():
    # One stage whose voltage rises linearly from 0 to 1 kV: column j (time t_j, evenly spaced
    # from the first to the last sample) is marked on the row (1 - v(t_j) / 1 kV) (rows - 1),
    # give or take the half column each side that a column covers.
    width, height = 70, 20
    time = np.linspace(0.0, 1e-6, 400)
    trace = _trace(time, np.full(400, -2.0), 1000.0 * (time / 1e-6)[:, None])
    lines = _plot_lines(waveform_plot(trace, width=width, height=height), width, height)
    rows = round((height - 5) * 2 / 3)
    panel = [line[GUTTER:] for line in lines[1:1 + rows]]
    columns = width - GUTTER
    for column in range(columns):
        marked = [row for row in range(rows) if panel[row][column] in "1^"]
        expected = round((1.0 - column / (columns - 1)) * (rows - 1))
        assert expected in marked and max(marked) - min(marked) <= 1, (column, marked)
    assert lines[1].startswith("       1 |") and lines[rows].startswith("       0 |")
    assert "[kV]" in lines[0] and "[A]" in lines[1 + rows]
    assert lines[-2].startswith("    [us]")


def test_plot_marks_the_peaks():
    result = _simulated()
    width, height = 100, 30
    lines = _plot_lines(waveform_plot(result.trace, width=width, height=height), width, height)
    waveform = trial_waveform(result.trace)
    rows = round((height - 5) * 2 / 3)
    stage = int(np.argmax(waveform.voltage.max(axis=0)))
    peak_sample = int(np.argmax(waveform.voltage[:, stage]))
    # Title: the highest sampled peak, its stage and time, as format_quantity prints them.
    assert (f"^ peak {format_quantity(waveform.voltage[peak_sample, stage], 'V')} on stage "
            f"{stage + 1} at {format_quantity(waveform.time[peak_sample], 's')}") in lines[0]
    # The mark: once, on the top row (the axis ends at the peak), in the peak's column.
    assert sum(line.count("^") for line in lines[1:]) == 1
    columns = width - GUTTER
    column = round(waveform.time[peak_sample] / waveform.time[-1] * (columns - 1))
    assert abs(lines[1].index("^") - GUTTER - column) <= 1
    # The reverse current's peak: 'v' on the current panel's bottom row; its title says I_RM.
    current_title = lines[1 + rows]
    reverse = -waveform.current.min()
    assert f"v peak reverse {format_quantity(reverse, 'A')}" in current_title
    bottom = lines[1 + rows + (height - 5 - rows)]
    assert "v" in bottom[GUTTER:] and bottom[:8].strip() == f"{-reverse:.3g}"
    assert lines[-1].startswith("stages: 1 2 3 4 5 6 7 8 9 A=10 B=11 C=12")


def test_plot_of_the_worst_stages_only():
    result = _simulated()
    waveform = trial_waveform(result.trace)
    worst = np.argsort(-waveform.voltage.max(axis=0))[:3]
    text = waveform_plot(result.trace, width=90, height=25, worst=3)
    lines = _plot_lines(text, 90, 25)
    marks = "123456789ABC"
    panel = "".join(line[GUTTER:] for line in lines[1:1 + round(20 * 2 / 3)])
    drawn = {mark for mark in marks if mark in panel}
    assert drawn <= {marks[k] for k in worst} and marks[worst[0]] in drawn
    legend = re.findall(r"[0-9A-C](?:=\d+)?", lines[-1].split(":")[1])
    assert lines[-1].startswith("worst 3 of 12 stages:") and len(legend) == 3


def test_bad_arguments_name_themselves():
    trace = _trace([0.0, 1e-6], [1.0, 0.0], [[0.0], [1.0]])
    with pytest.raises(StringcheckError, match="width, height"):
        waveform_plot(trace, width=39)
    with pytest.raises(StringcheckError, match="worst"):
        waveform_plot(trace, worst=0)
    with pytest.raises(StringcheckError, match="trial"):
        waveform_csv(trace, trial=1)
    flagged = _trace([0.0, 1e-6], [1.0, 0.0], [[0.0], [1.0]], np.array([True, False]))
    with pytest.raises(StringcheckError, match="fewer than two"):
        waveform_plot(flagged)
