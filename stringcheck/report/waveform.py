"""Waveforms of one simulated turn-off as text (a terminal plot, CSV); formats, no physics.

Both take a :class:`stringcheck.solvers.transient.TurnOffTrace` (``simulate_turn_off(...,
record=True).trace``) and one trial of it, and return a string; writing it anywhere is the
caller's job. Sign conventions are the trace's: stage and capacitor voltages are reverse voltages
(positive while the string blocks), the loop current is positive in the diodes' forward
direction, so a reverse-recovery current is negative.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from stringcheck.errors import StringcheckError
from stringcheck.report.display_text import shown
from stringcheck.units import ENGINEERING_PREFIXES, format_quantity
from stringcheck.solvers.transient import TurnOff, TurnOffTrace

__all__ = ["TrialWaveform", "trial_waveform", "waveform_csv", "waveform_plot"]

_MARKS = "123456789ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz"
"""Mark of stage k (1-based) in the plot: its number up to 9, then letters."""

_CURRENT_MARK, _PEAK_MARK, _REVERSE_PEAK_MARK, _ZERO_MARK = "*", "^", "v", "."
_GUTTER = 10  # "%8s |": eight characters of axis label, a space and the axis
_MIN_WIDTH, _MIN_HEIGHT = 40, 12
_PREFIXES = ENGINEERING_PREFIXES[1:-1]  # giga to pico: the range of a turn-off's axes


@dataclass(frozen=True)
class TrialWaveform:
    """The accepted samples of one trial of a trace.

    Attributes
    ----------
    time
        Time since the source reversed [s], increasing, shape ``(samples,)``.
    current
        Loop current [A], positive in the forward direction, ``(samples,)``.
    voltage, capacitor_voltage
        Reverse voltage of each stage and of each grading capacitor [V] (the stage's own where
        R_d = 0), ``(samples, n)``.
    """

    time: NDArray[np.float64]
    current: NDArray[np.float64]
    voltage: NDArray[np.float64]
    capacitor_voltage: NDArray[np.float64]


def trial_waveform(trace: TurnOffTrace, trial: int = 0) -> TrialWaveform:
    """Pick the accepted samples of one trial out of a trace.

    Parameters
    ----------
    trace
        A turn-off trace of one or more trials.
    trial
        Index of the trial, in ``[0, trials)``.

    Returns
    -------
    TrialWaveform

    Raises
    ------
    StringcheckError
        When ``trial`` is out of range or the trial has fewer than two accepted samples (it was
        not simulated, for example an input that the engine flagged).
    """
    trials = trace.accepted.shape[1]
    if not 0 <= trial < trials:
        raise StringcheckError(f"trial: {trial} is not in [0, {trials})")
    rows = trace.accepted[:, trial]
    if rows.sum() < 2:
        raise StringcheckError(f"trial: trial {trial} has fewer than two accepted samples "
                               "(was it simulated?)")
    return TrialWaveform(time=trace.time[rows, trial], current=trace.current[rows, trial],
                         voltage=trace.voltage[rows, trial],
                         capacitor_voltage=trace.capacitor_voltage[rows, trial])


def waveform_csv(trace: TurnOffTrace, *, trial: int = 0,
                 capacitor_voltages: bool = False) -> str:
    """The waveforms of one trial as CSV text, one row per accepted sample.

    Parameters
    ----------
    trace
        A turn-off trace.
    trial
        Index of the trial.
    capacitor_voltages
        Also write the reverse voltage of each grading capacitor (``vc1_V`` ... ``vcn_V``).

    Returns
    -------
    str
        Header ``time_s,current_A,v1_V,...,vn_V`` (then ``vc1_V,...`` when asked), then the
        values in SI units, written with the shortest text that reads back to the same float;
        lines end in a newline.
    """
    waveform = trial_waveform(trace, trial)
    count = waveform.voltage.shape[1]
    names = ["time_s", "current_A"] + [f"v{k}_V" for k in range(1, count + 1)]
    columns = [waveform.time[:, None], waveform.current[:, None], waveform.voltage]
    if capacitor_voltages:
        names += [f"vc{k}_V" for k in range(1, count + 1)]
        columns.append(waveform.capacitor_voltage)
    table = np.concatenate(columns, axis=1).tolist()
    lines = [",".join(names)] + [",".join(map(repr, row)) for row in table]
    return "\n".join(lines) + "\n"


def _prefix(magnitude: float) -> tuple[float, str]:
    """Engineering scale and prefix for numbers up to ``magnitude``."""
    for scale, prefix in _PREFIXES:
        if magnitude >= scale * 0.9995:
            return scale, prefix
    return _PREFIXES[-1]


def _limits(values: NDArray[np.float64]) -> tuple[float, float]:
    """Axis range: the data's, always including zero, never empty."""
    low, high = min(float(values.min()), 0.0), max(float(values.max()), 0.0)
    if high - low <= 0.0:
        return low - 1.0, high + 1.0
    return low, high


