"""The terminal report of ``stringcheck check`` (rich). Formats results; computes no physics."""

from __future__ import annotations

import math
from typing import TYPE_CHECKING, Callable

from rich.console import Console
from rich.panel import Panel
from rich.table import Table
from rich.text import Text

from stringcheck.constants import SAFE_VOLTAGE
from stringcheck.errors import Setting
import numpy as np

from stringcheck.units import format_quantity
from stringcheck.montecarlo.estimates import WANTED_RELATIVE_ERROR
from stringcheck.studies.check import CheckResult
from stringcheck.checks.forward import ParallelCheck, ThermalCheck
from stringcheck.checks.series import DynamicCheck, SeriesCheck, StaticCheck
from stringcheck.report.cautions import safety_cautions
from stringcheck.report.display_text import shown
from stringcheck.checks.transient import TransientCheck
from stringcheck.report.lots import render_lots
from stringcheck.report.wording import (
    estimator_text,
    impossibility_text,
    rare_note_text,
    reason_text,
    sentence,
    sentences,
)
from stringcheck.report.check_sections import (
    failure_point_text,
    render_drivers,
    render_parallel,
    render_thermal,
    render_transient,
    carried_recovery_lines,
    static_solution_text,
    turn_off_text,
    worst_value_text,
)

if TYPE_CHECKING:
    from stringcheck.studies.size import SizingResult

_TITLES = {
    "static": "Blocking-state sharing (leakage vs grading resistors)",
    "dynamic": "Turn-off sharing (recovery charge vs grading capacitance)",
}


def _ratio(value: float) -> str:
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "-"
    if math.isinf(value):
        return "unsolved"
    # Near the limit, three decimals would print a passing 0.99996 as "1.000".
    return f"{value:.5f}" if 0.995 <= value <= 1.005 else f"{value:.3f}"


def _deciding_rare(check):
    """The check's importance-sampling estimate when it decided the check, else None."""
    rare = check.rare
    return rare if rare is not None and rare.decides else None


def _plain_mark(check) -> str:
    """Why the plain run decided a check the importance sampler also ran on ("" if it did not)."""
    rare = check.rare
    if rare is None or rare.decides:
        return ""
    if not rare.orbit_complete:
        return " (plain; IS orbit incomplete)"
    if not rare.coverage_assured:
        return " (plain; IS coverage not assured)"
    if rare.found_failure_point:
        return " (plain; IS disagrees)"
    return " (plain; IS found no failure point)"


def _probability(check: SeriesCheck, confidence: float) -> str:
    rare = _deciding_rare(check)
    if rare is not None:
        if rare.found_failure_point:
            return f"{rare.p_fail:.2g} [{rare.ci_low:.2g}, {rare.ci_high:.2g}] (IS)"
        pooled = " (pooled)" if rare.pooled_trials else " (IS: none found)"
        if rare.p_fail == 0.0:
            return f"<= {rare.ci_high:.2g}{pooled}"
        return f"{rare.p_fail:.2g} [{rare.ci_low:.2g}, {rare.ci_high:.2g}]{pooled}"
    estimate = check.estimate
    if estimate is None:
        return "-"
    plain_decided = _plain_mark(check)
    if estimate.failures == 0:
        return f"<= {estimate.ci_high:.2g} (none seen){plain_decided}"
    return f"{estimate.p_fail:.2g} [{estimate.ci_low:.2g}, {estimate.ci_high:.2g}]{plain_decided}"


def _render_worst_string(result: CheckResult, console: Console,
                         trace: Callable[[int, int, int], str] | None) -> None:
    """The worst built string of the turn-off (else of the static check): its trial, its highest
    stage, and how to see its turn-off in the time domain."""
    name = "dynamic" if result.checks["dynamic"].ran else "static"
    check = result.checks[name]
    if not check.ran or check.worst_trial < 0:
        return
    stages = np.asarray(check.worst_string, dtype=float)
    text = f"Worst built string of the {name} check: trial {check.worst_trial:,}"
    if np.isfinite(stages).any():
        branch, index = np.unravel_index(np.nanargmax(stages), stages.shape)
        where = f"position {index + 1}" + (f" of branch {branch + 1}" if stages.shape[0] > 1 else "")
        text += f" ({format_quantity(float(stages[branch, index]), 'V')} at {where})"
    if name == "dynamic" and trace is not None:
        text += f"; its turn-off in the time domain: {trace(check.worst_trial, result.seed, result.trials)}"
    console.print(shown(text) + ".", highlight=False)


