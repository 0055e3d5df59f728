"""Forward conduction of a power diode: temperature-dependent line model, waveforms and losses.

The forward characteristic is the straight line v = V_T0(T) + r_T(T) i for i > 0 (the
threshold-voltage / slope-resistance representation of IEC 60747-2). The duty of a parallel
group is given, as rectifier ratings are, by the average forward current I_F(AV) of the whole
group and a waveform:

* ``"dc"``: a constant current I_F(AV), conducting all the time;
* ``"half-sine"``: a half-wave pulse train, i = I_pk sin(w t) during the first half period and 0
  during the second, I_F(AV) = I_pk / pi;
* ``"square"``: i = I_pk during the first half period and 0 during the second, I_F(AV) = I_pk / 2.

Besides conduction, a device dissipates leakage power while it blocks and recovery energy at
each turn-off. All functions are pure, vectorized, take SI units (temperatures in [degC]) and let
NaN propagate.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray
from scipy.special import gammaln

from stringcheck.physics.leakage import leakage_current
from stringcheck.physics.waveforms import SINE_PULSES, check_waveform, forward_peak_factor

__all__ = [
    "DEFAULT_PHASE_POINTS",
    "SLOPE_RESISTANCE_FLOOR",
    "PhaseSamples",
    "blocking_factor",
    "conduction_loss",
    "form_factor",
    "leakage_loss",
    "peak_factor",
    "phase_samples",
    "recovery_loss",
    "slope_resistance",
    "threshold_voltage",
]

SLOPE_RESISTANCE_FLOOR = 1e-9
"""Smallest slope resistance r_T(T) returned [ohm] (1 nano-ohm).

A linear temperature coefficient extrapolated far enough (a negative ``tempco_r_t`` at a high
temperature) would give r_T <= 0, which has no physical meaning and would make the branch
conductance infinite. The floor is five or more decades below the slope resistance of any power
diode (tenths of a milliohm and up) and so never binds inside the model's valid range; where it
does bind, the model is being used outside that range.
"""

DEFAULT_PHASE_POINTS = 80
"""Default number of midpoint samples over the conducting half period of a half-sine.

