"""Tests of stringcheck.solvers.electrothermal (electro-thermal equilibrium of a parallel group)."""

from __future__ import annotations

import math

import numpy as np
import pytest
from hypothesis import assume, given, settings
from hypothesis import strategies as st
from scipy.integrate import quad, quad_vec, solve_ivp
from scipy.optimize import brentq, fsolve
from scipy.special import lambertw

from stringcheck.solvers.electrothermal import (
    OVER_LIMIT,
    RUNAWAY,
    STABLE,
    Equilibrium,
    ParallelDevices,
    ParallelDuty,
    runaway_ambient,
    solve_equilibrium,
)

DEVICE = dict(
    threshold_voltage=0.80, slope_resistance=3e-3, forward_reference_temperature=25.0,
    resistance_reference_temperature=25.0,
    threshold_tempco=-2e-3, resistance_tempco=0.0, leakage_current=0.0,
    leakage_reference_voltage=1000.0, leakage_reference_temperature=25.0, doubling_temperature=10.0,
    voltage_exponent=0.5, recovery_charge=0.0, junction_to_sink=0.6,
    max_junction_temperature=1e9,
)
DUTY = dict(
    forward_current=60.0, waveform="dc", ambient=40.0, blocking_voltage=800.0, frequency=50.0,
    path_resistance=0.0, sink_to_ambient=0.2, heatsink="shared",
)


def _devices(**changes):
    return ParallelDevices(**{**DEVICE, **changes})


def _duty(**changes):
    return ParallelDuty(**{**DUTY, **changes})


def _share(equilibrium):
    return equilibrium.branch_average.max(axis=-1) / equilibrium.branch_average.mean(axis=-1)


# --- Semenov's thermal explosion, a closed form -------------------------------------------------
# N. N. Semenov, Z. Physik 48 (1928): T = T_a + R P_0 exp(a (T - T_0)) has a steady state iff
# Se = a R P_0 exp(a (T_a - T_0)) <= 1/e; the stable (lower) root is T = T_a - W_0(-Se) / a
# (Lambert W, principal branch), where dT'/dT = a R P = -W_0(-Se). A single device blocking a dc
# voltage with no forward current dissipates exactly V I_R(V) 2^((T - T_0) / T_double).

def _semenov_case(rate_doubling, resistance, power, number):
    """One blocking device with P = P_0 2^((T - 25) / T_double) at a given Semenov number."""
    rate = math.log(2.0) / rate_doubling
    ambient = 25.0 + math.log(number / (rate * resistance * power)) / rate
    devices = _devices(leakage_current=power / 1000.0, doubling_temperature=rate_doubling,
                       junction_to_sink=resistance)
    duty = _duty(forward_current=0.0, blocking_voltage=1000.0, sink_to_ambient=0.0,
                 ambient=ambient)
    return devices, duty, rate, ambient


@pytest.mark.parametrize("number", [0.05, 0.25, 0.35, 0.995 / math.e])
def test_semenov_lower_root_and_spectral_radius(number):
    devices, duty, rate, ambient = _semenov_case(10.0, 1.2, 0.8, number)
    equilibrium = solve_equilibrium(devices, duty)
    assert isinstance(equilibrium, Equilibrium)
    lower = -lambertw(-number, 0).real
    assert equilibrium.classification[0] == STABLE
    assert math.isclose(equilibrium.junction_temperature[0, 0, 0], ambient + lower / rate,
                        rel_tol=1e-10)
    assert math.isclose(equilibrium.spectral_radius[0], lower, rel_tol=1e-8)


@pytest.mark.parametrize(("doubling", "resistance", "power"), [(10.0, 1.2, 0.8), (7.0, 4.0, 0.05)])
def test_semenov_boundary_within_half_a_percent(doubling, resistance, power):
    # Stable at Se = 0.995 / e, runaway (no equilibrium) at 1.005 / e.
    below = solve_equilibrium(*_semenov_case(doubling, resistance, power, 0.995 / math.e)[:2])
    above = solve_equilibrium(*_semenov_case(doubling, resistance, power, 1.005 / math.e)[:2])
    assert below.classification[0] == STABLE and below.stable[0]
    assert above.classification[0] == RUNAWAY and not above.converged[0]


