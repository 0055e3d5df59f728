"""AC voltage sharing of a series diode string over the reverse half-period.

At line frequency the blocking state is not dc: the string voltage rises and falls within the
reverse half-period, and each stage's grading capacitor (plus the junction capacitance) divides
the voltage as much as its grading resistor and the leakage do. Each stage k is its capacitance
C_k in parallel with its conductance G_k and its diode's leakage I_R,k(V); all carry the same string
current i(t), and the stage voltages add up to the string voltage v(t):

    C_k dV_k/dt + G_k V_k + I_R,k(V_k) = i(t),        sum_k V_k = v(t).

Eliminating i leaves n coupled first-order equations per string. Each time step is implicit in the
linear part (BDF2, started and restarted by backward Euler; both L-stable, so a stage with a small
C_j only follows its resistive split without ringing) and explicit in the leakage (extrapolated to
second order), so a step is a closed form: every V_k is affine in i and the sum fixes i. The step
is vectorized over any leading axes (trials, branches); there is no per-trial loop.

The half-period starts from the stage voltages the forward half and the turn-off leave (0 V: the
stages discharged by the conducting diodes; after a recovery, its offsets, which the caller forms
with the charge balance of ``solvers.series_dynamic``).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["AcSharing", "solve_ac_sharing"]


@dataclass(frozen=True)
class AcSharing:
    """Stage voltages of a series string followed over the reverse half-period.

    Attributes
    ----------
    peak_voltages
        Highest reverse voltage of each stage over the half-period max_t V_k(t) [V], shape
        ``(..., n)``. (The peaks of different stages need not fall at the same instant, so they
        need not add up to the string's peak.)
    peak_times
        Time of each stage's peak [s], shape ``(..., n)``; None unless asked for
        (``peak_times=True``).
    final_voltages
        Stage voltages at the last time step [V], shape ``(..., n)``, summing to the string
        voltage of that instant.
    """

    peak_voltages: NDArray[np.float64]
    peak_times: NDArray[np.float64] | None
    final_voltages: NDArray[np.float64]


def _leakage(voltage, coefficient, reference_voltage, exponent):
    """I_R(V) = I_R,ref (V / V_ref)^m for V > 0, zero otherwise [A]."""
    positive = np.maximum(voltage, 0.0)
    with np.errstate(divide="ignore", invalid="ignore"):
        current = coefficient * np.power(positive / reference_voltage, exponent)
    return np.where(voltage > 0.0, current, 0.0)


def solve_ac_sharing(
    times: ArrayLike,
    string_voltage: ArrayLike,
    conductance: ArrayLike,
    capacitance: ArrayLike,
    leakage_current: ArrayLike,
    *,
    reference_voltage: ArrayLike,
    voltage_exponent: ArrayLike,
    initial_voltages: ArrayLike | None = None,
    peak_times: bool = False,
) -> AcSharing:
    """Follow the stage voltages of a series string through one reverse half-period.

    Parameters
    ----------
    times
        Uniform time grid t_0 = 0 < t_1 < ... < t_N [s], shape ``(N + 1,)``, N >= 1.
    string_voltage
        Reverse voltage across the whole string at each time v(t_j) [V], shape ``(N + 1,)``,
        >= 0; v(t_0) is where the forward half leaves the string (0 V: the stages discharged by the
        conducting diodes). Any shape over time (half-sine, square, a sampled waveform).
    conductance
        Conductance across each stage G_k = 1 / R_k [S], shape ``(..., n)``, >= 0.
    capacitance
        Capacitance across each stage C_k [F] (grading capacitor plus junction capacitance),
        broadcastable to ``conductance``, >= 0; every stage needs C_k > 0 or G_k > 0.
    leakage_current
        Each diode's leakage I_R,k at ``reference_voltage`` and at its junction temperature [A],
        broadcastable to ``conductance``, >= 0.
    reference_voltage
        Voltage at which ``leakage_current`` is given V_ref [V], > 0, broadcastable.
    voltage_exponent
        Exponent m of the leakage's voltage law I_R ~ V^m [-], in [0, 1], broadcastable.
    initial_voltages
        Stage voltages at t_0 [V], broadcastable to ``conductance``, >= 0 (None: 0 V, the stages
        discharged by the conducting diodes). After a turn-off, the offsets the recovery leaves;
        their sum need not equal v(t_0) (the recovery's instant lies within the first step), the
        first step restores sum_k V_k = v(t_1).
    peak_times
        Also record when each stage peaks (costs a third more time).

    Returns
    -------
    AcSharing
        Each stage's peak voltage and its time, and the voltages at t_N.

    Notes
    -----
    With F_k(V) = I_R,k(V) the step t_j -> t_{j+1} (h = t_{j+1} - t_j) takes
    C_k (3 V^{j+1} - 4 V^j + V^{j-1}) / (2h) + G_k V^{j+1} + F_k(2 V^j - V^{j-1}) = i (BDF2 [1]_,
    chapter III.1; backward Euler C_k (V^{j+1} - V^j) / h on the first step). Then
    V_k^{j+1} = (i + a_k) / b_k with b_k = 1.5 C_k / h + G_k and a_k the known terms, and sum_k V_k^{j+1} = v(t_{j+1}) gives i = (v - sum a_k / b_k) / sum 1 / b_k. Explicit
    leakage is stable while h dF/dV << C; the leakage's differential conductance is far below
    the grading conductance in a graded string.

    References
    ----------
    .. [1] E. Hairer and G. Wanner, *Solving Ordinary Differential Equations II: Stiff and
       Differential-Algebraic Problems*, 2nd ed., Springer, 1996, chapters III.1 (BDF methods) and
       IV.3 (stiff accuracy, L-stability).
    .. [2] C. K. Alexander and M. N. O. Sadiku, *Fundamentals of Electric Circuits*, 5th ed.,
       McGraw-Hill, 2013, chapter 7 (first-order RC circuits): the stage equation.
    """
    times = np.asarray(times, dtype=float)
    source = np.asarray(string_voltage, dtype=float)
    conductance = np.asarray(conductance, dtype=float)
    shape = np.broadcast_shapes(conductance.shape, np.shape(capacitance),
                                np.shape(leakage_current))
    conductance = np.broadcast_to(conductance, shape)
    capacitance = np.broadcast_to(np.asarray(capacitance, dtype=float), shape)
    coefficient = np.broadcast_to(np.asarray(leakage_current, dtype=float), shape)
    reference_voltage = np.asarray(reference_voltage, dtype=float)
    exponent = np.asarray(voltage_exponent, dtype=float)
    previous = np.zeros(shape)
    voltage = np.zeros(shape)
    steps = times.size - 1
    if initial_voltages is not None:
        voltage = np.array(np.broadcast_to(np.asarray(initial_voltages, dtype=float), shape))
    peak = voltage.copy()
    peak_time = np.zeros(shape) if peak_times else None
    # Constant steps (a uniform grid): the implicit coefficients are formed once.
    h = float(times[1] - times[0])
    if not np.allclose(np.diff(times), h, rtol=1e-9, atol=0.0):
        raise ValueError("times: the grid must be uniform")
    inverse_euler = 1.0 / (capacitance / h + conductance)
    inverse_bdf2 = 1.0 / (1.5 * capacitance / h + conductance)
    total_euler = inverse_euler.sum(axis=-1)
    total_bdf2 = inverse_bdf2.sum(axis=-1)
    history = capacitance / h
    # One exponent for every device (the usual case): a scalar power, much faster.
    uniform_exponent = exponent.size >= 1 and bool(np.all(exponent == exponent.flat[0]))
    if uniform_exponent:
        exponent = float(exponent.flat[0])
        scale = coefficient / np.power(reference_voltage, exponent)
    for j in range(steps):
        target = source[j + 1]
        if j == 0:
            # The first step by backward Euler: no history yet.
            predicted = voltage
            a = history * voltage
            inverse, total = inverse_euler, total_euler
        else:
            doubled = 2.0 * voltage
            predicted = doubled - previous
            doubled -= 0.5 * previous
            a = history * doubled
            inverse, total = inverse_bdf2, total_bdf2
        if uniform_exponent:
            if exponent == 0.0:
                leak = np.where(predicted > 0.0, coefficient, 0.0)
            elif exponent == 0.5:
                leak = scale * np.sqrt(np.maximum(predicted, 0.0))
            else:
                leak = scale * np.power(np.maximum(predicted, 0.0), exponent)
        else:
            leak = _leakage(predicted, coefficient, reference_voltage, exponent)
        a -= leak
        current = (target - np.einsum("...k,...k->...", a, inverse)) / total
        new = (current[..., None] + a) * inverse
        previous, voltage = voltage, new
        if peak_time is not None:
            peak_time[voltage > peak] = times[j + 1]
        np.maximum(peak, voltage, out=peak)
    return AcSharing(peak_voltages=peak, peak_times=peak_time, final_voltages=voltage)