def _python_trace(trial: int, seed: int, trials: int) -> str:
    return f"stringcheck.trace_turn_off(design, trial={trial}, trials={trials}, seed={seed})"


def render_check(result: CheckResult, console: Console, *,
                 spell: Callable[[Setting], str] = str,
                 trace: Callable[[int, int, int], str] | None = _python_trace) -> None:
    """Print the whole check report to ``console``; a setting the report suggests is spelled by
    ``spell`` (the command line's option, by default the Python keyword), and how to trace the
    worst string's turn-off by ``trace(trial, seed, trials)`` (the command line's ``wave`` command; None:
    not shown)."""
    design = result.design
    layout = design.string
    confidence = design.monte_carlo.confidence
    parts = ", ".join(shown(name) for name in design.parts_used())
    heading = Text.assemble(
        (shown(design.title), "bold"), "\n",
        f"file {shown(design.source)}\n",
        f"{layout.parallel} branch(es) x {layout.series} devices in series, part(s) {parts}; "
        f"{format_quantity(design.duty.reverse_voltage, 'V')} peak reverse, "
        f"{design.duty.waveform} duty, ambient {design.duty.ambient:g} degC\n",
        f"{result.trials:,} built strings drawn (seed {result.seed}); device limit = derating "
        f"{layout.derating:g} x V_RRM\n"
        f"a check passes when P(fail) <= {result.target_p_fail:g} at {confidence:.0%} confidence "
        "(upper bound of the exact interval)")
    console.print(Panel(heading, title="stringcheck check", title_align="left"))

    if result.verdict == "pass":
        skipped = [name for name, check in result.checks.items() if not check.ran]
        caveat = ""
        if skipped:
            caveat += f" Not checked: {', '.join(skipped)} (reasons below)."
        if "transient" not in result.checks and result.checks["dynamic"].ran:
            caveat += (" The turn-off was judged by charge balance only; "
                       f"{spell(Setting('transient'))} adds the overshoot of the stray inductance.")
        console.print(Text(" VERDICT: PASS ", style="bold black on green"),
                      f"P(fail) is shown to be at most {result.target_p_fail:g} for every check "
                      "that ran, and every rating given holds." + caveat)
    else:
        console.print(Text(" VERDICT: FAIL ", style="bold white on red"), _fail_reason(result, spell))
    if result.impossible:
        console.print(Text(f"Impossible design: {impossibility_text(result.impossible)}.",
                           style="bold red"))
    render_warnings(result.warnings, console)
    console.print()

    summary = Table(title="Checks", title_justify="left", show_lines=False)
    probability_column = f"P(fail), {confidence:.0%} interval"
    for column in ("check", "worst", "worst/limit", "p99/limit", probability_column, "result"):
        summary.add_column(column, justify="right" if column not in ("check", "result") else "left")
    for name, check in result.checks.items():
        if not check.ran:
            summary.add_row(name, "-", "-", "-", "-", Text("not run", style="yellow"))
            continue
        outcome = Text("pass", style="green") if check.passed else Text("FAIL", style="bold red")
        worst = worst_value_text(check)
        summary.add_row(name, worst, _ratio(check.worst_ratio),
                        _ratio(check.p99_ratio), _probability(check, confidence), outcome)
    console.print(summary)
    for name, check in result.checks.items():
        if not check.ran:
            console.print(Text(f"{name} check not run: {shown(reason_text(check.reason))}.",
                               style="yellow"))
        elif _convergence_note(check, spell):
            console.print(_convergence_note(check, spell), highlight=False)
        if check.ran and check.rare is not None:
            rare = check.rare
            automatic = (" (run automatically: the plain run saw too few failures to decide the "
                         "check)" if rare.automatic else "")
            console.print(
                f"{name}: P(fail) from {estimator_text(rare)}{automatic}; {rare.samples:,} "
                "samples, "
                f"standard error "
                f"{rare.std_error:.2g}" + (f", beta = {rare.beta:.2f} (first-order Phi(-beta) = "
                                           f"{rare.first_order:.2g}, for reference)"
                                           if rare.found_failure_point else "")
                + f"; plain Monte Carlo: {check.estimate.failures:,} of {check.estimate.trials:,}"
                + (f"; {failure_point_text(rare)}" if failure_point_text(rare) else "")
                + ("" if rare.decides else f"; {rare_note_text(rare)}"))
    if layout.series > 1:
        _render_worst_string(result, console, trace)
    console.print()

    for name, check in result.checks.items():
        if not check.ran:
            continue
        if name in ("static", "dynamic") and layout.series == 1:
            continue
        _DETAIL[type(check)](name, check, design, console)
    if layout.series == 1 and any(result.checks[n].ran for n in ("static", "dynamic")):
        worst = max(result.checks[n].worst_ratio for n in ("static", "dynamic")
                    if result.checks[n].ran)
        console.print(
            f"Series sharing: one device per branch (string.series = 1), so each device blocks the "
            f"whole {format_quantity(design.duty.reverse_voltage, 'V')} ({worst:.3f} of its "
            "limit at worst): there is nothing to share, and the sharing sections are left out.",
            highlight=False)
        console.print()

    render_drivers(result, console)
    render_lots(design, console)
    _render_network(result, console)

    if result.assumptions:
        console.print(Text("Assumptions made", style="bold"))
        for line in sentences(result.assumptions):
            console.print(f"  - {shown(line)}")
    if result.no_scatter:
        console.print(Text("Without scatter (fixed values)", style="bold"))
        console.print("  - " + shown("; ".join(sentences(result.no_scatter))))
    console.print()
    grading = result.grading
    cautions = safety_cautions(string_voltage=design.duty.reverse_voltage,
                               stage_energy=grading.stage_energy, total_energy=grading.total_energy,
                               discharge_time=grading.discharge_time)
    console.print(Panel("\n".join(f"! {line}" for line in cautions), title="High-voltage cautions",
                        title_align="left", border_style="red"))


