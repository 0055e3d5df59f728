"""What the grading network must withstand: resistor power and voltage, capacitor voltage, stored
energy and discharge time, from the nominal values and the worst voltages the checks found.

Ratings exceeded are "rating problems" (they fail the verdict); rules of thumb are advisories,
marked as common practice, never hidden constraints. Both are findings (``checks.findings``): a
code, the figures and the limit; ``report.wording`` says them in words.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Mapping

import numpy as np

from stringcheck.checks.findings import Finding, Value, codes
from stringcheck.checks.outcome import Exported, figure, json_number, text_or_null
from stringcheck.constants import SAFE_DISCHARGE_TIME, SAFE_VOLTAGE
from stringcheck.design.model import Design
from stringcheck.limits import exceeds_limit
from stringcheck.physics.grading import discharge_time, resistor_power, stored_energy
from stringcheck.physics.leakage import leakage_current

# Grading current below this multiple of the hottest maximum leakage draws an advisory (common
# practice: "several times" the leakage; 5x is our threshold for saying so).
GRADING_CURRENT_MULTIPLE = 5.0
# The checks whose worst figure is a stage voltage [V]: every grading component across a stage
# sees it (the transient check's is the simulated turn-off peak, overshoot included).
STAGE_VOLTAGE_CHECKS = ("static", "dynamic", "transient")


@dataclass(frozen=True, kw_only=True, repr=False)
class GradingSummary(Exported):
    """What the grading network must withstand, from nominal values and the worst drawn voltages
    (SI units); its JSON is the result's ``network``."""

    json_order = ("resistor", "capacitor", "damping_resistor", "worst_stage_voltage",
                  "worst_stage_voltage_check", "resistor_power_continuous", "resistor_power_duty",
                  "resistor_rated_power", "resistor_rated_voltage", "capacitor_rated_voltage",
                  "total_grading_loss", "stage_energy", "total_energy", "discharge_time",
                  "grading_current", "hottest_max_leakage", "rating_problem_codes",
                  "advisory_codes")

    resistor: float | None = figure(unit="ohm")
    capacitor: float | None = figure(unit="F")
    damping_resistor: float | None = figure(unit="ohm")
    # The highest stage voltage any check found: every component of a stage sees it.
    worst_stage_voltage: float = figure(unit="V", encode=json_number)
    worst_voltage_check: str = figure("worst_stage_voltage_check", encode=text_or_null)
    resistor_power_continuous: float | None = figure(unit="W", encode=json_number)
    resistor_power_duty: float | None = figure(unit="W", encode=json_number)
    resistor_rated_power: float | None = figure(unit="W")
    resistor_rated_voltage: float | None = figure(unit="V")
    total_grading_loss: float | None = figure(unit="W", encode=json_number)
    capacitor_rated_voltage: float | None = figure(unit="V")
    stage_energy: float | None = figure(unit="J", encode=json_number)
    total_energy: float | None = figure(unit="J", encode=json_number)
    discharge_time: float = figure(unit="s", encode=json_number)
    grading_current: float | None = figure(unit="A", encode=json_number)
    hottest_max_leakage: float = figure(unit="A", encode=json_number)
    # Findings (checks.findings): their codes here, their sentences (rating_problems,
    # advisories) written beside them by report.export.
    rating_problems: tuple[Finding, ...] = figure("rating_problem_codes", encode=codes)
    advisories: tuple[Finding, ...] = figure("advisory_codes", encode=codes)
    # What a sized network's parts must be rated for (``studies.size``; None in a plain check):
    # the worst stage voltage and the resistor's power over the derating, the capacitors' loss
    # in the damping resistors. In the JSON of ``size`` (its ``grading.ratings``), not here.
    derating: float | None = figure(None, default=None)
    resistor_voltage_required: float | None = figure(None, unit="V", default=None)
    resistor_power_required: float | None = figure(None, unit="W", default=None)
    capacitor_voltage_required: float | None = figure(None, unit="V", default=None)
    damping_loss_per_stage: float | None = figure(None, unit="W", default=None)
    damping_loss_total: float | None = figure(None, unit="W", default=None)


def worst_stage_voltage(checks: Mapping[str, object]) -> tuple[float, str]:
    """The highest stage voltage [V] any check that ran found (``STAGE_VOLTAGE_CHECKS``), and the
    name of that check (NaN and "" when none ran)."""
    found = [(checks[name].worst_voltage, name) for name in STAGE_VOLTAGE_CHECKS
             if name in checks and checks[name].ran and np.isfinite(checks[name].worst_voltage)]
    if not found:
        return float("nan"), ""
    value, name = max(found, key=lambda item: item[0])
    return float(value), name


