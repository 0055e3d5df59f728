"""Dynamic voltage sharing of a series string whose stage capacitance depends on voltage.

The charge balance of :mod:`stringcheck.solvers.series_dynamic` with a junction that follows the
junction law (:mod:`stringcheck.physics.junction_capacitance`): after the common current has
extracted a charge Q from the string, stage k, once its recovery charge Q_rr,k is gone, holds

.. math:: g_k(V_k) = C_{g,k} V_k + Q_{c,k}(V_k) = \\max(Q - Q_{rr,k}, 0)

(grading capacitor C_g,k and the junction's own charge Q_c,k(V) = integral of C_j dV), and the stage
voltages sum to the string voltage. For a capacitive device (a SiC Schottky diode) Q_rr,k = 0 and
the whole recovery charge is the junction's Q_c(V_k), up to the stage's own voltage.

Solution. g_k is increasing and concave (C_j falls with V), so its inverse V_k(y) is increasing and
convex, and so is F(Q) = sum_k V_k(Q) - V_s. Both are solved by Newton's method from the side on
which it converges monotonically (no bracket can be left, no step overshoots):

* the stage voltage V_k(y) from below: the tangent of a concave function lies above it, so each
  step lands at or below the root; the iteration starts from the smaller of the two upper bounds
  y / C_g and Q_c^-1(y), and a first step below the lower bound y / (C_g + C_j0) is raised to it;
* the extracted charge Q from above, starting at max_k Q_rr,k + min_k g_k(V_s), where F >= 0,
  inside the bracket [min_k Q_rr,k, that start], with Newton's step on log(sum V_k) where it
  stays inside (fast where a stage's V(Q) grows steeply, gamma near 1), and a bisection
  where a step did not cut F tenfold far from the root.

Every trial and stage is iterated at once (arrays of any leading shape); the loops are over Newton
iterations only, until every row has converged.

References
----------
.. [1] J. E. Dennis and R. B. Schnabel, *Numerical Methods for Unconstrained Optimization and
   Nonlinear Equations*, SIAM, 1996, chapter 2 (Newton's method in one variable; its monotone
   convergence on a convex increasing function, from memory of the chapter's theorem).
.. [2] M. H. Rashid, *Power Electronics: Circuits, Devices and Applications*, 3rd ed., Pearson
   Prentice Hall, 2004, chapter 2 (series-connected diodes: dynamic voltage equalisation).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from stringcheck.physics.junction_capacitance import (
    junction_capacitance,
    junction_charge,
    voltage_at_charge,
)

__all__ = ["CapacitiveSharing", "solve_capacitive_sharing"]

# Relative tolerances: of the string equation (sum V_k = V_s) and of each stage's inversion.
_RTOL = 1e-11
_STAGE_RTOL = 1e-14
_MAX_ITERATIONS = 200


@dataclass(frozen=True)
class CapacitiveSharing:
    """Stage voltages after recovery with a voltage-dependent junction capacitance.

    Attributes
    ----------
    voltages
        Reverse voltage of each stage V_k [V], shape ``(..., n)``, summing to the string voltage.
    extracted_charge
        Charge Q that flowed through the string until all stages block [C], shape ``...``.
    converged
        Whether the row's iteration met its tolerance (``...``); False only for NaN input.
    """

    voltages: NDArray[np.float64]
    extracted_charge: NDArray[np.float64]
    converged: NDArray[np.bool_]


def solve_capacitive_sharing(string_voltage: ArrayLike, recovery_charge: ArrayLike,
                             grading_capacitance: ArrayLike, zero_bias_capacitance: ArrayLike, *,
                             built_in_potential: ArrayLike, grading_exponent: ArrayLike
                             ) -> CapacitiveSharing:
    """Share the string voltage among stages with grading capacitors and nonlinear junctions.

    Parameters
    ----------
    string_voltage
        V_s [V], >= 0, a scalar or shape ``...``.
    recovery_charge
        Stored (minority-carrier) recovery charge of each device Q_rr,k [C], shape ``(..., n)``,
        >= 0: 0 for a capacitive device, whose recovery charge is its junction's.
    grading_capacitance
        C_g,k [F], >= 0, broadcastable to ``recovery_charge``.
    zero_bias_capacitance
        C_j0,k of each junction [F], >= 0, broadcastable; C_g,k + C_j0,k > 0 at every stage.
    built_in_potential
        phi_k [V], > 0, broadcastable.
    grading_exponent
        gamma_k [1] in [0, 1], broadcastable (0: a constant C_j0, the linear charge balance).

    Returns
    -------
    CapacitiveSharing
        Stage voltages [V], the extracted charge [C] and the convergence flags.

    Notes
    -----
    Solves, along the last axis,

    .. math:: C_{g,k} V_k + Q_{c,k}(V_k) = \\max(Q - Q_{rr,k}, 0), \\qquad \\sum_k V_k = V_s

    With gamma = 0 it is the linear balance V_k = max(Q - Q_rr,k, 0) / (C_g,k + C_j0,k) of
    :func:`stringcheck.solvers.series_dynamic.solve_dynamic_sharing`.
    """
    total = np.asarray(string_voltage, dtype=float)
    threshold = np.asarray(recovery_charge, dtype=float)
    shape = np.broadcast_shapes(threshold.shape, np.shape(grading_capacitance),
                                np.shape(zero_bias_capacitance), np.shape(built_in_potential),
                                np.shape(grading_exponent))
    shape = np.broadcast_shapes(shape, total.shape + (1,))
    threshold = np.broadcast_to(threshold, shape)
    stage = _Stages(*(np.broadcast_to(np.asarray(value, dtype=float), shape) for value in (
        grading_capacitance, zero_bias_capacitance, built_in_potential, grading_exponent)))
    total = np.broadcast_to(total, shape[:-1])
    # Q = max Q_rr + min g_k(V_s) puts every stage k at V_k >= V_s for the k of the least g_k.
    high = threshold.max(axis=-1) + stage.charge(total[..., None]).min(axis=-1)
    low = threshold.min(axis=-1)  # every stage at 0 V: F = -V_s
    level = high
    high_excess = high_slope = None
    converged = np.zeros(shape[:-1], dtype=bool)
    voltages = np.zeros(shape)
    for _ in range(_MAX_ITERATIONS):
        # A stage far above the root may overflow to V = inf: F = +inf, an upper end as any.
        with np.errstate(over="ignore", invalid="ignore"):
            voltages, slopes = stage.voltages(level[..., None] - threshold)
            excess = voltages.sum(axis=-1) - total
        slope = slopes.sum(axis=-1)
        # The bracket collapsed to rounding: the level is as good as the arithmetic allows.
        tight = (high - low) <= 4.0 * np.finfo(float).eps * np.abs(high)
        converged = (np.abs(excess) <= _RTOL * np.maximum(total, 1e-300)) | (
            tight & np.isfinite(excess))
        if (converged | np.isnan(excess)).all():  # NaN rows stay unconverged
            break
        above = excess > 0
        # Newton's step was slow where it did not cut F at the upper end tenfold while the
        # string is still far above V_s (a stage whose V(Q) grows steeply, gamma near 1):
        # bisect there next.
        slow = above & (high_excess is not None) & (excess > total) & (
            excess > 0.1 * (excess if high_excess is None else high_excess))
        high = np.where(above, level, high)
        low = np.where(above, low, level)
        high_excess = excess if high_excess is None else np.where(above, excess, high_excess)
        high_slope = slope if high_slope is None else np.where(above, slope, high_slope)
        # Newton from the upper end on F never lands below the root (F is convex); Newton on
        # log(sum V_k / V_s) takes the steeply growing stages (V ~ e^Q at gamma = 1) in one step
        # and is taken where it stays above the known lower end.
        with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
            safe_slope = np.where(high_slope > 0, high_slope, 1.0)
            newton = high - np.where(high_slope > 0, high_excess / safe_slope, 0.0)
            ratio = (high_excess + total) / np.maximum(total, 1e-300)
            logarithmic = high - np.where(high_slope > 0, np.log(ratio) * (high_excess + total)
                                          / safe_slope, 0.0)
        step = np.where(np.isfinite(logarithmic) & (logarithmic > low), logarithmic, newton)
        middle = 0.5 * (low + high)
        level = np.where(converged, level, np.where(
            ~slow & (step > low) & (step < high), step, middle))
    return CapacitiveSharing(voltages=voltages, extracted_charge=level, converged=converged)


@dataclass(frozen=True)
class _Stages:
    grading: NDArray[np.float64]
    zero_bias: NDArray[np.float64]
    phi: NDArray[np.float64]
    gamma: NDArray[np.float64]

    def charge(self, voltage: NDArray[np.float64]) -> NDArray[np.float64]:
        """g(V) = C_g V + Q_c(V) [C]."""
        return self.grading * voltage + junction_charge(
            voltage, self.zero_bias, built_in_potential=self.phi, grading_exponent=self.gamma)

    def capacitance(self, voltage: NDArray[np.float64]) -> NDArray[np.float64]:
        """g'(V) = C_g + C_j(V) [F]."""
        return self.grading + junction_capacitance(
            voltage, self.zero_bias, built_in_potential=self.phi, grading_exponent=self.gamma)

    def charge_and_capacitance(self, voltage: NDArray[np.float64]
                               ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """g(V) [C] and g'(V) [F] from one logarithm and one exponential: with
        x = log1p(V / phi), C_j = C_j0 e^(-gamma x) and Q_c = C_j0 phi expm1((1 - gamma) x) /
        (1 - gamma) (its series where (1 - gamma) x is small)."""
        x = np.log1p(voltage / self.phi)
        junction = self.zero_bias * np.exp(-self.gamma * x)
        m = 1.0 - self.gamma
        mx = m * x
        # (phi + V) C_j - phi C_j0 = C_j0 phi expm1(m x), exact where m x is not small.
        direct = ((self.phi + voltage) * junction - self.phi * self.zero_bias) / np.where(
            mx > 1e-2, m, 1.0)
        series = self.zero_bias * self.phi * x * (1.0 + mx * (0.5 + mx * (1.0 / 6.0 + mx * (
            1.0 / 24.0 + mx * (1.0 / 120.0 + mx / 720.0)))))
        return (self.grading * voltage + np.where(mx > 1e-2, direct, series),
                self.grading + junction)

    def voltages(self, held: NDArray[np.float64]) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """V = g^-1(max(held, 0)) [V] and dV/dQ = 1 / g'(V) [1/F] (0 where the stage does not
        block yet)."""
        blocking = held > 0
        y = np.where(blocking, held, 0.0)
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            by_grading = np.where(self.grading > 0, y / self.grading, np.inf)
            by_junction = np.where(self.zero_bias > 0, voltage_at_charge(
                y, np.where(self.zero_bias > 0, self.zero_bias, 1.0), built_in_potential=self.phi,
                grading_exponent=self.gamma), np.inf)
        lower = y / (self.grading + self.zero_bias)
        voltage = np.minimum(by_grading, by_junction)
        single = (self.grading <= 0) | (self.zero_bias <= 0)
        for _ in range(_MAX_ITERATIONS):
            with np.errstate(invalid="ignore", over="ignore"):  # inf where V overflowed
                charge, capacitance = self.charge_and_capacitance(voltage)
            error = charge - y
            done = single | ~np.isfinite(error) | (
                np.abs(error) <= _STAGE_RTOL * np.maximum(y, 1e-300))
            if done.all():
                break
            voltage = np.where(done, voltage, np.maximum(voltage - error / capacitance, lower))
        with np.errstate(divide="ignore"):  # C = 0 where an overflowed V = inf: slope inf
            slope = np.where(blocking, 1.0 / capacitance, 0.0)
        return voltage, slope
