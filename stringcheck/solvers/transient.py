"""Time-domain turn-off of a series diode string, batched over Monte Carlo trials.

Circuit. A source V_s in series with the commutation inductance L (and an optional loop
resistance R_L) drives the string of n stages. Stage k is a charge-control diode
(:mod:`stringcheck.physics.charge_control`) in parallel with its junction capacitance C_j, a shunt
conductance G (grading resistor 1/R_k plus leakage) and the grading capacitor C_k in series with
the damping resistor R_d. Forward orientation throughout: v_k is the anode-to-cathode voltage of
stage k, i the loop current in the diodes' forward direction; reported voltages are the reverse
ones, -v_k. The state of a stage is its voltage v, its stored charge q_M and the grading
capacitor's voltage w; the loop adds the current i:

.. math::

    C_j \\dot v &= i - i_D(v, q_M) - G v - (v - w) / R_d \\\\
    \\dot q_M &= i_D(v, q_M) - q_M / \\tau \\\\
    C_k \\dot w &= (v - w) / R_d \\\\
    L \\dot i &= -V_s - R_L i - \\textstyle\\sum_k v_k

With R_d = 0 the capacitor sits directly across the stage: C_k joins C_j and w is not used.

Initial condition. The string conducts I_F in steady state (q_M = tau i_D, v the forward drop,
w = v) and at t = 0 the source reverses to V_s: the current falls at (V_s + sum v_F) / L, crosses
zero and the diodes recover. The steady state is an exact equilibrium of the model, so the charge
left at the zero crossing is what the model's own recombination leaves; starting at the zero
crossing would need that charge from the closed form of an exact ramp. I_F = 0 starts from rest
(a step response).

Integrator. TR-BDF2 with gamma = 2 - sqrt(2) [1]_ [2]_: a trapezoidal stage to t + gamma h, then
a BDF2 stage to t + h. One-step (no restart cost after a rejection or a stage's snap), second
order, L-stable (the stiff junction and R_d C_j modes are damped, where trapezoidal alone would
reflect them), and both stages share one Newton matrix M - (gamma / 2) h J. The local error
C h^3 x''' (C = (-3 gamma^2 + 4 gamma - 2) / (12 (2 - gamma))) is estimated from the step's three
rates and filtered through the Newton matrix [3]_, so damped stiff components do not shrink the
step. Per trial, h <- h min(5, max(0.2, 0.9 err^(-1/3))) on the max norm of the error weighted by
rtol max(|x|, scale); a step whose Newton iteration fails is retried at h / 4.

Elimination. Within a Newton step the stages couple only through the loop current: eliminating
q_M and w of a stage leaves one scalar S_k per stage with dv_k = (rhs_k + a di) / S_k, and the
loop equation becomes one scalar equation for di (a Schur complement of the arrow-shaped
Jacobian onto the loop current). The work is O(n) per trial per iteration, done for all trials
and stages at once; the only Python loops are over time steps and Newton iterations. In forward
bias the Newton update of v is capped at 4 n V_T above max(v, 0), so the exponential changes by at
most e^4 per iteration (a damped Newton step [4]_).

Steps per trial. Every trial has its own step size and time. A common step would be set by the
hardest trial at each moment and would make a trial's result depend on its batch; here nothing
of one trial enters another's arithmetic, so a trial gives the same numbers in any batch or chunk
(as the studies' chunking requires). Finished trials leave the working set.

End and settled voltages. A trial ends when all its diodes have recovered and its ringing has
decayed (stage and capacitor voltages within ``settle_tolerance`` V_s / n of the settled values,
|i| within ``settle_tolerance`` times the current scale), or at ``duration``. The settled
voltages are the charge-balance share that the ringing decays towards, projected from the state:
stage k holds the charge C_j v_k + C_k w_k and will take a common further charge dQ, so
U_k = (charge_k + dQ) / (C_j + C_k) with sum U_k = V_s (grading resistors neglected over the
event, R C >> t_rr, as in :mod:`stringcheck.solvers.series_dynamic`).

References
----------
.. [1] R. E. Bank, W. M. Coughran, W. Fichtner, E. H. Grosse, D. J. Rose and R. K. Smith,
   "Transient simulation of silicon devices and circuits", *IEEE Transactions on Electron
   Devices*, 32(10), 1985 (TR-BDF2 and its error constant, from memory).
.. [2] M. E. Hosea and L. F. Shampine, "Analysis and implementation of TR-BDF2", *Applied
   Numerical Mathematics*, 20, 1996.
.. [3] E. Hairer and G. Wanner, *Solving Ordinary Differential Equations II: Stiff and
   Differential-Algebraic Problems*, 2nd ed., Springer, 1996, section IV.8 (error estimate
   filtered by the Newton matrix; section number from memory).
.. [4] P. Deuflhard, *Newton Methods for Nonlinear Problems*, Springer, 2004, chapter 3
   (damped Newton methods).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, fields, replace

import numpy as np
from numpy.typing import ArrayLike, NDArray

from stringcheck.physics.charge_control import (
    DEFAULT_EMISSION_COEFFICIENT,
    DEFAULT_SATURATION_CURRENT,
    forward_state,
    ramp_recovery,
    thermal_voltage,
)

from stringcheck.physics.junction_capacitance import junction_capacitance
from stringcheck.solvers.turn_off_newton import (
    StringCircuit,
    circuit_rates,
    factor_jacobian,
    newton_solve,
    node_capacitance_at,
    node_charge,
    settled_values,
    solve_linear,
)

__all__ = ["TurnOff", "TurnOffTrace", "simulate_turn_off"]

_GAMMA = 2.0 - math.sqrt(2.0)
_IMPLICIT = _GAMMA / 2.0  # = (1 - gamma) / (2 - gamma): the same Newton matrix in both stages
_FROM_STAGE = 1.0 / (_GAMMA * (2.0 - _GAMMA))
_FROM_START = (1.0 - _GAMMA) ** 2 / (_GAMMA * (2.0 - _GAMMA))
_ERROR_CONSTANT = (-3.0 * _GAMMA**2 + 4.0 * _GAMMA - 2.0) / (12.0 * (2.0 - _GAMMA))


@dataclass(frozen=True)
class TurnOffTrace:
    """Every step of a turn-off, for plots and tests (only with ``record=True``).

    Row r of each array is one pass of the integrator; a trial's own trajectory is the rows
    where ``accepted[:, trial]`` is true (row 0 is the initial state). Shapes ``(rows, trials)``
    or ``(rows, trials, n)``; values are NaN where the row was not accepted for that trial.

    Attributes
    ----------
    accepted, time, current
        Whether the row holds an accepted step of the trial; t [s] since the source reversed;
        loop current i [A], positive in the forward direction.
    voltage, capacitor_voltage, stored_charge
        Reverse voltage of each stage -v_k [V]; of each grading capacitor -w_k [V] (the stage
        voltage where R_d = 0); stored charge of each diode q_M [C].
    """

    accepted: NDArray[np.bool_]
    time: NDArray[np.float64]
    current: NDArray[np.float64]
    voltage: NDArray[np.float64]
    capacitor_voltage: NDArray[np.float64]
    stored_charge: NDArray[np.float64]


@dataclass(frozen=True)
class TurnOff:
    """Result of :func:`simulate_turn_off` for a batch of trials.

    Attributes
    ----------
    peak_voltage, peak_time
        Largest reverse voltage of each stage [V] and when it occurred, since the source
        reversed [s], shape ``(trials, n)``.
    settled_voltage, overshoot
        Charge-balance share the ringing decays towards (summing to V_s) and
        ``peak_voltage - settled_voltage`` [V], shape ``(trials, n)``.
    peak_current
        Peak reverse loop current, the string's I_RM [A], shape ``(trials,)``.
    damping_energy
        Energy dissipated in each damping resistor R_d over the event [J], ``(trials, n)``.
    converged
        Whether the integration reached its end, shape ``(trials,)``. False after a step size
        collapse, a non-finite state or ``max_steps``; the other fields then hold what was
        reached and must not be trusted.
    settled
        Whether the trial ended because its diodes had recovered and its ringing had decayed
        (rather than at ``duration``), shape ``(trials,)``.
    end_time, steps, rejected_steps
        When the trial's integration stopped [s], its accepted steps and its rejected steps
        (error too large or Newton failure), shape ``(trials,)``.
    trace
        The trajectory with ``record=True``, else None.
    """

    peak_voltage: NDArray[np.float64]
    peak_time: NDArray[np.float64]
    settled_voltage: NDArray[np.float64]
    overshoot: NDArray[np.float64]
    peak_current: NDArray[np.float64]
    damping_energy: NDArray[np.float64]
    converged: NDArray[np.bool_]
    settled: NDArray[np.bool_]
    end_time: NDArray[np.float64]
    steps: NDArray[np.int64]
    rejected_steps: NDArray[np.int64]
    trace: TurnOffTrace | None


def _parabola_peak(t0, t1, t2, y0, y1, y2):
    """Vertex of the parabola through three samples where the middle one is a local maximum."""
    h1, h2 = t1 - t0, t2 - t1
    with np.errstate(divide="ignore", invalid="ignore"):  # h1 = 0 on the first step
        d1, d2 = (y1 - y0) / h1, (y2 - y1) / h2
        curvature = (d2 - d1) / (h1 + h2)
    slope = d1 + curvature * h1
    is_peak = (y1 >= y0) & (y1 >= y2) & (curvature < 0.0)
    safe = np.where(is_peak, curvature, -1.0)
    return is_peak, y1 - slope * slope / (4.0 * safe), t1 - slope / (2.0 * safe)


def _broadcast(loop, stage):
    """Loop inputs to (T,) and stage inputs to (T, n); 1-D stage inputs are one trial."""
    loop = [np.asarray(x, dtype=float) for x in loop]
    stage = [np.asarray(x, dtype=float) for x in stage]
    shape = np.broadcast_shapes(*(x.shape for x in stage), *(x.shape + (1,) for x in loop))
    if len(shape) == 1:
        shape = (1,) + shape
    if len(shape) != 2:
        raise ValueError(f"stage inputs must broadcast to (trials, n), not {shape}")
    loop = [np.broadcast_to(x[..., None], shape)[:, 0].copy() for x in loop]
    stage = [np.broadcast_to(x, shape).copy() for x in stage]
    return loop, stage


def simulate_turn_off(
    source_voltage: ArrayLike,
    inductance: ArrayLike,
    forward_current: ArrayLike,
    lifetime: ArrayLike,
    transit_time: ArrayLike,
    junction_capacitance: ArrayLike,
    grading_resistance: ArrayLike,
    grading_capacitance: ArrayLike,
    damping_resistance: ArrayLike,
    *,
    leakage_conductance: ArrayLike = 0.0,
    loop_resistance: ArrayLike = 0.0,
    saturation_current: ArrayLike = DEFAULT_SATURATION_CURRENT,
    emission_coefficient: ArrayLike = DEFAULT_EMISSION_COEFFICIENT,
    temperature: ArrayLike = 300.0,
    duration: ArrayLike | None = None,
    max_step: ArrayLike | None = None,
    rtol: float = 1e-4,
    settle_tolerance: float = 1e-3,
    max_steps: int = 100_000,
    record: bool = False,
    junction_potential: ArrayLike | None = None,
    junction_exponent: ArrayLike | None = None,
) -> TurnOff:
    """Simulate the turn-off of a series string of charge-control diodes, trial by trial.

    Parameters
    ----------
    source_voltage
        Reverse source voltage V_s [V], > 0; scalar or shape ``(trials,)``.
    inductance
        Commutation inductance L [H], > 0; scalar or ``(trials,)``. The current falls at about
        V_s / L, so L = V_s / (di/dt) reproduces a given di/dt.
    forward_current
        Forward current before turn-off I_F [A], >= 0; scalar or ``(trials,)``.
    lifetime, transit_time
        Charge-control tau and T_M of each diode [s], > 0; ``(trials, n)`` or broadcastable
        (see :func:`stringcheck.physics.charge_control_fit.fit_charge_control`).
    junction_capacitance, grading_resistance, grading_capacitance, damping_resistance
        C_j [F] >= 0, R_k [ohm] > 0 (``inf`` for none), C_k [F] >= 0 with C_j + C_k > 0, and
        R_d [ohm] >= 0 in series with C_k (0, or below 1e-12 sqrt(L / (C_j + C_k)), puts C_k
        directly across the stage); each ``(trials, n)`` or broadcastable.
    leakage_conductance
        Leakage of each stage as a conductance [S], >= 0.
    loop_resistance
        R_L in series with L [ohm], >= 0; scalar or ``(trials,)``.
    saturation_current, emission_coefficient, temperature
        I_S [A], n [-] and T [K] of the diodes' q_E, broadcastable to ``(trials, n)``.
    duration
        Longest simulated time [s], scalar or ``(trials,)``. Default 2 t_1 + 20 tau_rr + 30 T_0
        with t_1 the largest closed-form time to I_RM at di/dt = V_s / L, tau_rr the largest
        tail time constant and T_0 = 2 pi sqrt(L C_series) the loop's ringing period.
    max_step
        Largest step [s], scalar or ``(trials,)``; default T_0 / 16.
    rtol
        Relative local error per step [-]; absolute floors are rtol times V_s / n for
        voltages, max(I_F, V_s sqrt(C_series / L)) for the current and tau I_F + C V_s / n for
        stored charges.
    settle_tolerance
        Fraction of those scales below which recovery and ringing count as finished [-].
    max_steps
        Most steps (accepted and rejected) per trial before it is reported as not converged.
    record
        Keep every step in :attr:`TurnOff.trace` (memory grows as steps x trials x n).
    junction_potential, junction_exponent
        phi [V] > 0 and gamma [1] in [0, 1] of the junction law C_j0 / (1 + V/phi)^gamma
        (:mod:`stringcheck.physics.junction_capacitance`), broadcastable to ``(trials, n)``;
        with them ``junction_capacitance`` is C_j0 and each node's charge follows the law
        (``None``: C_j constant, as before).

    Returns
    -------
    TurnOff
        Peaks, their times, settled voltages, overshoot, peak reverse current, damping energy
        and a convergence flag per trial.

    Notes
    -----
    The model, initial condition, integrator, step control, elimination and end criterion are
    described in the module docstring. Peak values are refined between steps by the vertex of
    the parabola through three consecutive accepted samples.

    References
    ----------
    .. [1] P. O. Lauritzen and C. L. Ma, "A simple diode model with reverse recovery", *IEEE
       Transactions on Power Electronics*, 6(2), 1991 (author order from memory).
    .. [2] M. E. Hosea and L. F. Shampine, "Analysis and implementation of TR-BDF2", *Applied
       Numerical Mathematics*, 20, 1996.
    """
    loop, stage = _broadcast(
        [source_voltage, inductance, forward_current, loop_resistance,
         np.nan if duration is None else duration, np.nan if max_step is None else max_step],
        [lifetime, transit_time, junction_capacitance, grading_resistance, grading_capacitance,
         damping_resistance, leakage_conductance, saturation_current, emission_coefficient,
         temperature] + ([] if junction_exponent is None else [
             1.0 if junction_potential is None else junction_potential, junction_exponent]),
    )
    with np.errstate(divide="ignore", invalid="ignore"):  # bad rows are flagged just below
        circuit, state = _build(loop, stage)
    trials, count = state.v.shape
    peak_voltage, peak_time = -state.v, np.zeros((trials, count))
    peak_current = np.maximum(-state.i, 0.0)
    settled_voltage, energy = np.full((trials, count), np.nan), np.zeros((trials, count))
    converged, settled = np.zeros(trials, dtype=bool), np.zeros(trials, dtype=bool)
    end_time, steps, rejected = np.zeros(trials), np.zeros(trials, int), np.zeros(trials, int)

    # Rows with a non-finite input or starting state, or without the positive L, tau, T_M,
    # C_j + C_k, duration and step limit the integration needs, are reported as not converged.
    valid = np.isfinite(np.concatenate(
        [np.stack(loop[:4] + [circuit.duration, circuit.max_step, circuit.current_scale], axis=1),
         state.v, state.q] + [getattr(circuit, f.name) for f in fields(StringCircuit)
                              if getattr(circuit, f.name) is not None
                              and getattr(circuit, f.name).ndim == 2], axis=1)).all(axis=1)
    valid &= (np.concatenate([circuit.lifetime, circuit.transit_time, circuit.stage_capacitance,
                              np.stack([circuit.inductance, circuit.duration, circuit.max_step],
                                       axis=1)], axis=1) > 0.0).all(axis=1)
    for output in (peak_voltage, peak_time, peak_current, energy):
        output[~valid] = np.nan
    rows = np.flatnonzero(valid)
    c, state = circuit.take(rows), state.take(rows)
    trace = [_trace_row(trials, rows, np.ones(rows.size, bool), c, state)] if record else None

    while rows.size:
        step = np.minimum(np.minimum(state.step, c.max_step), c.duration - state.time)
        new, new_rates, error, newton_ok = _trbdf2_step(c, state, step, rtol)
        accept = newton_ok & (error <= 1.0)
        factor = np.clip(0.9 * np.power(np.maximum(error, 1e-300), -1.0 / 3.0), 0.2, state.grow)
        next_step = step * np.where(newton_ok, factor, 0.25)

        # Peaks: the accepted sample, or the vertex of the parabola through the last three.
        t_new, u_new, j_new = state.time + step, -new.v, -new.i
        is_peak, vertex, vertex_time = _parabola_peak(*state.history_t[:, :, None],
                                                      t_new[:, None], *state.history_u, u_new)
        use_vertex = is_peak & (vertex > u_new)
        candidate = np.where(use_vertex, vertex, u_new)
        better = accept[:, None] & (candidate > peak_voltage[rows])
        peak_time[rows] = np.where(better, np.where(use_vertex, vertex_time, t_new[:, None]),
                                   peak_time[rows])
        peak_voltage[rows] = np.where(better, candidate, peak_voltage[rows])
        is_peak, vertex, _ = _parabola_peak(*state.history_t, t_new, *state.history_i, j_new)
        candidate = np.where(is_peak, np.maximum(vertex, j_new), j_new)
        peak_current[rows] = np.where(accept & (candidate > peak_current[rows]), candidate,
                                      peak_current[rows])

        state = _advance(state, new, new_rates, accept, next_step, t_new, u_new, j_new)
        steps[rows] += accept
        rejected[rows] += ~accept
        if record:
            trace.append(_trace_row(trials, rows, accept, c, state))

        # End of a trial: settled, out of time, or failed.
        target = settled_values(c, state.v, state.w)
        slack = settle_tolerance * c.voltage_scale[:, None]
        ringing_done = (
            (np.abs(-state.v - target) <= slack).all(axis=1)
            & ((np.abs(-state.w - target) <= slack) | (c.held_capacitance <= 0.0)).all(axis=1)
            & (np.abs(state.q) <= slack * c.stage_capacitance).all(axis=1)
            & (np.abs(state.i) <= settle_tolerance * c.current_scale)
        )
        out_of_time = state.time >= c.duration * (1.0 - 1e-12)
        failed = (~accept & (state.step < 1e-12 * c.duration))
        failed |= steps[rows] + rejected[rows] >= max_steps
        finished = (accept & (ringing_done | out_of_time)) | failed
        if finished.any():
            done = rows[finished]
            settled_voltage[done] = target[finished]
            energy[done] = state.energy[finished]
            converged[done] = ~failed[finished]
            settled[done] = ringing_done[finished] & accept[finished]
            end_time[done] = state.time[finished]
            keep = np.flatnonzero(~finished)
            rows, c, state = rows[keep], c.take(keep), state.take(keep)

    return TurnOff(
        peak_voltage=peak_voltage, peak_time=peak_time, settled_voltage=settled_voltage,
        overshoot=peak_voltage - settled_voltage, peak_current=peak_current,
        damping_energy=energy, converged=converged, settled=settled, end_time=end_time,
        steps=steps, rejected_steps=rejected,
        trace=TurnOffTrace(**{key: np.stack([row[key] for row in trace]) for key in trace[0]})
        if record else None,
    )


@dataclass(frozen=True)
class _State:
    """Working state of the trials still running: stage arrays (T, n), loop arrays (T,)."""

    v: NDArray[np.float64]
    q: NDArray[np.float64]
    w: NDArray[np.float64]
    i: NDArray[np.float64]
    energy: NDArray[np.float64]
    time: NDArray[np.float64]
    step: NDArray[np.float64]
    grow: NDArray[np.float64]  # largest step growth factor: 1 right after a rejection
    rates: tuple  # the right-hand sides at (v, q, w, i), see circuit_rates
    history_t: NDArray[np.float64]  # (2, T): the two previous accepted times
    history_u: NDArray[np.float64]  # (2, T, n): reverse stage voltages there
    history_i: NDArray[np.float64]  # (2, T): reverse loop current there

    def take(self, rows: NDArray[np.intp]) -> _State:
        def pick(name, value):
            if name == "rates":
                return tuple(r[rows] for r in value)
            return value[:, rows] if name.startswith("history") else value[rows]

        return _State(**{f.name: pick(f.name, getattr(self, f.name)) for f in fields(self)})


def _build(loop, stage):
    """Per-trial constants, default duration and step limit, and the forward starting state."""
    source, inductance, current, resistance, duration, max_step = loop
    tau, transit, c_j, r_grading, c_grading, r_damping, g_leak, i_sat, emission, temp = stage[:10]
    law = stage[10:]  # phi and gamma of the junction law, where C_j depends on the voltage
    count = tau.shape[1]
    zero_bias = c_j
    if law:
        # C_j at an even share of V_s sets the scales, the ringing period and the step limit;
        # the node holds C_j0, its charge follows the law (turn_off_newton.node_charge).
        c_j = junction_capacitance((source / count)[:, None], zero_bias,
                                   built_in_potential=law[0], grading_exponent=law[1])
    stage_capacitance = c_j + c_grading
    # R_d below 1e-12 of the stage's impedance sqrt(L / C) changes no result above rounding but
    # makes the equations needlessly stiff (and 1 / R_d overflows for a subnormal R_d): it puts
    # C_k across the stage, as R_d = 0 does.
    negligible = 1e-12 * np.sqrt(inductance[:, None] / stage_capacitance)
    merged = r_damping <= np.where(np.isfinite(negligible), negligible, 0.0)
    unused = merged | (c_grading <= 0.0)
    shunt = g_leak + 1.0 / r_grading
    series_capacitance = 1.0 / (1.0 / stage_capacitance).sum(axis=1)
    period = 2.0 * np.pi * np.sqrt(inductance * series_capacitance)
    ramp = ramp_recovery(tau, transit, current[:, None], (source / inductance)[:, None])
    blocking = (current[:, None] + ramp.peak_current) * (inductance / source)[:, None]
    blocking = np.where(current[:, None] > 0.0, blocking, 0.0)
    default = 2.0 * blocking.max(axis=1) + 20.0 * ramp.tail_time_constant.max(axis=1)
    duration = np.where(np.isnan(duration), default + 30.0 * period, duration)
    max_step = np.where(np.isnan(max_step), period / 16.0, max_step)
    voltage_scale = source / count
    circuit = StringCircuit(
        source=source, inductance=inductance, loop_resistance=resistance,
        saturation_charge=i_sat * tau, inverse_scale=1.0 / (emission * thermal_voltage(temp)),
        lifetime=tau, transit_time=transit,
        node_capacitance=np.where(merged, zero_bias + c_grading, zero_bias),
        branch_capacitance=np.where(unused, 1.0, c_grading),  # a placeholder where unused
        held_capacitance=np.where(merged, 0.0, c_grading),
        damping_conductance=np.where(unused, 0.0, 1.0 / np.where(unused, 1.0, r_damping)),
        shunt_conductance=shunt, stage_capacitance=stage_capacitance,
        voltage_scale=voltage_scale,
        current_scale=np.maximum(current, source * np.sqrt(series_capacitance / inductance)),
        charge_scale=tau * current[:, None] + stage_capacitance * voltage_scale[:, None],
        duration=duration, max_step=max_step,
        **(dict(junction_zero_bias=zero_bias, junction_potential=law[0],
                junction_exponent=law[1]) if law else {}),
    )
    start = forward_state(current[:, None], tau, transit, shunt_conductance=shunt,
                          saturation_current=i_sat, emission_coefficient=emission,
                          temperature=temp)
    v, zero = start.junction_voltage, np.zeros_like(current)
    i = current.copy()
    return circuit, _State(
        v=v, q=start.stored_charge, w=v.copy(), i=i, energy=np.zeros_like(v), time=zero,
        step=1e-3 * np.minimum(max_step * 16.0, period), grow=np.full_like(current, 5.0),
        rates=circuit_rates(circuit, v, start.stored_charge, v, i), history_t=np.stack([zero, zero]),
        history_u=np.stack([-v, -v]), history_i=np.stack([-i, -i]),
    )


def _trbdf2_step(c, state, step, rtol):
    """One TR-BDF2 step of every trial: the new state, its rates, the error norm, Newton's flag."""
    v, q, w, i = state.v, state.q, state.w, state.i
    weight_v = rtol * np.maximum(np.abs(v), c.voltage_scale[:, None])
    weight_q = rtol * np.maximum(np.abs(q), c.charge_scale)
    weight_i = rtol * np.maximum(np.abs(i), c.current_scale)
    weights = (weight_v, weight_q, weight_i)
    a = _IMPLICIT * step
    a2 = a[:, None]
    rate_v, rate_q, rate_w, rate_i = state.rates[:4]
    # Trapezoidal stage to t + gamma h, then BDF2 stage to t + h; the same matrix M - a J.
    rhs = (node_charge(c, v) + a2 * rate_v, q + a2 * rate_q,
           c.branch_capacitance * w + a2 * rate_w, c.inductance * i + a * rate_i)
    middle, ok_middle = newton_solve(c, a, rhs, (v, q, w, i), weights)
    middle_rates = circuit_rates(c, *middle)
    sv, sq, sw, si = middle
    rhs = (_FROM_STAGE * node_charge(c, sv) - _FROM_START * node_charge(c, v)
           if c.junction_exponent is not None else
           c.node_capacitance * (_FROM_STAGE * sv - _FROM_START * v),
           _FROM_STAGE * sq - _FROM_START * q,
           c.branch_capacitance * (_FROM_STAGE * sw - _FROM_START * w),
           c.inductance * (_FROM_STAGE * si - _FROM_START * i))
    (nv, nq, nw, ni), ok_end = newton_solve(c, a, rhs, middle, weights)
    new_rates = circuit_rates(c, nv, nq, nw, ni)

    # Local error 2 C h [(f1 - fg) / (1 - gamma) - (fg - f0) / gamma], filtered by M - a J.
    estimate = [2.0 * _ERROR_CONSTANT * (step if f0.ndim == 1 else step[:, None])
                * ((f1 - fg) / (1.0 - _GAMMA) - (fg - f0) / _GAMMA)
                for f0, fg, f1 in zip(state.rates[:4], middle_rates[:4], new_rates[:4])]
    factors = factor_jacobian(c, a, new_rates[4], node_capacitance_at(c, nv))
    ev, eq, ew, ei = solve_linear(c, a, factors, new_rates[4], *estimate)
    error = np.maximum.reduce([
        (np.maximum(np.abs(ev), np.abs(ew)) / np.maximum(weight_v, rtol * np.abs(nv))).max(axis=1),
        (np.abs(eq) / np.maximum(weight_q, rtol * np.abs(nq))).max(axis=1),
        np.abs(ei) / np.maximum(weight_i, rtol * np.abs(ni)),
    ])
    newton_ok = ok_middle & ok_end & np.isfinite(error)
    power = (state.rates[5], middle_rates[5], new_rates[5])
    at_middle = state.energy + 0.5 * _GAMMA * step[:, None] * (power[0] + power[1])
    energy = (_FROM_STAGE * at_middle - _FROM_START * state.energy
              + _IMPLICIT * step[:, None] * power[2])
    new = replace(state, v=nv, q=nq, w=nw, i=ni, energy=energy)
    return new, new_rates, np.where(newton_ok, error, np.inf), newton_ok