def test_runaway_ambient_finds_the_semenov_limit_for_a_batch():
    # Three trials with different a, R, P_0; the search starts 30 K below each limit.
    doubling = np.array([10.0, 7.0, 14.0])[:, None, None]
    resistance = np.array([1.2, 4.0, 0.5])[:, None, None]
    power = np.array([0.8, 0.05, 3.0])[:, None, None]
    rate = math.log(2.0) / doubling
    limit = (25.0 - (1.0 + np.log(rate * resistance * power)) / rate).ravel()
    devices = _devices(leakage_current=power / 1000.0, doubling_temperature=doubling,
                       junction_to_sink=resistance)
    duty = _duty(forward_current=0.0, blocking_voltage=1000.0, sink_to_ambient=0.0,
                 ambient=limit - 30.0)
    found = runaway_ambient(devices, duty, upper_limit=float(limit.max() + 50.0))
    number = (rate * resistance * power).ravel() * np.exp(rate.ravel() * (found.ambient - 25.0))
    np.testing.assert_allclose(number, 1.0 / math.e, rtol=5e-3)
    assert ((found.lower <= limit + 1e-9) & (limit <= found.upper + 0.05)).all()


def test_runaway_ambient_infinite_when_stable_to_the_limit_and_minus_infinite_when_lost():
    devices, duty, _, ambient = _semenov_case(10.0, 1.2, 0.8, 0.2)
    survives = runaway_ambient(devices, duty, upper_limit=ambient + 1.0)
    assert survives.ambient[0] == np.inf
    lost = _semenov_case(10.0, 1.2, 0.8, 0.5)
    assert runaway_ambient(*lost[:2], upper_limit=lost[3] + 10.0).ambient[0] == -np.inf


# --- Independent solution by scipy fsolve -------------------------------------------------------

def _reference_map(temperature, case, resistance_reference=25.0):
    """F(T) written out again with brentq for each instant and scipy quad_vec over the phase
    (V_T0 given at 25 degC, r_T at ``resistance_reference``)."""
    (threshold, resistance, tempco_v, tempco_r, rth, leak, bv, q_rr, sink, ambient, current,
     waveform, heatsink, frequency, path) = case
    temperature = temperature.reshape(threshold.shape)
    device_threshold = threshold + tempco_v * (temperature - 25.0)
    device_resistance = resistance * (1.0 + tempco_r * (temperature - resistance_reference))
    branch_threshold = device_threshold.sum(axis=-1)
    branch_resistance = device_resistance.sum(axis=-1) + path

    def split(total):
        def excess(voltage):
            return np.sum(np.maximum(voltage - branch_threshold, 0.0) / branch_resistance) - total

        low = branch_threshold.min()
        voltage = brentq(excess, low, low + total * branch_resistance.max() + 1.0, xtol=1e-15,
                         rtol=1e-15)
        amounts = np.maximum(voltage - branch_threshold, 0.0) / branch_resistance
        return np.concatenate([amounts, amounts**2])

    if waveform == "half-sine":
        # Branch c starts to conduct when the group current reaches
        # sum_b max(Theta_c - Theta_b, 0) / rho_b: give quad_vec those kinks of the integrand.
        onset = [np.sum(np.maximum(level - branch_threshold, 0.0) / branch_resistance)
                 for level in branch_threshold]
        peak = math.pi * current
        kinks = sorted({math.asin(i / peak) for i in onset if 0 < i < peak})
        kinks += [math.pi - k for k in kinks]
        moments = quad_vec(lambda theta: split(peak * math.sin(theta)), 0.0, math.pi,
                           epsabs=1e-11, epsrel=1e-11, points=kinks or None)[0] / (2.0 * math.pi)
    else:
        moments = split(current if waveform == "dc" else 2.0 * current)
        moments = moments * (1.0 if waveform == "dc" else 0.5)
    count = branch_threshold.size
    average, mean_square = moments[:count, None], moments[count:, None]
    power = device_threshold * average + device_resistance * mean_square
    # Leakage over the blocking half period, V sin reverse voltage, by quad (m = 0.5).
    factor = {"dc": 0.0, "square": 0.5,
              "half-sine": quad(lambda t: math.sin(t) ** 1.5, 0, math.pi)[0] / (2 * math.pi)}
    leakage = leak * (bv / 1000.0) ** 0.5 * 2.0 ** ((temperature - 25.0) / 10.0)
    power = power + factor[waveform] * bv * leakage
    power = power + (0.0 if waveform == "dc" else q_rr * bv * frequency)
    shared = power.sum() if heatsink == "shared" else power
    return (ambient + rth * power + sink * shared).ravel()


