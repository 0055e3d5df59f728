"""Report and JSON of ``stringcheck review`` (baseline against candidate)."""

from __future__ import annotations

import math
from typing import Any

from rich.console import Console
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
from stringcheck.report.wording import estimator_text, rare_note_text, sentence


def review_to_dict(result: ReviewResult) -> dict[str, Any]:
    """``baseline``, ``candidate`` (each a whole check result), ``changes`` and ``verdict``."""
    return {
        "schema": 1,
        "verdict": result.verdict,
        "tolerance": result.tolerance,
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
                 "rise": json_number(c.rise), "acceptable": c.acceptable}
                for c in result.changes],
            "worse_positions": [
                {"check": p.check, "branch": p.branch, "index": p.index,
                 "baseline_part": p.baseline_part, "candidate_part": p.candidate_part,
                 "baseline_max_voltage": json_number(p.baseline_max),
                 "candidate_max_voltage": json_number(p.candidate_max), "limit": p.limit}
                for p in result.worse_positions],
            "reasons": list(result.reasons),
        },
    }


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


def render_review(result: ReviewResult, console: Console) -> None:
    base, cand = result.baseline, result.candidate
    heading = Text.assemble(
        ("baseline  ", "bold"), f"{shown(base.design.title)} ({shown(base.design.source)})\n",
        ("candidate ", "bold"), f"{shown(cand.design.title)} ({shown(cand.design.source)})\n",
        f"{base.trials:,} built strings each, seed {base.seed}, on common random numbers (the same "
        "draws wherever the two share a part); accepted when the candidate passes and no check's "
        f"P(fail) upper bound rises by more than {result.tolerance:g}")
    console.print(Panel(heading, title="stringcheck review", title_align="left"))
    if result.verdict == "accept":
        console.print(Text(" ACCEPT ", style="bold black on green"),
                      "the candidate passes and is no worse than the baseline within the tolerance.")
    else:
        console.print(Text(" REJECT ", style="bold white on red"), _why(result))
    console.print()
    table = Table(title="Side by side (worst = stress / limit; P up = upper bound of P(fail), "
                        "(IS) where the importance sampler decided)", title_justify="left")
    for column in ("check", "base worst", "cand worst", "base P up", "cand P up", "change",
                   "result"):
        table.add_column(column, justify="left" if column in ("check", "result") else "right")
    for c in result.changes:
        change = "-" if c.rise is None else f"{c.rise:+.2g}"
        outcome = Text("ok", style="green") if c.acceptable else Text("WORSE", style="bold red")
        if not c.baseline_ran and not c.candidate_ran:
            outcome = Text("not run", style="yellow")
        table.add_row(c.name, _ratio(c.baseline_worst_ratio), _ratio(c.candidate_worst_ratio),
                      _bound(c.baseline_p_fail_upper, c.baseline_by),
                      _bound(c.candidate_p_fail_upper, c.candidate_by), change,
                      outcome)
    console.print(table)
    if result.worse_positions:
        console.print(Text("Positions that got worse (largest rise first):", style="italic"))
        worse = Table(show_edge=False, pad_edge=False)
        for column in ("check", "position", "part base -> cand", "max V base", "max V cand",
                       "limit V"):
            worse.add_column(column, justify="left" if column in ("check", "position",
                                                                  "part base -> cand") else "right")
        for p in result.worse_positions[:8]:
            worse.add_row(p.check, f"branch {p.branch} #{p.index}",
                          f"{shown(p.baseline_part)} -> {shown(p.candidate_part)}",
                          f"{p.baseline_max:,.0f}",
                          f"{p.candidate_max:,.0f}", f"{p.limit:,.0f}")
        console.print(worse)
    _render_warnings(result, console)
    if result.reasons:
        console.print(Text("Why, in physical terms:", style="bold"))
        for line in result.reasons:
            console.print(f"  - {shown(line)}")
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
