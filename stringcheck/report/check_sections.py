"""Report sections and JSON of the checks beyond the series ones: parallel sharing, thermal, transient."""

from __future__ import annotations

import math
from typing import Any

from rich.console import Console
from rich.table import Table
from rich.text import Text

from stringcheck.units import format_quantity
from stringcheck.checks.forward import ParallelCheck, ThermalCheck
from stringcheck.checks.transient import TransientCheck
from stringcheck.report.display_text import shown


def json_number(value: float | None) -> float | None:
    """JSON has no inf or NaN: write them as null (the report text says why)."""
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


# How each basis of the turn-off current (checks.recovery_conditions.TurnOffCurrent) reads.
_TURN_OFF_BASIS = {
    "dc": "the dc forward current",
    "square_peak": "a square wave commutates from its peak, 2 I_F(AV)",
    "half_sine_average": "the half-sine's average I_F(AV); its decay to the zero crossing is not "
                         "modelled yet",
    "test_current": "the parts' test I_F: no duty.forward_current",
}


def turn_off_to_dict(turn_off) -> dict[str, Any] | None:
    """JSON of the current a branch commutates from (null where no check used one)."""
    if turn_off is None:
        return None
    return {"value": json_number(turn_off.current), "unit": "A", "per": "branch",
            "basis": turn_off.basis}


def turn_off_text(turn_off) -> str:
    """The current a branch commutates from, in words."""
    return (f"I_F = {format_quantity(turn_off.current, 'A')} per branch at turn-off "
            f"({_TURN_OFF_BASIS[turn_off.basis]})")


def _estimate(estimate) -> dict[str, Any]:
    return {"failures": estimate.failures, "p_fail": estimate.p_fail,
            "p_fail_ci": [estimate.ci_low, estimate.ci_high]}


def rare_to_dict(rare) -> dict[str, Any] | None:
    """JSON of a check's importance-sampling estimate (``--rare``), or None."""
    if rare is None:
        return None
    return {"estimator": rare.estimator, "p_fail": rare.p_fail, "std_error": rare.std_error,
            "p_fail_ci": [rare.ci_low, rare.ci_high], "beta": json_number(rare.beta),
            "first_order": rare.first_order, "samples": rare.samples,
            "found_failure_point": rare.found_failure_point,
            "failure_points": rare.failure_points, "pooled_trials": rare.pooled_trials,
            "decides": rare.decides, "note": rare.note, "automatic": rare.automatic,
            "orbit_complete": rare.orbit_complete, "regions_found": rare.regions_found,
            "coverage_assured": rare.coverage_assured,
            "importance": [{"input": item.input, "share": item.share, "branch": item.branch,
                            "index": item.index, "sign": item.sign}
                           for item in rare.importance]}


def failure_point_text(rare, *, top: int = 3) -> str:
    """The inputs that make up most of the failure point, in words (empty without one)."""
    if rare is None or not rare.found_failure_point:
        return ""
    pieces = []
    for item in rare.importance[:top]:
        if item.share < 0.01:
            break
        if item.input == "mix":  # a low substitution score is a substituted device
            state = "kept" if item.sign > 0 else "substituted"
            name = "substitution (mix)"
        else:
            state = "high" if item.sign > 0 else "low"
            name = item.input
        where = "" if item.branch is None else f", mostly branch {item.branch} #{item.index} " \
            f"{state}"
        pieces.append(f"{item.share:.0%} {name}{where}")
    return "failure point: " + "; ".join(pieces) if pieces else ""


def parallel_to_dict(check: ParallelCheck) -> dict[str, Any]:
    """JSON of the parallel check (currents [A], shares and ratios [-])."""
    ballast = check.ballast
    return {
        "passed": check.passed,
        "worst_share": json_number(check.worst_share),
        "p99_share": json_number(check.p99_share),
        "worst_ratio": json_number(check.worst_ratio),
        "p50_ratio": json_number(check.p50_ratio),
        "p99_ratio": json_number(check.p99_ratio),
        **_estimate(check.estimate),
        "rare": rare_to_dict(check.rare),
        "unsolved": check.unsolved,
        "worst_trial": check.worst_trial,
        "required_derating": json_number(check.required_derating),
        "electro_thermal": check.electro_thermal,
        "branches": [
            {"branch": b.branch, "limit_current": json_number(b.limit_current),
             "mean_current": json_number(b.mean_current), "max_current": json_number(b.max_current),
             "mean_share": json_number(b.mean_share), "max_share": json_number(b.max_share),
             "failures": b.failures}
            for b in check.branches
        ],
        "ballast": None if ballast is None else {
            "target_share": ballast.target_share, "resistance": json_number(ballast.resistance),
            "exact_resistance": json_number(ballast.exact_resistance), "loss": json_number(ballast.loss),
            "quantile": ballast.quantile, "reachable": ballast.reachable},
    }


