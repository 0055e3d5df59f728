"""The circuit study (issue 23): every stack's duty derived from the [circuit] table, each
distinct duty checked once, one verdict over all of them."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from stringcheck.design.reading import load_design, parse_design_text
from stringcheck.studies.circuit import circuit_stacks, run_circuit

EXAMPLES = Path(__file__).resolve().parents[2] / "examples"
TRIALS = 4000  # above the 3688 that P(fail) <= 1e-3 needs at 95 %


def _text(name: str) -> str:
    return (EXAMPLES / name).read_text(encoding="utf-8")


def test_half_wave_capacitor_input_stack_blocks_twice_the_crest():
    # Capacitor input: the reservoir holds V_pk while the secondary swings to -V_pk, so the stack
    # blocks 2 V_pk = 2 sqrt(2) 10 kV (Sedra and Smith, Microelectronic Circuits, ch. 4).
    design = load_design(EXAMPLES / "xray-halfwave-circuit.toml")
    result = run_circuit(design, trials=TRIALS)
    (stack,) = result.stacks
    assert stack.reverse_voltage == pytest.approx(2 * math.sqrt(2) * 10e3)
    assert stack.duty.waveform == "offset-sine"
    assert stack.duty.forward_current == pytest.approx(20e-3)  # charge balance
    assert 0 < stack.conduction_angle < math.pi
    assert result.groups[0].result.design.duty.reverse_voltage == stack.reverse_voltage
    assert result.verdict == "pass", result.groups[0].result


def test_bridge_stacks_share_one_duty_with_the_overlap_slope():
    # Mohan, Undeland and Robbins, ch. 5: single-phase bridge, cos u = 1 - 2 omega L I_d /
    # (sqrt(2) V_s), slope sqrt(2) V_s sin u / (2 L); V_s = 20 kV, L = 50 mH, I_d = 0.5 A.
    design = load_design(EXAMPLES / "precipitator-bridge-circuit.toml")
    result = run_circuit(design, trials=TRIALS)
    assert [s.label for s in result.stacks] == ["D1", "D2", "D3", "D4"]
    assert len(result.groups) == 1 and result.groups[0].labels == ("D1", "D2", "D3", "D4")
    assert any(f.code == "circuit.same_duty" and f.number("count") == 4 for f in result.findings)
    omega = 2 * math.pi * 50
    u = math.acos(1 - 2 * omega * 50e-3 * 0.5 / (math.sqrt(2) * 20e3))
    stack = result.stacks[0]
    assert stack.overlap_angle == pytest.approx(u)
    assert stack.di_dt == pytest.approx(math.sqrt(2) * 20e3 * math.sin(u) / (2 * 50e-3))
    assert stack.reverse_voltage == pytest.approx(math.sqrt(2) * 20e3)
    assert result.verdict == "pass"


def test_multiplier_reports_ripple_and_drop_and_checks_twelve_stacks_once():
    # Kuffel, Zaengl and Kuffel, High Voltage Engineering Fundamentals, ch. 2 (from memory):
    # n = 6, 1 mA, 40 kHz, 2.2 nF: I / (f C) = 11.36 V, ripple x 21, drop x 966 / 6.
    design = load_design(EXAMPLES / "multiplier-6stage-circuit.toml")
    result = run_circuit(design, trials=TRIALS)
    unit = 1e-3 / (40e3 * 2.2e-9)
    assert result.ripple == pytest.approx(unit * 21)
    assert result.drop == pytest.approx(unit * 966 / 6)
    assert len(result.stacks) == 12 and len(result.groups) == 1
    assert all(s.reverse_voltage == pytest.approx(10e3) for s in result.stacks)
    assert result.verdict == "pass"
    data = result.to_dict()
    assert data["ripple"] == pytest.approx(result.ripple) and len(data["stacks"]) == 12


def test_a_stack_no_string_can_hold_fails_with_the_arithmetic():
    # 10 kV (2 x 5 kV) on 4 x 2 kV at derating 0.8 = 6.4 kV: no built string can pass.
    text = _text("multiplier-6stage-circuit.toml").replace("series = 8", "series = 4")
    result = run_circuit(parse_design_text(text), trials=200)
    assert result.verdict == "fail"
    (finding,) = result.groups[0].result.impossible
    assert finding.code == "impossible.string_voltage"
    assert finding.number("voltage") == pytest.approx(10e3)
    assert finding.limit.number == pytest.approx(6.4e3)


def test_equal_stack_duties_group_into_one():
    # The grouping keys on the derived duty: stacks of equal duty share one check.
    design = load_design(EXAMPLES / "multiplier-6stage-circuit.toml")
    stacks, _, _ = circuit_stacks(design)
    assert len({s.duty for s in stacks}) == 1


@pytest.mark.parametrize("topology,factor", [("half-wave", 1.0), ("center-tap", 2.0),
                                             ("bridge", 1.0)])
def test_peak_reverse_voltage_of_each_resistive_topology(topology, factor):
    # Mohan, Undeland and Robbins, ch. 5 (from memory): a half-wave and a bridge diode block the
    # secondary's crest, a center-tap diode twice its half's crest.
    text = _text("precipitator-bridge-circuit.toml").replace(
        'topology = "bridge"', f'topology = "{topology}"').replace(
        'commutation_inductance = "50 mH"\n', "")
    stacks, _, _ = circuit_stacks(parse_design_text(text))
    assert stacks[0].reverse_voltage == pytest.approx(factor * math.sqrt(2) * 20e3)
    assert stacks[0].duty.waveform == "half-sine"
    # The natural turn-off of a half-sine: omega I_pk at its zero.
    assert stacks[0].di_dt == pytest.approx(2 * math.pi * 50 * stacks[0].forward_peak)
