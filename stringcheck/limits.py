"""How every check compares a stress with its limit.

A device whose stress equals its limit passes. In floating point "equals" is a few rounding steps
wide: the stage voltage of a stack of n identical devices at V_s = n x derating x V_RRM comes out of
the charge balance or the static solver through a different chain of roundings than
derating x V_RRM itself, and lands one or two units in the last place (ulps) above or below it. So a
stress passes when it is within a relative ``LIMIT_RTOL`` (four ulps of 1.0) of its limit. The
checks (static, dynamic, transient, parallel, thermal, the electro-thermal T_j,max class, the
grading ratings, the damping search of ``size``, the importance sampler's failure indicator and
its search) make their pass/fail comparison through
:func:`within_limit` (or its complement :func:`exceeds_limit`, for counting devices over a limit),
so that one device judged by two checks is judged alike.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["LIMIT_RTOL", "exceeds_limit", "within_limit"]

# Four units in the last place of 1.0: wider than the one or two rounding steps by which two float
# paths to one value differ, far below any difference a datasheet or a measurement can resolve.
LIMIT_RTOL = 4.0 * float(np.finfo(float).eps)


def within_limit(value: ArrayLike, limit: ArrayLike = 1.0, *,
                 rtol: float = LIMIT_RTOL) -> NDArray[np.bool_] | np.bool_:
    """Whether ``value`` is at most ``limit``, allowing a relative ``rtol`` for rounding.

    Parameters
    ----------
    value
        The stress [any unit], or a stress ratio [-] with the default ``limit`` of 1; any shape.
    limit
        The allowed value, in the unit of ``value``, broadcastable against it; positive, or +inf
        (no limit).
    rtol
        Relative tolerance [-] (default :data:`LIMIT_RTOL`, four ulps of 1.0).

    Returns
    -------
    numpy.ndarray of bool or numpy.bool_
        ``value <= limit * (1 + rtol)`` element by element; False where ``value`` or ``limit`` is
        NaN (an unsolved or undefined stress fails).

    Notes
    -----
    The tolerance scales with the limit, so it is the same number of rounding steps at 1 V and at
    100 kV. A ratio r = value / limit carries one rounding more than the pair (half an ulp), well
    inside the four ulps.

    References
    ----------
    .. [1] D. Goldberg, "What every computer scientist should know about floating-point
       arithmetic", ACM Computing Surveys 23 (1), 1991: relative error of a rounded operation at
       most half an ulp (eps / 2), so k operations stay within about k eps / 2.
    """
    value = np.asarray(value, dtype=float)
    limit = np.asarray(limit, dtype=float)
    with np.errstate(invalid="ignore", over="ignore"):
        return value <= limit * (1.0 + rtol)


def exceeds_limit(value: ArrayLike, limit: ArrayLike = 1.0, *,
                  rtol: float = LIMIT_RTOL) -> NDArray[np.bool_] | np.bool_:
    """Whether ``value`` is above ``limit`` by more than the rounding allowance ``rtol``: the
    complement of :func:`within_limit` except at NaN, which exceeds nothing (for counting the
    devices over their limit; a trial with an undefined stress is failed by :func:`within_limit`).

    Parameters and units as :func:`within_limit`; returns ``value > limit * (1 + rtol)``.
    """
    value = np.asarray(value, dtype=float)
    limit = np.asarray(limit, dtype=float)
    with np.errstate(invalid="ignore", over="ignore"):
        return value > limit * (1.0 + rtol)
