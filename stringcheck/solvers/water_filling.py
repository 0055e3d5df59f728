"""Exact water-filling: share a total among channels that open at different thresholds.

Channel k takes nothing while a common level L is below its threshold t_k and then grows with
slope w_k. The level at which the channels together take a given total is found exactly by
sorting the thresholds, so that the sum becomes a piecewise-linear increasing function of L, and
solving its one linear piece that crosses the total (in practice an active-set Newton iteration
finds that piece first, usually in one step). The same solver serves

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

# Active-set Newton steps before the rows still moving are finished by sorting.
_NEWTON_STEPS = 4


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
    The left side h(L) is piecewise linear, convex and increasing in L. On the set A of channels
    with t_k <= L it is the line W_A L - M_A with W_A = sum_{k in A} w_k and
    M_A = sum_{k in A} w_k t_k, whose root is

    .. math:: L_A = (\\mathrm{total} + M_A) / W_A

    Newton's method on h from the right is an active-set iteration: start with every channel
    active (L_0 is at or above the root, since h lies above each of its linear pieces), then
    repeatedly keep the channels with t_k <= L_j and solve their line again. The level falls
    monotonically, the set only shrinks, and the iteration ends exactly, with the right set, as
    soon as the set stays the same: at most n steps, and one step when every channel is open at
    the solution (the usual case for a series string, whose voltage exceeds the spread of the
    recovery charges over the capacitances). Rows still moving after a few steps are finished by
    sorting: with t_(1) <= ... <= t_(n) and their weights, on the segment t_(j) <= L <= t_(j+1)
    the left side is W_j (L - t_(j)) + F_j with W_j = sum_{i<=j} w_(i) and
    F_j = sum_{i<j} w_(i) (t_(j) - t_(i)) its value at the breakpoint t_(j). F_j is nondecreasing
    in j; the segment that holds the solution is the last j with F_j < total, and there

    .. math:: L = t_{(j)} + (\\mathrm{total} - F_j) / W_j

    The sums, the level and the amounts are all formed on thresholds shifted by the row minimum,
    which keeps them free of cancellation when the thresholds share a large common offset; the
    offset is added back to the returned level only. Cost O(n) per row and step, O(n log n) for
    the sorted rows, all rows at once; no loop over rows.

    References
    ----------
    .. [1] T. M. Cover and J. A. Thomas, *Elements of Information Theory*, 2nd ed., Wiley, 2006,
       chapter 9 (Gaussian channel), section 9.4, parallel Gaussian channels: water-filling.
    .. [2] J. Duchi, S. Shalev-Shwartz, Y. Singer and T. Chandra, "Efficient projections onto the
       l1-ball for learning in high dimensions", *Proc. 25th International Conference on Machine
       Learning (ICML)*, 2008: the exact sort-based O(n log n) solution of the same
       piecewise-linear equation.
    .. [3] W. H. Press, S. A. Teukolsky, W. T. Vetterling and B. P. Flannery, *Numerical Recipes:
       The Art of Scientific Computing*, 3rd ed., Cambridge University Press, 2007, section 9.4
       (Newton-Raphson method; from the convex side it converges monotonically).
    """
    thresholds = np.asarray(thresholds, dtype=float)
    weights = np.asarray(weights, dtype=float)
    total = np.asarray(total, dtype=float)
    count = np.broadcast_shapes(thresholds.shape, weights.shape)[-1]
    leading = np.broadcast_shapes(
        np.broadcast_shapes(thresholds.shape, weights.shape)[:-1], total.shape
    )
    rows = int(np.prod(leading, dtype=int))
    thresholds = np.broadcast_to(thresholds, leading + (count,)).reshape(rows, count)
    weights = np.broadcast_to(weights, leading + (count,)).reshape(rows, count)
    total = np.broadcast_to(total, leading).reshape(rows)

    starts = np.arange(0, rows * count, count)
    # Row minima and maxima by reduceat: about twice as fast as min(axis=-1) on short rows.
    offset = np.minimum.reduceat(thresholds.reshape(-1), starts) if rows else np.zeros(0)
    shifted = thresholds - offset[:, None]
    weighted = weights * shifted
    with np.errstate(divide="ignore", invalid="ignore"):
        level = (total + _row_sum(weighted)) / _row_sum(weights)
    invalid = np.isnan(level)
    widest = np.maximum.reduceat(shifted.reshape(-1), starts) if rows else np.zeros(0)
    moving = np.flatnonzero(~invalid & ~(widest <= level))
    active = None
    for _ in range(_NEWTON_STEPS):
        if moving.size == 0:
            break
        if active is None:
            active = shifted[moving] <= level[moving, None]
        else:
            active &= shifted[moving] <= level[moving, None]
        level[moving] = (total[moving] + _row_sum(np.where(active, weighted[moving], 0.0))) / (
            _row_sum(np.where(active, weights[moving], 0.0))
        )
        changed = ~np.all(active == (shifted[moving] <= level[moving, None]), axis=-1)
        moving, active = moving[changed], active[changed]
    if moving.size:
        level[moving] = _sorted_level(shifted[moving], weights[moving], total[moving])
    level[invalid] = np.nan
    # Amounts from the shifted level, so that a large common offset costs no precision.
    amounts = np.maximum(level[:, None] - shifted, 0.0)
    amounts *= weights
    return WaterFill(
        level=(offset + level).reshape(leading), amounts=amounts.reshape(leading + (count,))
    )


def _row_sum(values: NDArray[np.float64]) -> NDArray[np.float64]:
    """Sum over the last axis (einsum's loop is several times faster than ``sum`` on short rows)."""
    return np.einsum("ij->i", values)


def _sorted_level(
    shifted: NDArray[np.float64], weights: NDArray[np.float64], total: NDArray[np.float64]
) -> NDArray[np.float64]:
    """The level of each row by sorting its thresholds (rows on axis 0; thresholds >= 0)."""
    order = np.argsort(shifted, axis=-1)
    sorted_thresholds = np.take_along_axis(shifted, order, axis=-1)
    sorted_weights = np.take_along_axis(weights, order, axis=-1)
    cumulative_weight = np.cumsum(sorted_weights, axis=-1)
    cumulative_moment = np.cumsum(sorted_weights * sorted_thresholds, axis=-1)
    # F_j = W_{j-1} s_j - M_{j-1}, the left side at breakpoint j (F_0 = 0).
    breakpoint_value = np.zeros_like(sorted_thresholds)
    breakpoint_value[:, 1:] = (
        cumulative_weight[:, :-1] * sorted_thresholds[:, 1:] - cumulative_moment[:, :-1]
    )
    segment = np.maximum(np.sum(breakpoint_value < total[:, None], axis=-1) - 1, 0)[:, None]
    start = np.take_along_axis(sorted_thresholds, segment, axis=-1)[:, 0]
    start_value = np.take_along_axis(breakpoint_value, segment, axis=-1)[:, 0]
    slope = np.take_along_axis(cumulative_weight, segment, axis=-1)[:, 0]
    return start + (total - start_value) / slope
