"""The implicit step's Newton solve of the string's turn-off circuit (used by solvers/transient.py).

The stages couple only through the loop current, so each Newton iteration eliminates the stages onto
the loop current in O(n) (an arrow-shaped Jacobian, solved by block elimination), vectorized over
trials; the iteration is damped in forward bias, where the exponential diode law would overshoot.
The equations, the integration formula and the sources are in the docstring of
:mod:`stringcheck.solvers.transient`.

References
----------
.. [1] P. Deuflhard, *Newton Methods for Nonlinear Problems*, Springer, 2004, chapter 3
   (damped Newton methods).
"""

from __future__ import annotations

from dataclasses import dataclass, fields

import numpy as np
from numpy.typing import NDArray

from stringcheck.physics.junction_capacitance import junction_capacitance, junction_charge

_NEWTON_TOLERANCE = 0.03
_NEWTON_ITERATIONS = 10
_FORWARD_CAP = 4.0  # largest rise of v per Newton iteration in forward bias [n V_T]


@dataclass(frozen=True)
class StringCircuit:
    """Per-trial constants of the working set; loop arrays (T,), stage arrays (T, n)."""

    source: NDArray[np.float64]
    inductance: NDArray[np.float64]
    loop_resistance: NDArray[np.float64]
    saturation_charge: NDArray[np.float64]
    inverse_scale: NDArray[np.float64]
    lifetime: NDArray[np.float64]
    transit_time: NDArray[np.float64]
    node_capacitance: NDArray[np.float64]
    branch_capacitance: NDArray[np.float64]
    held_capacitance: NDArray[np.float64]
    damping_conductance: NDArray[np.float64]
    shunt_conductance: NDArray[np.float64]
    stage_capacitance: NDArray[np.float64]
    voltage_scale: NDArray[np.float64]
    current_scale: NDArray[np.float64]
    charge_scale: NDArray[np.float64]
    duration: NDArray[np.float64]
    max_step: NDArray[np.float64]
    # The junction law C_j0 / (1 + V/phi)^gamma of each stage (None: C_j constant, inside
    # node_capacitance); node_capacitance then holds C_j0 (plus a merged grading capacitor).
    junction_zero_bias: NDArray[np.float64] | None = None
    junction_potential: NDArray[np.float64] | None = None
    junction_exponent: NDArray[np.float64] | None = None

    def take(self, rows: NDArray[np.intp]) -> StringCircuit:
        return StringCircuit(**{f.name: None if getattr(self, f.name) is None else
                                getattr(self, f.name)[rows] for f in fields(self)})


def node_charge(c, v):
    """Charge of each stage's node capacitance at v [C] (forward orientation): C v for a constant
    C_j; with the junction law, -Q_c(-v) of the junction in reverse bias (C_j0 v in forward bias,
    where the diffusion charge q_M dominates) plus the merged grading capacitor's C v."""
    if c.junction_exponent is None:
        return c.node_capacitance * v
    reverse = np.maximum(-v, 0.0)
    junction = np.where(v > 0.0, c.junction_zero_bias * v, -junction_charge(
        reverse, c.junction_zero_bias, built_in_potential=c.junction_potential,
        grading_exponent=c.junction_exponent))
    return (c.node_capacitance - c.junction_zero_bias) * v + junction


def node_capacitance_at(c, v):
    """d(node charge)/dv at v [F]: ``node_capacitance``, or with the junction law C_j(-v)."""
    if c.junction_exponent is None:
        return c.node_capacitance
    junction = junction_capacitance(np.maximum(-v, 0.0), c.junction_zero_bias,
                                    built_in_potential=c.junction_potential,
                                    grading_exponent=c.junction_exponent)
    return c.node_capacitance - c.junction_zero_bias + junction


def circuit_rates(c, v, q, w, i):
    """Right-hand sides M x' = f(x), the diode's dI_D/dv and the damping-resistor power."""
    growth = np.exp(np.minimum(v * c.inverse_scale, 300.0))
    diode = (c.saturation_charge * (growth - 1.0) - q) / c.transit_time
    slope = c.saturation_charge * c.inverse_scale * growth / c.transit_time
    branch = c.damping_conductance * (v - w)
    rate_v = i[:, None] - diode - c.shunt_conductance * v - branch
    rate_q = diode - q / c.lifetime
    rate_i = -c.source - c.loop_resistance * i - v.sum(axis=1)
    return rate_v, rate_q, branch, rate_i, slope, branch * (v - w)


