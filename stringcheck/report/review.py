"""Report and JSON of ``stringcheck review`` (baseline against candidate)."""

from __future__ import annotations

import csv
import io
import math
from typing import Any

from rich.console import Console
from rich.padding import Padding
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from stringcheck.studies.review import ReviewResult
from stringcheck.report.cautions import safety_cautions
from stringcheck.checks.outcome import json_number
from stringcheck.report.check_sections import render_drivers
from stringcheck.report.display_text import shown
from stringcheck.report.export import result_to_dict
from stringcheck.report.lots import render_lots
from stringcheck.report.terminal import render_warnings
from stringcheck.checks.findings import codes
from stringcheck.report.wording import estimator_text, rare_note_text, sentence, sentences


def review_to_dict(result: ReviewResult) -> dict[str, Any]:
    """``baseline``, ``candidate`` (each a whole check result), ``changes`` and ``verdict``."""
    return {
        "schema": 1,
        "verdict": result.verdict,
        "tolerance": result.tolerance,
        "stress_tolerance": result.stress_tolerance,
        "mix": _mix(result),
        "baseline": result_to_dict(result.baseline),
        "candidate": result_to_dict(result.candidate),
        "changes": {
            "checks": [
                {"check": c.name, "baseline_ran": c.baseline_ran, "candidate_ran": c.candidate_ran,
                 "baseline_worst_ratio": json_number(c.baseline_worst_ratio),
                 "candidate_worst_ratio": json_number(c.candidate_worst_ratio),
                 "baseline_p_fail_upper": json_number(c.baseline_p_fail_upper),
                 "candidate_p_fail_upper": json_number(c.candidate_p_fail_upper),
                 "baseline_p_fail_by": c.baseline_by, "candidate_p_fail_by": c.candidate_by,
                 "rise": json_number(c.rise), "acceptable": c.acceptable,
                 "baseline_p99_ratio": json_number(c.baseline_p99_ratio),
                 "candidate_p99_ratio": json_number(c.candidate_p99_ratio),
                 "worst_ratio_rise": json_number(c.worst_ratio_rise),
                 "p99_ratio_rise": json_number(c.p99_ratio_rise),
                 "allowed_rise": c.allowed_rise,
                 "decisive": sentences(c.decisive), "decisive_codes": codes(c.decisive),
                 "noted": sentences(c.noted), "noted_codes": codes(c.noted)}
                for c in result.changes],
            "worse_positions": [
                {"check": p.check, "branch": p.branch, "index": p.index,
                 "baseline_part": p.baseline_part, "candidate_part": p.candidate_part,
                 "baseline_max_voltage": json_number(p.baseline_max),
                 "candidate_max_voltage": json_number(p.candidate_max), "limit": p.limit}
                for p in result.worse_positions],
            "positions": [
                {"check": d.check, "branch": d.branch, "index": d.index,
                 "baseline_part": d.baseline_part, "candidate_part": d.candidate_part,
                 "unit": d.unit, "baseline_limit": json_number(d.baseline_limit),
                 "candidate_limit": json_number(d.candidate_limit),
                 "baseline_mean": json_number(d.baseline_mean),
                 "candidate_mean": json_number(d.candidate_mean),
                 "baseline_p99": json_number(d.baseline_p99),
                 "candidate_p99": json_number(d.candidate_p99),
                 "baseline_worst": json_number(d.baseline_worst),
                 "candidate_worst": json_number(d.candidate_worst),
                 "mean_ratio_change": json_number(d.mean_ratio_change),
                 "worst_ratio_change": json_number(d.worst_ratio_change)}
                for d in result.positions],
            "reasons": sentences(result.reasons),
            "reason_codes": codes(result.reasons),
            "flags": sentences(result.flags),
            "flag_codes": codes(result.flags),
            "decided_by": sentences(result.decided_by),
            "decided_by_codes": codes(result.decided_by),
        },
    }


def review_positions_csv(result: ReviewResult) -> str:
    """The per-position change, one row per check and position (a branch of the parallel check
    has index 0): both parts, the unit, both limits, means and worsts, and the change of the
    mean and of the worst as fractions of each side's limit."""
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(["check", "branch", "index", "baseline_part", "candidate_part", "unit",
                     "baseline_limit", "candidate_limit", "baseline_mean", "candidate_mean",
                     "baseline_p99", "candidate_p99", "baseline_worst", "candidate_worst",
                     "mean_ratio_change", "worst_ratio_change"])
    for d in result.positions:
        # A figure the check does not keep (a p99 but of the static and dynamic checks) is empty.
        writer.writerow([d.check, d.branch, d.index, d.baseline_part, d.candidate_part, d.unit]
                        + [f"{value:.6g}" if math.isfinite(value) else "" for value in (
                            d.baseline_limit, d.candidate_limit, d.baseline_mean,
                            d.candidate_mean, d.baseline_p99, d.candidate_p99,
                            d.baseline_worst, d.candidate_worst, d.mean_ratio_change,
                            d.worst_ratio_change)])
    return out.getvalue()