@pytest.mark.parametrize("seed", range(8))
def test_equilibrium_matches_fsolve_on_small_random_groups(seed):
    rng = np.random.default_rng(seed)
    branches, length = int(rng.integers(2, 4)), int(rng.integers(1, 3))
    shape = (branches, length)
    waveform = ["dc", "square", "half-sine"][seed % 3]
    heatsink = ["shared", "separate"][seed % 2]
    case = (rng.normal(0.85, 0.04, shape), rng.normal(3e-3, 4e-4, shape),
            rng.uniform(-2.5e-3, -1e-3, shape), rng.uniform(0.0, 4e-3, shape),
            rng.uniform(0.3, 0.9, shape), rng.uniform(1e-7, 2e-6, shape), 900.0, 4e-6, 0.15,
            40.0, float(rng.uniform(15.0, 50.0)) * branches, waveform, heatsink, 2e3,
            rng.uniform(0.0, 1e-3, branches))
    (threshold, resistance, tempco_v, tempco_r, rth, leak, bv, q_rr, sink, ambient,
     current) = case[:11]
    # Recovery at Q_rr = 4 uC per device with the default (upper-bound) tail fraction.
    devices = _devices(threshold_voltage=threshold, slope_resistance=resistance,
                       threshold_tempco=tempco_v, resistance_tempco=tempco_r,
                       junction_to_sink=rth, leakage_current=leak, recovery_charge=q_rr,
                       resistance_reference_temperature=125.0)
    duty = _duty(forward_current=current, waveform=waveform, heatsink=heatsink,
                 sink_to_ambient=sink, blocking_voltage=bv, frequency=2e3,
                 path_resistance=case[-1], ambient=ambient)
    equilibrium = solve_equilibrium(devices, duty)
    start = np.full(branches * length, ambient)
    # r_T given at 125 degC, V_T0 at 25 degC: each line referred from its own row's temperature.
    reference, info, _, message = fsolve(lambda t: t - _reference_map(t, case, 125.0), start,
                                         xtol=1e-12, full_output=True)
    assert np.abs(info["fvec"]).max() < 1e-9, message
    assert equilibrium.classification[0] == STABLE
    # The half-sine is integrated exactly per branch (solvers.parallel.phase_rule), so every
    # waveform meets quad_vec + fsolve to the solvers' tolerances.
    np.testing.assert_allclose(equilibrium.junction_temperature.ravel(), reference, rtol=0,
                               atol=1e-8)
    # Stability: spectral radius of dF/dT from central differences of the reference map
    # (numpy eigvals), which checks the current-redistribution terms of the solver's Jacobian.
    step = 1e-4
    columns = [(_reference_map(reference + step * unit, case, 125.0)
                - _reference_map(reference - step * unit, case, 125.0)) / (2 * step)
               for unit in np.eye(reference.size)]
    radius = np.abs(np.linalg.eigvals(np.array(columns).T)).max()
    assert math.isclose(equilibrium.spectral_radius[0], radius, rel_tol=1e-6)


