"""The report's figures: matplotlib (Agg) drawn to SVG text, from result objects only.

Every function takes the result objects a study returned (a check's outcome, the design it ran on)
and draws what they hold; none recomputes physics. Each returns the SVG as text, ready to be placed
inline in the HTML report (``report.html_page``), with text kept as text (``svg.fonttype`` none, so
the page needs no embedded font) and ids salted with a constant so that one result always gives the
same bytes. Nothing here needs colour to be read: limits differ by line style and are labelled.

This module imports matplotlib at once; only the HTML report imports it, and only when a report is
asked for.
"""

from __future__ import annotations

import io
from typing import Sequence

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402  (after the backend is chosen)
import matplotlib.ticker  # noqa: E402
import numpy as np  # noqa: E402

from stringcheck.units import ENGINEERING_PREFIXES  # noqa: E402

__all__ = ["branch_current_figure", "drivers_figure", "junction_figure",
           "position_figure", "review_position_figure", "runaway_figure", "sizing_curve_figure", "stress_distribution_figure",
           "svg_text", "wave_figure"]

# Our own plain look: ink for data, a second ink for limits; widths and dashes tell them apart.
INK = "#1f3b4d"
SOFT = "#8fa9b8"
LIMIT = "#b03a2e"
GRID = "#d9d9d9"
WIDTH, HEIGHT = 7.0, 3.0  # inches: the width of an A4 page's text at 96 dpi

_STYLE = {
    "svg.fonttype": "none",
    "svg.hashsalt": "stringcheck",
    "font.family": "sans-serif",
    "font.size": 8.5,
    "axes.edgecolor": "#555555",
    "axes.linewidth": 0.6,
    "axes.grid": True,
    "grid.color": GRID,
    "grid.linewidth": 0.5,
    "axes.spines.top": False,
    "axes.spines.right": False,
    "legend.frameon": False,
    "legend.fontsize": 7.5,
}


def svg_text(figure) -> str:
    """``figure`` as SVG text (no XML declaration, no metadata block), and closed."""
    buffer = io.StringIO()
    figure.savefig(buffer, format="svg", bbox_inches="tight", metadata={"Date": None})
    plt.close(figure)
    text = buffer.getvalue()
    text = text[text.index("<svg"):]
    # The RDF block names the drawing program and licences by URL: nothing a reader needs.
    start, end = text.find("<metadata>"), text.find("</metadata>")
    if start >= 0 and end > start:
        text = text[:start] + text[end + len("</metadata>"):]
    return text


def _figure(height: float = HEIGHT):
    with plt.rc_context(_STYLE):
        figure, axes = plt.subplots(figsize=(WIDTH, height))
    return figure, axes


def _styled(function):
    """Run a drawing function under the report's style."""
    def wrapped(*args, **kwargs):
        with plt.rc_context(_STYLE):
            return function(*args, **kwargs)
    wrapped.__doc__ = function.__doc__
    wrapped.__name__ = function.__name__
    return wrapped


def _legend_above(axes, *, ncol: int, extra=None) -> None:
    """The legend in a row above the plot, clear of the data (``extra``: a twin axes whose lines
    join it)."""
    handles, labels = axes.get_legend_handles_labels()
    if extra is not None:
        more = extra.get_legend_handles_labels()
        handles, labels = handles + more[0], labels + more[1]
    axes.legend(handles, labels, loc="lower left", bbox_to_anchor=(0.0, 1.01), ncol=ncol,
                borderaxespad=0.0)


def _scale(values: Sequence[float], unit: str) -> tuple[float, str]:
    """The factor and the prefixed unit for an axis over ``values`` [unit]."""
    finite = [abs(v) for v in values if v is not None and np.isfinite(v)]
    largest = max(finite) if finite else 1.0
    for factor, prefix in ENGINEERING_PREFIXES:
        if largest >= factor * 0.9995:
            return factor, prefix + unit
    return ENGINEERING_PREFIXES[-1][0], ENGINEERING_PREFIXES[-1][1] + unit


