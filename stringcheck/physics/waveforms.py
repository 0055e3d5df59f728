"""The duty waveforms: shape of the reverse voltage, its mean square, the forward current's peak
factor and the natural commutation slope at the end of a conduction pulse.

Every waveform of :data:`stringcheck.constants.WAVEFORMS` is described here once, as a function
of the phase theta = omega t over one period [0, 2 pi):

* ``"dc"``: a constant forward current; the string blocks a constant voltage V when it does not
  conduct (the reverse voltage is taken as V throughout, the conservative case);
* ``"half-sine"``: a half-wave rectifier fed from a sine; the diode conducts
  i = I_pk sin(theta) over (0, pi) and blocks v = V |sin(theta)| over (pi, 2 pi);
* ``"square"``: i = I_pk over (0, pi), v = V over (pi, 2 pi);
* ``"offset-sine"``: capacitor-input and voltage-multiplier duty: the diode's cathode sits on a
  smoothing capacitor at the peak while its anode follows the source, so the reverse voltage
  swings between 0 and the peak as v = (V / 2)(1 - sin(theta)) through the whole period. The
  forward current flows in short pulses near v = 0 whose shape depends on the load and the
  capacitors; it is taken as a half-sine pulse of the same average (a modelling choice the report
  lists: a shorter pulse commutates from a higher peak, so give ``duty.di_dt`` where it is known).

All functions are pure and vectorized over their array arguments; SI units.

References
----------
.. [1] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics: Converters, Applications,
   and Design*, 3rd ed., Wiley, 2003, chapter 5 (line-frequency diode rectifiers): the half-wave
   rectifier and the capacitor-input rectifier (chapter from memory).
.. [2] E. Kuffel, W. S. Zaengl and J. Kuffel, *High Voltage Engineering: Fundamentals*, 2nd ed.,
   Newnes, 2000, chapter 2 (generation of high direct voltages): the voltage across the diodes of
   a Cockcroft-Walton multiplier swings between 0 and twice the source peak (from memory).
"""

from __future__ import annotations

import math

import numpy as np
from numpy.typing import ArrayLike, NDArray

from stringcheck.constants import WAVEFORMS
from stringcheck.errors import StringcheckError

__all__ = [
    "COMMUTATING_PULSES",
    "SINE_PULSES",
    "check_waveform",
    "forward_peak_factor",
    "natural_commutation_slope",
    "reverse_mean_square",
    "reverse_voltage_shape",
]

SINE_PULSES = ("half-sine", "offset-sine")
"""Waveforms whose forward current is a half-sine pulse i = I_pk sin(theta), theta in (0, pi)."""

COMMUTATING_PULSES = ("half-sine", "offset-sine", "square")
"""Waveforms whose forward current stops once a period (a turn-off every period)."""


def check_waveform(waveform: str) -> None:
    """Raise StringcheckError unless ``waveform`` is one of :data:`stringcheck.constants.WAVEFORMS`."""
    if waveform not in WAVEFORMS:
        valid = ", ".join(repr(name) for name in WAVEFORMS)
        raise StringcheckError(f"waveform: {waveform!r} is not known; use one of {valid}")


def reverse_voltage_shape(waveform: str, phase: ArrayLike) -> NDArray[np.float64]:
    """The reverse voltage over the period as a fraction of its peak, v(theta) / V.

    Parameters
    ----------
    waveform
        One of :data:`stringcheck.constants.WAVEFORMS`.
    phase
        Phase theta = omega t [rad], any real value (taken modulo 2 pi); any shape.

    Returns
    -------
    numpy.ndarray
        v / V [-] in [0, 1], the shape of ``phase``: 1 for dc; |sin theta| over (pi, 2 pi) and
        0 over [0, pi] for a half-sine; 1 over (pi, 2 pi) and 0 over [0, pi] for a square wave;
        (1 - sin theta) / 2 for an offset-sine (0 at theta = pi / 2, 1 at 3 pi / 2).

    References
    ----------
    .. [1] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics*, 3rd ed., Wiley, 2003,
       chapter 5 (line-frequency diode rectifiers) (chapter from memory).
    """
    check_waveform(waveform)
    theta = np.mod(np.asarray(phase, dtype=float), 2.0 * np.pi)
    blocking = theta > np.pi
    if waveform == "dc":
        return np.ones_like(theta)
    if waveform == "half-sine":
        return np.where(blocking, -np.sin(theta), 0.0)
    if waveform == "square":
        return np.where(blocking, 1.0, 0.0)
    return 0.5 * (1.0 - np.sin(theta))


