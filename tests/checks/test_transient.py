"""``run_check(transient=True)``: the time-domain turn-off wired into the check."""

from __future__ import annotations

import json
from importlib import resources


from stringcheck.design.reading import parse_design_text
from stringcheck.report.export import json_text, result_to_dict
from stringcheck.studies.check import run_check
from stringcheck.report.wording import sentence

DEMO = (resources.files("stringcheck") / "data" / "demo.toml").read_text(encoding="utf-8")


def test_underdamped_capacitors_fail_in_the_time_domain_though_charge_balance_passes():
    # Charge balance knows no inductance. With R_d = 100 ohm per stage, n R_d = 2.4 kohm is far
    # below the critical 2 sqrt(L / (C / n)) (series RLC, any circuit-theory text): the loop rings
    # and the stages overshoot well past the settled share, while the charge balance passes.
    text = DEMO.replace('damping_resistor = "1.2 kOhm"', 'damping_resistor = "100 Ohm"')
    result = run_check(parse_design_text(text), trials=4000, transient=True, transient_sample=100,
                       transient_worst=5)
    assert result.checks["dynamic"].passed
    transient = result.checks["transient"]
    assert transient.ran and not transient.passed
    assert transient.worst_failures == 5
    assert transient.overshoot > 0.3 * 30e3 / 24  # more than 30 % of the nominal share
    assert result.verdict == "fail"


def test_damped_string_peaks_above_but_near_the_charge_balance():
    # With R_d near critical damping the ring is gone: the time-domain peak exceeds the settled
    # (charge-balance) share only by a modest overshoot, and the settled share is close to it.
    result = run_check(parse_design_text(DEMO), trials=4000, transient=True, transient_sample=100,
                       transient_worst=5)
    transient, dynamic = result.checks["transient"], result.checks["dynamic"]
    assert transient.ran
    assert transient.worst_voltage >= 0.95 * dynamic.worst_voltage
    assert transient.worst_voltage <= 1.3 * dynamic.worst_voltage
    data = json.loads(json_text(result_to_dict(result)))["checks"]["transient"]
    for key in ("passed", "worst_voltage", "overshoot", "worst_ratio", "p_fail", "p_fail_ci",
                "positions", "sampled", "worst_failures"):
        assert key in data, key
    assert data["sampled"] == 100


def test_transient_needs_the_dynamic_check():
    text = DEMO.replace('waveform = "half-sine"', 'waveform = "dc"').replace(
        '\ndi_dt = "10 A/us"', "\n")
    result = run_check(parse_design_text(text), trials=200, transient=True)
    assert not result.checks["transient"].ran
    reason = result.checks["transient"].reason
    assert reason.code == "not_run.needs_dynamic"
    assert reason.causes == (result.checks["dynamic"].reason,)
    assert sentence(reason) == ("needs the dynamic check, which did not run: "
                                + sentence(result.checks["dynamic"].reason))


def test_inconsistent_recovery_data_is_reported_not_crashed():
    # A triangle of base t_rr and slope di/dt holds at most di/dt t_rr^2 / 2 = 10 A/us x
    # (0.1 us)^2 / 2 = 50 nC < 80 nC (geometry of the recovery waveform).
    text = DEMO.replace('t_rr = { typ = "0.2 us", max = "0.3 us"', 't_rr = { typ = "0.1 us"')
    result = run_check(parse_design_text(text), trials=4000, transient=True)
    check = result.checks["transient"]
    assert not check.ran and check.reason.code == "not_run.inconsistent_recovery"
    assert "t_rr" in sentence(check.reason)
    assert all(c.passed for c in result.checks.values() if c.ran)
    assert result.verdict == "fail"  # a requested check that could not run never passes
