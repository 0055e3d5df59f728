"""Dynamic voltage sharing of a series diode string at turn-off, by charge balance.

All devices of a series string carry the same current. At turn-off that common current first
removes the recovery charge of every device; a device that has given up its own recovery charge
Q_rr,k starts to block, and from then on the charge still flowing through the string charges its
capacitance C_k (grading capacitor plus junction capacitance). The fastest device (least Q_rr)
starts blocking first and takes the most voltage. When the currents have settled, the charge Q
extracted through the string fixes every stage voltage.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from stringcheck.solvers.water_filling import water_fill

__all__ = ["DynamicSharing", "solve_dynamic_sharing"]


@dataclass(frozen=True)
class DynamicSharing:
    """Stage voltages of a series string after reverse recovery, by charge balance.

    Attributes
    ----------
    voltages
        Reverse voltage of each stage V_k [V], shape ``(..., n)``; >= 0, summing to the string
        voltage along the last axis.
    extracted_charge
        Charge Q that flowed through the string from the current zero crossing until all stages
        block [C], shape ``...``.
    """

    voltages: NDArray[np.float64]
    extracted_charge: NDArray[np.float64]


def solve_dynamic_sharing(
    string_voltage: ArrayLike,
    recovery_charge: ArrayLike,
    capacitance: ArrayLike,
) -> DynamicSharing:
    """Share the string voltage among series stages according to their recovery charges.

    Parameters
    ----------
    string_voltage
        Reverse voltage across the whole string after recovery V_s [V], >= 0; a scalar or shape
        ``...`` (for example one value per Monte Carlo trial).
    recovery_charge
        Reverse-recovery charge of each device Q_rr,k [C], shape ``(..., n)``, >= 0 and finite.
    capacitance
        Capacitance across each stage C_k [F] (grading capacitor plus junction capacitance),
        broadcastable to ``recovery_charge``, > 0 and finite.

    Returns
    -------
    DynamicSharing
        Stage voltages ``(..., n)`` [V] and the extracted charge ``...`` [C].

    Notes
    -----
    Charge balance: the common current has extracted a charge Q. Stage k blocks once Q exceeds
    Q_rr,k, and the excess charges C_k:

    .. math::

        V_k = \\max(Q - Q_{rr,k}, 0) / C_k, \\qquad \\sum_k V_k = V_s

    The left side of the string equation is piecewise linear and increasing in Q, so it is
    solved exactly by :func:`stringcheck.solvers.water_filling.water_fill` with thresholds
    Q_rr,k, weights 1 / C_k and total V_s. The grading resistors are neglected over the
    recovery interval (R C >> t_rr), and so are stray inductance and ringing: this is the
    settled voltage after recovery, not the transient peak.

    For n equal capacitances, one device at the minimum recovery charge and n - 1 at a charge
    larger by dQ_rr, the fast device takes V_DM when

    .. math:: C = (n - 1) \\, \\Delta Q_{rr} / (n V_{DM} - V_s)

    the textbook worst-case rule for dynamic equalisation [1]_.

    References
    ----------
    .. [1] M. H. Rashid, *Power Electronics: Circuits, Devices and Applications*, 3rd ed.,
       Pearson Prentice Hall, 2004, chapter 2 (power semiconductor diodes), series-connected
       diodes: dynamic voltage equalisation with shunt capacitors.
    """
    capacitance = np.asarray(capacitance, dtype=float)
    solution = water_fill(recovery_charge, 1.0 / capacitance, string_voltage)
    return DynamicSharing(voltages=solution.amounts, extracted_charge=solution.level)
