"""The single-fault study (studies.faults) against closed forms, a hand count and scipy."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.optimize import brentq

from stringcheck.design.reading import parse_design_text
from stringcheck.errors import DesignError
from stringcheck.studies.check import run_check
from stringcheck.studies.faults import run_faults


def _fixed(*, series=10, string_voltage="6 kV", v_rrm="1 kV", derating=0.8, resistor="10 MOhm",
           exponent=0.5, capacitor='capacitor = "1 nF"', damping='damping_resistor = "1 kOhm"',
           trials=4000, leakage="2 uA", charge="100 nC", extra=""):
    """A string without scatter (every trial the same string): typ alone everywhere, exact
    resistors and capacitors, one temperature."""
    return f"""
[duty]
reverse_voltage = "{string_voltage}"
waveform = "half-sine"
frequency = "50 Hz"
di_dt = "10 A/us"
ambient = "25 degC"
[string]
series = {series}
derating = {derating}
part = "D"
[parts.D]
v_rrm = "{v_rrm}"
i_r = {{ typ = "{leakage}", at_temperature = "25 degC", at_voltage = "{v_rrm}" }}
q_rr = {{ typ = "{charge}", at_di_dt = "10 A/us" }}
c_j = "10 pF"
leakage_voltage_exponent = {exponent}
[grading]
resistor = "{resistor}"
resistor_tolerance = "0 %"
resistor_tcr = "0 ppm/K"
{capacitor}
capacitor_tolerance = "0 %"
{damping}
[monte_carlo]
trials = {trials}
seed = 7
{extra}
"""


def test_shorted_device_leaves_n_minus_1_devices_at_the_string_voltage():
    # Closed form (Kirchhoff's voltage law on identical stages): with one of n identical stages
    # shorted, each of the other n - 1 takes V_s / (n - 1), statically and at turn-off.
    design = parse_design_text(_fixed(series=10, string_voltage="6 kV"))
    study = run_faults(design, kinds=("device_short",), redundancy=False)
    worst = study.kinds[0].worst
    voltages = np.array(worst.stage_voltages)
    assert voltages.size == 10
    assert voltages[worst.index - 1] == 0.0
    others = np.delete(voltages, worst.index - 1)
    assert np.allclose(others, 6000.0 / 9, rtol=1e-9)
    assert worst.static_worst_ratio == pytest.approx(6000.0 / 9 / 800.0, rel=1e-9)
    assert worst.dynamic_worst_ratio == pytest.approx(6000.0 / 9 / 800.0, rel=1e-9)
    # The unfaulted string: V_s / n each.
    assert study.baseline.worst_ratio == pytest.approx(600.0 / 800.0, rel=1e-9)


def test_redundancy_count_by_hand():
    # By hand: 10 identical devices of 1 kV at derating 0.8 (limit 800 V) across 6 kV. With m
    # shorted each other takes 6000 / (10 - m): m = 2 gives 750 V (passes), m = 3 gives 857 V
    # (fails), so the string tolerates 2 shorted devices.
    design = parse_design_text(_fixed(series=10, string_voltage="6 kV"))
    study = run_faults(design, kinds=("device_short",))
    assert study.redundancy.shorted == 2
    assert len(study.redundancy.positions) == 2
    assert [len(step.positions) for step in study.redundancy.steps] == [1, 2, 3]
    assert study.redundancy.steps[-1].worst_ratio == pytest.approx(6000.0 / 7 / 800.0, rel=1e-9)
    assert not study.redundancy.steps[-1].passed
    # 7 kV: 7000 / 9 = 778 V passes, 7000 / 8 = 875 V fails: 1 shorted device.
    design = parse_design_text(_fixed(series=10, string_voltage="7 kV"))
    assert run_faults(design, kinds=("device_short",)).redundancy.shorted == 1


def _stage_current(voltage, conductance, coefficient, exponent):
    return conductance * voltage + coefficient * voltage ** exponent


def test_open_resistor_stage_set_by_the_leakage_balance_alone():
    # Our own solver (scipy brentq, nested): the string current I is common to every stage; the
    # open stage carries it by leakage alone, c V^m = I, the others by G V + c V^m = I, and the
    # stage voltages add to V_s (Kirchhoff). Leakage 2 uA at 1 kV with m = 0.5.
    series, string_voltage, resistance, exponent = 10, 6000.0, 10e6, 0.5
    coefficient = 2e-6 / 1000.0 ** exponent
    # A dc duty: the blocking state is the dc balance (a periodic duty's ac sharing, with its
    # capacitors, is tested against its own closed form in tests/solvers/test_series_ac.py).
    design = parse_design_text(_fixed(series=series, string_voltage="6 kV", exponent=exponent,
                                      v_rrm="1 kV").replace('waveform = "half-sine"',
                                                            'waveform = "dc"'))
    study = run_faults(design, kinds=("resistor_open",), redundancy=False)
    worst = study.kinds[0].worst

    def inverse(current, conductance):
        return brentq(lambda v: _stage_current(v, conductance, coefficient, exponent) - current,
                      0.0, 1e15, xtol=1e-12, rtol=1e-14)

    def mismatch(current):
        return inverse(current, 0.0) + (series - 1) * inverse(current, 1 / resistance) - \
            string_voltage

    current = brentq(mismatch, 1e-9, 1e-2, xtol=1e-18, rtol=1e-14)
    open_stage = inverse(current, 0.0)
    others = inverse(current, 1 / resistance)
    voltages = np.array(worst.stage_voltages)
    assert voltages[worst.index - 1] == pytest.approx(open_stage, rel=1e-7)
    assert np.allclose(np.delete(voltages, worst.index - 1), others, rtol=1e-7)
    assert worst.static_worst_ratio == pytest.approx(open_stage / 800.0, rel=1e-7)
    # An open resistor leaves the turn-off sharing as it was.
    assert worst.dynamic_worst_ratio == pytest.approx(study.baseline.dynamic_worst_ratio)


def test_open_capacitor_stage_keeps_its_junction_capacitance_only():
    # Closed form (series capacitors after equal recovery charges: each stage takes the same
    # charge beyond its Q_rr, so V_k is proportional to 1 / C_k and sum V_k = V_s, Kirchhoff):
    # the open stage keeps c_j = 10 pF, the others C + c_j = 1.01 nF.
    series, string_voltage = 10, 6000.0
    open_stage, other = 10e-12, 1e-9 + 10e-12
    expected = string_voltage / open_stage / (1 / open_stage + (series - 1) / other)
    design = parse_design_text(_fixed(series=series, string_voltage="6 kV", charge="100 nC"))
    study = run_faults(design, kinds=("capacitor_open",), redundancy=False)
    worst = study.kinds[0].worst
    voltages = np.array(worst.stage_voltages)
    assert voltages[worst.index - 1] == pytest.approx(expected, rel=1e-9)
    assert voltages.sum() == pytest.approx(string_voltage, rel=1e-9)
    # Static sharing unchanged by an open capacitor.
    assert worst.static_worst_ratio == pytest.approx(study.baseline.static_worst_ratio)
    assert worst.dynamic_worst_ratio == pytest.approx(expected / 800.0, rel=1e-9)
    assert not study.kinds[0].survives


def test_the_unfaulted_string_is_the_checks_on_the_same_draws():
    # The study draws what run_check draws (same seed, same trials): its unfaulted string has the
    # check's worst ratios, bit for bit in the chunks' arithmetic.
    from tests.designs import design_text

    design = parse_design_text(design_text("scatter"))
    result = run_check(design, trials=4096, only=("static", "dynamic"))
    study = run_faults(design, trials=4096, kinds=("resistor_open",), redundancy=False)
    assert study.baseline.static_worst_ratio == pytest.approx(
        result.checks["static"].worst_ratio, rel=1e-12)
    assert study.baseline.dynamic_worst_ratio == pytest.approx(
        result.checks["dynamic"].worst_ratio, rel=1e-12)
    assert study.baseline.estimate.failures >= max(result.checks["static"].estimate.failures,
                                                   result.checks["dynamic"].estimate.failures)
    # Every fault of every position of both branches was solved.
    assert study.kinds[0].faults_evaluated == design.string.series * design.string.parallel


def test_parallel_fault_changes_one_branch_only():
    # Two identical branches: a short in one leaves the other at V_s / n; the string's worst is
    # the faulted branch's V_s / (n - 1).
    text = _fixed(series=6, string_voltage="4 kV").replace("series = 6\n", "series = 6\nparallel = 2\n")
    study = run_faults(parse_design_text(text), kinds=("device_short",), redundancy=False)
    kind = study.kinds[0]
    assert kind.faults_evaluated == 12
    assert {item.branch for item in kind.faults} == {1, 2}
    assert kind.worst.worst_ratio == pytest.approx(4000.0 / 5 / 800.0, rel=1e-9)


def test_kinds_that_share_a_faulted_string_and_kinds_that_cannot_run():
    design = parse_design_text(_fixed(damping=""))
    study = run_faults(design, redundancy=False)
    kinds = {kind.kind: kind for kind in study.kinds}
    assert kinds["capacitor_short"].same_as == "device_short"
    assert kinds["capacitor_short"].worst.worst_ratio == kinds["device_short"].worst.worst_ratio
    assert not kinds["damping_open"].ran
    assert kinds["damping_open"].reason.code == "fault.no_damping_resistor"
    data = study.to_dict()
    assert set(data["kinds"]) == set(kinds)
    assert data["kinds"]["device_short"]["worst"]["stage_voltages"][0] is not None


def test_fault_that_leaves_no_device_is_refused():
    design = parse_design_text(_fixed(series=1, string_voltage="500 V"))
    with pytest.raises(DesignError, match="faults.kinds"):
        run_faults(design, kinds=("device_short",))


def test_unknown_fault_kind_in_the_design_file_is_refused():
    with pytest.raises(DesignError, match="faults.kinds.*unknown fault kind 'diode_open'"):
        parse_design_text(_fixed(extra='[faults]\nkinds = ["diode_open"]'))
    design = parse_design_text(_fixed(extra='[faults]\nkinds = ["resistor_open"]'))
    assert design.faults.kinds == ("resistor_open",)


def test_cli_check_faults_table_json_and_bad_kind(tmp_path):
    import json

    from typer.testing import CliRunner

    from stringcheck.cli.app import app

    path = tmp_path / "stack.toml"
    path.write_text(_fixed(series=10, string_voltage="6 kV"), encoding="utf-8")
    out = tmp_path / "result.json"
    run = CliRunner().invoke(app, ["check", str(path), "--faults", "--json", str(out)])
    assert run.exit_code in (0, 1), run.output
    assert "Single faults" in run.output and "device shorted" in run.output
    assert "Redundancy: the string still passes with 2 shorted device(s)" in run.output
    data = json.loads(out.read_text(encoding="utf-8"))["faults"]
    assert data["redundancy"]["shorted"] == 2
    assert data["kinds"]["device_short"]["worst"]["worst_ratio"] == pytest.approx(6000 / 9 / 800)
    quiet = CliRunner().invoke(app, ["check", str(path), "--faults", "--quiet"])
    assert "tolerates 2 shorted device(s)" in quiet.output, quiet.output
    path.write_text(_fixed(extra='[faults]\nkinds = ["diode_open"]'), encoding="utf-8")
    bad = CliRunner().invoke(app, ["check", str(path), "--faults"])
    assert bad.exit_code == 2, bad.output
    assert "faults.kinds" in bad.output and "Traceback" not in bad.output
    assert len(bad.output.strip().splitlines()) == 1
