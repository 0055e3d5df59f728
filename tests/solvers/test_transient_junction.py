"""The turn-off engine with a voltage-dependent junction capacitance C_j(V) (issue 17,
capacitive devices), against scipy's solve_ivp (Radau) of the same two-stage string written
from the circuit: C_j(V) dv/dt = i - i_D - G v - (v - w) / R_d with the junction law
C_j0 / (1 + V/phi)^gamma (Sze and Ng, 3rd ed., ch. 2) in reverse bias and C_j0 in forward bias,
and the charge-control diode of Lauritzen and Ma (IEEE Trans. Power Electronics 6(2), 1991).
Circuit values are invented."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy.integrate import solve_ivp

from stringcheck.physics.charge_control import forward_state, thermal_voltage
from stringcheck.physics.junction_capacitance import junction_capacitance
from stringcheck.solvers.transient import simulate_turn_off

SATURATION, EMISSION = 1e-9, 2.0  # the engine's defaults, restated for the reference ODE

STAGES = dict(lifetime=np.array([40e-9, 60e-9]), transit=np.array([10e-9, 12e-9]),
              zero_bias=np.array([600e-12, 450e-12]), grading=np.array([2e6, 2.2e6]),
              capacitor=np.array([100e-12, 120e-12]), damping=np.array([20.0, 25.0]))
PHI, GAMMA = np.array([1.2, 1.0]), np.array([0.5, 0.45])


def _reference(voltage, inductance, current, end):
    count = 2
    s = STAGES
    scale = 1.0 / (EMISSION * float(thermal_voltage(300.0)))
    shunt = 1.0 / s["grading"]
    start = forward_state(current, s["lifetime"], s["transit"], shunt_conductance=shunt)

    def capacitance(v):
        return np.where(v > 0, s["zero_bias"], junction_capacitance(
            np.maximum(-v, 0.0), s["zero_bias"], built_in_potential=PHI, grading_exponent=GAMMA))

    def rates(_, state):
        v, q, w, i = state[:count], state[count:2 * count], state[2 * count:3 * count], state[-1]
        diode = (SATURATION * s["lifetime"] * np.expm1(scale * v) - q) / s["transit"]
        branch = (v - w) / s["damping"]
        return np.concatenate([(i - diode - shunt * v - branch) / capacitance(v),
                               diode - q / s["lifetime"], branch / s["capacitor"],
                               [(-voltage - v.sum()) / inductance]])

    v0 = start.junction_voltage
    initial = np.concatenate([v0, start.stored_charge, v0, [current]])
    floor = np.concatenate([np.full(count, voltage / count), s["lifetime"] * current,
                            np.full(count, voltage / count), [current]])
    solution = solve_ivp(rates, (0.0, end), initial, method="Radau", rtol=1e-8,
                         atol=1e-10 * floor, dense_output=True)
    assert solution.status == 0
    time = np.linspace(0.0, end, 30_001)
    reverse = -solution.sol(time)[:count]
    return reverse.max(axis=1), lambda t: -solution.sol(t)[:count]


@pytest.mark.slow
def test_two_stage_string_with_junction_law_matches_radau():
    # Tolerances: 0.2 % on the peaks (the engine at rtol = 1e-5), 0.5 % of V_s on the stage
    # voltages where the engine ends (settled, or at the end of the window).
    voltage, inductance, current, end = 1200.0, 2e-6, 8.0, 3e-6
    peaks, late = _reference(voltage, inductance, current, end)
    s = STAGES
    result = simulate_turn_off(voltage, inductance, current, s["lifetime"], s["transit"],
                               s["zero_bias"], s["grading"], s["capacitor"], s["damping"],
                               junction_potential=PHI, junction_exponent=GAMMA, duration=end,
                               rtol=1e-5, record=True)
    assert result.converged.all()
    np.testing.assert_allclose(result.peak_voltage[0], peaks, rtol=2e-3)
    rows = result.trace.accepted[:, 0]
    last = result.trace.time[rows, 0][-1]
    np.testing.assert_allclose(result.trace.voltage[rows, 0][-1], late(last), rtol=0,
                               atol=5e-3 * voltage)
    # The settled share it reports is where the reference is heading (ringing decayed).
    np.testing.assert_allclose(result.settled_voltage[0], late(last), rtol=0, atol=1e-2 * voltage)
    # The law matters here: a constant C_j0 gives visibly different peaks.
    constant = simulate_turn_off(voltage, inductance, current, s["lifetime"], s["transit"],
                                 s["zero_bias"], s["grading"], s["capacitor"], s["damping"],
                                 duration=end, rtol=1e-5)
    assert np.max(np.abs(constant.peak_voltage[0] - peaks) / peaks) > 1e-2


def test_zero_exponent_is_the_constant_capacitance_engine():
    # gamma = 0 is C_j = C_j0 at every voltage: the same turn-off as the constant engine.
    s = STAGES
    args = (1200.0, 2e-6, 8.0, s["lifetime"], s["transit"], s["zero_bias"], s["grading"],
            s["capacitor"], s["damping"])
    law = simulate_turn_off(*args, junction_potential=1.0, junction_exponent=0.0, duration=0.3e-6,
                            rtol=1e-3)
    constant = simulate_turn_off(*args, duration=0.3e-6, rtol=1e-3)
    np.testing.assert_allclose(law.peak_voltage, constant.peak_voltage, rtol=1e-6)
    np.testing.assert_allclose(law.settled_voltage, constant.settled_voltage, rtol=1e-6)
    assert law.peak_voltage.max() > 600.0  # the window holds the recovery
    assert math.isclose(law.settled_voltage.sum(), 1200.0, rel_tol=1e-9)