def test_runaway_classification_agrees_with_a_heating_transient():
    # scipy solve_ivp of the heating transient dT/dt = F(T) - T from ambient (equal thermal
    # time constants), with F written out independently (_reference_map): it settles where
    # the solver reports a stable equilibrium and passes 1000 degC where it reports runaway.
    # SiC-like branches (r_T tempco +0.6 %/K) on one sink, at currents around their limit.
    rng = np.random.default_rng(11)
    shape = (3, 1)
    threshold, resistance = np.full(shape, 0.9), rng.uniform(8e-3, 1.2e-2, size=shape)
    tempco_r, rth = np.full(shape, 6e-3), np.full(shape, 0.8)
    currents = np.array([150.0, 260.0, 330.0, 450.0])
    devices = _devices(threshold_voltage=threshold, slope_resistance=resistance,
                       threshold_tempco=0.0, resistance_tempco=tempco_r, junction_to_sink=rth)
    duty = _duty(forward_current=currents, waveform="square", sink_to_ambient=0.1)
    equilibrium = solve_equilibrium(devices, duty)
    assert {STABLE, RUNAWAY} <= set(equilibrium.classification)

    def too_hot(_, temperature):
        return temperature.max() - 1000.0

    too_hot.terminal = True
    for trial, current in enumerate(currents):
        case = (threshold, resistance, 0.0, tempco_r, rth, 0.0, 800.0, 0.0, 0.1, 40.0, current,
                "square", "shared", 50.0, 0.0)
        transient = solve_ivp(lambda _, t: _reference_map(t, case) - t, (0.0, 400.0),
                              np.full(3, 40.0), method="LSODA", rtol=1e-10, atol=1e-10,
                              events=too_hot)
        final = transient.y[:, -1]
        if equilibrium.classification[trial] == STABLE:
            np.testing.assert_allclose(final, equilibrium.junction_temperature[trial].ravel(),
                                       atol=1e-4)
        else:
            assert final.max() >= 1000.0 - 1e-6


def test_over_junction_limit_is_reported_separately_from_runaway():
    devices = _devices(max_junction_temperature=np.array([[[200.0], [60.0]]]))
    equilibrium = solve_equilibrium(devices, _duty(forward_current=np.array([60.0])))
    assert equilibrium.stable[0] and equilibrium.classification[0] == OVER_LIMIT


def test_result_shapes_and_loss_bookkeeping():
    devices = _devices(threshold_voltage=np.array([0.80, 0.82, 0.79])[:, None],
                       leakage_current=1e-5, recovery_charge=3e-6)
    duty = _duty(forward_current=np.array([30.0, 90.0]), waveform="half-sine",
                 blocking_voltage=700.0)
    equilibrium = solve_equilibrium(devices, duty)
    assert equilibrium.junction_temperature.shape == (2, 3, 1)
    for name in ("branch_average", "branch_rms", "branch_peak"):
        assert getattr(equilibrium, name).shape == (2, 3)
    for name in ("converged", "stable", "spectral_radius", "classification"):
        assert getattr(equilibrium, name).shape == (2,)
    np.testing.assert_allclose(equilibrium.power, equilibrium.conduction_loss
                               + equilibrium.leakage_loss + equilibrium.recovery_loss)
    np.testing.assert_allclose(equilibrium.recovery_loss, 3e-6 * 700.0 * 50.0)
    # Kirchhoff: branch peaks add up to the group peak pi I_F(AV).
    np.testing.assert_allclose(equilibrium.branch_peak.sum(axis=-1), math.pi * duty.forward_current,
                               rtol=1e-12)


# --- Properties of the sign of the temperature coefficients -------------------------------------

branch_counts = st.integers(min_value=2, max_value=4)
waveforms = st.sampled_from(["dc", "half-sine", "square"])
heatsinks = st.sampled_from(["shared", "separate"])