def _spans(time, values, columns):
    """Lowest and highest value of each series in each column, shape ``(columns, series)``.

    Column j stands for the time t_j = t_0 + j (t_end - t_0) / (columns - 1) and covers the
    half-way points to its neighbours. Its span holds the samples inside and the curve (linear
    between samples) at its two edges, so that neighbouring columns join and a ringing faster
    than a column shows as a filled band rather than as aliased dots.
    """
    centres = np.linspace(time[0], time[-1], columns)
    half = 0.5 * (centres[1] - centres[0])
    edges = np.concatenate([[time[0]], centres[:-1] + half, [time[-1]]])
    at_edges = np.stack([np.interp(edges, time, series) for series in values.T], axis=1)
    low = np.minimum(at_edges[:-1], at_edges[1:])
    high = np.maximum(at_edges[:-1], at_edges[1:])
    inside = np.clip(np.searchsorted(edges, time, side="right") - 1, 0, columns - 1)
    np.minimum.at(low, inside, values)
    np.maximum.at(high, inside, values)
    return low, high


def _row(value, low, high, rows):
    """Row of a value on a panel of ``rows`` rows from ``high`` (row 0) down to ``low``."""
    position = (high - np.asarray(value, dtype=float)) / (high - low) * (rows - 1)
    return np.clip(np.rint(position), 0, rows - 1).astype(int)


def _panel(time, values, marks, rows, columns, limits):
    """A grid of characters with each series drawn as vertical runs of its mark."""
    low, high = limits
    grid = [[" "] * columns for _ in range(rows)]
    if low < 0.0 < high:
        grid[int(_row(0.0, low, high, rows))] = [_ZERO_MARK] * columns
    span_low, span_high = _spans(time, values, columns)
    top, bottom = _row(span_high, low, high, rows), _row(span_low, low, high, rows)
    for series, mark in enumerate(marks):
        for column in range(columns):
            for row in range(top[column, series], bottom[column, series] + 1):
                grid[row][column] = mark
    return grid


def _axis_labels(limits, rows, scale):
    """Labels of the top row, the bottom row and the zero row, right-aligned in 8 characters."""
    low, high = limits
    labels = [""] * rows
    labels[0], labels[-1] = _number(high / scale), _number(low / scale)
    if low < 0.0 < high:
        zero_row = int(_row(0.0, low, high, rows))
        if 0 < zero_row < rows - 1:
            labels[zero_row] = "0"
    return [f"{label:>8}" for label in labels]


def _number(value: float) -> str:
    """Three significant digits in at most eight characters."""
    text = f"{value:.3g}"
    return text if len(text) <= 8 else f"{value:.1e}"


def _fit(text: str, width: int) -> str:
    """Cut or pad a line to exactly ``width`` characters."""
    return text[:width - 3] + "..." if len(text) > width else text.ljust(width)


def _tick_step(span: float) -> float:
    """A step of 1, 2 or 5 times a power of ten that cuts ``span`` into at most six intervals."""
    power = 10.0 ** np.floor(np.log10(span / 4.0))
    for factor in (1.0, 2.0, 5.0, 10.0):
        if span / (factor * power) <= 6.0:
            return factor * power
    return 10.0 * power


