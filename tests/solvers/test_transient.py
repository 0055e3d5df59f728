"""Tests of stringcheck.solvers.transient (time-domain turn-off of a series string).

References outside the project: the closed-form step response of a series R-L-C circuit (any
circuit-theory text, e.g. C. K. Alexander and M. N. O. Sadiku, Fundamentals of Electric Circuits,
ch. 8, second-order circuits; chapter number from memory), the charge-control equations of P. O. Lauritzen and C. L. Ma (IEEE
Trans. Power Electronics 6(2), 1991) integrated by scipy's solve_ivp (Radau), Kirchhoff's voltage
law, and the charge-balance solver of stringcheck.solvers.series_dynamic (itself checked against
Rashid's textbook corner and brentq). Circuit values are invented.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy.integrate import solve_ivp

from stringcheck.physics.charge_control import (
    diode_current,
    emitter_charge,
    forward_state,
    ramp_recovery,
    thermal_voltage,
)
from stringcheck.physics.recovery import recovery_charge
from stringcheck.solvers.series_dynamic import solve_dynamic_sharing
from stringcheck.solvers.transient import TurnOff, TurnOffTrace, simulate_turn_off

SATURATION, EMISSION = 1e-9, 2.0  # the engine's defaults, restated for the reference ODE


def _series_rlc(voltage, resistance, inductance, capacitance, time):
    """Capacitor voltage and current of a series R-L-C circuit after a voltage step at t = 0."""
    alpha = resistance / (2.0 * inductance)
    omega0 = 1.0 / math.sqrt(inductance * capacitance)
    if alpha < omega0:
        omega = math.sqrt(omega0**2 - alpha**2)
        decay = np.exp(-alpha * time)
        phase = omega * time
        charge = voltage * (1 - decay * (np.cos(phase) + alpha / omega * np.sin(phase)))
        return charge, voltage / (inductance * omega) * decay * np.sin(omega * time)
    root = math.sqrt(alpha**2 - omega0**2)
    slow, fast = -alpha + root, -alpha - root
    ratio = (fast * np.exp(slow * time) - slow * np.exp(fast * time)) / (fast - slow)
    current = -voltage / inductance * (np.exp(slow * time) - np.exp(fast * time)) / (fast - slow)
    return voltage * (1.0 - ratio), current


def _trajectory(trace, trial=0):
    rows = trace.accepted[:, trial]
    return (trace.time[rows, trial], trace.current[rows, trial], trace.voltage[rows, trial],
            trace.capacitor_voltage[rows, trial])


@pytest.mark.parametrize("resistance", [60.0, 300.0])  # 2 sqrt(L/C) = 200 ohm: under, over
@pytest.mark.parametrize("where", ["loop", "damping"])
def test_uncharged_single_stage_is_a_series_rlc(resistance, where):
    # A diode with no stored charge (I_F = 0) blocks from the start, so one stage behind L is a
    # series R-L-C: R as the loop resistance with C = C_j + C_k directly across (R_d = 0), or R
    # as the damping resistor with C_j = 0. Closed-form step response (Alexander and Sadiku,
    # ch. 8). Tolerances: 5e-4 V_s on the trajectory and 2e-4 on the peak and I_RM (the global
    # error of this second-order method at rtol = 1e-5 is 3e-4 V_s here and falls as
    # rtol^(2/3), measured from 1e-3 to 1e-7), 1e-3 on the time of the peak.
    voltage, inductance, capacitance = 1000.0, 10e-6, 1e-9
    loop, damping = (resistance, 0.0) if where == "loop" else (0.0, resistance)
    junction = 0.2e-9 if where == "loop" else 0.0
    result = simulate_turn_off(
        voltage, inductance, 0.0, 1e-9, 1e-10, junction, np.inf, capacitance - junction, damping,
        loop_resistance=loop, duration=5e-6, rtol=1e-5, record=True)
    assert isinstance(result, TurnOff) and isinstance(result.trace, TurnOffTrace)
    assert result.converged.all()
    time, current, stage, held = _trajectory(result.trace)
    expected, expected_current = _series_rlc(voltage, resistance, inductance, capacitance, time)
    np.testing.assert_allclose(held[:, 0], expected, rtol=0, atol=5e-4 * voltage)
    np.testing.assert_allclose(-current, expected_current, rtol=0, atol=5e-4 * voltage / 100.0)
    # The stage itself: the capacitor plus the drop on R_d (zero where R_d = 0).
    np.testing.assert_allclose(stage[:, 0], expected + damping * expected_current,
                               rtol=0, atol=5e-4 * voltage)
    fine = np.linspace(0.0, result.end_time[0], 500_001)  # overdamped: ends once settled
    charge, flow = _series_rlc(voltage, resistance, inductance, capacitance, fine)
    peak = charge + damping * flow
    assert math.isclose(result.peak_voltage[0, 0], peak.max(), rel_tol=2e-4)
    if resistance < 200.0:  # an interior peak: at pi / omega_d when R is in the loop
        assert math.isclose(result.peak_time[0, 0], fine[peak.argmax()], rel_tol=1e-3)
    assert math.isclose(result.peak_current[0], flow.max(), rel_tol=2e-4)
    assert math.isclose(result.settled_voltage[0, 0], voltage, rel_tol=1e-12)


def _reference_string(voltage, inductance, current, lifetime, transit, junction, grading,
                      capacitor, damping, end):
    """The whole string by solve_ivp (Radau), written from the circuit and the paper's model."""
    count = lifetime.size
    scale = 1.0 / (EMISSION * float(thermal_voltage(300.0)))
    shunt = 1.0 / grading
    start = forward_state(current, lifetime, transit, shunt_conductance=shunt)

    def rates(_, state):
        v, q, w = state[:count], state[count:2 * count], state[2 * count:3 * count]
        i = state[3 * count]
        diode = (SATURATION * lifetime * np.expm1(scale * v) - q) / transit
        branch = (v - w) / damping
        return np.concatenate([(i - diode - shunt * v - branch) / junction, diode - q / lifetime,
                               branch / capacitor, [(-voltage - v.sum()) / inductance],
                               branch * (v - w)])

    v0 = start.junction_voltage
    initial = np.concatenate([v0, start.stored_charge, v0, [current], np.zeros(count)])
    floor = np.concatenate([np.full(count, voltage / count), lifetime * current,
                            np.full(count, voltage / count), [current], np.full(count, 1e-3)])
    solution = solve_ivp(rates, (0.0, end), initial, method="Radau", rtol=1e-8,
                         atol=1e-10 * floor, dense_output=True)
    assert solution.status == 0
    time = np.linspace(0.0, end, 200_001)
    state = solution.sol(time)
    reverse = -state[:count]
    return (reverse.max(axis=1), time[reverse.argmax(axis=1)], -state[3 * count].min(),
            state[3 * count + 1:, -1])