def render_warnings(warnings, console: Console, *, label: str = "") -> None:
    """The plausibility warnings, one line each (nothing when there are none)."""
    for warning in warnings:
        console.print(Text(f"warning{label}: {warning.key}: {sentence(warning.finding)}",
                           style="bold yellow"),
                      highlight=False)


def _convergence_note(check, spell: Callable[[Setting], str]) -> str:
    """How precisely the plain Monte Carlo run knows P(fail), when it is too short for 10 %
    (pointing to the importance sampler unless it ran); the figures are the estimate's own."""
    estimate = check.estimate
    if estimate is None or not estimate.needs_more_trials:
        return ""
    failures = f"{estimate.failures:,} failure" + ("" if estimate.failures == 1 else "s")
    return (f"{check.name}: {failures} in {estimate.trials:,} trials know "
            f"P(fail) to +-{estimate.relative_error:.0%} (standard error); about "
            f"{estimate.trials_for_wanted_error:,} trials would give "
            f"+-{WANTED_RELATIVE_ERROR:.0%}" + ("" if check.rare is not None
                                                else f", or use {spell(Setting('rare'))}"))


def _fail_reason(result: CheckResult, spell: Callable[[Setting], str]) -> str:
    reasons = []
    for name, check in result.checks.items():
        if check.ran and not check.passed:
            estimate = check.estimate
            rare = _deciding_rare(check)
            if rare is not None:
                reasons.append(f"{name}: P(fail) up to {rare.ci_high:.2g} "
                               f"({'IS' if rare.found_failure_point else 'pooled plain'}) > "
                               f"{result.target_p_fail:g}")
            elif estimate.failures:
                reasons.append(f"{name}: {estimate.failures:,} of {estimate.trials:,} strings have a "
                               "device above its limit, P(fail) up to "
                               f"{estimate.ci_high:.2g} > {result.target_p_fail:g}"
                               + (f" ({check.unsolved} unsolved)" if check.unsolved else ""))
    transient = result.checks.get("transient")
    if transient is not None and not transient.ran:
        reasons.append("the requested transient check could not run "
                       f"({reason_text(transient.reason)})")
    reasons += sentences(result.grading.rating_problems)
    short = [name for name, check in result.checks.items()
             if check.ran and check.estimate.failures == 0 and not check.passed
             and _deciding_rare(check) is None]
    if short:
        reasons.append(f"{result.trials:,} trials cannot show P(fail) <= {result.target_p_fail:g} "
                       f"even with no failure seen; run at least {result.trials_needed:,} "
                       f"({spell(Setting('trials'))})")
    return "; ".join(reasons) if reasons else "see below"


