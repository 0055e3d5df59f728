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

from stringcheck.findings import Finding
import pandas as pd
import pytest
from rich.cells import cell_len
from rich.console import Console
from hypothesis import given, settings
from hypothesis import strategies as st

from stringcheck.errors import StringcheckError
from stringcheck.units import format_quantity
from stringcheck.report.waveform import (TrialWaveform, event_window, render_wave, trial_waveform,
                                        waveform_csv, waveform_plot)
from stringcheck.solvers.transient import TurnOffTrace, simulate_turn_off

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


# --- the panels -------------------------------------------------------------------------------

BLOCKS = " ▁▂▃▄▅▆▇█"  # U+2581..U+2588, eighths of a cell from the bottom
BAND = "░"


def _lines(text, width, height):
    """The plot's lines; each fits ``width`` terminal cells, at most ``height`` of them."""
    assert text.endswith("\n"), text
    lines = text[:-1].split("\n")
    assert len(lines) <= height, text
    assert all(cell_len(line) <= width for line in lines), text
    return lines


def _stage_panel(lines, stage):
    """The rows of the panel of ``stage`` (1-based): its first row starts with its label."""
    first = next(k for k, line in enumerate(lines) if re.match(rf"\s*stage {stage}│", line))
    rows = [lines[first]]
    for line in lines[first + 1:]:
        if re.match(r"\s*(median)?│", line) and line.split("│")[1][:1] in BLOCKS + BAND:
            if BAND in line or re.match(r"\s*stage", line):
                break
            rows.append(line)
        else:
            break
    return rows


def _trace_cells(row, columns=None):
    """The trace part of a panel row: the ``columns`` cells after the rule (by default as many
    as the band row ``row`` holds: a band row has no blank cell, then a space and the words)."""
    body = row.split("│", 1)[1]
    if columns is None:
        columns = body.index(" ") if " " in body else len(body)
    return body[:columns].ljust(columns)


@settings(max_examples=30, deadline=None)
@given(st.integers(min_value=40, max_value=160), st.integers(min_value=12, max_value=60),
       st.integers(min_value=1, max_value=12))
def test_every_line_fits_the_size_asked_for(width, height, worst):
    trace = _trace(np.linspace(0.0, 3e-6, 50), np.linspace(10.0, -4.0, 50),
                   np.sin(np.linspace(0.0, 9.0, 50))[:, None] * np.linspace(100.0, 40.0, 12))
    lines = _lines(waveform_plot(trace, width=width, height=height, worst=worst,
                                 limit=90.0), width, height)
    # Nothing of a line printer: no digit or letter traces, no '*' or '^' marks, no '+--' axis.
    assert not any(mark in line for line in lines for mark in ("*", "^", "+-", "-+"))


@settings(max_examples=40, deadline=None)
@given(st.lists(st.floats(min_value=0.0, max_value=5e3), min_size=1, max_size=30),
       st.booleans(), st.integers(min_value=40, max_value=130))
def test_any_stage_amplitudes_give_panels_within_the_width(amplitudes, with_limit, width):
    # Stages rising to their amplitude (zero included), with or without a limit: the lines
    # fit, and the first panel is the stage with the highest peak (over the limit), its peak
    # written as format_quantity prints the highest sample.
    time = np.linspace(0.0, 1e-6, 60)
    voltage = np.sin(np.linspace(0.0, 3.0, 60))[:, None] * np.asarray(amplitudes)
    trace = _trace(time, np.linspace(3.0, -1.0, 60), voltage)
    limit = 1000.0 if with_limit else None
    lines = _lines(waveform_plot(trace, width=width, height=24, limit=limit), width, 24)
    peaks = voltage.max(axis=0)
    worst = int(np.argmax(peaks))  # the first of equal peaks (a stable order)
    assert re.match(rf"\s*stage {worst + 1}│", lines[1]), lines[1]
    assert format_quantity(peaks[worst], "V") in lines[1]