STRING = dict(  # three invented stages: lifetimes and transit times differ, all elements present
    lifetime=np.array([0.45e-6, 0.55e-6, 0.5e-6]), transit=np.array([0.1e-6, 0.12e-6, 0.08e-6]),
    junction=np.array([100e-12, 80e-12, 120e-12]), grading=np.array([1e6, 1.1e6, 0.9e6]),
    capacitor=np.array([10e-9, 9e-9, 11e-9]), damping=np.array([50.0, 40.0, 60.0]))


def test_string_matches_radau():
    # Independent integrator: scipy's Radau on the same equations at rtol 1e-8. Tolerances: 0.1 %
    # on peak voltages, their times and I_RM; 0.5 % on the damping energy (rtol = 1e-4 here).
    voltage, inductance, current, end = 3000.0, 60e-6, 100.0, 10e-6
    peaks, times, reverse_peak, energy = _reference_string(voltage, inductance, current,
                                                          *STRING.values(), end)
    result = simulate_turn_off(voltage, inductance, current, STRING["lifetime"],
                               STRING["transit"], STRING["junction"], STRING["grading"],
                               STRING["capacitor"], STRING["damping"], duration=end)
    assert result.converged.all()
    np.testing.assert_allclose(result.peak_voltage[0], peaks, rtol=1e-3)
    np.testing.assert_allclose(result.peak_time[0], times, rtol=1e-3)
    assert math.isclose(result.peak_current[0], reverse_peak, rel_tol=1e-3)
    np.testing.assert_allclose(result.damping_energy[0], energy, rtol=5e-3)
    # The stages differ, so the test would see a permutation or a wrong stage.
    assert np.ptp(peaks) > 0.1 * peaks.mean()