def thermal_to_dict(check: ThermalCheck) -> dict[str, Any]:
    """JSON of the thermal check (temperatures [degC], powers [W])."""
    runaway = check.runaway
    return {
        "passed": check.passed,
        "worst_tj": json_number(check.worst_tj),
        "p99_tj": json_number(check.p99_tj),
        "worst_ratio": json_number(check.worst_ratio),
        "p50_ratio": json_number(check.p50_ratio),
        "p99_ratio": json_number(check.p99_ratio),
        **_estimate(check.estimate),
        "rare": rare_to_dict(check.rare),
        "p_runaway": runaway.p_fail,
        "p_runaway_ci": [runaway.ci_low, runaway.ci_high],
        "runaway_trials": runaway.failures,
        "over_tj_max_trials": check.over_limit,
        "worst_trial": check.worst_trial,
        "runaway_ambient": {key: json_number(value) for key, value in check.runaway_ambient.items()},
        "runaway_ambient_trials": check.runaway_ambient_trials,
        "runaway_search_limit": check.runaway_search_limit,
        "mean_total_power": json_number(check.total_power_mean),
        "turn_off_current": turn_off_to_dict(check.turn_off_current),
        "positions": [
            {"branch": p.branch, "index": p.index, "part": p.part, "limit": p.limit,
             "mean_tj": json_number(p.mean_temperature), "max_tj": json_number(p.max_temperature),
             "failures": p.failures}
            for p in check.positions
        ],
    }


def transient_to_dict(check: TransientCheck) -> dict[str, Any]:
    """JSON of the transient check (voltages [V], currents [A], energies [J])."""
    return {
        "passed": check.passed,
        "worst_voltage": json_number(check.worst_voltage),
        "overshoot": json_number(check.overshoot),
        "worst_ratio": json_number(check.worst_ratio),
        "p50_ratio": json_number(check.p50_ratio),
        "p99_ratio": json_number(check.p99_ratio),
        **_estimate(check.estimate),
        "unsolved": check.unsolved,
        "worst_trial": check.worst_trial,
        "sampled": check.sampled,
        "worst_simulated": check.worst_simulated,
        "simulated": check.simulated,
        "worst_failures": check.worst_failures,
        "peak_recovery_current": json_number(check.peak_recovery_current),
        "damping_energy": json_number(check.damping_energy),
        "inductance": json_number(check.inductance),
        "forward_current": json_number(check.forward_current),
        "turn_off_current": turn_off_to_dict(check.turn_off_current),
        "notes": list(check.notes),
        "rare": rare_to_dict(check.rare),
        "positions": [
            {"branch": p.branch, "index": p.index, "part": p.part, "limit": p.limit,
             "mean_voltage": json_number(p.mean_voltage), "std_voltage": json_number(p.std_voltage),
             "max_voltage": json_number(p.max_voltage), "max_overshoot": json_number(p.max_overshoot),
             "failures": p.failures}
            for p in check.positions
        ],
    }


