"""Static and dynamic voltage sharing with voltage-dependent grading components (end of life).

At the end of life a high-value thick-film grading resistor has a voltage coefficient,
R(V) = R_0 (1 + gamma V), and a ceramic grading capacitor loses capacitance under dc bias,
C(V) = C_0 (1 - b V / V_rated). Both make the sharing nonlinear in the component values; each is
solved here by a fixed point on the component values around the linear solvers
(``solvers.series_static``, ``solvers.series_dynamic``), vectorized over every row.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

from stringcheck.solvers.series_dynamic import DynamicSharing, solve_dynamic_sharing
from stringcheck.solvers.series_static import StaticSharing, solve_static_sharing

__all__ = ["secant_capacitance_factor", "solve_dynamic_sharing_dc_bias",
           "solve_static_sharing_voltage_coefficient"]

_MAX_ITERATIONS = 200


def solve_static_sharing_voltage_coefficient(
    string_voltage: ArrayLike, resistance: ArrayLike, leakage_current: ArrayLike, *,
    reference_voltage: ArrayLike, voltage_exponent: ArrayLike, voltage_coefficient: float,
    shunt_conductance: ArrayLike = 0.0, rtol: float = 1e-11,
) -> StaticSharing:
    """Static sharing with grading resistors R_k(V_k) = R_k0 (1 + gamma V_k).

    Parameters
    ----------
    string_voltage
        V_s [V], > 0.
    resistance
        R_k0 [ohm] at zero voltage (and at the stage temperature), shape ``(..., n)``, > 0
        (inf: no resistor).
    leakage_current, reference_voltage, voltage_exponent
        As :func:`~stringcheck.solvers.series_static.solve_static_sharing`.
    voltage_coefficient
        gamma [1/V]; 1 + gamma V must stay > 0 over the stage voltages (rows where it does not
        are returned unconverged).
    shunt_conductance
        A voltage-independent conductance across each stage [S] (surface leakage), >= 0.
    rtol
        Tolerance on the change of the stage voltages between iterations, relative to V_s.

    Returns
    -------
    StaticSharing
        As the linear solver; ``converged`` also false where the iteration did not settle.

    Notes
    -----
    Stage k carries I = V_k / (R_k0 (1 + gamma V_k)) + G_s,k V_k + c_k V_k^m_k, sum V_k = V_s.
    Each stage law stays increasing in V_k (d/dV of V / (1 + gamma V) is 1 / (1 + gamma V)^2 > 0),
    so the string equation keeps one root. The fixed point freezes each resistor at the last
    iterate's voltage and solves the linear problem exactly; it contracts for
    |gamma| V_k << 1 (a resistor that changes by 10 % over its voltage converges in a few tens
    of iterations).

    References
    ----------
    .. [1] W. H. Press, S. A. Teukolsky, W. T. Vetterling and B. P. Flannery, *Numerical Recipes*,
       3rd ed., Cambridge University Press, 2007, section 9.6 (nonlinear systems; fixed-point
       iteration); the resistor law R(V) = R_0 (1 + gamma V) is the usual linear voltage
       coefficient of resistance (common practice for high-value resistors).
    """
    resistance = np.asarray(resistance, dtype=float)
    shunt = np.asarray(shunt_conductance, dtype=float)
    string_voltage = np.asarray(string_voltage, dtype=float)
    count = resistance.shape[-1]
    voltages = np.broadcast_to(string_voltage[..., None] / count if string_voltage.ndim else
                               string_voltage / count, resistance.shape).astype(float)
    settled = np.zeros(resistance.shape[:-1], dtype=bool)
    solution = None
    for _ in range(_MAX_ITERATIONS):
        factor = 1.0 + voltage_coefficient * voltages
        with np.errstate(divide="ignore", invalid="ignore"):
            conductance = np.where(factor > 0, 1.0 / (resistance * factor), np.nan) + shunt
        solution = solve_static_sharing(string_voltage, conductance, leakage_current,
                                        reference_voltage=reference_voltage,
                                        voltage_exponent=voltage_exponent)
        with np.errstate(invalid="ignore"):
            change = np.max(np.abs(solution.voltages - voltages), axis=-1)
        voltages = solution.voltages
        settled = change <= rtol * np.max(np.abs(string_voltage))
        if np.all(settled | ~np.isfinite(change)):
            break
    valid = np.all(1.0 + voltage_coefficient * voltages > 0, axis=-1)
    return StaticSharing(voltages=voltages, string_current=solution.string_current,
                         converged=np.asarray(solution.converged) & settled & valid,
                         iterations=solution.iterations)


def solve_dynamic_sharing_dc_bias(
    string_voltage: ArrayLike, recovery_charge: ArrayLike, grading_capacitance: ArrayLike,
    junction_capacitance: ArrayLike, *, dc_bias_loss: float, rated_voltage: float,
    rtol: float = 1e-11, dc_bias_curve: tuple[tuple[float, float], ...] = (),
) -> DynamicSharing:
    """Charge balance with grading capacitors that lose capacitance under dc bias.

    Parameters
    ----------
    string_voltage
        V_s [V], >= 0.
    recovery_charge
        Q_rr,k [C], shape ``(..., n)``.
    grading_capacitance
        C_k0 [F] at zero bias, broadcastable to ``recovery_charge``, >= 0.
    junction_capacitance
        c_j,k [F] (voltage-independent here), >= 0, with C_k0 + c_j,k > 0.
    dc_bias_loss
        b [1]: the fraction of C_0 lost at the rated voltage, in [0, 1).
    rated_voltage
        V_rated [V] of the grading capacitor, > 0.
    dc_bias_curve
        ((V / V_rated, loss), ...): the maker's curve, the loss linear between its points from 0
        at 0 V and held beyond the last (:func:`secant_capacitance_factor`); empty: the linear
        loss ``dc_bias_loss``.

    Returns
    -------
    DynamicSharing
        Stage voltages (..., n) [V] and the extracted charge [C].

    Notes
    -----
    With C(V) = C_0 (1 - b V / V_rated) (a linear loss), the charge a stage's capacitor holds at
    V is Q(V) = C_0 (V - b V^2 / (2 V_rated)), and the charge balance of
    ``solve_dynamic_sharing`` becomes Q_k(V_k) + c_j V_k = max(Q - Q_rr,k, 0). The fixed point
    freezes each capacitor at its secant value C_0 (1 - b V_k / (2 V_rated)) at the last
    iterate and solves the piecewise-linear balance exactly.

    References
    ----------
    .. [1] W. H. Press et al., *Numerical Recipes*, 3rd ed., 2007, section 9.6 (fixed point);
       the linear loss of capacitance with dc bias of class-2 ceramic capacitors is common
       practice (manufacturers give it as a curve; the linear form is its chord to the rated
       voltage).
    """
    charge = np.asarray(recovery_charge, dtype=float)
    grading = np.broadcast_to(np.asarray(grading_capacitance, dtype=float), charge.shape)
    junction = np.broadcast_to(np.asarray(junction_capacitance, dtype=float), charge.shape)
    voltages = np.zeros(charge.shape)
    solution = None
    scale = float(np.max(np.abs(np.asarray(string_voltage, dtype=float))))
    for _ in range(_MAX_ITERATIONS):
        if dc_bias_curve:
            secant = grading * secant_capacitance_factor(voltages / rated_voltage, dc_bias_curve)
        else:
            secant = grading * (1.0 - dc_bias_loss * voltages / (2.0 * rated_voltage))
        solution = solve_dynamic_sharing(string_voltage, charge, np.maximum(secant, 0.0) + junction)
        change = np.max(np.abs(solution.voltages - voltages))
        voltages = solution.voltages
        if not change > rtol * scale:
            break
    return solution


def secant_capacitance_factor(bias: ArrayLike, curve: tuple[tuple[float, float], ...]
                              ) -> np.ndarray:
    """Q(V) / (C_0 V) of a capacitor whose dc-bias loss follows a piecewise-linear curve [-].

    Parameters
    ----------
    bias
        V / V_rated [-], >= 0, any shape.
    curve
        ((V / V_rated, loss), ...) with rising voltages: the fraction of C_0 lost at each point,
        linear between the points from 0 at 0 V, held beyond the last.

    Returns
    -------
    numpy.ndarray
        (1 / x) * integral_0^x (1 - L(u)) du, 1 at x = 0, the shape of ``bias``.

    Notes
    -----
    The charge a capacitor of small-signal capacitance C(V) = C_0 (1 - L(V / V_rated)) holds at
    V is Q = integral_0^V C(v) dv; with L piecewise linear the integral is exact by the
    trapezoid rule on each segment (the integrand is linear there). A one-point curve ((1, b),)
    is the linear loss b V / V_rated of :func:`solve_dynamic_sharing_dc_bias`.

    References
    ----------
    .. [1] The trapezoid rule is exact for a linear integrand (any numerical-analysis text, e.g.
       Press et al., *Numerical Recipes*, 3rd ed., 2007, section 4.1).
    """
    x = np.maximum(np.asarray(bias, dtype=float), 0.0)
    nodes = np.array([0.0] + [point[0] for point in curve])
    losses = np.array([0.0] + [point[1] for point in curve])
    # The integral of 1 - L at each node (exact trapezoids), then within the segment of x.
    widths = np.diff(nodes)
    cumulative = np.concatenate([[0.0], np.cumsum(widths * (1.0 - 0.5 * (losses[1:] + losses[:-1])))])
    segment = np.clip(np.searchsorted(nodes, x, side="right") - 1, 0, len(nodes) - 1)
    start, loss_start = nodes[segment], losses[segment]
    loss_here = np.interp(x, nodes, losses)  # held beyond the last node
    integral = cumulative[segment] + (x - start) * (1.0 - 0.5 * (loss_start + loss_here))
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(x > 0.0, integral / np.where(x > 0.0, x, 1.0), 1.0)