def test_kirchhoff_along_the_trajectory_and_settled_sum():
    # KVL around the loop, integrated: L (i(t) - I_F) = int_0^t (-V_s - sum_k v_k) dt at every
    # accepted step, with the integral by the trapezoidal rule on the accepted samples (an
    # independent quadrature; its error, O(h^2) per step, sets the tolerance 1e-3 L I_F).
    voltage, inductance, current = 3000.0, 60e-6, 100.0
    result = simulate_turn_off(voltage, inductance, current, STRING["lifetime"],
                               STRING["transit"], STRING["junction"], STRING["grading"],
                               STRING["capacitor"], STRING["damping"], record=True, rtol=1e-5)
    time, loop_current, stage, _ = _trajectory(result.trace)
    drive = -voltage + stage.sum(axis=1)  # -V_s - sum v_k with v_k the forward voltages
    flux = np.concatenate([[0.0], np.cumsum(0.5 * (drive[1:] + drive[:-1]) * np.diff(time))])
    np.testing.assert_allclose(inductance * (loop_current - current), flux, rtol=0,
                               atol=1e-3 * inductance * current)
    assert math.isclose(result.settled_voltage.sum(), voltage, rel_tol=1e-12)
    assert result.settled.all()


@pytest.mark.parametrize("capacitance", [10e-9, 30e-9])
def test_settled_voltages_follow_charge_balance(capacitance):
    # series_dynamic (charge balance) with each device's Q_rr from the model's ramp closed form
    # at di/dt = V_s / L. Conditions under which the two describe the same thing: R_k = inf (no
    # resistor discharge over the event) and enough damping that the ringing never swings a stage
    # back into forward conduction (with R_d -> 0 the first trough does, the conducting stages
    # clamp and the string equalises: charge balance no longer applies). R_d itself does not
    # enter the charge balance. Residual difference: once the first stage blocks, the loop's
    # di/dt is no longer exactly V_s / L, which moves the later stages' recovered charge; it is
    # below 0.1 % of V_s / n here, against a charge-balance spread (max - min) of 8-24 % of
    # V_s / n. Tolerance 0.3 % of V_s / n.
    voltage, inductance, current = 3000.0, 60e-6, 100.0
    lifetime = np.array([0.45e-6, 0.55e-6, 0.5e-6])
    result = simulate_turn_off(voltage, inductance, current, lifetime, 0.1e-6, 100e-12, np.inf,
                               capacitance, 20.0)
    charge = ramp_recovery(lifetime, 0.1e-6, current, voltage / inductance).recovery_charge
    balance = solve_dynamic_sharing(voltage, charge, capacitance + 100e-12).voltages
    assert result.settled.all()
    assert np.ptp(balance) > 0.04 * voltage / 3
    np.testing.assert_allclose(result.settled_voltage[0], balance, rtol=0,
                               atol=3e-3 * voltage / 3)


def _batch(trials, seed):
    rng = np.random.default_rng(seed)
    return dict(
        source_voltage=rng.uniform(2e3, 4e3, trials), inductance=rng.uniform(30e-6, 90e-6, trials),
        forward_current=rng.uniform(20.0, 150.0, trials),
        lifetime=0.5e-6 * np.exp(rng.normal(0.0, 0.3, (trials, 3))), transit_time=0.1e-6,
        junction_capacitance=100e-12, grading_resistance=1e6,
        grading_capacitance=rng.uniform(5e-9, 20e-9, (trials, 3)),
        damping_resistance=rng.uniform(10.0, 80.0, (trials, 1)))


def test_trials_do_not_depend_on_their_batch():
    # Per-trial steps: a trial's arithmetic never mixes with another's, so running it alone, in a
    # batch, or in a batch of another order gives bit-identical results.
    inputs = _batch(5, 3)
    together = simulate_turn_off(**inputs)
    order = np.array([3, 0, 4, 2, 1])
    shuffled = simulate_turn_off(**{key: value[order] if np.ndim(value) and np.shape(value)[0] == 5
                                    else value for key, value in inputs.items()})
    for trial in (0, 4):
        alone = simulate_turn_off(**{key: value[trial:trial + 1]
                                     if np.ndim(value) and np.shape(value)[0] == 5 else value
                                     for key, value in inputs.items()})
        for name in ("peak_voltage", "peak_time", "settled_voltage", "peak_current",
                     "damping_energy", "end_time", "steps"):
            np.testing.assert_array_equal(getattr(alone, name)[0], getattr(together, name)[trial])
    np.testing.assert_array_equal(shuffled.peak_voltage, together.peak_voltage[order])
    assert together.converged.all()