def _advance(state, new, new_rates, accept, next_step, t_new, u_new, j_new):
    """Take the new state where the step was accepted; keep the old one elsewhere."""
    rows = accept[:, None]

    def pick(old, fresh):
        return np.where(rows if np.ndim(old) == 2 else accept, fresh, old)

    return _State(
        v=pick(state.v, new.v), q=pick(state.q, new.q), w=pick(state.w, new.w),
        i=pick(state.i, new.i), energy=pick(state.energy, new.energy),
        time=pick(state.time, t_new), step=next_step, grow=np.where(accept, 5.0, 1.0),
        rates=tuple(pick(old, fresh) for old, fresh in zip(state.rates, new_rates)),
        history_t=np.where(accept, np.stack([state.history_t[1], t_new]), state.history_t),
        history_u=np.where(rows, np.stack([state.history_u[1], u_new]), state.history_u),
        history_i=np.where(accept, np.stack([state.history_i[1], j_new]), state.history_i),
    )


def _trace_row(trials, rows, accept, c, state):
    """One row of the trace in global trial order, NaN where not accepted."""
    held = np.where(c.held_capacitance > 0.0, state.w, state.v)
    values = {"time": state.time, "current": state.i, "voltage": -state.v,
              "capacitor_voltage": -held, "stored_charge": state.q}
    row = {"accepted": np.zeros(trials, dtype=bool)}
    row["accepted"][rows[accept]] = True
    for key, value in values.items():
        row[key] = np.full((trials,) + value.shape[1:], np.nan)
        row[key][rows[accept]] = value[accept]
    return row