def render_transient(check: TransientCheck, design, console: Console) -> None:
    console.print(Text("Turn-off in the time domain (stray inductance, recovery, damping)",
                       style="bold underline"))
    current = turn_off_text(check.turn_off_current) if check.turn_off_current is not None else \
        f"I_F = {format_quantity(check.forward_current, 'A')} per branch"
    console.print(f"L = {format_quantity(check.inductance, 'H')}, {current}; simulated: the "
                  f"{check.worst_simulated} worst charge-balance strings and a random sample of "
                  f"{check.sampled:,} (P(fail) is estimated on the sample)")
    ranked = sorted(check.positions, key=lambda p: p.max_voltage / p.limit, reverse=True)[:5]
    single_branch = all(p.branch == 1 for p in check.positions)
    table = Table(show_edge=False, pad_edge=False)
    for column in ("position", "part", "mean peak V", "max peak V", "max overshoot V", "limit V",
                   "over"):
        table.add_column(column, justify="left" if column in ("position", "part") else "right")
    for p in ranked:
        label = f"#{p.index}" if single_branch else f"branch {p.branch} #{p.index}"
        table.add_row(label, shown(p.part), f"{p.mean_voltage:,.0f}", f"{p.max_voltage:,.0f}",
                      f"{p.max_overshoot:,.0f}", f"{p.limit:,.0f}", f"{p.failures:,}")
    console.print(table)
    console.print(f"  worst peak {format_quantity(check.worst_voltage, 'V')} (overshoot up to "
                  f"{format_quantity(check.overshoot, 'V')} above the settled share); peak recovery "
                  f"current {format_quantity(check.peak_recovery_current, 'A')}; energy per "
                  f"damping resistor per turn-off up to {format_quantity(check.damping_energy, 'J')}")
    if check.worst_failures:
        console.print(Text(f"  {check.worst_failures} of the {check.worst_simulated} worst "
                           "charge-balance strings exceed the limit in the time domain",
                           style="bold red"))
    for note in check.notes:
        console.print(Text(f"  note: {shown(note)}", style="italic"))
    console.print()


def worst_value_text(check) -> str:
    """The 'worst' cell of the summary table for a check that is not a series check."""
    if isinstance(check, TransientCheck):
        return format_quantity(check.worst_voltage, "V")
    if isinstance(check, ParallelCheck):
        return f"share {check.worst_share:.3f}"
    return "runaway" if not math.isfinite(check.worst_tj) else f"T_j {check.worst_tj:.0f} degC"


def render_parallel(check: ParallelCheck, design, console: Console) -> None:
    duty = design.duty
    console.print(Text("Current sharing of the parallel branches", style="bold underline"))
    source = "at electro-thermal equilibrium" if check.electro_thermal else \
        "isothermal, at ambient + each position's temperature rise"
    console.print(f"{format_quantity(duty.forward_current, 'A')} average ({duty.waveform}) shared "
                  f"by {design.string.parallel} branches, {source}; share = max branch I_AV / mean "
                  f"branch I_AV, limit = each device's I_F(AV)")
    table = Table(show_edge=False, pad_edge=False)
    for column in ("branch", "mean I_AV", "max I_AV", "I_F(AV)", "mean share", "max share",
                   "over"):
        table.add_column(column, justify="left" if column == "branch" else "right")
    for b in check.branches:
        table.add_row(str(b.branch), format_quantity(b.mean_current, "A"),
                      format_quantity(b.max_current, "A"), format_quantity(b.limit_current, "A"),
                      f"{b.mean_share:.3f}", f"{b.max_share:.3f}", f"{b.failures:,}")
    console.print(table)
    console.print(f"  worst share {check.worst_share:.3f}, 99th percentile {check.p99_share:.3f}: "
                  f"rate the group at no more than {check.required_derating:.0%} of "
                  f"{design.string.parallel} x I_F(AV)")
    ballast = check.ballast
    if ballast is not None and check.p99_share > ballast.target_share:
        if not ballast.reachable:
            console.print(Text(f"  no equal series ballast reaches a share of "
                               f"{ballast.target_share:g}", style="yellow"))
        else:
            console.print(Text(
                f"  to share within {ballast.target_share:g} in {ballast.quantile:.2%} of built "
                f"groups: add {format_quantity(ballast.resistance, 'ohm')} (E12, from "
                f"{format_quantity(ballast.exact_resistance, 'ohm')}) in series with each branch, "
                f"about {format_quantity(ballast.loss, 'W')} of extra loss in all",
                style="yellow"))
    console.print()