@_styled
def position_figure(check, design) -> str:
    """A series check's stage voltage along the stack: per position the mean, mean +- 1 standard
    deviation (thick), mean +- 3 standard deviations (thin) and the highest value drawn (a
    marker); the limit derating x V_RRM (dashed) and V_RRM (dotted) per position; positions with a
    temperature rise shaded."""
    rows = check.per_position()
    figure, axes = _figure()
    factor, unit = _scale([p.max_voltage for p in rows] + [p.limit / design.string.derating
                                                            for p in rows], "V")
    branches = sorted({p.branch for p in rows})
    offset = 0.0 if len(branches) == 1 else 0.6 / len(branches)
    rise = design.string.temperature_rise_grid()
    for hot in np.flatnonzero(rise.max(axis=0) > 0):
        axes.axvspan(hot + 0.5, hot + 1.5, color="#f2e6d9", lw=0, zorder=0)
    for number, branch in enumerate(branches):
        mine = [p for p in rows if p.branch == branch]
        x = np.array([p.index for p in mine], float) + (number - (len(branches) - 1) / 2) * offset
        mean = np.array([p.mean_voltage for p in mine]) / factor
        std = np.array([p.std_voltage for p in mine]) / factor
        high = np.array([p.max_voltage for p in mine]) / factor
        axes.vlines(x, mean - 3 * std, mean + 3 * std, color=SOFT, lw=1.0, zorder=2)
        axes.vlines(x, mean - std, mean + std, color=INK, lw=3.0, zorder=3)
        axes.plot(x, high, ls="none", marker="_", ms=7, mew=1.4, color=INK, zorder=4)
    first = [p for p in rows if p.branch == branches[0]]
    edges = np.arange(len(first) + 1) + 0.5
    limit = np.array([p.limit for p in first]) / factor
    rating = limit / design.string.derating
    axes.stairs(limit, edges, baseline=None, color=LIMIT, lw=1.2, ls="--",
                label="limit: derating x V_RRM")
    axes.stairs(rating, edges, baseline=None, color=LIMIT, lw=1.0, ls=":", label="V_RRM")
    axes.plot([], [], color=INK, lw=3.0, label="mean +- 1 sigma")
    axes.plot([], [], color=SOFT, lw=1.0, label="mean +- 3 sigma")
    axes.plot([], [], ls="none", marker="_", ms=7, mew=1.4, color=INK, label="highest drawn")
    if (rise > 0).any():
        axes.fill_between([], [], color="#f2e6d9", label="position with a temperature rise")
    axes.set_xlim(0.5, len(first) + 0.5)
    # From a little below the lowest bar, so that the spread shows, up past V_RRM.
    lowest = min((p.mean_voltage - 3 * p.std_voltage) for p in rows) / factor
    top = float(np.max(rating)) * 1.04
    axes.set_ylim(max(0.0, lowest - 0.15 * (top - lowest)), top)
    axes.set_xlabel("position in the stack (1 = first in the file)")
    axes.set_ylabel(f"stage voltage [{unit}]")
    _legend_above(axes, ncol=3)
    if len(first) <= 30:
        axes.set_xticks(np.arange(1, len(first) + 1))
    return svg_text(figure)


@_styled
def stress_distribution_figure(check, *, limit_label: str = "limit") -> str:
    """The worst device's stress ratio (stress / allowed limit) of each built string: a histogram
    (counts on a log scale, so that the tail shows) and the fraction of strings at or below each
    ratio; the limit (ratio 1) dashed."""
    figure, axes = _figure()
    bins = [b for b in check.histogram if b[2] >= 0]
    twin = None
    if bins:
        lows = np.array([b[0] for b in bins])
        highs = np.array([b[1] for b in bins])
        counts = np.array([b[2] for b in bins], float)
        widths = np.where(highs > lows, highs - lows, 0.002)
        axes.bar(lows, np.where(counts > 0, counts, np.nan), width=widths, align="edge",
                 color=SOFT, edgecolor=INK, lw=0.5, label="built strings per bin")
        axes.set_yscale("log")
        cumulative = np.cumsum(counts) / counts.sum()
        twin = axes.twinx()
        twin.step(np.r_[lows[0], highs], np.r_[0.0, cumulative], where="pre", color=INK, lw=1.2,
                  label="fraction at or below")
        twin.set_ylim(0, 1.02)
        twin.set_ylabel("fraction of strings at or below")
        twin.grid(False)
        twin.spines["right"].set_visible(True)
    axes.axvline(1.0, color=LIMIT, ls="--", lw=1.2, label=limit_label)
    axes.set_xlabel("worst stress of a built string / its limit")
    axes.set_ylabel("built strings")
    _legend_above(axes, ncol=3, extra=twin)
    return svg_text(figure)


