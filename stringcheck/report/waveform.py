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
from stringcheck.limits import exceeds_limit
from stringcheck.report.display_text import shown
from stringcheck.report.wording import sentences
from stringcheck.units import ENGINEERING_PREFIXES, format_quantity
from stringcheck.solvers.transient import TurnOff, TurnOffTrace

__all__ = ["PEAK_SPAN", "SETTLE_FRACTION", "TrialWaveform", "event_window", "render_wave",
           "trial_waveform", "waveform_csv", "waveform_plot"]

@dataclass(frozen=True)
class _Glyphs:
    """The characters of the panels: ``levels`` a cell filled from the bottom in eighths (empty
    to full, nine), ``band`` the shade of the band just above a stage's limit, ``rule`` the left
    edge of every panel, ``tick`` under a round time of the axis, ``pointer`` under the loop
    current's reverse-recovery peak; ``braille`` draws the current in braille dots, otherwise in
    the ASCII marks of :func:`_ascii_cell`."""

    levels: str
    band: str
    rule: str
    tick: str
    pointer: str
    braille: bool


_UNICODE = _Glyphs(levels=" ▁▂▃▄▅▆▇█", band="░", rule="│", tick="╵", pointer="↑", braille=True)
"""Blocks U+2581 to U+2588, light shade U+2591, box drawing, an arrow, braille U+2800 on."""

_ASCII = _Glyphs(levels=" ..--==##", band="/", rule="|", tick="'", pointer="|", braille=False)
"""For a console that cannot encode the above: half-cells in marks of growing weight, the band
hatched."""

_BRAILLE = 0x2800
_DOTS = ((0x01, 0x08), (0x02, 0x10), (0x04, 0x20), (0x40, 0x80))
"""Bit of the braille dot in row r (0 to 3, from the top) and column c (0, 1) of a cell."""

_MIN_WIDTH, _MIN_HEIGHT, _MIN_COLUMNS = 40, 12, 10
_MAX_STAGE_ROWS = 4
_TINY = 1e-30  # the scale of a panel whose every stage stays at zero [V]
_CURRENT_ROWS = (4, 6)  # fewest and most rows of the loop-current panel
_PREFIXES = ENGINEERING_PREFIXES[1:-1]  # giga to pico: the range of a turn-off's axes

SETTLE_FRACTION = 0.02
"""A signal has settled when it stays within this share of its range from its last value."""

PEAK_SPAN = 4.0
"""The time axis shows at most this many times the latest peak's time."""


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


def _tick_step(span: float) -> float:
    """A step of 1, 2 or 5 times a power of ten that cuts ``span`` into at most six intervals."""
    power = 10.0 ** np.floor(np.log10(span / 4.0))
    for factor in (1.0, 2.0, 5.0, 10.0):
        if span / (factor * power) <= 6.0:
            return factor * power
    return 10.0 * power


def event_window(waveform: TrialWaveform, *, settle: float = SETTLE_FRACTION,
                 peaks: float = PEAK_SPAN) -> tuple[float, float]:
    """The stretch of a turn-off worth looking at: from the first sample to a few times the
    latest peak, or until every signal has settled if that comes first, ended on a round time.

    Parameters
    ----------
    waveform
        One trial's samples (:func:`trial_waveform`).
    settle
        A signal has settled once it stays within this fraction of its own range (largest minus
        smallest sample) of its last sample [-]; in (0, 1).
    peaks
        How many times the latest peak's time (from the first sample) to show at most [-];
        above 1. The peaks are each stage's highest reverse voltage and the reverse-recovery
        peak (the most negative loop current).

    Returns
    -------
    (start, end) : tuple of float
        Times [s]: ``start`` is the first sample's; ``end`` is the earlier of ``peaks`` times
        the latest peak and 1.25 times the last moment any of the loop current and the stage
        voltages is farther than ``settle`` of its range from its last value (both from
        ``start``), rounded up to a step of the time axis (1, 2 or 5 times a power of ten) and
        never past the last sample. A record whose peaks and settling both come at its first
        sample is shown whole.
    """
    time = waveform.time
    start, last = float(time[0]), float(time[-1])
    signals = np.column_stack([waveform.current, waveform.voltage])
    spread = signals.max(axis=0) - signals.min(axis=0)
    away = np.abs(signals - signals[-1]) > settle * np.where(spread > 0.0, spread, np.inf)
    moving = np.flatnonzero(away.any(axis=1))
    settled = last if moving.size == 0 or moving[-1] + 1 >= time.size else \
        float(time[moving[-1] + 1])
    latest = max(float(time[np.argmin(waveform.current)]),
                 float(time[np.argmax(waveform.voltage, axis=0)].max()))
    span = min(1.25 * (settled - start), peaks * (latest - start))
    if span <= 0.0:
        return start, last
    step = _tick_step(span)
    end = start + np.ceil(span / step * (1.0 - 1e-9)) * step
    return start, float(min(end, last))