def _render_detail(name: str, check: SeriesCheck, design, console: Console) -> None:
    console.print(Text(_TITLES.get(name, name), style="bold underline"))
    if name == "dynamic":
        console.print("Q_rr of each device carried to " + turn_off_text(check.turn_off_current)
                      if check.turn_off_current is not None else
                      "Q_rr of each device at the datasheet's test conditions (not carried to the "
                      "application's turn-off; see the assumptions)")
        if check.turn_off_current is not None:
            for line in carried_recovery_lines(check.turn_off_current):
                console.print(line)
    if isinstance(check, StaticCheck):
        console.print(static_solution_text(check))
    single_branch = all(p.branch == 1 for p in check.positions)
    ranked = sorted(check.positions, key=lambda p: p.max_voltage / p.limit, reverse=True)[:5]
    table = Table(show_edge=False, pad_edge=False)
    for column in ("position", "part", "mean V", "std V", "max V", "limit V", "max/limit",
                   "over"):
        table.add_column(column, justify="left" if column in ("position", "part") else "right")
    for p in ranked:
        label = f"#{p.index}" if single_branch else f"branch {p.branch} #{p.index}"
        table.add_row(label, shown(p.part), f"{p.mean_voltage:,.0f}",
                      f"{p.std_voltage:,.1f}", f"{p.max_voltage:,.0f}", f"{p.limit:,.0f}",
                      f"{p.max_voltage / p.limit:.3f}", f"{p.failures:,}")
    console.print(Text("Most stressed positions:", style="italic"))
    console.print(table)
    if check.histogram:
        console.print(Text("Worst device of each string, as a fraction of its limit:", style="italic"))
        peak = max(count for _, _, count in check.histogram) or 1
        for low, high, count in check.histogram:
            bar = "#" * max(1 if count else 0, round(30 * count / peak))
            marker = " <- over limit" if low >= 1.0 else ""
            console.print(f"  {low:6.3f}-{high:6.3f} | {bar:<30} {count:>8,}{marker}")
    console.print()


# The detail section of each check type (a check type missing here is a KeyError, never a section
# of the wrong kind).
_DETAIL = {
    SeriesCheck: _render_detail,
    StaticCheck: _render_detail,
    DynamicCheck: _render_detail,
    ParallelCheck: lambda name, check, design, console: render_parallel(check, design, console),
    ThermalCheck: lambda name, check, design, console: render_thermal(check, design, console),
    TransientCheck: lambda name, check, design, console: render_transient(check, design, console),
}