@_styled
def branch_current_figure(check) -> str:
    """The parallel check's branch currents: per branch the mean and the highest drawn average
    current, against the branch's rating I_F(AV) (dashed)."""
    rows = check.per_position()
    figure, axes = _figure()
    x = np.array([row.branch for row in rows])
    axes.bar(x - 0.18, [row.mean_current for row in rows], width=0.36, color=SOFT, edgecolor=INK,
             lw=0.5, label="mean")
    axes.bar(x + 0.18, [row.max_current for row in rows], width=0.36, color=INK,
             label="highest drawn")
    for row in rows:
        axes.hlines(row.limit_current, row.branch - 0.45, row.branch + 0.45, color=LIMIT, ls="--",
                    lw=1.2)
    axes.plot([], [], color=LIMIT, ls="--", lw=1.2, label="I_F(AV) limit")
    axes.set_xticks(x)
    axes.set_xlabel("branch")
    axes.set_ylabel("average forward current [A]")
    _legend_above(axes, ncol=3)
    return svg_text(figure)


@_styled
def junction_figure(check) -> str:
    """The thermal check's junction temperatures: per device the mean and the highest drawn, against
    T_j,max (dashed)."""
    rows = check.per_position()
    figure, axes = _figure()
    x = np.arange(1, len(rows) + 1)
    axes.plot(x, [row.mean_temperature for row in rows], ls="none", marker="o", ms=3.5, color=INK,
              label="mean")
    axes.plot(x, [row.max_temperature for row in rows], ls="none", marker="_", ms=7, mew=1.4, color=INK,
              label="highest drawn")
    axes.stairs([row.limit for row in rows], np.arange(len(rows) + 1) + 0.5, baseline=None,
                color=LIMIT, ls="--", lw=1.2, label="T_j,max")
    axes.set_xlabel("device (branch by branch, position by position)")
    axes.set_ylabel("junction temperature [degC]")
    axes.set_xlim(0.5, len(rows) + 0.5)
    _legend_above(axes, ncol=3)
    return svg_text(figure)


@_styled
def runaway_figure(check, ambient: float) -> str:
    """The thermal check's junction temperature against ambient: the p99 and worst T_j at the
    design's ambient, and the ambients at which sampled strings run away (their spread as a band,
    the median as a line)."""
    figure, axes = _figure(2.6)
    axes.plot([ambient], [check.p99_tj], ls="none", marker="o", color=INK, label="p99 T_j")
    axes.plot([ambient], [check.worst_tj], ls="none", marker="^", color=INK, label="worst T_j")
    runaway = check.runaway_ambient
    if runaway:
        axes.axvspan(runaway["p1"], runaway["p99"], color="#f2e6d9", lw=0,
                     label="runaway ambient, 1st-99th percentile of the sample")
        axes.axvline(runaway["p50"], color=LIMIT, ls="--", lw=1.2,
                     label="runaway ambient, median")
    limit = max(row.limit for row in check.per_position())
    axes.axhline(limit, color=LIMIT, ls=":", lw=1.0, label="T_j,max")
    axes.axvline(ambient, color=INK, lw=0.6)
    axes.set_xlabel("ambient [degC]")
    axes.set_ylabel("junction temperature [degC]")
    _legend_above(axes, ncol=2)
    return svg_text(figure)


@_styled
def drivers_figure(drivers, check: str) -> str:
    """What drives a check's worst stress: the rank correlation of each input with it (bars), the
    top ones annotated with the p99 stress ratio the check reaches with that input tightened."""
    mine = [d for d in drivers if d.check == check and np.isfinite(d.rank_correlation)]
    mine = sorted(mine, key=lambda d: -abs(d.rank_correlation))[:10][::-1]
    figure, axes = _figure(0.35 * max(len(mine), 2) + 0.8)
    y = np.arange(len(mine))
    axes.barh(y, [d.rank_correlation for d in mine], color=SOFT, edgecolor=INK, lw=0.5)
    for row, driver in zip(y, mine):
        if driver.tightened_p99_ratio is not None:
            axes.text(0.01, row, f" tightened: p99 {driver.tightened_p99_ratio:.3f}",
                      va="center", fontsize=7, transform=axes.get_yaxis_transform())
    axes.set_yticks(y, [d.label for d in mine])
    axes.axvline(0, color="#555555", lw=0.6)
    axes.set_xlim(-1, 1)
    axes.set_xlabel("rank correlation with the worst stress ratio")
    return svg_text(figure)


