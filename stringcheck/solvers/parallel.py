"""Current sharing of a parallel group of diode branches, over a waveform, and ballasting.

A group is m branches in parallel, each of n devices in series with a path resistance R_path.
Arrays carry Monte Carlo trials on the first axis: branch quantities have shape ``(trials, m)``.
Each device follows v = V_T0(T) + r_T(T) i for i > 0 (:mod:`stringcheck.physics.forward`), so a
branch is again a line, with threshold Theta_b = sum of its devices' V_T0(T) and resistance
rho_b = sum of their r_T(T) plus R_path. At an instant the branches share the group current at a
common voltage, sum_b max((v - Theta_b) / rho_b, 0) = i, solved exactly by
:func:`stringcheck.solvers.water_filling.water_fill` (the solver that also serves dynamic series
sharing). Over a waveform the phase is sampled (:func:`stringcheck.physics.forward.phase_samples`)
and the branch I_AV, I_RMS and peak follow from the sampled split; all samples and trials go
through one call of the water-filling solver. The electro-thermal equilibrium built on this
split is in :mod:`stringcheck.solvers.electrothermal`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from stringcheck.physics.forward import DEFAULT_PHASE_POINTS, phase_samples
from stringcheck.solvers.water_filling import water_fill

__all__ = [
    "Ballast",
    "BranchCurrents",
    "CurrentSplit",
    "ballast_for_share",
    "branch_currents",
    "split_current",
]


@dataclass(frozen=True)
class CurrentSplit:
    """Instantaneous split of a group current among parallel branches.

    Attributes
    ----------
    forward_voltage
        Common forward voltage of the group v [V], shape ``...``.
    currents
        Current of each branch i_b [A], shape ``(..., m)``, summing to the group current.
    """

    forward_voltage: NDArray[np.float64]
    currents: NDArray[np.float64]


@dataclass(frozen=True)
class BranchCurrents:
    """Branch currents of a parallel group over one period of a waveform.

    Attributes
    ----------
    average
        Average current of each branch I_AV [A], shape ``(..., m)``.
    rms
        RMS current of each branch I_RMS [A], shape ``(..., m)``.
    peak
        Peak current of each branch [A], shape ``(..., m)`` (at the group's peak current).
    """

    average: NDArray[np.float64]
    rms: NDArray[np.float64]
    peak: NDArray[np.float64]


def split_current(
    branch_threshold: ArrayLike, branch_resistance: ArrayLike, total_current: ArrayLike
) -> CurrentSplit:
    """Share an instantaneous group current among branches with line characteristics.

    Parameters
    ----------
    branch_threshold
        Threshold voltage of each branch Theta_b [V] (sum of its devices' V_T0(T)), shape
        ``(..., m)``, finite.
    branch_resistance
        Resistance of each branch rho_b [ohm] (sum of its devices' r_T(T) plus the path
        resistance), broadcastable to ``branch_threshold``, > 0.
    total_current
        Instantaneous group current i [A], broadcastable to the leading shape ``...``, >= 0.

    Returns
    -------
    CurrentSplit
        The common voltage ``...`` [V] and the branch currents ``(..., m)`` [A]. A branch whose
        threshold is above the common voltage carries nothing.

    Notes
    -----
    .. math:: v = \\Theta_b + \\rho_b i_b \\ (i_b > 0), \\qquad
              \\sum_b \\max((v - \\Theta_b) / \\rho_b, 0) = i

    solved exactly by :func:`stringcheck.solvers.water_filling.water_fill` (thresholds Theta_b,
    weights 1 / rho_b).

    References
    ----------
    .. [1] M. H. Rashid, *Power Electronics: Circuits, Devices and Applications*, 3rd ed.,
       Pearson Prentice Hall, 2004, chapter 2 (power semiconductor diodes), parallel-connected
       diodes.
    """
    solution = water_fill(
        branch_threshold, 1.0 / np.asarray(branch_resistance, dtype=float), total_current
    )
    return CurrentSplit(forward_voltage=solution.level, currents=solution.amounts)


def _sampled_split(threshold, resistance, average_current, waveform, points):
    """Branch currents at the phase samples, shape (..., p, m), and the phase samples."""
    threshold = np.asarray(threshold, dtype=float)
    resistance = np.asarray(resistance, dtype=float)
    average = np.asarray(average_current, dtype=float)
    leading = np.broadcast_shapes(
        threshold.shape[:-1], resistance.shape[:-1], average.shape
    )
    samples = phase_samples(np.broadcast_to(average, leading), waveform, points=points)
    split = split_current(threshold[..., None, :], resistance[..., None, :], samples.currents)
    return split.currents, samples


def branch_currents(
    branch_threshold: ArrayLike,
    branch_resistance: ArrayLike,
    average_current: ArrayLike,
    waveform: str,
    *,
    points: int = DEFAULT_PHASE_POINTS,
) -> BranchCurrents:
    """Average, RMS and peak current of each branch of a group over one period.

    Parameters
    ----------
    branch_threshold
        Threshold voltage of each branch [V], shape ``(..., m)``.
    branch_resistance
        Resistance of each branch [ohm], broadcastable to ``branch_threshold``, > 0.
    average_current
        Average forward current of the whole group I_F(AV) [A], broadcastable to ``...``, >= 0.
    waveform
        ``"dc"``, ``"half-sine"`` or ``"square"`` (see :mod:`stringcheck.physics.forward`).
    points
        Phase samples of a half-sine (see :func:`stringcheck.physics.forward.phase_samples`).

    Returns
    -------
    BranchCurrents
        I_AV, I_RMS and peak of each branch [A], each of shape ``(..., m)``.

    Notes
    -----
    With samples i_j of the group current, weights w_j and the split i_bj at each sample,

    .. math:: I_{AV,b} = \\sum_j w_j i_{bj}, \\qquad I_{RMS,b}^2 = \\sum_j w_j i_{bj}^2

    Each branch current is nondecreasing in the group current, so the branch peak is the split
    of the group peak, computed exactly rather than sampled. All samples and trials go through
    one call of the water-filling solver.
    """
    currents, samples = _sampled_split(
        branch_threshold, branch_resistance, average_current, waveform, points
    )
    average = np.einsum("...pm,p->...m", currents, samples.weights)
    rms = np.sqrt(np.einsum("...pm,p->...m", currents * currents, samples.weights))
    peak = split_current(branch_threshold, branch_resistance, samples.peak).currents
    return BranchCurrents(average=average, rms=rms, peak=peak)


@dataclass(frozen=True)
class Ballast:
    """Equal series resistance per branch that brings the current share to a target.

    Attributes
    ----------
    resistance
        Added resistance per branch R_add [ohm], shape ``...``; 0 where the share is already at
        or under the target, +inf where the target cannot be met (target <= 1).
    share
        max branch I_AV / mean branch I_AV with the ballast [-], shape ``...``.
    unballasted_share
        The same ratio without ballast [-], shape ``...``.
    loss
        Power dissipated in the added resistors, R_add sum_b I_RMS,b^2 [W], shape ``...``
        (NaN where the resistance is infinite).
    """

    resistance: NDArray[np.float64]
    share: NDArray[np.float64]
    unballasted_share: NDArray[np.float64]
    loss: NDArray[np.float64]


def _share_and_loss(threshold, resistance, added, total, waveform, points):
    currents = branch_currents(threshold, resistance + added[..., None], total, waveform,
                               points=points)
    share = currents.average.max(axis=-1) / currents.average.mean(axis=-1)
    return share, added * np.sum(currents.rms**2, axis=-1)


def ballast_for_share(
    branch_threshold: ArrayLike,
    branch_resistance: ArrayLike,
    total_current: ArrayLike,
    waveform: str,
    target_share: float,
    *,
    points: int = DEFAULT_PHASE_POINTS,
    rtol: float = 1e-12,
) -> Ballast:
    """Smallest equal series resistance per branch that meets a current-share target.

    Parameters
    ----------
    branch_threshold
        Threshold voltage of each branch [V], shape ``(..., m)``.
    branch_resistance
        Resistance of each branch without ballast [ohm], broadcastable to ``branch_threshold``,
        > 0.
    total_current
        Average forward current of the whole group I_F(AV) [A], broadcastable to ``...``, > 0.
    waveform
        ``"dc"``, ``"half-sine"`` or ``"square"``.
    target_share
        Allowed max branch I_AV / mean branch I_AV [-], > 1.
    points
        Phase samples of a half-sine.
    rtol
        Relative width of the final bracket on the resistance [-].

    Returns
    -------
    Ballast
        Resistance, share with and without it, and the loss in the added resistors.

    Notes
    -----
    Bisection on R_add, batched over rows: the upper end starts at max(rho_b, m (Theta_max -
    Theta_min) / I_F(AV)) and doubles until the target is met, then the bracket [lo, hi] is
    halved until hi - lo <= rtol hi; the feasible end hi is returned, so the share never
    exceeds the target. At one instant the share can only fall as R_add grows: with
    g_b = 1 / (rho_b + R_add) and the conducting set C, d i_b / d R_add = g_b (i_g - i_b) with
    i_g = sum_C g_c i_c / sum_C g_c, a weighted mean of the branch currents, which the
    largest current exceeds. For dc and square currents (a single sample) the bisection
    therefore finds the smallest resistance; for a half-sine, where branches may start
    conducting part-way up the sine, it finds a resistance at which the share meets the target.
    """
    threshold = np.asarray(branch_threshold, dtype=float)
    resistance = np.asarray(branch_resistance, dtype=float)
    total = np.asarray(total_current, dtype=float)
    count = threshold.shape[-1]
    leading = np.broadcast_shapes(threshold.shape[:-1], resistance.shape[:-1], total.shape)
    threshold = np.broadcast_to(threshold, leading + (count,)).reshape(-1, count)
    resistance = np.broadcast_to(resistance, leading + (count,)).reshape(-1, count)
    total = np.broadcast_to(total, leading).reshape(-1)
    rows = total.size

    zero = np.zeros(rows)
    unballasted, _ = _share_and_loss(threshold, resistance, zero, total, waveform, points)
    low, high = zero.copy(), np.full(rows, np.inf)
    pending = np.flatnonzero(unballasted > target_share)
    if target_share > 1.0 and pending.size:
        spread = np.ptp(threshold[pending], axis=-1) * count / total[pending]
        trial = np.maximum(resistance[pending].max(axis=-1), spread)
        for _ in range(200):  # doublings of the upper end, all rows at once
            share, _ = _share_and_loss(threshold[pending], resistance[pending], trial,
                                       total[pending], waveform, points)
            met = share <= target_share
            high[pending[met]] = trial[met]
            pending, trial = pending[~met], 2.0 * trial[~met]
            if not pending.size:
                break
        active = np.flatnonzero(np.isfinite(high) & (unballasted > target_share))
        while active.size:
            middle = 0.5 * (low[active] + high[active])
            share, _ = _share_and_loss(threshold[active], resistance[active], middle,
                                       total[active], waveform, points)
            met = share <= target_share
            high[active[met]] = middle[met]
            low[active[~met]] = middle[~met]
            active = active[high[active] - low[active] > rtol * high[active]]
    added = np.where(unballasted > target_share, high, 0.0)
    finite = np.isfinite(added)
    share, loss = _share_and_loss(threshold, resistance, np.where(finite, added, 0.0), total,
                                  waveform, points)
    share = np.where(finite, share, np.nan)
    loss = np.where(finite, loss, np.nan)
    return Ballast(
        resistance=added.reshape(leading),
        share=share.reshape(leading),
        unballasted_share=unballasted.reshape(leading),
        loss=loss.reshape(leading),
    )