def _render_network(result: CheckResult, console: Console) -> None:
    grading = result.grading
    console.print(Text("Grading network", style="bold underline"))
    rows = []
    if grading.resistor is not None:
        rows.append(("resistor per stage", format_quantity(grading.resistor, "ohm")))
        rows.append(("grading current at nominal share", format_quantity(grading.grading_current, "A")))
        rows.append(("resistor power at worst static voltage (continuous)",
                     format_quantity(grading.resistor_power_continuous, "W")))
        rows.append((f"resistor power at worst static voltage ({result.design.duty.waveform} duty)",
                     format_quantity(grading.resistor_power_duty, "W")
                     + (f" (rated {format_quantity(grading.resistor_rated_power, 'W')})"
                        if grading.resistor_rated_power else "")))
        rows.append(("total grading loss at nominal share", format_quantity(grading.total_grading_loss, "W")))
    rows.append((f"worst stage voltage ({_worst_from(grading.worst_voltage_check)})",
                 format_quantity(grading.worst_stage_voltage, "V")
                 + (f" (resistor rated {format_quantity(grading.resistor_rated_voltage, 'V')})"
                    if grading.resistor_rated_voltage else "")))
    rows.append(("hottest device's maximum leakage", format_quantity(grading.hottest_max_leakage, "A")))
    if grading.capacitor is not None:
        rows.append(("capacitor per stage", format_quantity(grading.capacitor, "F")
                     + (f" (rated {format_quantity(grading.capacitor_rated_voltage, 'V')})"
                        if grading.capacitor_rated_voltage else "")))
        rows.append(("damping resistor", format_quantity(grading.damping_resistor, "ohm")
                     if grading.damping_resistor else "none"))
        rows.append(("energy per capacitor at worst stage voltage", format_quantity(grading.stage_energy, "J")))
    rows.append(("energy stored in the stack at nominal share", format_quantity(grading.total_energy, "J")))
    rows.append((f"time to fall below {SAFE_VOLTAGE:g} V",
                 "never (no bleed path)" if math.isinf(grading.discharge_time)
                 else format_quantity(grading.discharge_time, "s")))
    table = Table(show_header=False, show_edge=False, pad_edge=False)
    table.add_column("item")
    table.add_column("value", justify="right")
    for row in rows:
        table.add_row(*row)
    console.print(table)
    for problem in sentences(grading.rating_problems):
        console.print(Text(f"  RATING EXCEEDED: {shown(problem)}", style="bold red"))
    for advisory in sentences(grading.advisories):
        console.print(Text(f"  advisory: {shown(advisory)}", style="yellow"))
    console.print()


def _transient_simulated(check: TransientCheck, trials: int) -> str:
    return (f"; {check.worst_failures:,}/{check.worst_simulated:,} worst charge-balance strings "
            f"failed; {check.simulated:,} of the {trials:,} strings simulated")


# The checks that simulate a selection of the trials (their P(fail) is on a sample): what the
# summary line says of it.
_SIMULATED_TEXT = {TransientCheck: _transient_simulated}


def render_check_summary(result: CheckResult, console: Console) -> None:
    """One line for ``--quiet``: the verdict and each check's P(fail) bound, the one that decided
    it (marked (IS) when the importance sampler's, (pooled) for its pooled plain interval)."""
    parts = []
    for name, check in result.checks.items():
        if check.ran:
            estimate = check.estimate
            rare = _deciding_rare(check)
            status = "pass" if check.passed else "FAIL"
            # The transient check simulates a random sample and the worst charge-balance
            # strings, not every trial of the run: say how many.
            simulated = _SIMULATED_TEXT.get(type(check))
            worst = "" if simulated is None else simulated(check, result.trials)
            sampled = "" if simulated is None else " sampled"
            if rare is not None and rare.found_failure_point:
                parts.append(f"{name} {status} (P(fail) upper bound {rare.ci_high:.2g} (IS) vs "
                             f"target {result.target_p_fail:g}; plain {estimate.failures:,}/"
                             f"{estimate.trials:,}{sampled} failed{worst})")
                continue
            failures, trials, bound, mark = estimate.failures, estimate.trials, estimate.ci_high, ""
            if rare is not None:
                pooled = rare.pooled_trials > 0
                failures = rare.failures + (estimate.failures if pooled else 0)
                trials, bound = (rare.pooled_trials if pooled else rare.samples), rare.ci_high
                mark = " (pooled)" if pooled else " (IS: none found)"
                sampled = ""
            elif check.rare is not None:
                mark = _plain_mark(check)
            if not check.passed and failures == 0:
                status = "FAIL, too few trials to show the target"
            parts.append(f"{name} {status} "
                         f"({failures:,}/{trials:,}{sampled} failed{mark}, P(fail) upper bound "
                         f"{bound:.2g} vs target {result.target_p_fail:g}{worst})")
        else:
            parts.append(f"{name} not run")
    if result.impossible:
        parts.append("impossible design")
    console.print(f"{result.verdict}: " + ", ".join(parts), highlight=False)
    render_warnings(result.warnings, console)


