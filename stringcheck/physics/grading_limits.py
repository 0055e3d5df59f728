"""Engineering limits of a grading network and of its damping resistor, as closed forms.

The sizing study (``studies.size``) holds a proposed network to these besides the Monte Carlo
P(fail): a grading current several times the leakage, a stack that discharges to a safe voltage in
time, a grading capacitor well above the stage's own capacitance, a damped commutation loop and a
recovery step that fits the stage's margin. All functions are pure and vectorized (SI units).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from stringcheck.constants import SAFE_VOLTAGE

__all__ = [
    "critical_damping_resistance",
    "damping_ratio",
    "discharge_limited_resistance",
    "leakage_limited_resistance",
    "recovery_step_voltage",
    "stage_capacitance_floor",
    "uniform_discharge_time",
]


def leakage_limited_resistance(stage_voltage: ArrayLike, leakage: ArrayLike,
                               multiple: ArrayLike) -> NDArray[np.float64]:
    """The largest grading resistance whose current is ``multiple`` times a leakage.

    Parameters
    ----------
    stage_voltage
        Nominal stage voltage V_s / n [V], > 0.
    leakage
        The hottest device's maximum leakage current I_R,max [A], > 0.
    multiple
        Required ratio k of grading current to that leakage, >= 1.

    Returns
    -------
    numpy.ndarray
        R_max [ohm].

    Notes
    -----
    .. math:: V_s / (n R) \\ge k I_{R,max} \\iff R \\le (V_s / n) / (k I_{R,max})

    k = 5 to 10 is common practice for grading resistors of series diodes.

    References
    ----------
    .. [1] B. W. Williams, *Power Electronics: Devices, Drivers, Applications, and Passive
       Components*, 2nd ed., McGraw-Hill, 1992, chapter on series connection of devices: static
       voltage sharing with shunt resistors carrying several times the leakage (from memory).
    """
    return np.asarray(stage_voltage, dtype=float) / (np.asarray(multiple, dtype=float)
                                                     * np.asarray(leakage, dtype=float))


def uniform_discharge_time(string_voltage: ArrayLike, resistance: ArrayLike,
                           stage_capacitance: ArrayLike, load_capacitance: ArrayLike,
                           stages: ArrayLike, *, threshold: ArrayLike = SAFE_VOLTAGE
                           ) -> NDArray[np.float64]:
    """Time for a string of n equal RC stages with a capacitance across it to fall to a threshold.

    Parameters
    ----------
    string_voltage
        Voltage across the string at disconnection V_s [V], > 0.
    resistance
        Grading resistance of each stage R [ohm], > 0.
    stage_capacitance
        Capacitance of each stage C + C_j [F], >= 0.
    load_capacitance
        Capacitance across the whole string C_load [F], >= 0.
    stages
        Number of stages n, >= 1.
    threshold
        Voltage to fall to [V], > 0 (default 60 V, IEC 60204-1:2016 clause 6.2.4).

    Returns
    -------
    numpy.ndarray
        t [s]; 0 where V_s is at or below the threshold.

    Notes
    -----
    With equal stages every stage holds V / n. The load capacitor's current i = -C_load dV/dt
    flows through every stage, C dv/dt = i - v / R with V = n v, so
    (C + n C_load) dv/dt = -v / R: a single time constant tau = R (C + n C_load) and

    .. math:: t = R (C + n C_{load}) \\ln(V_s / V_{th})

    References
    ----------
    .. [1] J. W. Nilsson and S. A. Riedel, *Electric Circuits*, 9th ed., Prentice Hall, 2011,
       chapter 7 (response of first-order RL and RC circuits): natural response of an RC circuit.
    """
    tau = np.asarray(resistance, dtype=float) * (
        np.asarray(stage_capacitance, dtype=float)
        + np.asarray(stages, dtype=float) * np.asarray(load_capacitance, dtype=float))
    return tau * np.maximum(np.log(np.asarray(string_voltage, dtype=float)
                                   / np.asarray(threshold, dtype=float)), 0.0)


def discharge_limited_resistance(string_voltage: ArrayLike, stage_capacitance: ArrayLike,
                                 load_capacitance: ArrayLike, stages: ArrayLike,
                                 time: ArrayLike, *, threshold: ArrayLike = SAFE_VOLTAGE
                                 ) -> NDArray[np.float64]:
    """The largest grading resistance that discharges the string to a threshold within a time.

    Parameters are those of :func:`uniform_discharge_time`, with ``time`` t_max [s] > 0.

    Returns
    -------
    numpy.ndarray
        R_max [ohm]; ``inf`` where V_s is at or below the threshold or the capacitance is zero.

    Notes
    -----
    The inverse of :func:`uniform_discharge_time`:

    .. math:: R \\le t_{max} / ((C + n C_{load}) \\ln(V_s / V_{th}))

    References
    ----------
    .. [1] J. W. Nilsson and S. A. Riedel, *Electric Circuits*, 9th ed., Prentice Hall, 2011,
       chapter 7; IEC 60204-1:2016 clause 6.2.4 (60 V within 5 s).
    """
    capacitance = (np.asarray(stage_capacitance, dtype=float)
                   + np.asarray(stages, dtype=float) * np.asarray(load_capacitance, dtype=float))
    logarithm = np.log(np.asarray(string_voltage, dtype=float) / np.asarray(threshold, dtype=float))
    with np.errstate(divide="ignore"):
        return np.where((logarithm > 0) & (capacitance > 0),
                        np.asarray(time, dtype=float) / (capacitance * np.maximum(logarithm, 1e-300)),
                        np.inf)


def stage_capacitance_floor(junction_capacitance: ArrayLike, stray_capacitance: ArrayLike,
                            multiple: ArrayLike) -> NDArray[np.float64]:
    """The least grading capacitance that dominates the stage's own capacitance.

    Parameters
    ----------
    junction_capacitance
        C_j of the device [F], >= 0.
    stray_capacitance
        Mounting stray capacitance across the stage [F], >= 0.
    multiple
        Required ratio m of the grading capacitor to C_j + stray, >= 1.

    Returns
    -------
    numpy.ndarray
        C_min = m (C_j + C_stray) [F].

    Notes
    -----
    The junction capacitance varies with voltage and between devices, and the strays with the
    layout: a grading capacitor ten times larger makes the dynamic sharing follow the grading
    capacitors (common practice).
    """
    return np.asarray(multiple, dtype=float) * (np.asarray(junction_capacitance, dtype=float)
                                                + np.asarray(stray_capacitance, dtype=float))


def critical_damping_resistance(inductance: ArrayLike, capacitance: ArrayLike,
                                stages: ArrayLike) -> NDArray[np.float64]:
    """The damping resistor per stage that critically damps the commutation loop.

    Parameters
    ----------
    inductance
        Commutation-loop inductance L [H], > 0.
    capacitance
        Grading capacitance of each stage C [F], > 0.
    stages
        Number of stages in series n, >= 1.

    Returns
    -------
    numpy.ndarray
        R_d [ohm] with damping ratio 1.

    Notes
    -----
    After the string blocks, L rings with the n series stages of C and R_d: a series RLC of
    R = n R_d and C / n, damping ratio zeta = (R / 2) sqrt(C_total / L) (see
    :func:`damping_ratio`). zeta = 1 gives

    .. math:: R_d = 2 \\sqrt{L / (n C)}

    References
    ----------
    .. [1] C. K. Alexander and M. N. O. Sadiku, *Fundamentals of Electric Circuits*, 5th ed.,
       McGraw-Hill, 2013, chapter 8 (second-order circuits): step response of a series RLC
       circuit, critically damped case R = 2 sqrt(L / C).
    """
    return 2.0 * np.sqrt(np.asarray(inductance, dtype=float)
                         / (np.asarray(stages, dtype=float) * np.asarray(capacitance, dtype=float)))


def damping_ratio(damping_resistance: ArrayLike, inductance: ArrayLike, capacitance: ArrayLike,
                  stages: ArrayLike) -> NDArray[np.float64]:
    """Damping ratio zeta of the commutation loop: L with n stages of C and R_d in series.

    Parameters are those of :func:`critical_damping_resistance`, with ``damping_resistance``
    R_d [ohm] >= 0.

    Returns
    -------
    numpy.ndarray
        zeta = (n R_d / 2) sqrt((C / n) / L) [1].

    References
    ----------
    .. [1] C. K. Alexander and M. N. O. Sadiku, *Fundamentals of Electric Circuits*, 5th ed.,
       McGraw-Hill, 2013, chapter 8: series RLC, alpha = R / (2 L), omega_0 = 1 / sqrt(L C).
    """
    n = np.asarray(stages, dtype=float)
    return (n * np.asarray(damping_resistance, dtype=float) / 2.0) * np.sqrt(
        np.asarray(capacitance, dtype=float) / n / np.asarray(inductance, dtype=float))


def recovery_step_voltage(peak_current: ArrayLike, damping_resistance: ArrayLike
                          ) -> NDArray[np.float64]:
    """The step of stage voltage when a device snaps off with its reverse current in R_d.

    Parameters
    ----------
    peak_current
        Reverse current at the snap, I_RM [A], >= 0.
    damping_resistance
        Damping resistor in series with the grading capacitor R_d [ohm], >= 0.

    Returns
    -------
    numpy.ndarray
        I_RM R_d [V].

    Notes
    -----
    At the snap the device's current can no longer flow in the device; the loop inductance holds
    it, so it flows on in the grading branch, where the capacitor's voltage cannot jump: the stage
    voltage steps by I_RM R_d. This is why an RC snubber's resistor is kept small.

    References
    ----------
    .. [1] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003, chapter 27 (snubber circuits): the
       diode snubber, the voltage step I_rr R_s at the snap.
    """
    return np.asarray(peak_current, dtype=float) * np.asarray(damping_resistance, dtype=float)