@settings(max_examples=30, deadline=None)
@given(branch_counts.flatmap(lambda count: st.lists(
    st.floats(min_value=2e-3, max_value=2e-2), min_size=count, max_size=count)),
    st.floats(min_value=1e-3, max_value=1e-2), st.floats(min_value=0.1, max_value=2.0),
    st.floats(min_value=1.0, max_value=60.0), st.floats(min_value=1.05, max_value=3.0),
    waveforms, heatsinks)
def test_positive_resistance_tempco_shares_better_as_current_rises(resistances, tempco, rth,
                                                                  current, factor, waveform,
                                                                  heatsink):
    # A branch with more current runs hotter (its loss, sum_j w_j i_j v_j with v the common
    # voltage, grows with its current) and a positive r_T tempco (unipolar, SiC-like) then
    # raises its resistance: the share improves as the current, and so the heating, rises.
    # Equal V_T0 and thermal resistances isolate the effect. Control: without tempco the
    # share does not depend on the current (branches with equal thresholds split as 1 / r).
    count = len(resistances)
    currents = np.array([current, factor * current]) * count
    common = dict(slope_resistance=np.array(resistances)[:, None], threshold_tempco=0.0,
                  junction_to_sink=rth)
    duty = _duty(forward_current=currents, waveform=waveform, heatsink=heatsink)
    heated = solve_equilibrium(_devices(resistance_tempco=tempco, **common), duty)
    assume(heated.stable.all())
    shares = _share(heated)
    assert shares[1] <= shares[0] * (1 + 1e-9)
    if np.ptp(resistances) > 1e-3 * max(resistances):
        assert shares[1] < shares[0]  # the heating must show, not merely leave the share alone
    control = _share(solve_equilibrium(_devices(resistance_tempco=0.0, **common), duty))
    assert math.isclose(control[0], control[1], rel_tol=1e-9)


@settings(max_examples=30, deadline=None)
@given(branch_counts.flatmap(lambda count: st.lists(
    st.floats(min_value=0.70, max_value=0.90), min_size=count, max_size=count)),
    st.floats(min_value=2e-3, max_value=2e-2), st.floats(min_value=0.05, max_value=1.0),
    st.floats(min_value=1.05, max_value=3.0), st.floats(min_value=1.0, max_value=60.0),
    waveforms, heatsinks)
def test_negative_threshold_tempco_shares_worse_as_junctions_run_hotter(thresholds, resistance,
                                                                       rth, factor, current,
                                                                       waveform, heatsink):
    # V_T0 falling about 2 mV/K (Si PN, common practice): the branch with the lowest threshold
    # carries most, runs hottest, and its threshold drops further. Raising the thermal
    # resistance (same current, hotter and further apart junctions) never improves the share.
    # Control: without tempco the share does not depend on the thermal resistance.
    count = len(thresholds)
    common = dict(threshold_voltage=np.array(thresholds)[:, None], slope_resistance=resistance,
                  junction_to_sink=np.array([rth, factor * rth])[:, None, None])
    duty = _duty(forward_current=current * count, waveform=waveform, heatsink=heatsink)
    heated = solve_equilibrium(_devices(threshold_tempco=-2e-3, **common), duty)
    assume(heated.stable.all())
    shares = _share(heated)
    assert shares[1] >= shares[0] * (1 - 1e-9)
    if np.ptp(thresholds) > 1e-3 and (heated.branch_average > 0).all():
        assert shares[1] > shares[0]  # the heating must show, not merely leave the share alone
    control = _share(solve_equilibrium(_devices(threshold_tempco=0.0, **common), duty))
    assert math.isclose(control[0], control[1], rel_tol=1e-9)


def test_bad_heatsink_and_shapes_are_errors_naming_the_argument():
    from stringcheck.errors import StringcheckError

    with pytest.raises(StringcheckError, match="heatsink"):
        solve_equilibrium(_devices(), _duty(heatsink="common"))
    with pytest.raises(StringcheckError, match="devices"):
        solve_equilibrium(_devices(threshold_voltage=np.full((2, 2, 2, 2), 0.8)), _duty())