The midpoint rule on i = I_pk sin(theta), theta in (0, pi), with p points gives I_AV too large
by the factor (h / 2) / sin(h / 2), h = pi / p, i.e. a relative error h^2 / 24 + O(h^4), and
I_RMS exactly (sin^2 integrates exactly for p >= 2). With p = 80 the error of I_AV is 6.4e-5,
under the 1e-4 we aim for.
"""


@dataclass(frozen=True)
class PhaseSamples:
    """Instantaneous group currents at sample phases of one period, with their weights.

    Attributes
    ----------
    currents
        Instantaneous current of the whole group at each sample [A], shape ``(..., q)`` where
        ``...`` is the shape of the average current; only the conducting part of the period is
        sampled (the rest carries no current and adds nothing to any average).
    weights
        Fraction of the period each sample stands for [-], shape ``(q,)``; they add up to the
        conducting fraction of the period (1 for dc, 1/2 for half-sine and square).
    peak
        Peak group current I_pk [A], shape ``...`` (exact, not sampled).
    """

    currents: NDArray[np.float64]
    weights: NDArray[np.float64]
    peak: NDArray[np.float64]


def threshold_voltage(
    threshold_at_reference: ArrayLike,
    tempco: ArrayLike,
    junction_temperature: ArrayLike,
    reference_temperature: ArrayLike,
) -> NDArray[np.float64]:
    """Threshold voltage of the forward line model at a junction temperature.

    Parameters
    ----------
    threshold_at_reference
        Threshold voltage V_T0 at the reference temperature [V] (design key ``v_t0``), > 0.
    tempco
        Temperature coefficient of V_T0 [V/K] (design key ``tempco_v_t0``); about -2e-3 for a
        silicon PN junction (common practice).
    junction_temperature
        Junction temperature T [degC].
    reference_temperature
        Temperature T_ref at which V_T0 is given [degC].

    Returns
    -------
    numpy.ndarray
        V_T0(T) [V], broadcast shape of the inputs. Not clipped: a value <= 0 means the linear
        temperature law is being used outside its range.

    Notes
    -----
    .. math:: V_{T0}(T) = V_{T0} + \\alpha_V (T - T_\\mathrm{ref})

    References
    ----------
    .. [1] IEC 60747-2, *Semiconductor devices - Discrete devices - Part 2: Rectifier diodes*:
       threshold voltage V_(T0) and slope resistance r_T of the forward characteristic.
    .. [2] J. Lutz, H. Schlangenotto, U. Scheuermann and R. De Doncker, *Semiconductor Power
       Devices: Physics, Characteristics, Reliability*, Springer, 2011, chapter 5 (pin diodes),
       forward conduction and its temperature dependence (chapter from memory).
    """
    reference = np.asarray(threshold_at_reference, dtype=float)
    rise = np.asarray(junction_temperature, dtype=float) - np.asarray(
        reference_temperature, dtype=float
    )
    return reference + np.asarray(tempco, dtype=float) * rise


def slope_resistance(
    resistance_at_reference: ArrayLike,
    tempco: ArrayLike,
    junction_temperature: ArrayLike,
    reference_temperature: ArrayLike,
) -> NDArray[np.float64]:
    """Slope resistance of the forward line model at a junction temperature.

    Parameters
    ----------
    resistance_at_reference
        Slope resistance r_T at the reference temperature [ohm] (design key ``r_t``), > 0.
    tempco
        Relative temperature coefficient of r_T [1/K] (design key ``tempco_r_t``); positive for
        a unipolar (SiC Schottky-like) device, near zero or slightly positive for a silicon PN
        diode at high current.
    junction_temperature
        Junction temperature T [degC].
    reference_temperature
        Temperature T_ref at which r_T is given [degC].

    Returns
    -------
    numpy.ndarray
        r_T(T) [ohm], broadcast shape of the inputs, never below
        :data:`SLOPE_RESISTANCE_FLOOR`.

    Notes
    -----
    .. math:: r_T(T) = \\max\\bigl(r_T \\, (1 + \\alpha_r (T - T_\\mathrm{ref})),\\ r_{floor}\\bigr)

    References
    ----------
    .. [1] IEC 60747-2, *Semiconductor devices - Discrete devices - Part 2: Rectifier diodes*:
       threshold voltage V_(T0) and slope resistance r_T of the forward characteristic.
    """
    reference = np.asarray(resistance_at_reference, dtype=float)
    rise = np.asarray(junction_temperature, dtype=float) - np.asarray(
        reference_temperature, dtype=float
    )
    return np.maximum(
        reference * (1.0 + np.asarray(tempco, dtype=float) * rise), SLOPE_RESISTANCE_FLOOR
    )


def peak_factor(waveform: str) -> float:
    """Ratio of the peak to the average current, I_pk / I_AV, of a waveform.

    Parameters
    ----------
    waveform
        One of :data:`stringcheck.constants.WAVEFORMS`.

    Returns
    -------
    float
        1 for dc, pi for a half-sine pulse train, 2 for a square wave of duty 1/2 [-].

    Notes
    -----
    Half-sine: I_AV = (1 / 2 pi) int_0^pi I_pk sin(theta) d(theta) = I_pk / pi. Square:
    I_AV = I_pk / 2.
    """
    check_waveform(waveform)
    return forward_peak_factor(waveform)


def form_factor(waveform: str) -> float:
    """Ratio of the RMS to the average current, I_RMS / I_AV, of a waveform.

    Parameters
    ----------
    waveform
        One of :data:`stringcheck.constants.WAVEFORMS`.

    Returns
    -------
    float
        1 for dc, pi / 2 for a half-sine pulse train, sqrt(2) for a square wave of duty 1/2 [-].

    Notes
    -----
    Half-sine: I_RMS^2 = (1 / 2 pi) int_0^pi I_pk^2 sin^2(theta) d(theta) = I_pk^2 / 4, so
    I_RMS = I_pk / 2 and I_RMS / I_AV = pi / 2. Square: I_RMS = I_pk / sqrt(2), I_AV = I_pk / 2.
    """
    check_waveform(waveform)
    return {"dc": 1.0, "square": np.sqrt(2.0)}.get(waveform, np.pi / 2.0)


def phase_samples(
    average_current: ArrayLike, waveform: str, *, points: int = DEFAULT_PHASE_POINTS
) -> PhaseSamples:
    """Sample the group current over the conducting part of one period.

    Parameters
    ----------
    average_current
        Average forward current of the whole group I_F(AV) [A], >= 0; any shape ``...``.
    waveform
        One of :data:`stringcheck.constants.WAVEFORMS`.
    points
        Number of samples of a half-sine, >= 1. A dc or square current is constant while it
        flows and is represented exactly by a single sample whatever ``points`` is.

    Returns
    -------
    PhaseSamples
        ``currents`` of shape ``(..., q)`` [A], ``weights`` of shape ``(q,)`` [-] and ``peak`` of
        shape ``...`` [A], with q = ceil(points / 2) for a half-sine and 1 otherwise. The average
        over the period of any g(i) with g(0) = 0 is ``sum(weights * g(currents), axis=-1)``.

    Notes
    -----
    Half-sine: the midpoint rule in the phase theta = w t over (0, pi),

    .. math:: \\theta_j = (j + 1/2) \\pi / p, \\quad i_j = I_{pk} \\sin\\theta_j,
              \\quad w_j = 1 / (2 p), \\quad I_{pk} = \\pi I_{F(AV)}

    The midpoint rule keeps its second-order accuracy where a branch current has a kink (a
    branch that starts conducting part-way up the sine), which a Gauss rule would not. See
    :data:`DEFAULT_PHASE_POINTS` for the error. Since sin(theta_j) = sin(theta_(p-1-j)), the
    p samples are returned as q = ceil(p / 2) distinct currents, paired ones with weight 1 / p:
    the same sums for half the work. Square: one sample at I_pk = 2 I_F(AV) with weight
    1/2. dc: one sample at I_F(AV) with weight 1. The parallel and electro-thermal solvers
    integrate each branch of a group exactly instead, cutting the sine where each branch starts
    to conduct (:func:`stringcheck.solvers.parallel.phase_rule`).
    """
    check_waveform(waveform)
    average = np.asarray(average_current, dtype=float)
    peak = peak_factor(waveform) * average
    if waveform in SINE_PULSES:
        # sin(theta) = sin(pi - theta): the midpoint samples pair up, so keep one of each pair
        # with twice the weight (the middle one of an odd count stands alone).
        kept = (points + 1) // 2
        phase = (np.arange(kept) + 0.5) * (np.pi / points)
        currents = peak[..., None] * np.sin(phase)
        weights = np.full(kept, 1.0 / points)
        if points % 2:
            weights[-1] = 0.5 / points
    else:
        currents = peak[..., None]
        weights = np.array([1.0 if waveform == "dc" else 0.5])
    return PhaseSamples(currents=currents, weights=weights, peak=peak)


def conduction_loss(
    threshold: ArrayLike, resistance: ArrayLike, average_current: ArrayLike, rms_current: ArrayLike
) -> NDArray[np.float64]:
    """Average conduction loss of the forward line model.

    Parameters
    ----------
    threshold
        Threshold voltage V_T0 at the operating junction temperature [V].
    resistance
        Slope resistance r_T at the operating junction temperature [ohm], >= 0.
    average_current
        Average forward current of the device I_AV [A], >= 0.
    rms_current
        RMS forward current of the device I_RMS [A], >= I_AV.

    Returns
    -------
    numpy.ndarray
        Conduction loss P [W], broadcast shape of the inputs.

    Notes
    -----
    With v = V_T0 + r_T i while i > 0 and the junction temperature steady over a period (thermal
    time constant much longer than the period),

    .. math:: P = \\frac{1}{T_p} \\int_0^{T_p} v\\,i\\,dt = V_{T0} I_{AV} + r_T I_{RMS}^2

    References
    ----------
    .. [1] IEC 60747-2, *Semiconductor devices - Discrete devices - Part 2: Rectifier diodes*:
       threshold voltage V_(T0) and slope resistance r_T of the forward characteristic.
    .. [2] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003, chapter 20 (power diodes), on-state
       losses (section from memory).
    """
    threshold = np.asarray(threshold, dtype=float)
    resistance = np.asarray(resistance, dtype=float)
    return threshold * np.asarray(average_current, dtype=float) + resistance * np.square(
        np.asarray(rms_current, dtype=float)
    )


def blocking_factor(
    voltage_exponent: ArrayLike, waveform: str, *, forward_current: ArrayLike
) -> NDArray[np.float64]:
    """Mean over a period of (v / V)^(1 + m) for the reverse voltage of a waveform.

    Multiplying by V I_R(V), the blocking loss at the peak reverse voltage V, gives the average
    leakage loss over the period (see :func:`leakage_loss`).

    Parameters
    ----------
    voltage_exponent
        Exponent m of the leakage voltage law I_R ~ V^m [-], in [0, 1].
    waveform
        One of :data:`stringcheck.constants.WAVEFORMS`.
    forward_current
        Average forward current of the group [A], >= 0; decides only the dc case.

    Returns
    -------
    numpy.ndarray
        The factor k [-], broadcast shape of ``voltage_exponent`` and ``forward_current``.

    Notes
    -----
    Assumed reverse voltage of each waveform (v(t) is the device's share, V its peak):

    * half-sine (a half-wave rectifier fed from a sine): v = V sin(theta) over the blocking half
      period theta in (pi, 2 pi), 0 while conducting. With
      int_0^pi sin^a = sqrt(pi) Gamma((a + 1) / 2) / Gamma(a / 2 + 1) and a = 1 + m,

      .. math:: k = \\frac{1}{2\\sqrt{\\pi}} \\frac{\\Gamma(1 + m/2)}{\\Gamma((3 + m)/2)}

      which is 1/pi for m = 0 (the mean of a half-wave sine), 1/4 for m = 1;
    * square: v = V over the blocking half period, k = 1/2;
    * offset-sine: v = (V / 2)(1 - sin theta) = V sin^2(pi/4 - theta/2) over the whole period;
      the mean of sin^(2a) over a period is Gamma(a + 1/2) / (sqrt(pi) Gamma(a + 1)), so

      .. math:: k = \\frac{\\Gamma(m + 3/2)}{\\sqrt{\\pi}\\,\\Gamma(m + 2)}

      which is 1/2 for m = 0, 3/8 for m = 1;
    * dc: conducting continuously, k = 0, where a forward current flows; blocking continuously at
      V, k = 1, where the forward current is 0.

    The integral is a standard one (Gradshteyn and Ryzhik 3.621, from memory); the test
    checks k against numerical quadrature.
    """
    check_waveform(waveform)
    exponent = np.asarray(voltage_exponent, dtype=float)
    current = np.asarray(forward_current, dtype=float)
    if waveform == "half-sine":
        factor = np.exp(gammaln(1.0 + exponent / 2.0) - gammaln((3.0 + exponent) / 2.0)) / (
            2.0 * np.sqrt(np.pi)
        )
    elif waveform == "offset-sine":
        factor = np.exp(gammaln(exponent + 1.5) - gammaln(exponent + 2.0)) / np.sqrt(np.pi)
    elif waveform == "square":
        factor = np.full_like(exponent, 0.5)
    else:
        factor = np.where(current > 0.0, 0.0, np.ones_like(exponent))
    return factor * np.ones_like(current)


def leakage_loss(
    reference_current: ArrayLike,
    reverse_voltage: ArrayLike,
    junction_temperature: ArrayLike,
    *,
    reference_voltage: ArrayLike,
    reference_temperature: ArrayLike,
    doubling_temperature: ArrayLike,
    voltage_exponent: ArrayLike,
    waveform: str,
    forward_current: ArrayLike,
) -> NDArray[np.float64]:
    """Average reverse-leakage loss of a device over one period.

    Parameters
    ----------
    reference_current
        Leakage current I_R,ref at ``reference_voltage`` and ``reference_temperature`` [A], >= 0.
    reverse_voltage
        Peak reverse voltage across this device V (its share of the string voltage) [V], >= 0.
    junction_temperature
        Junction temperature T [degC], taken as steady over the period.
    reference_voltage, reference_temperature, doubling_temperature, voltage_exponent
        Parameters of :func:`stringcheck.physics.leakage.leakage_current`: V_ref [V], T_ref
        [degC], T_double [K], m [-].
    waveform
        One of :data:`stringcheck.constants.WAVEFORMS`; fixes the shape of the reverse voltage (see
        :func:`blocking_factor`).
    forward_current
        Average forward current of the group [A], >= 0 (a dc group with current blocks never).

    Returns
    -------
    numpy.ndarray
        Leakage loss P_R [W], broadcast shape of the inputs.

    Notes
    -----
    With I_R(v, T) = I_R(V, T) (v / V)^m,

    .. math:: P_R = \\frac{1}{T_p} \\int v\\, I_R(v, T)\\, dt = k(m)\\, V\\, I_R(V, T)

    with k from :func:`blocking_factor`. I_R(V, T) comes from
    :func:`stringcheck.physics.leakage.leakage_current` (power law in V, doubling in T).

    References
    ----------
    .. [1] S. M. Sze and K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007,
       chapter 2 (p-n junctions): generation current under reverse bias.
    """
    voltage = np.asarray(reverse_voltage, dtype=float)
    current = leakage_current(
        reference_current,
        voltage,
        junction_temperature,
        reference_voltage=reference_voltage,
        reference_temperature=reference_temperature,
        doubling_temperature=doubling_temperature,
        voltage_exponent=voltage_exponent,
    )
    factor = blocking_factor(voltage_exponent, waveform, forward_current=forward_current)
    return factor * voltage * current


def recovery_loss(
    recovery_charge: ArrayLike,
    reverse_voltage: ArrayLike,
    frequency: ArrayLike,
    *,
    tail_fraction: ArrayLike = 1.0,
) -> NDArray[np.float64]:
    """Estimate of the average reverse-recovery loss of a device.

    This is an estimate: the true recovery energy depends on how fast the reverse voltage
    builds up during recovery, which only a transient simulation or a measurement gives.

    Parameters
    ----------
    recovery_charge
        Reverse-recovery charge Q_rr at the application's forward current, di/dt and
        temperature [C], >= 0.
    reverse_voltage
        Reverse voltage the device takes up during recovery V_R [V], >= 0 (its share of the
        string voltage).
    frequency
        Number of turn-offs per second f [Hz], >= 0.
    tail_fraction
        Fraction of Q_rr recovered while the device already holds V_R [-], in [0, 1]. For the
        triangular recovery current it is t_b / t_rr = S / (1 + S), S the softness. The default
        1 is the upper bound.

    Returns
    -------
    numpy.ndarray
        Recovery loss P_rr [W], broadcast shape of the inputs.

    Notes
    -----
    In the triangular recovery model (see :mod:`stringcheck.physics.recovery`) the diode still
    holds almost no voltage while the reverse current rises (t_a); the voltage builds up to V_R
    around the current peak, and the tail charge recovered during t_b flows against V_R.
    Taking the voltage at V_R through the whole tail,

    .. math:: E_{rr} \\approx V_R \\int_{t_a}^{t_{rr}} i\\,dt
              = \\mathrm{tail\\_fraction}\\; Q_{rr} V_R, \\qquad P_{rr} = E_{rr} f

    With ``tail_fraction`` = 1 this is the quick estimate E_rr ~ Q_rr V_R (common practice),
    an upper bound of the triangular model. An overshoot of the voltage above V_R (stray
    inductance) is not included.

    References
    ----------
    .. [1] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics: Converters,
       Applications, and Design*, 3rd ed., Wiley, 2003, chapter 20 (power diodes), reverse
       recovery.
    .. [2] J. Lutz, H. Schlangenotto, U. Scheuermann and R. De Doncker, *Semiconductor Power
       Devices: Physics, Characteristics, Reliability*, Springer, 2011, chapter 5 (pin diodes),
       turn-off and reverse-recovery losses (chapter from memory).
    """
    return (
        np.asarray(tail_fraction, dtype=float)
        * np.asarray(recovery_charge, dtype=float)
        * np.asarray(reverse_voltage, dtype=float)
        * np.asarray(frequency, dtype=float)
    )