def render_thermal(check: ThermalCheck, design, console: Console) -> None:
    console.print(Text("Junction temperatures and thermal runaway", style="bold underline"))
    thermal = design.thermal
    console.print(f"heatsink {thermal.heatsink}, R_th(s-a) {thermal.r_th_sa:g} K/W, ambient "
                  f"{design.duty.ambient:g} degC; losses: conduction + leakage + recovery; "
                  + (f"mean total loss {format_quantity(check.total_power_mean, 'W')} (groups "
                     "with an equilibrium)" if math.isfinite(check.total_power_mean) else
                     "no group reaches an equilibrium"))
    if check.turn_off_current is not None:
        console.print(f"recovery loss Q_rr V f with each device's Q_rr carried, as in the dynamic "
                      f"check, to {turn_off_text(check.turn_off_current)}")
    ranked = sorted(check.positions, key=lambda p: p.max_temperature, reverse=True)[:5]
    single_branch = all(p.branch == 1 for p in check.positions)
    table = Table(show_edge=False, pad_edge=False)
    for column in ("position", "part", "mean T_j", "max T_j", "T_j,max", "over"):
        table.add_column(column, justify="left" if column in ("position", "part") else "right")
    for p in ranked:
        label = f"#{p.index}" if single_branch else f"branch {p.branch} #{p.index}"
        table.add_row(label, shown(p.part), f"{p.mean_temperature:.1f}",
                      f"{p.max_temperature:.1f}",
                      f"{p.limit:.0f}", f"{p.failures:,}")
    console.print(Text("Hottest positions (degC, trials with an equilibrium):", style="italic"))
    console.print(table)
    runaway = check.runaway
    if runaway.failures:
        console.print(Text(f"  {runaway.failures:,} built groups have no stable equilibrium "
                           f"(thermal runaway): P = {runaway.p_fail:.2g} "
                           f"[{runaway.ci_low:.2g}, {runaway.ci_high:.2g}]", style="bold red"))
    else:
        console.print(f"  no thermal runaway seen: P(runaway) <= {runaway.ci_high:.2g}")
    if check.runaway_ambient:
        values = check.runaway_ambient
        text = ", ".join(f"{key} {_temperature(value, check.runaway_search_limit)}"
                         for key, value in values.items())
        console.print(f"  ambient at which the equilibrium is lost (first "
                      f"{check.runaway_ambient_trials:,} trials): {text}")
    console.print()


def _temperature(value: float, limit: float) -> str:
    if math.isinf(value) and value > 0:
        return f"> {limit:.0f} degC"
    if math.isinf(value):
        return "already at the given ambient"
    return f"{value:.1f} degC"


def drivers_to_list(drivers) -> list[dict[str, Any]]:
    """JSON of the drivers ranking (``check --drivers``)."""
    return [{"check": d.check, "input": d.input, "label": d.label,
             "rank_correlation": json_number(d.rank_correlation),
             "tightened_p99_ratio": json_number(d.tightened_p99_ratio),
             "tightened_p_fail_upper": json_number(d.tightened_p_fail_upper),
             "failure_point_share": json_number(d.failure_point_share)} for d in drivers]


def render_drivers(result, console: Console) -> None:
    """What drives each series check, and what halving each input's spread would buy."""
    if not result.drivers:
        return
    console.print(Text("What drives the worst stress", style="bold underline"))
    console.print("rank correlation of each input's mismatch across the string with the string's "
                  "worst stress ratio (first 20,000 trials; for the transient check its random "
                  "sample); each top input rerun with its spread halved on the same draws, and "
                  "the ambient rerun 10 K cooler (plain Monte Carlo: the P(fail) bound after is "
                  "the exact interval's, never importance sampling's)")
    shares = any(d.failure_point_share is not None for d in result.drivers)
    table = Table(show_edge=False, pad_edge=False)
    columns = ["check", "input", "rank corr.", "p99/limit now", "p99/limit after",
               "P(fail) upper after (plain)"] + (["share of failure point"] if shares else [])
    for column in columns:
        table.add_column(column, justify="left" if column in ("check", "input") else "right")
    for d in result.drivers:
        now = result.checks[d.check].p99_ratio
        row = [d.check, d.label, "-" if math.isnan(d.rank_correlation) else
               f"{d.rank_correlation:+.2f}", f"{now:.3f}",
               "-" if d.tightened_p99_ratio is None else f"{d.tightened_p99_ratio:.3f}",
               "-" if d.tightened_p_fail_upper is None else f"{d.tightened_p_fail_upper:.2g}"]
        if shares:
            row.append("-" if d.failure_point_share is None else f"{d.failure_point_share:.0%}")
        table.add_row(*row)
    console.print(table)
    console.print()