def reverse_mean_square(waveform: str) -> float:
    """Mean over a period of (v / V)^2, the reverse voltage's mean square over its peak's square.

    Parameters
    ----------
    waveform
        One of :data:`stringcheck.constants.WAVEFORMS`.

    Returns
    -------
    float
        1 for dc, 1/4 for a half-sine, 1/2 for a square wave, 3/8 for an offset-sine [-]. Times
        V^2 / R it is the average power of a resistor across the stage.

    Notes
    -----
    Half-sine: (1 / 2 pi) int_pi^2pi sin^2 = 1/4. Offset-sine: with (1 - sin theta) / 2 =
    sin^2(pi/4 - theta/2), the mean of sin^4 over a period, 3/8.

    References
    ----------
    .. [1] I. S. Gradshteyn and I. M. Ryzhik, *Table of Integrals, Series, and Products*, 7th ed.,
       Academic Press, 2007, 2.513 (powers of the sine) (from memory); tests check by quadrature.
    """
    check_waveform(waveform)
    return {"dc": 1.0, "half-sine": 0.25, "square": 0.5, "offset-sine": 0.375}[waveform]


def forward_peak_factor(waveform: str) -> float:
    """Ratio of the forward current's peak to its average over the period, I_pk / I_AV [-].

    Parameters
    ----------
    waveform
        One of :data:`stringcheck.constants.WAVEFORMS`.

    Returns
    -------
    float
        1 for dc, 2 for a square wave, pi for a half-sine pulse (half-sine and offset-sine).

    Notes
    -----
    Half-sine pulse: I_AV = (1 / 2 pi) int_0^pi I_pk sin = I_pk / pi.
    """
    check_waveform(waveform)
    return {"dc": 1.0, "square": 2.0}.get(waveform, math.pi)


def natural_commutation_slope(
    average_current: ArrayLike, frequency: ArrayLike, waveform: str
) -> NDArray[np.float64]:
    """Rate at which the forward current falls at its own zero crossing, |di/dt| there [A/s].

    Parameters
    ----------
    average_current
        Average forward current of a branch over the period I_AV [A], >= 0.
    frequency
        Repetition frequency f [Hz], > 0.
    waveform
        One of :data:`stringcheck.constants.WAVEFORMS`.

    Returns
    -------
    numpy.ndarray
        omega I_pk = 2 pi f pi I_AV for a half-sine pulse (half-sine, offset-sine); NaN for dc and
        square, whose current has no slope of its own (the circuit's di/dt or stray inductance
        decides).

    Notes
    -----
    .. math:: \\left|\\frac{d}{dt} I_{pk} \\sin\\omega t\\right|_{t = \\pi/\\omega}
              = \\omega I_{pk} |\\cos\\pi| = \\omega I_{pk}

    References
    ----------
    .. [1] N. Mohan, T. M. Undeland and W. P. Robbins, *Power Electronics*, 3rd ed., Wiley, 2003,
       chapter 5 (line-frequency diode rectifiers): natural commutation at the current zero
       (chapter from memory).
    """
    check_waveform(waveform)
    average = np.asarray(average_current, dtype=float)
    omega = 2.0 * np.pi * np.asarray(frequency, dtype=float)
    if waveform in SINE_PULSES:
        return omega * forward_peak_factor(waveform) * average
    return np.full(np.broadcast(average, omega).shape, np.nan)
