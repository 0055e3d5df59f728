"""Report sections of the checks beyond the series ones: parallel sharing, thermal, transient (their
JSON is generated from the result fields, ``checks.outcome``)."""

from __future__ import annotations

import math
from rich.console import Console
from rich.table import Table
from rich.text import Text

from stringcheck.units import format_quantity
from stringcheck.checks.forward import ParallelCheck, ThermalCheck
from stringcheck.checks.series import DynamicCheck, SeriesCheck, StaticCheck
from stringcheck.checks.transient import TransientCheck
from stringcheck.report.display_text import shown
from stringcheck.report.wording import SLOPE_SOURCES, sentences


# How each basis of the turn-off current (checks.recovery_conditions.TurnOffCurrent) reads.
_TURN_OFF_BASIS = {
    "dc": "the dc forward current",
    "square_peak": "a square wave commutates from its peak, 2 I_F(AV)",
    "half_sine_history": "the crest pi I_F(AV) of the half-sine pulse; the stored charge is "
                         "followed along the sine to its zero",
    "half_sine_crest": "the crest pi I_F(AV) of the half-sine pulse, taken as steady: no "
                       "duty.frequency to follow the sine",
    "test_current": "the parts' test I_F: no duty.forward_current",
}


def turn_off_text(turn_off, *, simulated: bool = False) -> str:
    """The current a branch commutates from and the commutation slope, in words; ``simulated``
    for the transient check, which starts from the steady equivalent of the current."""
    text = (f"I_F = {format_quantity(turn_off.current, 'A')} per branch at turn-off "
            f"({_TURN_OFF_BASIS[turn_off.basis]})")
    if simulated and turn_off.basis not in ("dc", "test_current") and \
            math.isfinite(turn_off.steady_equivalent):
        text += (f", simulated from the steady {format_quantity(turn_off.steady_equivalent, 'A')} "
                 "that leaves the typical device the same stored charge at the zero")
    if math.isfinite(turn_off.di_dt):
        text += (f", di/dt = {_per_us(turn_off.di_dt)} from "
                 f"{SLOPE_SOURCES[turn_off.di_dt_source]}")
        if turn_off.di_dt_source != "natural" and math.isfinite(turn_off.natural_di_dt):
            text += (f" (the waveform's natural slope is "
                     f"{_per_us(turn_off.natural_di_dt)})")
    return text


def _per_us(slope: float) -> str:
    """A slope [A/s] in A/us, the trade's unit."""
    return f"{slope * 1e-6:.3g} A/us"


def carried_recovery_lines(turn_off) -> list[str]:
    """Per part, Q_rr at the datasheet's test beside the value carried to the turn-off."""
    lines = []
    for item in turn_off.parts:
        given = f"typ {format_quantity(item.datasheet_typ, 'C')}"
        carried = f"typ {format_quantity(item.carried_typ, 'C')}"
        if item.datasheet_limit is not None:
            given += f", max {format_quantity(item.datasheet_limit, 'C')}"
            carried += f", max {format_quantity(item.carried_limit, 'C')}"
        lines.append(f"  part {shown(item.part)}: Q_rr {given} at the datasheet's "
                     f"{format_quantity(item.test_current, 'A')}, "
                     f"{_per_us(item.test_di_dt)} -> carried {carried}")
    return lines


def static_solution_text(check: StaticCheck) -> str:
    """The static check's line on its blocking-state solutions: dc only, or dc and ac and which
    decided, and where the junction temperatures came from."""
    where = ("junction temperatures from the thermal check's electro-thermal equilibrium"
             if check.junction_temperature == "equilibrium" else
             "junction temperatures = ambient + each position's temperature rise")
    if check.blocking_state == "dc" or check.ac_worst_voltage is None:
        return f"Blocking state solved as dc (the peak reverse voltage held); {where}"
    share = check.ac_decided_share or 0.0
    return (f"Blocking state: the dc solution (peak held, worst "
            f"{format_quantity(check.dc_worst_voltage, 'V')}) and the ac one (the reverse "
            f"half-period followed in time, worst {format_quantity(check.ac_worst_voltage, 'V')}); "
            f"each device judged by the worse, the {check.decided_by} solution decided the worst "
            f"string (ac the worse in {share:.0%} of the strings); {where}")


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


def render_transient(check: TransientCheck, design, console: Console) -> None:
    console.print(Text("Turn-off in the time domain (stray inductance, recovery, damping)",
                       style="bold underline"))
    current = turn_off_text(check.turn_off_current, simulated=True) \
        if check.turn_off_current is not None else \
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
    for note in sentences(check.notes):
        console.print(Text(f"  note: {shown(note)}", style="italic"))
    console.print()


def worst_value_text(check) -> str:
    """The 'worst' cell of the summary table: the check's own worst figure."""
    return _WORST_TEXT[type(check)](check)


def _thermal_worst(check: ThermalCheck) -> str:
    return "runaway" if not math.isfinite(check.worst_tj) else f"T_j {check.worst_tj:.0f} degC"


# Each check's worst figure in words (a check type missing here is a KeyError, never a wrong cell).
_WORST_TEXT = {
    SeriesCheck: lambda check: format_quantity(check.worst_voltage, "V"),
    StaticCheck: lambda check: format_quantity(check.worst_voltage, "V"),
    DynamicCheck: lambda check: format_quantity(check.worst_voltage, "V"),
    TransientCheck: lambda check: format_quantity(check.worst_voltage, "V"),
    ParallelCheck: lambda check: f"share {check.worst_share:.3f}",
    ThermalCheck: _thermal_worst,
}


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
        for line in carried_recovery_lines(check.turn_off_current):
            console.print(line)
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