def _time_axis(start, end, columns):
    """The axis line with tick marks at round times, and the line of their labels and unit."""
    scale, prefix = _prefix(max(abs(start), abs(end)))
    step = _tick_step(end - start)
    values = np.arange(np.ceil(start / step), np.floor(end / step) + 1) * step
    axis = ["-"] * columns
    labels = [" "] * columns
    free = 0
    for value in values:
        tick = int(np.rint((value - start) / (end - start) * (columns - 1)))
        axis[tick] = "+"
        text = f"{value / scale:.4g}"
        first = min(max(tick - len(text) // 2, 0), columns - len(text))
        if first < free:
            continue
        labels[first:first + len(text)] = text
        free = first + len(text) + 1
    unit = f"[{prefix}s]"
    return (" " * (_GUTTER - 1) + "+" + "".join(axis),
            f"{unit:>8}  " + "".join(labels))


def waveform_plot(trace: TurnOffTrace, *, trial: int = 0, width: int = 80, height: int = 24,
                  worst: int | None = None) -> str:
    """A text plot of one trial's stage voltages and loop current against time.

    Parameters
    ----------
    trace
        A turn-off trace.
    trial
        Index of the trial.
    width, height
        Size of the plot in characters and lines; at least 40 x 12.
    worst
        Draw only this many stages, those with the highest peak reverse voltage; None draws all
        (at most 61 stages can be told apart).

    Returns
    -------
    str
        Exactly ``height`` lines of exactly ``width`` characters, each ending in a newline:
        the voltage panel's title with the highest peak, the voltage panel (each stage drawn
        with its mark: its number, then A = 10, B = 11, ...; ``^`` at the highest peak), the
        current panel's title with the peak reverse current, the current panel (``*``; ``v``
        at the peak reverse current; ``.`` at zero), the time axis with its unit and a legend
        of the stages drawn. Plain ASCII characters.

    Raises
    ------
    StringcheckError
        For a size below 40 x 12, ``worst`` below 1, or more than 61 stages to draw.
    """
    if width < _MIN_WIDTH or height < _MIN_HEIGHT:
        raise StringcheckError(f"width, height: {width} x {height} is below the smallest plot, "
                               f"{_MIN_WIDTH} x {_MIN_HEIGHT}")
    waveform = trial_waveform(trace, trial)
    time, voltage, current = waveform.time, waveform.voltage, waveform.current
    count = voltage.shape[1]
    peaks = voltage.max(axis=0)
    order = np.argsort(-peaks, kind="stable")  # worst first
    if worst is not None:
        if worst < 1:
            raise StringcheckError(f"worst: {worst} stages; give at least 1, or None for all")
        order = order[:worst]
    if order.size > len(_MARKS):
        raise StringcheckError(f"worst: {order.size} stages cannot be told apart in a text plot; "
                               f"give worst <= {len(_MARKS)}")
    columns = width - _GUTTER
    panel_rows = height - 5
    voltage_rows = max(2, round(panel_rows * 2 / 3))
    current_rows = panel_rows - voltage_rows

    # Voltage panel: the worst stage drawn last, on top.
    drawn = order[::-1]
    voltage_limits = _limits(voltage[:, order])
    voltage_scale, voltage_prefix = _prefix(max(abs(v) for v in voltage_limits))
    grid = _panel(time, voltage[:, drawn], [_MARKS[k] for k in drawn], voltage_rows, columns,
                  voltage_limits)
    worst_stage = int(order[0])
    peak_sample = int(np.argmax(voltage[:, worst_stage]))
    centres = np.linspace(time[0], time[-1], columns)
    peak_column = int(np.argmin(np.abs(centres - time[peak_sample])))
    grid[int(_row(peaks[worst_stage], *voltage_limits, voltage_rows))][peak_column] = _PEAK_MARK
    lines = [_fit(f"stage reverse voltage [{voltage_prefix}V]   {_PEAK_MARK} peak "
                  f"{format_quantity(peaks[worst_stage], 'V')} on stage {worst_stage + 1} at "
                  f"{format_quantity(time[peak_sample], 's')}", width)]
    labels = _axis_labels(voltage_limits, voltage_rows, voltage_scale)
    lines += [f"{label} |" + "".join(row) for label, row in zip(labels, grid)]

    # Current panel.
    current_limits = _limits(current)
    current_scale, current_prefix = _prefix(max(abs(i) for i in current_limits))
    grid = _panel(time, current[:, None], [_CURRENT_MARK], current_rows, columns, current_limits)
    reverse_sample = int(np.argmin(current))
    title = f"loop current [{current_prefix}A], forward positive"
    if current[reverse_sample] < 0.0:
        column = int(np.argmin(np.abs(centres - time[reverse_sample])))
        grid[int(_row(current[reverse_sample], *current_limits, current_rows))][column] = \
            _REVERSE_PEAK_MARK
        title += (f"   {_REVERSE_PEAK_MARK} peak reverse "
                  f"{format_quantity(-current[reverse_sample], 'A')} at "
                  f"{format_quantity(time[reverse_sample], 's')}")
    lines.append(_fit(title, width))
    labels = _axis_labels(current_limits, current_rows, current_scale)
    lines += [f"{label} |" + "".join(row) for label, row in zip(labels, grid)]

    lines += list(_time_axis(time[0], time[-1], columns))
    shown = " ".join(_MARKS[k] if k < 9 else f"{_MARKS[k]}={k + 1}" for k in sorted(order))
    which = "stages" if worst is None else f"worst {order.size} of {count} stages"
    lines.append(_fit(f"{which}: {shown}", width))
    return "".join(_fit(line, width) + "\n" for line in lines)


def render_wave(title: str, trial: int, branch: int, result: TurnOff, notes, console, *,
                width: int = 80, height: int = 24, worst: int = 6) -> None:
    """Print ``stringcheck wave``'s report of one traced turn-off (``checks.transient.trial_trace``)
    on a rich ``console``: a line naming the trial, the terminal plot (:func:`waveform_plot`) and
    the trace's notes; a trial the engine could not finish says so first."""
    if not bool(result.converged[0]):
        console.print("[bold red]the engine could not finish this trial; the plot shows what "
                      "was reached[/]", markup=True)
    console.print(f"{shown(title)}: trial {trial}, branch {branch}; turn-off from "
                  f"{result.trace.time.shape[0]} recorded steps")
    console.print(waveform_plot(result.trace, width=width, height=height, worst=worst), end="")
    for note in notes:
        console.print(f"note: {shown(note)}")
