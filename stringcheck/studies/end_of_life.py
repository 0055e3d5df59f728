"""The check at the start and at the end of life, on the same draws (``check --end-of-life``).

The end-of-life changes of the grading network (``[end_of_life]``: resistor drift, voltage
coefficient, capacitor dc-bias loss, surface leakage; ``montecarlo.sampling.aged_strings`` and
``solvers.aged_sharing``) are applied to the very built strings of the initial check (same seed,
same trials; the changes draw from streams of their own), and every check runs again. Each
check's margin is 1 - its worst stress ratio; the design passes when it passes both times. The
importance sampler draws the initial network only, so the end-of-life run uses the plain Monte
Carlo estimate. Results are plain dataclasses; nothing here formats text.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from stringcheck.checks.outcome import Exported, figure, json_number
from stringcheck.design.model import Design, EndOfLife
from stringcheck.errors import DesignError
from stringcheck.studies.check import CheckResult, run_check

__all__ = ["EndOfLifeStudy", "MarginPair", "run_end_of_life"]


@dataclass(frozen=True, kw_only=True, repr=False)
class MarginPair(Exported):
    """One check at the start and at the end of life: worst and 99th-percentile stress ratio,
    margin (1 - worst ratio), P(fail) upper bound and verdict."""

    check: str = figure()
    initial_worst_ratio: float = figure(encode=json_number)
    end_of_life_worst_ratio: float = figure(encode=json_number)
    initial_p99_ratio: float = figure(encode=json_number)
    end_of_life_p99_ratio: float = figure(encode=json_number)
    initial_margin: float = figure(encode=json_number)
    end_of_life_margin: float = figure(encode=json_number)
    initial_p_fail_upper: float = figure(encode=json_number)
    end_of_life_p_fail_upper: float = figure(encode=json_number)
    initial_passed: bool = figure()
    end_of_life_passed: bool = figure()


def _settings(aged: EndOfLife) -> dict:
    return {"resistor_drift": aged.resistor_drift, "resistor_drift_mode": aged.resistor_drift_mode,
            "resistor_voltage_coefficient": aged.resistor_voltage_coefficient,
            "capacitor_dc_bias": aged.capacitor_dc_bias,
            "surface_resistance": aged.surface_resistance,
            "surface_fraction": aged.surface_fraction}


@dataclass(frozen=True, eq=False, kw_only=True, repr=False)
class EndOfLifeStudy(Exported):
    """Both runs, and each check's pair of margins."""

    settings: EndOfLife = figure(encode=_settings)  # the changes applied, SI
    verdict: str = figure()  # "pass" when the design passes at the start and at the end of life
    end_of_life_verdict: str = figure()
    margins: tuple[MarginPair, ...] = figure(encode=lambda items: [item.to_dict()
                                                                   for item in items])
    initial: CheckResult = figure(None)
    aged: CheckResult = figure(None)  # the full end-of-life result (``to_dict()`` for its JSON)


def run_end_of_life(design: Design, **check_options) -> EndOfLifeStudy:
    """``run_check`` with the design as it is and at the end of life (``check_options`` passed to
    both; the end-of-life run without importance sampling)."""
    aged = design.end_of_life
    if not aged.given:
        raise DesignError("gives no end-of-life change: set at least one of resistor_drift, "
                          "resistor_voltage_coefficient, capacitor_dc_bias, surface_resistance",
                          source=design.source, key="end_of_life")
    if check_options.get("rare"):
        raise DesignError("importance sampling (rare) draws the initial network only: run the "
                          "end of life without it", source=design.source, key="end_of_life")
    initial = run_check(replace(design, end_of_life=replace(aged, enabled=False)),
                        **check_options)
    options = {**check_options, "rare": False}
    late = run_check(replace(design, end_of_life=replace(aged, enabled=True)), **options)
    margins = []
    for name, check in initial.checks.items():
        other = late.checks.get(name)
        if not check.ran or other is None or not other.ran:
            continue
        margins.append(MarginPair(
            check=name, initial_worst_ratio=check.worst_ratio,
            end_of_life_worst_ratio=other.worst_ratio, initial_p99_ratio=check.p99_ratio,
            end_of_life_p99_ratio=other.p99_ratio, initial_margin=1.0 - check.worst_ratio,
            end_of_life_margin=1.0 - other.worst_ratio,
            initial_p_fail_upper=check.estimate.ci_high,
            end_of_life_p_fail_upper=other.estimate.ci_high, initial_passed=check.passed,
            end_of_life_passed=other.passed))
    verdict = "pass" if initial.verdict == "pass" and late.verdict == "pass" else "fail"
    return EndOfLifeStudy(settings=aged, verdict=verdict, end_of_life_verdict=late.verdict,
                          margins=tuple(margins), initial=initial, aged=late)