def render_sizing_summary(result: "SizingResult", console: Console) -> None:
    """One line for ``size --quiet``: the chosen R [ohm], C [F], R_d [ohm] and device count, then
    the check of the sized design (:func:`render_check_summary`)."""
    r = result.resistor.chosen.value
    c = result.design.grading.capacitor if result.capacitor else None
    console.print(f"R = {format_quantity(r, 'ohm', digits=4)}"
                  + (f", C = {format_quantity(c, 'F', digits=4)}" if c else "")
                  + (f", R_d = {format_quantity(result.damping_resistor, 'ohm')}"
                     if result.damping_resistor else "")
                  + f", n = {result.series_count}; ", end="")
    render_check_summary(result.check, console)


def render_no_proposal(findings, console: Console, *, quiet: bool = False,
                       spell: Callable[[Setting], str] = str) -> None:
    """``size`` when no network meets every limit and check: which cannot be met and what came
    closest (``studies.size.NoProposal``'s findings); one line with ``quiet``."""
    said = sentences(findings, spell=spell)
    if quiet:
        console.print("no proposal: " + "; ".join(said), highlight=False)
        return
    console.print(Panel(Text.assemble(
        ("NO PROPOSAL", "bold red"), "\n",
        "no grading network meets every limit of [sizing] and passes its own checks:"),
        title="stringcheck size", title_align="left"))
    for line in said:
        console.print(Text(f"  - {line}"), highlight=False)


def _confirmation_line(item: str, choice, unit: str) -> str | None:
    """How the independent sample judged a proposed value (and the stepped one, where it failed)."""
    if not choice.confirmations:
        return None
    runs = []
    for run in choice.confirmations:
        how = "rare-event estimate" if run.rare else f"{run.failures:,} failures in {run.trials:,}"
        runs.append(f"{format_quantity(run.value, unit)}: P(fail) <= {run.p_fail_upper:.3g} "
                    f"({how}), {'passes' if run.passed else 'fails'}")
    seed = choice.confirmations[0].seed
    return f"  {item} on an independent sample (seed {seed}): " + "; then ".join(runs)