def test_a_ramp_fills_the_rows_the_linear_map_gives_and_the_band_starts_at_the_limit():
    # One stage rising linearly from 0 to 1.5 x its 1 kV limit over the record (its peak at the
    # end, so the window is the whole record). Column j stands for t_j = j T / (columns - 1);
    # it shows the highest voltage in its span, v_j ~ 1.5 kV j / (columns - 1) (half a column
    # either side). Under the band (rows 1..R-1, zero to the limit) the column is filled to
    # round(8 (R - 1) min(v_j, 1 kV) / 1 kV) eighths; the band (row 0) stays shaded while
    # v_j <= 1 kV and holds a block once v_j is over it.
    width, height = 100, 20
    time = np.linspace(0.0, 1e-6, 400)
    limit = 1000.0
    trace = _trace(time, np.full(400, -2.0), 1.5 * limit * (time / 1e-6)[:, None])
    lines = _lines(waveform_plot(trace, width=width, height=height, limit=limit), width, height)
    panel = _stage_panel(lines, 1)
    rows = len(panel)
    columns = len(_trace_cells(panel[0]))
    cells = [_trace_cells(row, columns) for row in panel]
    assert all(len(c) == columns for c in cells[1:]), cells
    band_over = [k for k, c in enumerate(cells[0]) if c != BAND]
    crossing = (columns - 1) / 1.5  # v_j = limit
    assert band_over and abs(band_over[0] - crossing) <= 1.5, (band_over[:3], crossing)
    assert all(c in BLOCKS[1:] for c in cells[0][band_over[0]:])
    for column in range(0, columns, 7):
        value = min(1.5 * column / (columns - 1), 1.0)
        filled = sum(BLOCKS.index(cells[row][column]) for row in range(1, rows))
        expected = 8 * (rows - 1) * value
        assert abs(filled - expected) <= 8 * (rows - 1) * 1.5 / (columns - 1) + 1, \
            (column, filled, expected)


def test_the_band_row_is_the_same_in_every_panel():
    # Stages at 50 %, 80 % and 120 % of the limit: the band is each panel's top row, shaded
    # throughout for the two under the limit, holding blocks for the one over it.
    time = np.linspace(0.0, 2e-6, 200)
    shape = np.clip(time / 0.5e-6, 0.0, 1.0)[:, None]
    trace = _trace(time, np.linspace(5.0, -1.0, 200), shape * [500.0, 800.0, 1200.0])
    lines = _lines(waveform_plot(trace, width=80, height=24, limit=1000.0), 80, 24)
    for stage, over in ((1, False), (2, False), (3, True)):
        band = _trace_cells(_stage_panel(lines, stage)[0])
        assert (set(band) != {BAND}) == over, (stage, band)


def test_a_band_stretched_to_the_highest_peak_over_limit():
    # Stages flat at 300 % and 150 % of a 1 kV limit from 0.5 us on: the band covers 100 % to
    # 300 % (the highest), so at the end the first fills its band cell (8 eighths) and the second
    # (150 - 100) / (300 - 100) x 8 = 2 eighths; the heading says how far the band reaches.
    time = np.linspace(0.0, 2e-6, 200)
    shape = np.clip(time / 0.5e-6, 0.0, 1.0)[:, None]
    trace = _trace(time, np.linspace(5.0, -1.0, 200), shape * [3000.0, 1500.0])
    lines = _lines(waveform_plot(trace, width=80, height=24, limit=1000.0), 80, 24)
    assert "over the limit (1 kV) to 300%" in lines[0]
    assert _trace_cells(_stage_panel(lines, 1)[0])[-1] == BLOCKS[8]
    assert _trace_cells(_stage_panel(lines, 2)[0])[-1] == BLOCKS[2]