def _ratio(value: float | None) -> str:
    return "-" if value is None or not math.isfinite(value) else f"{value:.3f}"


def _bound(value: float | None, by: str = "plain") -> str:
    if value is None:
        return "-"
    return f"{value:.2g}" + (" (IS)" if by == "importance sampling" else "")


def _mix(result: ReviewResult) -> dict[str, Any] | None:
    """The candidate's mixed stock (``--mix``), or None."""
    mix = result.candidate.design.string.mix
    return None if mix is None else {"fraction": mix.fraction, "part": mix.part}


# Rows of the per-position table shown per check (the JSON and the CSV hold every position).
POSITION_ROWS = 6


def render_review(result: ReviewResult, console: Console) -> None:
    base, cand = result.baseline, result.candidate
    allowed = result.tolerance * base.target_p_fail
    heading = Text.assemble(
        ("baseline  ", "bold"), f"{shown(base.design.title)} ({shown(base.design.source)})\n",
        ("candidate ", "bold"), f"{shown(cand.design.title)} ({shown(cand.design.source)})\n",
        f"{base.trials:,} built strings each, seed {base.seed}, on common random numbers (the same "
        "draws wherever the two share a part); accepted when the candidate passes, no check's "
        f"p99 or worst stress rises by more than {result.stress_tolerance:g} of the limit, and "
        f"no check's P(fail) upper bound by more than {result.tolerance:g} of the target "
        f"({allowed:.2g})")
    console.print(Panel(heading, title="stringcheck review", title_align="left"))
    if result.verdict == "accept":
        console.print(Text(" ACCEPT ", style="bold black on green"),
                      "the candidate passes and is no worse than the baseline within the tolerances.")
    else:
        console.print(Text(" REJECT ", style="bold white on red"), _why(result))
    console.print()
    table = Table(title="Side by side, baseline -> candidate (stress / limit; P up = upper bound "
                        "of P(fail), (IS) where the importance sampler decided)",
                  title_justify="left")
    for column in ("check", "worst", "p99", "P up", "result"):
        table.add_column(column, justify="left" if column in ("check", "result") else "right")
    for c in result.changes:
        outcome = Text("ok", style="green") if c.acceptable else Text("WORSE", style="bold red")
        if not c.baseline_ran and not c.candidate_ran:
            outcome = Text("not run", style="yellow")
        table.add_row(c.name, _pair(c.baseline_worst_ratio, c.candidate_worst_ratio),
                      _pair(c.baseline_p99_ratio, c.candidate_p99_ratio),
                      f"{_bound(c.baseline_p_fail_upper, c.baseline_by)} -> "
                      f"{_bound(c.candidate_p_fail_upper, c.candidate_by)}", outcome)
    console.print(table)
    decisive = list(result.decided_by) + [f for c in result.changes for f in c.decisive]
    noted = [f for c in result.changes for f in c.noted]
    for label, findings in (("What decides:", decisive), ("Reported, not decisive:", noted)):
        if findings:
            console.print(Text(label, style="bold"))
            _bullets(console, [("-", sentence(finding)) for finding in findings])
    if result.flags:
        console.print(Text("The substitute parts, whatever the Monte Carlo says:", style="bold"))
        _bullets(console, [("!", sentence(finding)) for finding in result.flags])
    _render_positions(result, console)
    _render_warnings(result, console)
    if result.reasons:
        console.print(Text("Why, in physical terms:", style="bold"))
        # A position's change, then, indented under it, the input that explains it.
        _bullets(console, [("-", sentence(finding)) if finding.code.startswith(
            "review.position_") or finding.code == "review.same_parts" else
            ("", sentence(finding)) for finding in result.reasons])
    for label, checked in (("baseline", base), ("candidate", cand)):
        for name, check in checked.checks.items():
            rare = check.rare if check.ran else None
            if rare is not None:
                console.print(f"{label} {name}: P(fail) from {estimator_text(rare)}"
                              + (" (run automatically)" if rare.automatic else "")
                              + f"; {rare.samples:,} samples"
                              + ("" if rare.decides else f"; {rare_note_text(rare)}"),
                              highlight=False)
    if cand.drivers:
        render_drivers(cand, console)
    console.print()
    render_lots(base.design, console, also=cand.design)
    grading = cand.grading
    cautions = safety_cautions(string_voltage=cand.design.duty.reverse_voltage,
                               stage_energy=grading.stage_energy, total_energy=grading.total_energy,
                               discharge_time=grading.discharge_time)
    console.print(Panel("\n".join(f"! {line}" for line in cautions), title="High-voltage cautions",
                        title_align="left", border_style="red"))


