"""Junction capacitance of a reverse-biased diode as a function of voltage, and its charge.

The depletion capacitance of a junction falls with reverse voltage as

.. math:: C_j(V) = C_{j0} / (1 + V / \\varphi)^{\\gamma}

(the junction law: built-in potential phi, grading exponent gamma = 1/2 for an abrupt junction or
a Schottky barrier, 1/3 for a linearly graded junction). The charge taken by the junction from 0 to
V is its integral, which for a silicon-carbide Schottky diode is the whole "recovery" charge
Q_c. Datasheets give C_j at one or a few voltages; :func:`fit_junction_law` fits C_j0 and gamma to
them with phi held (the class's default, or the part's).

All functions are pure and vectorized: they broadcast their arguments, take SI units and return
float arrays.

References
----------
.. [1] S. M. Sze and K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007,
   chapter 2 (p-n junctions: depletion capacitance of abrupt and linearly graded junctions) and
   chapter 3 (metal-semiconductor contacts: the Schottky barrier's depletion capacitance).
.. [2] P. Antognetti and G. Massobrio, *Semiconductor Device Modeling with SPICE*, 2nd ed.,
   McGraw-Hill, 1993, chapter 1 (the diode model's junction capacitance CJO / (1 - V/VJ)^M and
   its charge).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["JunctionLaw", "fit_junction_law", "junction_capacitance", "junction_charge",
           "voltage_at_charge"]


def junction_capacitance(reverse_voltage: ArrayLike, zero_bias_capacitance: ArrayLike, *,
                         built_in_potential: ArrayLike, grading_exponent: ArrayLike
                         ) -> NDArray[np.float64]:
    """Depletion capacitance of a junction at a reverse voltage.

    Parameters
    ----------
    reverse_voltage
        Reverse voltage V [V], >= 0 (the law holds for V > -phi).
    zero_bias_capacitance
        C_j0, the capacitance at V = 0 [F], >= 0.
    built_in_potential
        phi [V], > 0 (about 0.7 V for silicon p-n, about 1 V for a SiC Schottky barrier).
    grading_exponent
        gamma [1], in [0, 1]; 0 gives a constant capacitance C_j0.

    Returns
    -------
    numpy.ndarray
        C_j(V) [F], the broadcast shape of the inputs.

    Notes
    -----
    .. math:: C_j(V) = C_{j0} (1 + V / \\varphi)^{-\\gamma}

    evaluated as C_j0 exp(-gamma log1p(V / phi)).

    References
    ----------
    .. [1] S. M. Sze and K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007,
       chapter 2 (depletion capacitance).
    """
    voltage = np.asarray(reverse_voltage, dtype=float)
    phi = np.asarray(built_in_potential, dtype=float)
    gamma = np.asarray(grading_exponent, dtype=float)
    return np.asarray(zero_bias_capacitance, dtype=float) * np.exp(-gamma * np.log1p(voltage / phi))


def junction_charge(reverse_voltage: ArrayLike, zero_bias_capacitance: ArrayLike, *,
                    built_in_potential: ArrayLike, grading_exponent: ArrayLike
                    ) -> NDArray[np.float64]:
    """Charge a junction takes from 0 V to a reverse voltage: Q_c = integral of C_j(V) dV.

    Parameters
    ----------
    reverse_voltage, zero_bias_capacitance, built_in_potential, grading_exponent
        As :func:`junction_capacitance` ([V], [F], [V], [1]; gamma in [0, 1]).

    Returns
    -------
    numpy.ndarray
        Q_c(V) [C], >= 0 for V >= 0, the broadcast shape of the inputs.

    Notes
    -----
    With x = log1p(V / phi) and m = 1 - gamma,

    .. math::

        Q_c(V) = \\int_0^V C_j(u)\\,du = C_{j0}\\,\\varphi\\,\\frac{(1 + V/\\varphi)^{m} - 1}{m}
               = C_{j0}\\,\\varphi\\,x\\,\\frac{\\mathrm{expm1}(m x)}{m x}

    which tends to C_j0 phi log1p(V / phi) as gamma -> 1 and to C_j0 V as gamma -> 0; the form
    with ``expm1`` is exact to rounding at every gamma.

    References
    ----------
    .. [1] P. Antognetti and G. Massobrio, *Semiconductor Device Modeling with SPICE*, 2nd ed.,
       McGraw-Hill, 1993, chapter 1 (the junction charge of the diode model).
    """
    voltage = np.asarray(reverse_voltage, dtype=float)
    phi = np.asarray(built_in_potential, dtype=float)
    m = 1.0 - np.asarray(grading_exponent, dtype=float)
    x = np.log1p(voltage / phi)
    return np.asarray(zero_bias_capacitance, dtype=float) * phi * x * _exprel(m * x)


def voltage_at_charge(charge: ArrayLike, zero_bias_capacitance: ArrayLike, *,
                      built_in_potential: ArrayLike, grading_exponent: ArrayLike
                      ) -> NDArray[np.float64]:
    """The reverse voltage at which a junction holds a charge: the inverse of
    :func:`junction_charge`.

    Parameters
    ----------
    charge
        Q_c [C], >= 0.
    zero_bias_capacitance, built_in_potential, grading_exponent
        As :func:`junction_capacitance` ([F] > 0, [V], [1] in [0, 1]).

    Returns
    -------
    numpy.ndarray
        V [V] with Q_c(V) = ``charge``.

    Notes
    -----
    With s = Q_c / (C_j0 phi) and m = 1 - gamma: (1 + V/phi)^m = 1 + m s, so

    .. math:: V = \\varphi\\,\\mathrm{expm1}\\big(\\mathrm{log1p}(m s) / m\\big)

    (V = phi expm1(s) at gamma = 1).
    """
    phi = np.asarray(built_in_potential, dtype=float)
    m = 1.0 - np.asarray(grading_exponent, dtype=float)
    s = np.asarray(charge, dtype=float) / (np.asarray(zero_bias_capacitance, dtype=float) * phi)
    ms = m * s
    small = np.abs(ms) < 1e-8
    # log1p(m s) / m -> s - m s^2 / 2 as m -> 0 (gamma -> 1).
    exponent = np.where(small, s * (1.0 - 0.5 * ms), np.log1p(ms) / np.where(small, 1.0, m))
    return phi * np.expm1(exponent)


def _exprel(x: NDArray[np.float64]) -> NDArray[np.float64]:
    """expm1(x) / x, 1 at x = 0."""
    x = np.asarray(x, dtype=float)
    small = np.abs(x) < 1e-8
    safe = np.where(small, 1.0, x)
    return np.where(small, 1.0 + 0.5 * x, np.expm1(safe) / safe)


@dataclass(frozen=True)
class JunctionLaw:
    """C_j0 [F] and gamma [1] of the junction law fitted to datasheet rows, phi [V] held.

    Attributes
    ----------
    zero_bias_capacitance
        C_j0 [F], shape of the leading axes of the rows.
    built_in_potential
        phi [V], the value held in the fit.
    grading_exponent
        gamma [1] (clipped to [0, 1]); the held default where a single row gives no slope.
    residual
        Root-mean-square of log(C_row / C_fit) over the rows [1]: 0 for one or two rows.
    """

    zero_bias_capacitance: NDArray[np.float64]
    built_in_potential: NDArray[np.float64]
    grading_exponent: NDArray[np.float64]
    residual: NDArray[np.float64]


def fit_junction_law(voltages: ArrayLike, capacitances: ArrayLike, *,
                     built_in_potential: ArrayLike, default_exponent: ArrayLike) -> JunctionLaw:
    """Fit C_j0 and gamma of the junction law to capacitance rows at several voltages.

    Parameters
    ----------
    voltages
        Reverse voltages of the rows V_i [V], >= 0 and distinct, shape ``(..., rows)``.
    capacitances
        C_j at those voltages [F], > 0, falling with voltage, broadcastable to ``voltages``.
    built_in_potential
        phi [V] held in the fit, > 0, broadcastable to the leading shape ``...``.
    default_exponent
        gamma [1] for a single row (no slope to fit), in [0, 1].

    Returns
    -------
    JunctionLaw
        C_j0, phi, gamma and the fit's residual, each of the leading shape.

    Notes
    -----
    Taking logarithms, log C_i = log C_j0 - gamma x_i with x_i = log1p(V_i / phi): a straight line
    in x, fitted by least squares (exact through two rows). For two rows

    .. math:: \\gamma = \\frac{\\ln(C_1 / C_2)}{\\ln\\big((1 + V_2/\\varphi) / (1 + V_1/\\varphi)\\big)},
              \\qquad C_{j0} = C_1 (1 + V_1/\\varphi)^{\\gamma}

    gamma is clipped to [0, 1] (from a constant capacitance to beyond the linearly graded and
    abrupt junctions; the design reader refuses rows that rise with voltage) and C_j0 refitted
    at the clipped slope.

    References
    ----------
    .. [1] S. M. Sze and K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007,
       chapter 2 (C-V profiles: the slope of log C against log of the voltage gives the grading).
    """
    voltage = np.asarray(voltages, dtype=float)
    capacitance = np.broadcast_to(np.asarray(capacitances, dtype=float), voltage.shape)
    phi = np.broadcast_to(np.asarray(built_in_potential, dtype=float), voltage.shape[:-1])
    x = np.log1p(voltage / phi[..., None])
    y = np.log(capacitance)
    rows = voltage.shape[-1]
    if rows == 1:
        gamma = np.broadcast_to(np.asarray(default_exponent, dtype=float), phi.shape).copy()
    else:
        dx = x - x.mean(axis=-1, keepdims=True)
        dy = y - y.mean(axis=-1, keepdims=True)
        gamma = -(dx * dy).sum(axis=-1) / (dx * dx).sum(axis=-1)
    gamma = np.clip(gamma, 0.0, 1.0)
    log_c0 = (y + gamma[..., None] * x).mean(axis=-1)
    residual = np.sqrt(np.mean((y - (log_c0[..., None] - gamma[..., None] * x)) ** 2, axis=-1))
    return JunctionLaw(zero_bias_capacitance=np.exp(log_c0), built_in_potential=np.asarray(phi),
                       grading_exponent=gamma, residual=residual)