def test_the_worst_stages_and_the_median_stage_get_panels():
    # Five stages, limits differ: the order is by peak over limit, not by peak.
    time = np.linspace(0.0, 1e-6, 100)
    ramp = (time / 1e-6)[:, None]
    peaks = np.array([900.0, 700.0, 1000.0, 400.0, 600.0])
    limits = np.array([1000.0, 1000.0, 2000.0, 1000.0, 500.0])
    # shares 0.9, 0.7, 0.5, 0.4, 1.2 -> worst two: stage 5, stage 1; median: stage 2 (0.7)
    trace = _trace(time, np.linspace(5.0, -1.0, 100), ramp * peaks)
    text = waveform_plot(trace, width=100, height=30, worst=2, limit=limits)
    labels = re.findall(r"^\s*stage (\d+)│", text, flags=re.M)
    assert labels == ["5", "1", "2"], text
    assert re.search(r"^\s*median│", text, flags=re.M)
    assert "120%" in text and "90%" in text and "70%" in text


def test_the_worst_stage_shows_the_peak_of_the_simulated_trace():
    result = _simulated()
    trace = result.trace
    # Independently of the module: the highest accepted sample of each stage, read off the
    # trace arrays (NaN where a row was not accepted), and its time.
    voltage = trace.voltage[:, 0, :]
    peaks = np.nanmax(voltage, axis=0)
    limit = 1.1 * peaks.min()
    stage = int(np.argmax(peaks))
    peak_time = trace.time[np.nanargmax(voltage[:, stage]), 0]
    for width in (80, 120):
        lines = _lines(waveform_plot(trace, width=width, height=24, worst=3, limit=limit),
                       width, 24)
        first, second = _stage_panel(lines, stage + 1)[:2]
        assert lines.index(first) == 1  # the worst panel comes first
        assert first.endswith(f"{format_quantity(peaks[stage], 'V')} "
                              f"{peaks[stage] / limit:>5.0%}"), first
        assert second.endswith(f"at {format_quantity(peak_time, 's')}"), second


def test_the_current_panel_points_at_the_reverse_recovery_peak():
    result = _simulated()
    trace = result.trace
    current = trace.current[:, 0]
    reverse = np.nanargmin(current)
    width = 100
    lines = _lines(waveform_plot(trace, width=width, height=24, limit=1500.0), width, 24)
    words = (f"reverse-recovery peak {format_quantity(-current[reverse], 'A')} at "
             f"{format_quantity(trace.time[reverse, 0], 's')}")
    pointer = next(line for line in lines if words in line)
    # The arrow stands under the peak's column: column j is the time start + j (end - start) /
    # (columns - 1) of the window; the first column follows the rule.
    first = lines[1].index("│") + 1
    columns = len(_trace_cells(lines[1]))
    start, end = event_window(trial_waveform(trace))
    expected = first + (trace.time[reverse, 0] - start) / (end - start) * (columns - 1)
    assert abs(pointer.index("↑") - expected) <= 1.0, (pointer.index("↑"), expected)
    assert lines[-2][first] == "╵"  # the axis starts at the window's start, a round time
    # The braille panel holds braille cells only (and blank cells).
    braille = [line.split("│", 1)[1] for line in lines if "│" in line
               and not re.match(r"\s*(stage \d+|median)?│[" + BLOCKS + BAND + "]", line)]
    assert braille and all(0x2800 <= ord(c) <= 0x28FF or c == " " for b in braille for c in b)


