"""The grading network's ratings against the worst stage voltage of every check that ran."""

from __future__ import annotations

import pytest

from stringcheck.checks.findings import Value
from stringcheck.design.reading import parse_design_text
from stringcheck.report.export import result_to_dict
from stringcheck.studies.check import run_check

from tests.designs import design_text

# A small ringing stack of our own: a low damping resistor lets the stray inductance overshoot far
# above the charge-balance voltage (1 kV devices, peaks near 1.7 kV).
RINGING = design_text("one_kv_stack") + """[grading]
resistor = "2 MOhm"
resistor_tolerance = "1 %"
resistor_rated_voltage = "RATED"
capacitor = "330 pF"
capacitor_tolerance = "5 %"
capacitor_rated_voltage = "RATED"
damping_resistor = "10 ohm"
[monte_carlo]
trials = 400
seed = 5
[sizing]
target_p_fail = 0.02
"""


def _run(rated: str, *, transient: bool):
    design = parse_design_text(RINGING.replace("RATED", rated))
    return run_check(design, transient=transient, transient_worst=5, transient_sample=20)


def test_ratings_are_judged_at_the_simulated_turn_off_peak():
    # Issue 14.6: 1.2 kV resistors and capacitors beside simulated peaks of about 1.7 kV must be a
    # rating problem. The worst stage voltage is the maximum of every voltage check's own worst
    # (the grading components sit across the stage), here the transient's.
    result = _run("1.2 kV", transient=True)
    checks = result.checks
    peaks = {name: checks[name].worst_voltage for name in ("static", "dynamic", "transient")}
    assert peaks["static"] < 1200.0 and peaks["dynamic"] < 1200.0 < peaks["transient"], peaks
    assert result.grading.worst_stage_voltage == max(peaks.values())
    assert result.grading.worst_voltage_check == "transient"
    # Findings, not sentences: the code, the voltage seen and the check that saw it, the rating.
    problems = {finding.code: finding for finding in result.grading.rating_problems}
    assert set(problems) == {"rating.resistor_voltage", "rating.capacitor_voltage"}, problems
    for finding in problems.values():
        assert finding.values["voltage"] == Value(peaks["transient"], "V")
        assert finding.number("check") == "transient"
        assert finding.limit == Value(1200.0, "V")
    assert result.verdict == "fail"
    network = result_to_dict(result)["network"]
    # The JSON keeps the sentences (report.wording) and gives the codes beside them.
    assert network["rating_problem_codes"] == [f.code for f in result.grading.rating_problems]
    texts = network["rating_problems"]
    assert any(p.startswith("grading resistor sees") and "simulated turn-off" in p
               for p in texts), texts
    assert any(p.startswith("grading capacitor sees") for p in texts), texts
    assert network["worst_stage_voltage"] == pytest.approx(peaks["transient"])
    assert network["worst_stage_voltage_check"] == "transient"


def test_without_the_transient_the_charge_balance_worst_rates_the_parts():
    # The same 1.2 kV ratings hold against the checks that ran when the turn-off is not simulated.
    result = _run("1.2 kV", transient=False)
    assert result.grading.worst_voltage_check in ("static", "dynamic")
    assert result.grading.worst_stage_voltage == max(
        result.checks[name].worst_voltage for name in ("static", "dynamic"))
    assert not result.grading.rating_problems