def test_failures_are_reported_not_hidden():
    # A NaN input, a stage with no capacitance at all, and a step budget too small to finish are
    # flagged per trial; the other trials are not affected.
    lifetime = np.array([[0.5e-6, np.nan], [0.5e-6, 0.6e-6], [0.5e-6, 0.6e-6]])
    capacitor = np.array([[10e-9, 10e-9], [10e-9, 10e-9], [10e-9, 0.0]])
    junction = np.array([[100e-12], [100e-12], [0.0]])
    result = simulate_turn_off(3000.0, 60e-6, 100.0, lifetime, 0.1e-6, junction, 1e6, capacitor,
                               20.0)
    assert result.converged.tolist() == [False, True, False]
    assert np.isnan(result.peak_voltage[[0, 2]]).all()
    assert np.isfinite(result.peak_voltage[1]).all()
    short = simulate_turn_off(3000.0, 60e-6, 100.0, lifetime[1:2], 0.1e-6, 100e-12, 1e6, 10e-9,
                              20.0, max_steps=30)
    assert not short.converged[0] and not short.settled[0]


stage_counts = st.integers(min_value=2, max_value=4)


@settings(max_examples=10, deadline=None)
@given(stage_counts.flatmap(lambda n: st.tuples(
    st.lists(st.floats(min_value=0.3e-6, max_value=0.8e-6), min_size=n, max_size=n),
    st.lists(st.floats(min_value=5e-9, max_value=20e-9), min_size=n, max_size=n),
    st.floats(min_value=10.0, max_value=80.0), st.permutations(range(n)))))
def test_permuting_stages_permutes_the_peaks(case):
    # Series elements commute: reordering the stages reorders the results. Both orders run as two
    # trials of one batch (batch independence is tested above). Tolerance 1e-3 V_s / n: the sums
    # over stages round differently, so the step sequences may differ within rtol = 1e-4.
    lifetime, capacitance, damping, order = case
    lifetime, capacitance = np.array(lifetime), np.array(capacitance)
    order = np.array(order)
    count = lifetime.size
    result = simulate_turn_off(1000.0 * count, 20e-6 * count, 80.0,
                               np.stack([lifetime, lifetime[order]]), 0.1e-6, 100e-12, 1e6,
                               np.stack([capacitance, capacitance[order]]), damping)
    assert result.converged.all()
    np.testing.assert_allclose(result.peak_voltage[1], result.peak_voltage[0][order], rtol=0,
                               atol=1.0)
    np.testing.assert_allclose(result.settled_voltage[1], result.settled_voltage[0][order],
                               rtol=0, atol=1.0)


@settings(max_examples=8, deadline=None)
@given(st.lists(st.floats(min_value=0.3e-6, max_value=0.8e-6), min_size=3, max_size=3),
       st.floats(min_value=2e-9, max_value=30e-9), st.floats(min_value=1.1, max_value=3.0),
       st.floats(min_value=10.0, max_value=200.0))
def test_more_grading_capacitance_never_raises_the_worst_peak(lifetime, capacitance, factor,
                                                               damping):
    # Equal grading capacitors on devices that differ in Q_rr (through tau): a larger C never
    # raises the worst stage's peak. Not a theorem here (C also changes the loop's I_RM and the
    # damping ratio); found to hold in 400 random cases with R_d from 1 ohm to 3 kohm before
    # this test was written. The ranges here keep each example short (a lightly damped string
    # rings long, a heavily overdamped one settles slowly). Tolerance 1e-3 relative (integration
    # error at rtol = 1e-4).
    lifetime = np.array(lifetime)
    result = simulate_turn_off(3000.0, 60e-6, 100.0, np.stack([lifetime, lifetime]), 0.1e-6,
                               100e-12, np.inf, np.array([[capacitance], [capacitance * factor]]),
                               damping)
    assert result.converged.all()
    assert result.peak_voltage[1].max() <= result.peak_voltage[0].max() * (1 + 1e-3)


def test_a_negligible_damping_resistance_acts_as_none():
    # Found by hypothesis: a positive R_d so small that 1 / R_d overflows (here 1e-320 ohm) gave
    # an infinite conductance and a trial flagged as failed, and R_d = 1e-300 ohm ran through
    # NaN Newton iterates. Physically it is R_d = 0 (C_k across the stage), which the engine now
    # uses below 1e-12 sqrt(L / (C_j + C_k)): the same constants, so bit-identical results. A
    # NaN R_d is still reported as not converged.
    inputs = dict(source_voltage=3000.0, inductance=60e-6, forward_current=100.0,
                  lifetime=STRING["lifetime"], transit_time=STRING["transit"],
                  junction_capacitance=STRING["junction"], grading_resistance=STRING["grading"],
                  grading_capacitance=STRING["capacitor"], duration=10e-6)
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # no overflow or invalid value on the way
        tiny = simulate_turn_off(**inputs,
                                 damping_resistance=np.array([[1e-320], [1e-300], [1e-12]]))
    none = simulate_turn_off(**inputs, damping_resistance=0.0)
    assert tiny.converged.all()
    for name in ("peak_voltage", "peak_time", "settled_voltage", "peak_current", "end_time"):
        for trial in range(3):
            np.testing.assert_array_equal(getattr(tiny, name)[trial], getattr(none, name)[0])
    assert not simulate_turn_off(**inputs, damping_resistance=np.nan).converged[0]