@_styled
def sizing_curve_figure(ladder, *, x_label: str, x_unit: str, target: float) -> str:
    """A sizing search's design curve (``studies.size.LadderChoice``): the P(fail) upper bound
    and estimate of every value searched (log scale, left), the p99 stress ratio (right), the
    target (dashed), the textbook corner (dotted) and the chosen value (solid line)."""
    points = sorted(ladder.curve, key=lambda c: c.value)
    figure, axes = _figure()
    values = np.array([c.value for c in points], float)
    factor, unit = _scale(values, x_unit)
    upper = np.array([c.p_fail_upper for c in points], float)
    estimate = np.array([c.p_fail for c in points], float)
    finite = upper[(upper > 0) & np.isfinite(upper)]
    floor = min(target / 100, finite.min() / 2) if finite.size else target / 100
    axes.plot(values / factor, np.maximum(upper, floor), marker="o", ms=3, color=INK,
              label="P(fail) upper bound")
    axes.plot(values / factor, np.where(estimate > 0, estimate, np.nan), marker=".", ls=":",
              color=SOFT, label="P(fail) estimate")
    axes.axhline(target, color=LIMIT, ls="--", lw=1.2, label="target")
    if ladder.textbook_bound is not None and np.isfinite(ladder.textbook_bound):
        axes.axvline(ladder.textbook_bound / factor, color=LIMIT, ls=":", lw=1.0,
                     label="textbook corner")
    if ladder.chosen is not None:
        axes.axvline(ladder.chosen.value / factor, color=INK, lw=1.4, label="chosen")
    axes.set_xscale("log")
    axes.set_yscale("log")
    # Plain numbers on the value axis (the unit carries the prefix), P(fail) from below the
    # lowest bound drawn up to 1.
    plain = matplotlib.ticker.FuncFormatter(lambda value, _: f"{value:g}")
    axes.xaxis.set_major_formatter(plain)
    axes.xaxis.set_minor_formatter(plain)
    axes.set_ylim(floor / 2, 1.5)
    axes.set_xlabel(f"{x_label} [{unit}]")
    axes.set_ylabel("P(fail)")
    twin = axes.twinx()
    p99 = np.array([c.p99_ratio for c in points], float)
    twin.plot(values / factor, p99, marker="s", ms=2.5, ls="-.", color=SOFT, lw=0.9,
              label="p99 stress / limit (right)")
    twin.set_ylabel("p99 stress / limit")
    twin.grid(False)
    twin.spines["right"].set_visible(True)
    _legend_above(axes, ncol=3, extra=twin)
    return svg_text(figure)


@_styled
def review_position_figure(positions, check: str) -> str:
    """A review's per-position change in one check (``studies.review.PositionDelta``): each
    position's worst and mean stress over its own limit in the baseline (open marks, dashed) and
    the candidate (filled marks, solid), position by position along the stack; the limit at 1."""
    rows = [p for p in positions if p.check == check]
    figure, axes = _figure()
    x = np.arange(1, len(rows) + 1)

    def ratio(values, limits):
        values, limits = np.asarray(values, float), np.asarray(limits, float)
        return np.where(limits > 0, values / np.where(limits > 0, limits, 1.0), np.nan)

    base_worst = ratio([p.baseline_worst for p in rows], [p.baseline_limit for p in rows])
    cand_worst = ratio([p.candidate_worst for p in rows], [p.candidate_limit for p in rows])
    base_mean = ratio([p.baseline_mean for p in rows], [p.baseline_limit for p in rows])
    cand_mean = ratio([p.candidate_mean for p in rows], [p.candidate_limit for p in rows])
    axes.plot(x, base_worst, ls="--", marker="o", mfc="white", ms=4, color=SOFT, lw=1.0,
              label="baseline, worst")
    axes.plot(x, cand_worst, ls="-", marker="o", ms=4, color=INK, lw=1.2,
              label="candidate, worst")
    axes.plot(x, base_mean, ls="--", marker="s", mfc="white", ms=3, color=SOFT, lw=0.8,
              label="baseline, mean")
    axes.plot(x, cand_mean, ls="-", marker="s", ms=3, color=INK, lw=0.8,
              label="candidate, mean")
    changed = [number for number, p in enumerate(rows, start=1)
               if p.baseline_part != p.candidate_part]
    for number in changed:
        axes.axvspan(number - 0.5, number + 0.5, color="#f2e6d9", lw=0, zorder=0)
    if changed:
        axes.fill_between([], [], color="#f2e6d9", label="part substituted")
    axes.axhline(1.0, color=LIMIT, ls="--", lw=1.2, label="limit")
    axes.set_xlim(0.5, len(rows) + 0.5)
    if len(rows) <= 30:
        axes.set_xticks(x, [f"{p.index}" if p.index else f"b{p.branch}" for p in rows])
    axes.set_xlabel("position (branch by branch)" if check != "parallel" else "branch")
    axes.set_ylabel("stress / limit")
    _legend_above(axes, ncol=4)
    return svg_text(figure)