def _against_rating(stress: float, values: dict, rating: float | None, unit: str, over: str,
                    missing: str, problems: list, advisories: list) -> None:
    """One rating of a grading part: a rating given is compared with the ``stress`` [``unit``]
    through the shared limit comparison (a problem ``over`` when exceeded, with ``values``); a
    rating not given is advised as ``missing``, since the stress then goes unchecked."""
    if rating is None:
        advisories.append(Finding(missing))
    elif exceeds_limit(stress, rating):
        problems.append(Finding(over, values, Value(rating, unit)))


def grading_summary(design: Design, checks: Mapping[str, object], temperature: np.ndarray,
                     junction_capacitance: np.ndarray) -> GradingSummary:
    grading = design.grading
    layout = design.string
    stage_count = layout.series * layout.parallel
    nominal_share = design.duty.reverse_voltage / layout.series
    static_worst = checks["static"].worst_voltage if checks["static"].ran else float("nan")
    worst_any, worst_check = worst_stage_voltage(checks)
    seen = {"voltage": Value(worst_any, "V"), "check": Value(worst_check)}
    problems, advisories = [], []

    power_continuous = power_duty = total_loss = grading_current = None
    if grading.resistor is not None:
        power_continuous = float(resistor_power(static_worst, grading.resistor, waveform="dc"))
        power_duty = float(resistor_power(static_worst, grading.resistor, waveform=design.duty.waveform))
        total_loss = float(stage_count * resistor_power(nominal_share, grading.resistor,
                                                        waveform=design.duty.waveform))
        grading_current = nominal_share / grading.resistor
        _against_rating(power_duty, {"power": Value(power_duty, "W")},
                        grading.resistor_rated_power, "W", "rating.resistor_power",
                        "advisory.resistor_rated_power_missing", problems, advisories)
        _against_rating(worst_any, seen, grading.resistor_rated_voltage, "V",
                        "rating.resistor_voltage", "advisory.resistor_rated_voltage_missing",
                        problems, advisories)

    hottest_leakage = 0.0
    # With a mix, every part that can stand at a position (StringLayout.part_grids).
    for grid in layout.part_grids():
        for branch in range(layout.parallel):
            for index in range(layout.series):
                part = design.parts[grid[branch, index]]
                spread = part.i_r
                maximum = spread.high if spread.high is not None else spread.typ
                value = float(leakage_current(maximum, spread.at_voltage, temperature[branch, index],
                                              reference_voltage=spread.at_voltage,
                                              reference_temperature=spread.at_temperature,
                                              doubling_temperature=part.doubling_temperature,
                                              voltage_exponent=part.voltage_exponent))
                hottest_leakage = max(hottest_leakage, value)
    if grading_current is not None and grading_current < GRADING_CURRENT_MULTIPLE * hottest_leakage:
        advisories.append(Finding(
            "advisory.grading_current_low",
            {"current": Value(grading_current, "A"), "leakage": Value(hottest_leakage, "A"),
             "multiple": Value(GRADING_CURRENT_MULTIPLE)},
            Value(GRADING_CURRENT_MULTIPLE * hottest_leakage, "A")))
    if grading.resistor is None:
        advisories.append(Finding("advisory.no_grading_resistors"))

    stage_energy = total_energy = None
    capacitance = junction_capacitance + (grading.capacitor or 0.0)
    if grading.capacitor is not None:
        stage_energy = float(stored_energy(grading.capacitor, worst_any))
        _against_rating(worst_any, seen, grading.capacitor_rated_voltage, "V",
                        "rating.capacitor_voltage", "advisory.capacitor_rated_voltage_missing",
                        problems, advisories)
        if grading.damping_resistor is None:
            advisories.append(Finding("advisory.damping_resistor_missing"))
    total_energy = float(np.sum(stored_energy(capacitance, nominal_share)))
    resistances = np.full(layout.series, np.inf if grading.resistor is None else grading.resistor)
    time = float(np.max([discharge_time(np.full(layout.series, nominal_share), resistances,
                                        capacitance[branch]) for branch in range(layout.parallel)]))
    if time > SAFE_DISCHARGE_TIME:
        advisories.append(Finding("advisory.slow_discharge",
                                  {"time": Value(time, "s"), "voltage": Value(SAFE_VOLTAGE, "V")},
                                  Value(SAFE_DISCHARGE_TIME, "s")))
    return GradingSummary(
        resistor=grading.resistor, capacitor=grading.capacitor,
        damping_resistor=grading.damping_resistor, worst_stage_voltage=worst_any,
        worst_voltage_check=worst_check,
        resistor_power_continuous=power_continuous, resistor_power_duty=power_duty,
        resistor_rated_power=grading.resistor_rated_power,
        resistor_rated_voltage=grading.resistor_rated_voltage, total_grading_loss=total_loss,
        capacitor_rated_voltage=grading.capacitor_rated_voltage,
        stage_energy=stage_energy, total_energy=total_energy, discharge_time=time,
        grading_current=grading_current, hottest_max_leakage=hottest_leakage,
        rating_problems=tuple(problems), advisories=tuple(advisories))