def _crossing(time, values, level, start):
    """First time at or after index ``start`` where ``values`` falls to ``level`` (linear)."""
    index = start + int(np.flatnonzero(values[start:] <= level)[0])
    before, after = values[index - 1], values[index]
    return time[index - 1] + (time[index] - time[index - 1]) * (before - level) / (before - after)


@pytest.mark.parametrize(
    "lifetime, transit, forward, di_dt, softness",
    [(1e-6, 0.05e-6, 100.0, 20e6, 0.05),  # snappy: tail tau_rr = 0.05 t_a
     (1e-6, 1e-6, 100.0, 20e6, 1.0)],     # soft: tau_rr = t_a
)
def test_one_diode_under_a_ramp_recovery_time_and_triangle_charge(lifetime, transit, forward,
                                                                  di_dt, softness):
    # One diode behind L = V_s / (di/dt), with a small C_j and an R-C snubber (R = sqrt(L / C))
    # that keeps the snap-off from swinging it back into conduction. Measured on the simulated
    # waveform of the diode's own current i_D = (q_E - q_M) / T_M (recomputed from the trace with
    # physics.charge_control): I_RM, t_rr from the zero crossing to 25 % of I_RM on the tail
    # (common practice; stringcheck.physics.recovery.RECOVERY_END_FRACTION) and Q_rr, the
    # integral of the reverse current. Sources: the closed forms of the model's ramp recovery
    # (Lauritzen and Ma 1991; derived in physics.charge_control.ramp_recovery), tolerance 0.5 %
    # (the ramp is (V_s + v_F) / L, 0.13 % steeper, and the snubber takes some charge; measured
    # 0.02-0.15 %); and the triangle Q_rr = I_RM t_rr / 2 of physics.recovery (Rashid ch. 2).
    # The model's tail is exponential, not triangular: with t_a = I_RM / a and s = tau_rr / t_a,
    # t_rr = t_a + tau_rr ln 4 and Q_rr = I_RM (t_a / 2 + tau_rr), so
    #   (I_RM t_rr / 2) / Q_rr = (1 + 2 s ln 2) / (1 + 2 s),
    # between ln 2 (very soft) and 1 (abrupt). The triangle therefore holds only to 1 - ln 2 = 31 %
    # in general within this model: 2.8 % low at s = 0.05, 20 % low at s = 1. The measured
    # ratio follows the exponential-tail formula within 0.5 %. (Checked once with the engine's
    # recombination q_M / (1.2 tau): I_RM off by 20-30 %, both cases fail.)
    voltage = 1000.0
    inductance, snubber = voltage / di_dt, 10e-9
    result = simulate_turn_off(voltage, inductance, forward, lifetime, transit, 10e-12, np.inf,
                               snubber, math.sqrt(inductance / snubber), rtol=1e-5, record=True)
    assert result.converged.all()
    rows = result.trace.accepted[:, 0]
    time = result.trace.time[rows, 0]
    stage = -result.trace.voltage[rows, 0, 0]
    stored = result.trace.stored_charge[rows, 0, 0]
    diode = diode_current(emitter_charge(stage, lifetime), stored, transit)

    zero = _crossing(time, diode, 0.0, 1)
    peak_index = int(np.argmin(diode))
    peak = -diode[peak_index]
    end = _crossing(time, -diode, 0.25 * peak, peak_index)
    recovery_time = end - zero
    after = time > zero
    charge = np.trapezoid(np.concatenate([[0.0], -diode[after]]),
                          np.concatenate([[zero], time[after]]))

    closed = ramp_recovery(lifetime, transit, forward, di_dt)
    assert math.isclose(closed.tail_time_constant / closed.rise_time, softness, rel_tol=0.05)
    assert math.isclose(peak, closed.peak_current, rel_tol=5e-3)
    assert math.isclose(recovery_time, closed.recovery_time, rel_tol=5e-3)
    assert math.isclose(charge, closed.recovery_charge, rel_tol=5e-3)
    triangle = recovery_charge(peak, recovery_time)
    tail = closed.tail_time_constant / closed.rise_time
    expected = (1.0 + 2.0 * tail * math.log(2.0)) / (1.0 + 2.0 * tail)
    assert math.isclose(triangle / charge, expected, rel_tol=5e-3)
    assert math.log(2.0) < triangle / charge < 1.0
