"""Exact water-filling: share a total among channels that open at different thresholds.

Channel k takes nothing while a common level L is below its threshold t_k and then grows with
slope w_k. The level at which the channels together take a given total is found exactly by
sorting the thresholds, so that the sum becomes a piecewise-linear increasing function of L, and
solving its one linear piece that crosses the total. The same solver serves

* dynamic sharing of a series string (thresholds: recovery charges Q_rr,k [C]; weights: 1 / C_k
  [1/F]; total: the string voltage [V]; level: the extracted charge [C]; amounts: stage
  voltages [V]), and
* current sharing of a parallel group (thresholds: threshold voltages V_T0,k [V]; weights: 1 / r_k
  [1/ohm]; total: the group current [A]; level: the common forward voltage [V]; amounts: branch
  currents [A]).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["WaterFill", "water_fill"]


@dataclass(frozen=True)
class WaterFill:
    """Solution of a water-filling problem.

    Attributes
    ----------
    level
        The common level L, shape ``...`` (the broadcast leading shape), in the unit of the
        thresholds.
    amounts
        What each channel takes, w_k max(L - t_k, 0), shape ``(..., n)``, in the unit of the total.
    """

    level: NDArray[np.float64]
    amounts: NDArray[np.float64]


def water_fill(thresholds: ArrayLike, weights: ArrayLike, total: ArrayLike) -> WaterFill:
    """Find the common level at which channels with thresholds and slopes take a given total.

    Solves, along the last axis,

    .. math:: \\sum_k w_k \\max(L - t_k, 0) = \\mathrm{total}

    for the level L and returns it with the amounts w_k max(L - t_k, 0).

    Parameters
    ----------
    thresholds
        Thresholds t_k, shape ``(..., n)``, finite. Unit of the level (for example [C] or [V]).
    weights
        Slopes w_k, broadcastable to ``thresholds``, > 0 and finite. Unit of the total per unit
        of the level (for example [1/F] or [1/ohm]).
    total
        The total to share, broadcastable against the leading shape ``...``, >= 0. Unit of the
        amounts (for example [V] or [A]).

    Returns
    -------
    WaterFill
        ``level`` with shape ``...`` and ``amounts`` with shape ``(..., n)``. For total = 0 the
        level is the smallest threshold and every amount is 0. A NaN anywhere in a row gives a NaN
        level and NaN amounts for that row.

    Notes
    -----
    Sort the thresholds of each row, t_(1) <= ... <= t_(n), with their weights. On the segment
    t_(j) <= L <= t_(j+1) the left side is W_j (L - t_(j)) + F_j with W_j = sum_{i<=j} w_(i) and
    F_j = sum_{i<j} w_(i) (t_(j) - t_(i)) its value at the breakpoint t_(j). F_j is nondecreasing
    in j; the segment that holds the solution is the last j with F_j < total, and there

    .. math:: L = t_{(j)} + (\\mathrm{total} - F_j) / W_j

    The cumulative sums, the level and the amounts are all formed on thresholds shifted by the
    row minimum, which keeps them free of cancellation when the thresholds share a large common
    offset; the offset is added back to the returned level only. Cost O(n log n) per row, all
    rows at once (``argsort``, ``take_along_axis``, ``cumsum``); no loop over rows.

    References
    ----------
    .. [1] T. M. Cover and J. A. Thomas, *Elements of Information Theory*, 2nd ed., Wiley, 2006,
       chapter 9 (Gaussian channel), section 9.4, parallel Gaussian channels: water-filling.
    .. [2] J. Duchi, S. Shalev-Shwartz, Y. Singer and T. Chandra, "Efficient projections onto the
       l1-ball for learning in high dimensions", *Proc. 25th International Conference on Machine
       Learning (ICML)*, 2008: the exact sort-based O(n log n) solution of the same
       piecewise-linear equation.
    """
    thresholds = np.asarray(thresholds, dtype=float)
    weights = np.asarray(weights, dtype=float)
    total = np.asarray(total, dtype=float)
    count = np.broadcast_shapes(thresholds.shape, weights.shape)[-1]
    leading = np.broadcast_shapes(
        np.broadcast_shapes(thresholds.shape, weights.shape)[:-1], total.shape
    )
    thresholds = np.broadcast_to(thresholds, leading + (count,))
    weights = np.broadcast_to(weights, leading + (count,))
    total = np.broadcast_to(total, leading)

    order = np.argsort(thresholds, axis=-1)
    sorted_thresholds = np.take_along_axis(thresholds, order, axis=-1)
    sorted_weights = np.take_along_axis(weights, order, axis=-1)
    offset = sorted_thresholds[..., :1]
    shifted = sorted_thresholds - offset

    cumulative_weight = np.cumsum(sorted_weights, axis=-1)
    cumulative_moment = np.cumsum(sorted_weights * shifted, axis=-1)
    # F_j = W_{j-1} s_j - M_{j-1}, the left side at breakpoint j (F_0 = 0).
    breakpoint_value = np.zeros_like(shifted)
    breakpoint_value[..., 1:] = (
        cumulative_weight[..., :-1] * shifted[..., 1:] - cumulative_moment[..., :-1]
    )
    segment = np.sum(breakpoint_value < total[..., None], axis=-1) - 1
    segment = np.maximum(segment, 0)[..., None]

    start = np.take_along_axis(shifted, segment, axis=-1)[..., 0]
    start_value = np.take_along_axis(breakpoint_value, segment, axis=-1)[..., 0]
    slope = np.take_along_axis(cumulative_weight, segment, axis=-1)[..., 0]
    shifted_level = start + (total - start_value) / slope

    invalid = (
        np.isnan(thresholds).any(axis=-1) | np.isnan(weights).any(axis=-1) | np.isnan(total)
    )
    shifted_level = np.where(invalid, np.nan, shifted_level)
    # Amounts from the shifted level, so that a large common offset costs no precision.
    amounts = weights * np.maximum(shifted_level[..., None] - (thresholds - offset), 0.0)
    return WaterFill(level=offset[..., 0] + shifted_level, amounts=amounts)