@_styled
def wave_figure(waveform, *, limits: Sequence[float], window: tuple[float, float],
                stages: Sequence[int] | None = None, title: str = "", image: str = "svg"):
    """One string's simulated turn-off: the voltage of the chosen stages (default: the three
    highest peaks and the lowest), each with its own line style, against the device limit
    (dashed, the lowest of the stages drawn when they differ), and the loop current below, over
    ``window`` [s] (``report.waveform.event_window`` gives the event's). ``waveform``: a
    ``report.waveform.TrialWaveform``; ``limits``: each stage's limit [V]. Returns SVG text, or PNG bytes with ``image="png"``."""
    time = np.asarray(waveform.time, float)
    voltage = np.asarray(waveform.voltage, float)
    current = np.asarray(waveform.current, float)
    shown = (time >= window[0]) & (time <= window[1])
    if shown.sum() < 2:
        shown = np.ones_like(time, dtype=bool)
    peaks = np.nanmax(voltage[shown], axis=0)
    if stages is None:
        order = list(np.argsort(peaks)[::-1])
        stages = order[:3] + ([order[-1]] if len(order) > 3 else [])
    figure, (upper, lower) = plt.subplots(2, 1, figsize=(WIDTH, 4.4), sharex=True,
                                          gridspec_kw={"height_ratios": [2, 1]})
    t_factor, t_unit = _scale([window[1] - window[0]], "s")
    drawn_limits = [limits[stage] for stage in stages]
    v_factor, v_unit = _scale(list(peaks[list(stages)]) + drawn_limits, "V")
    styles = ["-", "--", "-.", ":"]
    for number, stage in enumerate(stages):
        label = f"stage {stage + 1} (peak {peaks[stage] / v_factor:.3g} {v_unit})"
        upper.plot(time[shown] / t_factor, voltage[shown, stage] / v_factor,
                   color=INK if number < 3 else SOFT, ls=styles[number % len(styles)], lw=1.1,
                   label=label + (", lowest" if number == 3 else ""))
    upper.axhline(min(drawn_limits) / v_factor, color=LIMIT, ls="--", lw=1.3,
                  label="limit: derating x V_RRM")
    upper.set_ylabel(f"stage reverse voltage [{v_unit}]")
    _legend_above(upper, ncol=2)
    if title:
        # Above the legend's rows (about 11 points each).
        upper.set_title(title, loc="left", fontsize=9, pad=8 + 11 * -(-(len(stages) + 1) // 2))
    i_factor, i_unit = _scale(list(np.abs(current[shown])), "A")
    lower.plot(time[shown] / t_factor, current[shown] / i_factor, color=INK, lw=1.1)
    low = int(np.argmin(np.where(shown, current, np.inf)))
    lower.annotate(f"reverse-recovery peak {current[low] / i_factor:.3g} {i_unit}",
                   (time[low] / t_factor, current[low] / i_factor), xytext=(14, 14),
                   textcoords="offset points", fontsize=7.5, va="bottom",
                   arrowprops={"arrowstyle": "-", "color": "#555555", "lw": 0.6})
    lower.axhline(0.0, color="#555555", lw=0.6)
    lower.set_ylabel(f"loop current [{i_unit}]")
    lower.set_xlabel(f"time since the source reversed [{t_unit}]")
    lower.set_xlim(window[0] / t_factor, window[1] / t_factor)
    if image == "png":
        buffer = io.BytesIO()
        figure.savefig(buffer, format="png", dpi=150, bbox_inches="tight",
                       metadata={"Software": None})
        plt.close(figure)
        return buffer.getvalue()
    return svg_text(figure)