def render_sizing(result: "SizingResult", console: Console, *,
                  spell: Callable[[Setting], str] = str) -> None:
    """Print the proposed grading network, the limit that bound each value, its confirmation on an
    independent sample, ratings and cautions (a setting the advisories name spelled by ``spell``,
    ``report.wording.sentence``)."""
    design = result.design
    ratings = result.ratings
    console.print(Panel(Text.assemble(
        (shown(design.title), "bold"), "\n",
        f"proposed grading network for {design.string.parallel} branch(es) x "
        f"{result.series_count} devices at {format_quantity(design.duty.reverse_voltage, 'V')}\n",
        f"target: P(fail) <= {result.target_p_fail:g} at {design.monte_carlo.confidence:.0%} "
        f"confidence, {result.check.trials:,} strings drawn (seed {result.check.seed}), the same "
        "strings for every candidate value"), title="stringcheck size", title_align="left"))
    table = Table(title="Proposal", title_justify="left")
    for column in ("item", "value", "limited by", "next value, rejected"):
        table.add_column(column)
    r = result.resistor
    table.add_row(f"grading resistor ({r.series})", format_quantity(r.chosen.value, "ohm"),
                  sentence(r.bound, spell=spell) if r.bound else "",
                  _rejected(r.rejected_neighbour, "ohm"))
    if result.capacitor is not None:
        c = result.capacitor
        table.add_row(f"grading capacitor ({c.series})",
                      format_quantity(result.design.grading.capacitor, "F"),
                      sentence(c.bound, spell=spell) if c.bound else "",
                      _rejected(c.rejected_neighbour, "F"))
    table.add_row("damping resistor", format_quantity(result.damping_resistor, "ohm")
                  if result.damping_resistor else "-", sentence(result.damping_rule, spell=spell),
                  "")
    if result.series_searched:
        table.add_row("devices in series", str(result.series_count),
                      "smallest count that passes every check with this network", "")
    console.print(table)
    for line in (_confirmation_line("R", r, "ohm"),
                 None if result.capacitor is None else
                 _confirmation_line("C", result.capacitor, "F")):
        if line:
            console.print(line, highlight=False)
    if result.damping_candidates:
        console.print("  damping resistors tried in the time domain: " + "; ".join(
            f"{format_quantity(c.value, 'ohm')} peak/limit {c.worst_ratio:.3f} "
            f"{format_quantity(c.energy, 'J')}{'' if c.within_limit else ' (over)'}"
            for c in result.damping_candidates), highlight=False)
    if r.textbook_bound is not None:
        console.print(f"  textbook worst-case corner: R <= {format_quantity(r.textbook_bound, 'ohm')}"
                      + (f", C >= {format_quantity(result.capacitor.textbook_bound, 'F')}"
                         if result.capacitor is not None and result.capacitor.textbook_bound
                         else "")
                      + " (every device at its limit at once; the Monte Carlo figure above is "
                        "what the spreads give)")
    console.print()
    rows = [
        (f"worst stage voltage ({_worst_from(ratings.worst_voltage_check)})",
         format_quantity(ratings.worst_stage_voltage, "V")),
        (f"resistor working voltage required (/ derating {ratings.derating:g})",
         format_quantity(ratings.resistor_voltage_required, "V")),
        ("resistor power at worst static voltage, continuous",
         format_quantity(ratings.resistor_power_continuous, "W")),
        (f"resistor power, {design.duty.waveform} duty (RMS)", format_quantity(ratings.resistor_power_duty, "W")),
        (f"resistor power rating required (/ derating {ratings.derating:g})",
         format_quantity(ratings.resistor_power_required, "W")),
        ("total grading-resistor loss", format_quantity(ratings.total_grading_loss, "W")),
    ]
    if result.capacitor is not None:
        rows += [
            (f"capacitor voltage rating required (/ derating {ratings.derating:g})",
             format_quantity(ratings.capacitor_voltage_required, "V")),
            ("damping loss C V^2 f per stage / stack",
             "-" if ratings.damping_loss_per_stage is None else
             f"{format_quantity(ratings.damping_loss_per_stage, 'W')} / "
             f"{format_quantity(ratings.damping_loss_total, 'W')}"),
            ("energy per capacitor at worst stage voltage", format_quantity(ratings.stage_energy, "J")),
        ]
    damping = result.damping
    if damping is not None and damping.value is not None:
        rows += [
            ("damping resistor pulse voltage I_RM x R_d", _figure(damping.pulse_voltage, "V")),
            ("damping resistor energy per turn-off" + (" (simulated)" if damping.time_domain
                                                       else " (C V^2 / 2)"),
             _figure(damping.energy_per_turn_off, "J")),
            ("damping resistor power at the duty frequency", _figure(damping.power, "W")),
        ]
    rows += [
        ("energy stored in the stack at nominal share", format_quantity(ratings.total_energy, "J")),
        (f"time to fall below {SAFE_VOLTAGE:g} V",
         "never (no bleed path)" if math.isinf(ratings.discharge_time)
         else format_quantity(ratings.discharge_time, "s")),
    ]
    ratings_table = Table(title="Ratings the chosen parts must have", title_justify="left",
                          show_header=False)
    ratings_table.add_column("item")
    ratings_table.add_column("value", justify="right")
    for row in rows:
        ratings_table.add_row(*row)
    console.print(ratings_table)
    for advisory in sentences(result.advisories, spell=spell):
        console.print(Text(f"  advisory: {advisory}", style="yellow"))
    console.print()
    console.print(Text("Check of the sized design", style="bold underline"))
    render_check(result.check, console, spell=spell)


def _figure(value: float, unit: str) -> str:
    return "-" if value is None or not math.isfinite(value) else format_quantity(value, unit)


def _worst_from(check: str) -> str:
    """Which check found the worst stage voltage (the worst of all that ran), for a row label."""
    return f"of every check that ran: {check}" if check else "no voltage check ran"


def _rejected(candidate, unit: str) -> str:
    if candidate is None:
        return "-"
    return (f"{format_quantity(candidate.value, unit)}: P(fail) up to {candidate.p_fail_upper:.3g} "
            f"({candidate.failures} failures)" + ("" if candidate.passed else ", over the target"))
