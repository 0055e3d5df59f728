"""Rectifier and voltage-multiplier circuits: the duty each diode stack of the circuit sees.

From a transformer secondary (rms voltage, frequency), a topology, a load and the circuit's
commutation (leakage) inductance and filter or stage capacitance, these functions give each stack's
peak reverse voltage, the conduction of a capacitor-input rectifier, the overlap of a
line-commutated bridge with its commutation slope, and a Cockcroft-Walton multiplier's ripple and
regulation drop. All functions are pure, vectorized (arrays broadcast), take SI units and let NaN
propagate; angles are in [rad].
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = [
    "CapacitorInputPulse",
    "MultiplierOutput",
    "capacitor_input_pulse",
    "commutation_slope",
    "multiplier_output",
    "overlap_angle",
    "secondary_peak",
]

# Bisection steps of the conduction start of a capacitor-input rectifier: the bracket is at most
# pi wide, so 60 halvings leave 3e-18 rad, below double precision.
_BISECTION_STEPS = 60
# Gauss-Legendre nodes over the conduction interval for the pulse's rms: the integrand is a
# trigonometric polynomial of degree 2, integrated to rounding by 16 nodes.
_RMS_NODES = 16


def secondary_peak(rms_voltage: ArrayLike) -> NDArray[np.float64]:
    """Peak of a sinusoidal secondary voltage, V_pk = sqrt(2) V_rms.

    Parameters
    ----------
    rms_voltage
        Rms secondary voltage [V], >= 0.

    Returns
    -------
    numpy.ndarray
        V_pk [V].

    References
    ----------
    .. [1] J. W. Nilsson and S. A. Riedel, *Electric Circuits*, 9th ed., Prentice Hall, 2011,
       chapter 10 (the rms value of a sinusoid).
    """
    return np.sqrt(2.0) * np.asarray(rms_voltage, dtype=float)


def overlap_angle(commutating_voltage: ArrayLike, inductance: ArrayLike, current: ArrayLike,
                  frequency: ArrayLike) -> NDArray[np.float64]:
    """Overlap (commutation) angle u of a line-commutated diode bridge carrying a steady dc current.

    Parameters
    ----------
    commutating_voltage
        Rms voltage that drives the commutation [V], > 0: the line-to-line voltage V_LL of a
        three-phase bridge, the secondary voltage V_s of a single-phase bridge.
    inductance
        Commutation inductance per phase (the transformer's leakage inductance referred to the
        secondary, plus the line's) [H], >= 0.
    current
        Dc current I_d the bridge commutates (held steady by the dc-side inductance) [A], >= 0.
    frequency
        Line frequency f [Hz], > 0.

    Returns
    -------
    numpy.ndarray
        u [rad] in [0, pi]; NaN where 2 omega L I_d > 2 sqrt(2) V (no commutation completes within
        a half period: the circuit is outside the model).

    Notes
    -----
    .. math:: \\cos u = 1 - \\frac{2 \\omega L I_d}{\\sqrt{2} V}

    (the volt-seconds of the commutating voltage, integrated over the overlap, carry the current
    from one diode to the next through the two inductances of the loop, or the one of a
    single-phase source).

    References
    ----------
    .. [1] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003, chapter 5 (line-frequency diode
       rectifiers: the effect of L_s on current commutation, single-phase and three-phase).
    """
    omega = 2.0 * np.pi * np.asarray(frequency, dtype=float)
    ratio = 1.0 - 2.0 * omega * np.asarray(inductance, dtype=float) * np.asarray(
        current, dtype=float) / (np.sqrt(2.0) * np.asarray(commutating_voltage, dtype=float))
    with np.errstate(invalid="ignore"):
        return np.where(ratio >= -1.0, np.arccos(np.minimum(ratio, 1.0)), np.nan)


def commutation_slope(commutating_voltage: ArrayLike, inductance: ArrayLike,
                      overlap: ArrayLike) -> NDArray[np.float64]:
    """Slope -di/dt of the outgoing diode's current at the end of the overlap [A/s].

    Parameters
    ----------
    commutating_voltage
        Rms commutating voltage V [V] (as :func:`overlap_angle`).
    inductance
        Commutation inductance per phase L [H], > 0.
    overlap
        Overlap angle u [rad] (:func:`overlap_angle`).

    Returns
    -------
    numpy.ndarray
        |di/dt| at the outgoing diode's current zero [A/s], >= 0.

    Notes
    -----
    During the overlap the commutating voltage sqrt(2) V sin(omega t) (from its zero, a diode
    rectifier's firing angle being 0) drives the loop of two inductances L, so the outgoing
    diode's current falls at sqrt(2) V sin(omega t) / (2 L); it reaches zero at omega t = u:

    .. math:: \\left|\\frac{di}{dt}\\right| = \\frac{\\sqrt{2} V \\sin u}{2 L}

    References
    ----------
    .. [1] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003, chapter 5 (current commutation with L_s).
    """
    voltage = np.asarray(commutating_voltage, dtype=float)
    return np.sqrt(2.0) * voltage * np.sin(np.asarray(overlap, dtype=float)) / (
        2.0 * np.asarray(inductance, dtype=float))


@dataclass(frozen=True)
class CapacitorInputPulse:
    """The diode current of an ideal capacitor-input rectifier in its steady state.

    Attributes
    ----------
    start, end
        Phase of the conduction's start (the source rises above the capacitor) and end (the
        diode current falls to zero) [rad], measured from the source's positive zero crossing.
    conduction_angle
        end - start [rad].
    ripple
        Peak-to-peak ripple of the capacitor voltage [V].
    peak_current
        Peak diode current [A] (at the start: the ideal circuit's current steps up there).
    average_current
        Average current of one diode over the source period [A].
    rms_current
        Rms current of one diode over the source period [A].
    extinction_slope
        |di/dt| of the diode current where it ends [A/s].
    """

    start: NDArray[np.float64]
    end: NDArray[np.float64]
    conduction_angle: NDArray[np.float64]
    ripple: NDArray[np.float64]
    peak_current: NDArray[np.float64]
    average_current: NDArray[np.float64]
    rms_current: NDArray[np.float64]
    extinction_slope: NDArray[np.float64]


def capacitor_input_pulse(peak_voltage: ArrayLike, load_current: ArrayLike,
                          capacitance: ArrayLike, frequency: ArrayLike, *,
                          pulses: int = 1) -> CapacitorInputPulse:
    """Conduction of an ideal capacitor-input (peak) rectifier with a constant-current load.

    Parameters
    ----------
    peak_voltage
        Peak of the (rectified) source voltage V_pk [V], > 0.
    load_current
        Dc load current I_L [A], > 0.
    capacitance
        Filter (reservoir) capacitance C [F], > 0.
    frequency
        Source frequency f [Hz], > 0.
    pulses
        Charging pulses per source period: 1 for a half-wave rectifier, 2 for a center-tap or a
        single-phase bridge (each pulse through its own diode or diode pair).

    Returns
    -------
    CapacitorInputPulse
        NaN where the capacitor would discharge fully between pulses (no steady capacitor-input
        operation: C too small for the load).

    Notes
    -----
    The source is ideal (no resistance or inductance), the diodes ideal. While a diode conducts the
    capacitor follows the source, v = V_pk sin(theta), and the diode carries
    i = omega C V_pk cos(theta) + I_L; it stops at cos(theta_2) = -I_L / (omega C V_pk). The
    capacitor then discharges linearly, v = V_pk sin(theta_2) - I_L (theta - theta_2) / (omega C),
    until the source meets it again at theta_1 + P (P = 2 pi / pulses), found by bisection (the
    gap is monotone on [-pi/2, pi/2]). The ripple is V_pk (1 - sin(theta_1)) for a pulse that
    ends past the crest. For a small ripple this gives the textbook approximations: conduction
    interval omega dt ~ sqrt(2 V_r / V_pk) before the crest, V_r ~ I_L / (pulses f C), peak
    current I_L (1 + 2 pi sqrt(2 V_pk / V_r)) for a half-wave rectifier [2].

    References
    ----------
    .. [1] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003, chapter 5 (idealized rectifier with a
       dc-side capacitor, L_s = 0).
    .. [2] A. S. Sedra and K. C. Smith, *Microelectronic Circuits*, 6th ed., Oxford University
       Press, 2010, chapter 4 (the peak rectifier: conduction interval and diode currents).
    """
    v_pk = np.asarray(peak_voltage, dtype=float)
    i_l = np.asarray(load_current, dtype=float)
    c = np.asarray(capacitance, dtype=float)
    omega = 2.0 * np.pi * np.asarray(frequency, dtype=float)
    v_pk, i_l, c, omega = np.broadcast_arrays(v_pk, i_l, c, omega)
    period = 2.0 * np.pi / pulses
    charge = omega * c * v_pk
    with np.errstate(invalid="ignore", divide="ignore"):
        end = np.pi / 2.0 + np.arcsin(np.minimum(i_l / charge, 1.0))
        held = v_pk * np.sin(end)
        slope = i_l / (omega * c)  # discharge [V/rad]

        def gap(theta):
            return v_pk * np.sin(theta) - held + slope * (theta + period - end)

        low = np.full(v_pk.shape, -np.pi / 2.0 if pulses == 1 else 0.0)
        high = np.full(v_pk.shape, np.pi / 2.0)
        valid = gap(low) <= 0.0
        for _ in range(_BISECTION_STEPS):
            middle = 0.5 * (low + high)
            below = gap(middle) <= 0.0
            low = np.where(below, middle, low)
            high = np.where(below, high, middle)
        start = np.where(valid & (charge > i_l), 0.5 * (low + high), np.nan)
        ripple = v_pk * (1.0 - np.sin(start))  # the pulse ends past the crest
        nodes, weights = np.polynomial.legendre.leggauss(_RMS_NODES)
        half = 0.5 * (end - start)
        phases = (0.5 * (end + start))[..., None] + half[..., None] * nodes
        current = charge[..., None] * np.cos(phases) + i_l[..., None]
        square = (half * np.sum(weights * current ** 2, axis=-1)) / (2.0 * np.pi)
        peak = charge * np.cos(start) + i_l
        extinction = omega * charge * np.sin(end)
    return CapacitorInputPulse(
        start=start, end=end + 0.0 * start, conduction_angle=end - start, ripple=ripple,
        peak_current=peak, average_current=i_l / pulses + 0.0 * start, rms_current=np.sqrt(square),
        extinction_slope=extinction + 0.0 * start)


@dataclass(frozen=True)
class MultiplierOutput:
    """A loaded Cockcroft-Walton (Greinacher cascade) multiplier's output.

    Attributes
    ----------
    no_load_voltage
        2 n V_pk [V].
    ripple
        Peak-to-peak output ripple [V].
    drop
        Regulation drop of the mean output below 2 n V_pk [V].
    output_voltage
        Mean output voltage 2 n V_pk - drop [V].
    diode_reverse_voltage
        Peak reverse voltage of every diode stack, 2 V_pk [V] (the no-load value: an upper bound).
    """

    no_load_voltage: NDArray[np.float64]
    ripple: NDArray[np.float64]
    drop: NDArray[np.float64]
    output_voltage: NDArray[np.float64]
    diode_reverse_voltage: NDArray[np.float64]


def multiplier_output(peak_voltage: ArrayLike, stages: ArrayLike, load_current: ArrayLike,
                      capacitance: ArrayLike, frequency: ArrayLike) -> MultiplierOutput:
    """Output of a Cockcroft-Walton multiplier of n stages with equal stage capacitors.

    Parameters
    ----------
    peak_voltage
        Peak of the ac input V_pk [V], > 0.
    stages
        Number of stages n (two diodes and two capacitors each), >= 1.
    load_current
        Dc load current I [A], >= 0.
    capacitance
        Capacitance of every stage capacitor C [F], > 0.
    frequency
        Input frequency f [Hz], > 0.

    Returns
    -------
    MultiplierOutput

    Notes
    -----
    .. math:: \\delta V = \\frac{I}{f C} \\frac{n (n + 1)}{2}, \\qquad
              \\Delta V = \\frac{I}{6 f C} (4 n^3 + 3 n^2 - n)

    Each diode blocks the voltage of the two capacitors it bridges less the input,
    V_pk (1 - sin(omega t)) at no load: an offset sine of peak 2 V_pk.

    References
    ----------
    .. [1] E. Kuffel, W. S. Zaengl and J. Kuffel, *High Voltage Engineering: Fundamentals*, 2nd
       ed., Newnes, 2000, chapter 2 (generation of high dc voltages: cascade circuits, ripple and
       voltage drop), from memory.
    """
    v_pk = np.asarray(peak_voltage, dtype=float)
    n = np.asarray(stages, dtype=float)
    unit = np.asarray(load_current, dtype=float) / (
        np.asarray(frequency, dtype=float) * np.asarray(capacitance, dtype=float))
    ripple = unit * n * (n + 1.0) / 2.0
    drop = unit / 6.0 * (4.0 * n ** 3 + 3.0 * n ** 2 - n)
    no_load = 2.0 * n * v_pk
    return MultiplierOutput(no_load_voltage=no_load, ripple=ripple, drop=drop,
                            output_voltage=no_load - drop,
                            diode_reverse_voltage=2.0 * v_pk + 0.0 * drop)