def factor_jacobian(c, a, slope, capacitance=None):
    """Pivots of M - a J after eliminating q_M and w of every stage (Schur complement);
    ``capacitance``: dM/dv of the nodes where C_j depends on v (default ``node_capacitance``)."""
    a2 = a[:, None]
    pivot_q = 1.0 + a2 / c.transit_time + a2 / c.lifetime
    pivot_w = c.branch_capacitance + a2 * c.damping_conductance
    pivot_v = (
        (c.node_capacitance if capacitance is None else capacitance)
        + a2 * c.shunt_conductance
        + a2 * slope * (1.0 + a2 / c.lifetime) / pivot_q
        + a2 * c.damping_conductance * c.branch_capacitance / pivot_w
    )
    pivot_i = c.inductance + a * c.loop_resistance + a * a * (1.0 / pivot_v).sum(axis=1)
    return pivot_q, pivot_w, pivot_v, pivot_i


def solve_linear(c, a, factors, slope, bv, bq, bw, bi, room=None):
    """(M - a J) dx = b by the Schur complement; dv capped at ``room`` before back substitution."""
    pivot_q, pivot_w, pivot_v, pivot_i = factors
    a2 = a[:, None]
    reduced = bv + (a2 / c.transit_time) * bq / pivot_q + a2 * c.damping_conductance * bw / pivot_w
    di = (bi - a * (reduced / pivot_v).sum(axis=1)) / pivot_i
    dv = (reduced + a2 * di[:, None]) / pivot_v
    if room is not None:
        dv = np.minimum(dv, room)
    dq = (bq + a2 * slope * dv) / pivot_q
    return dv, dq, (bw + a2 * c.damping_conductance * dv) / pivot_w, di


def newton_solve(c, a, rhs, start, weights, iterations=_NEWTON_ITERATIONS):
    """Solve M x - a f(x) = rhs for every trial; returns x and a convergence flag per trial.

    Once fewer than half of the trials are still iterating, the rest continue on their own
    (a recursive call on the subset): the same arithmetic per trial, less work per iteration.
    """
    v, q, w, i = start
    weight_v, weight_q, weight_i = weights
    active = np.ones(i.shape, dtype=bool)
    converged = np.zeros(i.shape, dtype=bool)
    cap = _FORWARD_CAP / c.inverse_scale
    a2 = a[:, None]
    for iteration in range(iterations):
        rate_v, rate_q, rate_w, rate_i, slope, _ = circuit_rates(c, v, q, w, i)
        bv = rhs[0] - node_charge(c, v) + a2 * rate_v
        bq = rhs[1] - q + a2 * rate_q
        bw = rhs[2] - c.branch_capacitance * w + a2 * rate_w
        bi = rhs[3] - c.inductance * i + a * rate_i
        room = np.maximum(np.maximum(v, 0.0) + cap - v, 0.0)
        factors = factor_jacobian(c, a, slope, node_capacitance_at(c, v))
        dv, dq, dw, di = solve_linear(c, a, factors, slope, bv, bq, bw, bi, room)
        size = np.maximum(
            np.max(np.maximum(np.abs(dv) / weight_v, np.abs(dw) / weight_v), axis=1),
            np.maximum(np.max(np.abs(dq) / weight_q, axis=1), np.abs(di) / weight_i),
        )
        rows = active[:, None]
        v = np.where(rows, v + dv, v)
        q = np.where(rows, q + dq, q)
        w = np.where(rows, w + dw, w)
        i = np.where(active, i + di, i)
        done = active & (size <= _NEWTON_TOLERANCE)
        converged |= done
        active &= ~done & np.isfinite(size)
        left = np.flatnonzero(active)
        if left.size == 0 or iteration + 1 == iterations:
            break
        if 2 * left.size < active.size:
            (v[left], q[left], w[left], i[left]), converged[left] = newton_solve(
                c.take(left), a[left], tuple(part[left] for part in rhs),
                (v[left], q[left], w[left], i[left]), tuple(part[left] for part in weights),
                iterations - iteration - 1)
            break
    return (v, q, w, i), converged


def settled_values(c, v, w):
    """Charge-balance reverse voltages the ringing decays towards (module notes); with the
    junction law, the balance linearised about the present stage voltages (exact once settled)."""
    if c.junction_exponent is not None:
        capacitance = node_capacitance_at(c, v) + c.held_capacitance
        inverse = 1.0 / capacitance
        # Stage k holds the charge it would hold with node and capacitor at -v, plus
        # held (v - w); a common further charge dQ moves it by (dQ + held (v - w)) / C_k(v).
        offset = c.held_capacitance * (v - w)
        further = (c.source + v.sum(axis=1) - (offset * inverse).sum(axis=1)) / inverse.sum(axis=1)
        return -v + (offset + further[:, None]) * inverse
    charge = -(c.node_capacitance * v + c.held_capacitance * w)
    inverse = 1.0 / c.stage_capacitance
    further = (c.source - (charge * inverse).sum(axis=1)) / inverse.sum(axis=1)
    return (charge + further[:, None]) * inverse