def _window(time, values, end):
    """The samples up to ``end`` [s], with the curve (linear between samples) at ``end``."""
    inside = time < end
    at_end = np.array([np.interp(end, time, series) for series in values.T])
    return (np.concatenate([time[inside], [end]]),
            np.concatenate([values[inside], at_end[None, :]], axis=0))


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


@dataclass(frozen=True)
class _Stage:
    """One stage panel: which stage (0-based), its highest sample [V] and when [s], its limit
    [V] (NaN: none given) and whether it is the median stage."""

    index: int
    peak: float
    peak_time: float
    limit: float
    median: bool


def _stages_of_interest(waveform, limit, worst, room):
    """The worst ``worst`` stages by peak over limit (by peak where no limit is given), then the
    median stage unless it is among them, at most ``room`` panels (the worst kept first)."""
    peaks = waveform.voltage.max(axis=0)
    count = peaks.size
    share = peaks / limit if np.all(np.isfinite(limit)) else peaks
    order = np.argsort(-share, kind="stable")
    median = int(order[::-1][(count - 1) // 2])  # the lower of two middle ones
    chosen = list(order[:min(worst, room)])
    if median not in chosen:
        if len(chosen) + 1 > room:
            chosen = chosen[:max(room - 1, 1)]
        if len(chosen) < room:
            chosen.append(median)
    times = waveform.time[np.argmax(waveform.voltage, axis=0)]
    return [_Stage(int(k), float(peaks[k]), float(times[k]), float(limit[k]), int(k) == median)
            for k in chosen]


def _eighths(fraction, rows, levels):
    """Characters of a filled column ``fraction`` of ``rows`` rows high, top row first; each row
    resolves eighths of itself (``levels``: empty to full)."""
    filled = int(np.clip(np.rint(fraction * 8 * rows), 0, 8 * rows))
    return [levels[int(np.clip(filled - 8 * (rows - 1 - row), 0, 8))] for row in range(rows)]


def _stage_rows(high, stage, rows, top, glyphs):
    """The panel of one stage: ``rows`` lines of block characters, one per column of ``high``
    (the highest voltage in each column [V]).

    With a limit the top row is the band: it covers the limit to ``top`` times it [-], shows the
    light shade where the stage stays at or below the limit, and fills (rounded up, so any
    excess shows) where ``exceeds_limit``; the rows below cover zero to the limit. With no limit
    all rows cover zero to ``top`` [V].
    """
    columns = high.size
    if not np.isfinite(stage.limit):
        cells = [_eighths(value / top, rows, glyphs.levels) for value in high]
        return ["".join(cell[row] for cell in cells) for row in range(rows)]
    below = rows - 1
    cells = [_eighths(min(value, stage.limit) / stage.limit, below, glyphs.levels)
             for value in high]
    lines = [[glyphs.band] * columns] + [[cell[row] for cell in cells] for row in range(below)]
    over = exceeds_limit(high, stage.limit)
    excess = (high / stage.limit - 1.0) / (top - 1.0) * 8
    for column in np.flatnonzero(over):
        lines[0][column] = glyphs.levels[int(np.clip(np.ceil(excess[column]), 1, 8))]
    return ["".join(line) for line in lines]


def _braille(time, values, rows, columns, glyphs):
    """One series as a trace of ``rows`` lines of ``columns`` cells of 2 x 4 dots each, with a
    dotted line at zero, in braille (or :func:`_ascii_cell`); returns the lines, the row of the
    zero line and the range (low, high) [unit of ``values``]."""
    low = min(float(values.min()), 0.0)
    high = max(float(values.max()), 0.0)
    if high - low <= 0.0:
        low, high = low - 1.0, high + 1.0
    dots_down = 4 * rows
    span_low, span_high = _spans(time, values[:, None], 2 * columns)

    def dot_row(value):
        return np.clip(np.rint((high - value) / (high - low) * (dots_down - 1)), 0,
                       dots_down - 1).astype(int)

    bits = np.zeros((rows, columns), dtype=int)
    zero_bits = np.zeros((rows, columns), dtype=int)
    top, bottom = dot_row(span_high[:, 0]), dot_row(span_low[:, 0])
    zero = int(dot_row(0.0))
    for dot_column in range(2 * columns):
        for row in range(top[dot_column], bottom[dot_column] + 1):
            bits[row // 4, dot_column // 2] |= _DOTS[row % 4][dot_column % 2]
        if dot_column % 4 == 0:
            zero_bits[zero // 4, dot_column // 2] |= _DOTS[zero % 4][dot_column % 2]
    if glyphs.braille:
        lines = ["".join(chr(_BRAILLE + int(b)) if b else " " for b in line)
                 for line in bits | zero_bits]
    else:
        lines = ["".join(_ascii_cell(int(b), int(z)) for b, z in zip(line, zeros))
                 for line, zeros in zip(bits, zero_bits)]
    return lines, zero // 4, (low, high)


def _ascii_cell(trace: int, zero: int) -> str:
    """An ASCII mark for a cell of 2 x 4 dots (braille bits): the trace in its top half only
    ``'``, in its bottom half only ``.``, in both ``|`` (a steep stretch) or ``:``; a cell of the
    zero line alone ``-``; an empty cell a space."""
    upper = trace & (0x01 | 0x08 | 0x02 | 0x10)
    lower = trace & (0x04 | 0x20 | 0x40 | 0x80)
    if upper and lower:
        return "|" if trace & (0x01 | 0x08) and trace & (0x40 | 0x80) else ":"
    if upper:
        return "'"
    if lower:
        return "."
    return "-" if zero else " "


def _time_axis(start, end, columns, tick):
    """Tick marks under round times and their labels, the unit after the last one."""
    scale, prefix = _prefix(max(abs(start), abs(end)))
    step = _tick_step(end - start)
    values = np.arange(np.ceil(start / step - 1e-9), np.floor(end / step + 1e-9) + 1) * step
    ticks = [" "] * columns
    placed = []
    for value in values:
        column = int(np.rint((value - start) / (end - start) * (columns - 1)))
        ticks[column] = tick
        placed.append((column, f"{value / scale + 0.0:.4g}"))
    column, text = placed[-1]
    placed[-1] = (column, f"{text} {prefix}s")
    labels = [" "] * (columns + 8)
    free = 0
    for index, (column, text) in enumerate(placed):
        first = max(column - len(text) // 2, 0) if index else column
        last = index == len(placed) - 1
        if first < free and not last:
            continue
        if last and first < free:  # the unit's label wins over the one before it
            labels[placed[index - 1][0]:free] = " " * (free - placed[index - 1][0])
        labels[first:first + len(text)] = text
        free = first + len(text) + 1
    return "".join(ticks), "".join(labels).rstrip()


def _fit(text: str, width: int) -> str:
    """Cut a line to at most ``width`` characters (an ellipsis shows the cut)."""
    return text if len(text) <= width else text[:width - 3] + "..."


def waveform_plot(trace: TurnOffTrace, *, trial: int = 0, width: int = 80, height: int = 24,
                  worst: int | None = None, limit=None, ascii_only: bool = False) -> str:
    """Panels of one trial's turn-off: a strip per stage of interest and the loop current.

    Parameters
    ----------
    trace
        A turn-off trace.
    trial
        Index of the trial.
    width, height
        The most characters a line and the most lines the plot may take; at least 40 x 12.
    worst
        Give a panel to this many stages with the highest peak over limit (over the highest
        peak where no limit is given), then to the median stage; None: every stage that fits.
    limit
        Each stage's limit [V] (scalar or ``(n,)``), the one its peak is judged by; None draws
        no band and scales every stage to the highest peak.
    ascii_only
        Plain ASCII marks instead of block, shade, box-drawing and braille characters (for a
        console that cannot encode them): the band hatched ``/``, half-cells ``.-=#`` and the
        current in ``'.:|`` marks.

    Returns
    -------
    str
        Lines of at most ``width`` characters (each ending in a newline), at most ``height``
        of them, zoomed in time to :func:`event_window`:

        - a heading line (the stage voltage, the band and its limit);
        - per stage of interest (worst first, the median stage last) a panel of two to four
          rows of block characters, one column per time step of the axis, each the highest
          reverse voltage in that column. The top row is the band: its light shade marks the
          limit, the rows under it cover zero to the limit in eighths of a row, and a trace
          in the band is over the limit. The band covers the limit to one row more on the same
          scale, or, where a stage shown goes higher, to the highest peak over limit (the
          heading then says how far). Beside the panel: the stage's highest sample, its
          share of the limit and its time, computed from all samples;
        - a heading line and a braille panel of the loop current (forward positive, dotted line
          at zero, range in the gutter), a line pointing at the reverse-recovery peak (the most
          negative current, its size and time);
        - a line of tick marks at round times and one of their labels, in engineering units.

        Nothing depends on colour: the band, the trace and the zero line differ in shape.

    Raises
    ------
    StringcheckError
        For a size below 40 x 12, ``worst`` below 1, or a limit that is not positive.
    """
    if width < _MIN_WIDTH or height < _MIN_HEIGHT:
        raise StringcheckError(f"width, height: {width} x {height} is below the smallest plot, "
                               f"{_MIN_WIDTH} x {_MIN_HEIGHT}")
    if worst is not None and worst < 1:
        raise StringcheckError(f"worst: {worst} stages; give at least 1, or None for all")
    waveform = trial_waveform(trace, trial)
    count = waveform.voltage.shape[1]
    limits = np.broadcast_to(np.nan if limit is None else np.asarray(limit, dtype=float),
                             (count,)).astype(float)
    if limit is not None and not np.all(limits > 0.0):
        raise StringcheckError("limit: give each stage's limit in volts, above zero")
    has_limit = limit is not None
    glyphs = _ASCII if ascii_only else _UNICODE

    # Lines: two headings, the pointer line, the tick marks and their labels (5), panels.
    room = height - 5 - _CURRENT_ROWS[0]
    wanted = count if worst is None else min(worst, count)
    chosen = _stages_of_interest(waveform, limits, wanted, max(room // 2, 1))
    rows = int(np.clip(room // len(chosen), 2, _MAX_STAGE_ROWS))
    current_rows = min(height - 5 - rows * len(chosen), _CURRENT_ROWS[1])

    start, end = event_window(waveform)
    time, values = _window(waveform.time, np.column_stack([waveform.current,
                                                           waveform.voltage]), end)
    current, voltage = values[:, 0], values[:, 1:]

    # Words beside the panels.
    peaks = [format_quantity(stage.peak, "V") for stage in chosen]
    peak_width = max(len(text) for text in peaks)
    notes = []
    for stage, peak in zip(chosen, peaks):
        share = f"{stage.peak / stage.limit:.0%}" if has_limit else ""
        notes.append((f"{peak:>{peak_width}} {share:>5}".rstrip(),
                      f"at {format_quantity(stage.peak_time, 's')}"))
    note_width = max(len(text) for pair in notes for text in pair)
    labels = [(f"stage {stage.index + 1}", "median" if stage.median else "")
              for stage in chosen]
    low_current, high_current = min(float(current.min()), 0.0), max(float(current.max()), 0.0)
    current_labels = [format_quantity(high_current, "A"), "0",
                      format_quantity(low_current, "A")]
    gutter = max(len(text) for text in [*(t for pair in labels for t in pair),
                                        *current_labels])
    columns = width - gutter - 2 - note_width
    if columns < _MIN_COLUMNS:
        raise StringcheckError(f"width: {width} characters leave {columns} for the trace; "
                               f"give at least {width + _MIN_COLUMNS - columns}")

    lines = []
    if has_limit:
        lowest, highest = float(limits.min()), float(limits.max())
        limit_text = format_quantity(lowest, "V") if np.isclose(lowest, highest) else \
            f"{format_quantity(lowest, 'V')} to {format_quantity(highest, 'V')}"
        band_top = max(1.0 + 1.0 / (rows - 1), max(stage.peak / stage.limit for stage in chosen))
        reach = f" to {band_top:.0%}" if band_top > 1.0 + 1.0 / (rows - 1) else ""
        heading = (f"reverse voltage per stage; {glyphs.band} band: over the limit "
                   f"({limit_text}){reach}")
        right = "peak, share, time"
    else:
        heading = "reverse voltage of each stage, to the highest peak (no limit given)"
        right = "peak, time"
    lines.append(_beside(heading, right, width))
    top = band_top if has_limit else max(max(stage.peak for stage in chosen), _TINY)
    _, high = _spans(time, voltage, columns)
    for stage, (name, role), (first, second) in zip(chosen, labels, notes):
        strip = _stage_rows(high[:, stage.index], stage, rows, top, glyphs)
        for row, text in enumerate(strip):
            left = name if row == 0 else role if row == 1 else ""
            note = first if row == 0 else second if row == 1 else ""
            lines.append(f"{left:>{gutter}}{glyphs.rule}{text} {note}".rstrip())

    lines.append(_fit("loop current, forward positive; dotted line at zero", width))
    traced, zero_row, _ = _braille(time, current, current_rows, columns, glyphs)
    for row, text in enumerate(traced):
        left = current_labels[0] if row == 0 else current_labels[2] \
            if row == current_rows - 1 else "0" if row == zero_row else ""
        lines.append(f"{left:>{gutter}}{glyphs.rule}{text}".rstrip())
    reverse = int(np.argmin(waveform.current))
    if waveform.current[reverse] < 0.0:
        words = (f"reverse-recovery peak {format_quantity(-waveform.current[reverse], 'A')} "
                 f"at {format_quantity(waveform.time[reverse], 's')}")
        column = gutter + 1 + int(np.rint((waveform.time[reverse] - start) / (end - start)
                                          * (columns - 1)))
        pointed = f"{glyphs.pointer} {words}"
        if column + len(pointed) <= width:
            lines.append(" " * column + pointed)
        else:
            lines.append(_fit(" " * max(column - len(words) - 1, 0) + f"{words} {glyphs.pointer}",
                              width))
    else:
        lines.append(_fit(" " * (gutter + 1) + "no reverse current", width))
    ticks, tick_labels = _time_axis(start, end, columns, glyphs.tick)
    lines.append((" " * (gutter + 1) + ticks).rstrip())
    lines.append(_fit(" " * (gutter + 1) + tick_labels, width))
    return "".join(line + "\n" for line in lines)


def _beside(left: str, right: str, width: int) -> str:
    """``left``, and ``right`` flush with the right edge where both fit in ``width``."""
    if len(left) + 2 + len(right) <= width:
        return left + right.rjust(width - len(left))
    return _fit(left, width)


def render_wave(title: str, trial: int, branch: int, result: TurnOff, notes, console, *,
                width: int | None = None, height: int = 24, worst: int = 6,
                limit=None) -> None:
    """Print ``stringcheck wave``'s report of one traced turn-off (``checks.transient.trial_trace``)
    on a rich ``console``: a line naming the trial, the panels (:func:`waveform_plot`, with each
    stage's ``limit`` [V] from ``checks.transient.trial_limits``) and the trace's notes; a trial
    the engine could not finish says so first. ``width`` None: the console's width (the
    terminal's, or ``COLUMNS``, 80 when piped); the panels are never wrapped or cut by the
    console; a console that cannot encode UTF-8 gets the ASCII marks."""
    width = console.width if width is None else width
    ascii_only = not console.encoding.lower().replace("-", "").startswith("utf")
    if not bool(result.converged[0]):
        console.print("[bold]the engine could not finish this trial; the panels show what "
                      "was reached[/]", markup=True)
    console.print(f"{shown(title)}: trial {trial}, branch {branch}; turn-off from "
                  f"{result.trace.time.shape[0]} recorded steps")
    console.print(waveform_plot(result.trace, width=max(width, _MIN_WIDTH), height=height,
                                worst=worst, limit=limit, ascii_only=ascii_only),
                  end="", soft_wrap=True)
    for note in sentences(notes):
        console.print(f"note: {shown(note)}")