def test_the_window_ends_after_the_event():
    # A stage that rises to its peak at 1 us and is flat from 2 us on, a current back to zero
    # at 1.5 us, recorded to 100 us: settled at 2 us, 1.25 x 2 us = 2.5 us is earlier than
    # 4 x 1 us; the axis step for 2.5 us is 0.5 us (at most six steps of 1, 2 or 5 x 10^k),
    # so the window ends at 2.5 us.
    time = np.concatenate([np.linspace(0.0, 2e-6, 201), np.linspace(2.1e-6, 100e-6, 50)])
    voltage = np.interp(time, [0.0, 1e-6, 2e-6, 1.0], [0.0, 1200.0, 1000.0, 1000.0])
    current = np.interp(time, [0.0, 0.5e-6, 1.5e-6, 1.0], [10.0, -3.0, 0.0, 0.0])
    waveform = TrialWaveform(time=time, current=current, voltage=voltage[:, None],
                             capacitor_voltage=voltage[:, None])
    start, end = event_window(waveform)
    assert start == 0.0 and end == pytest.approx(2.5e-6, rel=1e-9)
    # The peak rule: a peak at 0.2 us and settling at 40 us shows 4 x 0.2 = 0.8 us.
    late = np.interp(time, [0.0, 0.2e-6, 40e-6, 1.0], [0.0, 1200.0, 1000.0, 1000.0])
    waveform = TrialWaveform(time=time, current=np.interp(time, [0.0, 0.1e-6, 1.0],
                                                          [10.0, -3.0, 0.0]),
                             voltage=late[:, None], capacitor_voltage=late[:, None])
    assert event_window(waveform) == (0.0, pytest.approx(0.8e-6, rel=1e-9))
    lines = waveform_plot(_trace(time, waveform.current, late[:, None]), width=80).split("\n")
    assert lines[-2].rstrip().endswith("800 ns"), lines[-2]  # engineering units: 800 ns


@pytest.mark.parametrize("width", [80, 120])
def test_render_wave_fits_the_console_and_needs_no_colour(width):
    result = _simulated()
    texts = []
    for terminal in (False, True):  # piped, and a colour terminal
        buffer = io.StringIO()
        # The report's console settings (report.display_text.report_console: no highlighting,
        # no markup read into text), with colours forced on for the terminal.
        console = Console(file=buffer, width=width, force_terminal=terminal, highlight=False,
                          markup=False, color_system="truecolor" if terminal else None)
        render_wave("Invented stack", 0, 1, result, (Finding("transient.left_out"),), console,
                    limit=np.full(12, 1500.0))
        texts.append(buffer.getvalue())
    piped, coloured = texts
    assert "\x1b" not in piped and "\x1b" not in coloured  # nothing styled: shapes only
    assert piped == coloured
    assert all(cell_len(line) <= width for line in piped.splitlines()), piped
    assert "stage " in piped and "reverse-recovery peak" in piped and "note: leakage and" in piped


def test_a_console_that_cannot_encode_utf8_gets_ascii_marks():
    result = _simulated()
    raw = io.BytesIO()
    stream = io.TextIOWrapper(raw, encoding="ascii", newline="\n")
    console = Console(file=stream, width=80, highlight=False, markup=False)
    render_wave("Invented stack", 0, 1, result, (), console, limit=np.full(12, 1500.0))
    stream.flush()
    text = raw.getvalue().decode("ascii")  # raises if anything else was written
    lines = text.splitlines()
    assert all(len(line) <= 80 for line in lines), text
    band = [line for line in lines if re.match(r"\s*stage \d+\|", line)]
    assert band and all(set(line.split("|", 1)[1].split(" ")[0]) <= set("/.-=#") for line in band)
    assert "reverse-recovery peak" in text
    assert not any(mark in text for mark in ("*", "^", "+-", "-+"))


def test_bad_arguments_name_themselves():
    trace = _trace([0.0, 1e-6], [1.0, 0.0], [[0.0], [1.0]])
    with pytest.raises(StringcheckError, match="width, height"):
        waveform_plot(trace, width=39)
    with pytest.raises(StringcheckError, match="worst"):
        waveform_plot(trace, worst=0)
    with pytest.raises(StringcheckError, match="limit"):
        waveform_plot(trace, limit=0.0)
    with pytest.raises(StringcheckError, match="trial"):
        waveform_csv(trace, trial=1)
    flagged = _trace([0.0, 1e-6], [1.0, 0.0], [[0.0], [1.0]], np.array([True, False]))
    with pytest.raises(StringcheckError, match="fewer than two"):
        waveform_plot(flagged)