def _bullets(console: Console, lines: list[tuple[str, str]]) -> None:
    """Marked lines, each wrapped under its own text (a hanging indent)."""
    grid = Table.grid(padding=(0, 1), pad_edge=False)
    grid.add_column(width=3, justify="right")
    grid.add_column(overflow="fold")
    for mark, text in lines:
        # A line without a mark explains the one above it: indented further.
        grid.add_row(mark, Padding(Text(shown(text)), (0, 0, 0, 0 if mark else 2)))
    console.print(grid)


def _pair(before: float | None, after: float | None) -> str:
    return f"{_ratio(before)} -> {_ratio(after)}"


def _render_positions(result: ReviewResult, console: Console) -> None:
    """Per check, the positions whose worst stress changed most (the JSON and the CSV hold
    them all): mean and worst as fractions of each side's limit, baseline -> candidate."""
    changed = [d for d in result.positions if not math.isfinite(d.worst_ratio_change)
               or abs(d.worst_ratio_change) > 1e-3 or abs(d.mean_ratio_change) > 1e-3]
    if not changed:
        if result.positions:
            console.print(Text("No position's stress changed by more than 0.1 % of the limit.",
                               style="italic"))
        return
    console.print(Text("Per-position change, baseline -> candidate (stress / limit; largest "
                       "change of the worst first; position BRANCH#INDEX):", style="italic"))
    table = Table(show_edge=False, pad_edge=False)
    for column in ("check", "position", "part", "mean", "p99", "worst"):
        table.add_column(column, justify="left" if column in ("check", "position", "part")
                         else "right")
    branches = max(d.branch for d in changed)
    more = []
    for name in dict.fromkeys(d.check for d in changed):
        rows = sorted((d for d in changed if d.check == name),
                      key=lambda d: -abs(d.worst_ratio_change)
                      if math.isfinite(d.worst_ratio_change) else -math.inf)
        if len(rows) > POSITION_ROWS:
            more.append(f"{len(rows) - POSITION_ROWS} {name}")
        for d in rows[:POSITION_ROWS]:
            where = (f"branch {d.branch}" if not d.index else
                     f"#{d.index}" if branches == 1 else f"{d.branch}#{d.index}")
            part = shown(d.baseline_part) if d.baseline_part == d.candidate_part else \
                f"{shown(d.baseline_part)} -> {shown(d.candidate_part)}"
            table.add_row(name, where, part,
                          _pair(d.baseline_mean / d.baseline_limit,
                                d.candidate_mean / d.candidate_limit),
                          _pair(d.baseline_p99 / d.baseline_limit,
                                d.candidate_p99 / d.candidate_limit),
                          _pair(d.baseline_worst / d.baseline_limit,
                                d.candidate_worst / d.candidate_limit))
    console.print(table)
    if more:
        console.print(Text(f"(and {', '.join(more)} positions more in the JSON and the CSV)",
                           style="italic"))


def _render_warnings(result: ReviewResult, console: Console) -> None:
    """Each design's plausibility warnings, those of the candidate only where they differ."""
    shown = set()
    for label, checked in (("baseline", result.baseline), ("candidate", result.candidate)):
        fresh = [w for w in checked.warnings if (w.key, sentence(w.finding)) not in shown]
        shown.update((w.key, sentence(w.finding)) for w in fresh)
        render_warnings(fresh, console, label=f" ({label})")


def _why(result: ReviewResult) -> str:
    parts = []
    if result.candidate.verdict != "pass":
        parts.append("the candidate does not pass on its own")
    worse = [c.name for c in result.changes if not c.acceptable and (c.baseline_ran or
                                                                       c.candidate_ran)]
    if worse:
        parts.append("worse than the baseline in: " + ", ".join(worse))
    return "; ".join(parts) or "see below"


def render_review_summary(result: ReviewResult, console: Console) -> None:
    worse = [c.name for c in result.changes if not c.acceptable and (c.baseline_ran or
                                                                       c.candidate_ran)]
    console.print(f"{result.verdict}: candidate {result.candidate.verdict}"
                  + (f"; worse in {', '.join(worse)}" if worse else ""), highlight=False)
    _render_warnings(result, console)
