"""Current sharing of a parallel group of diode branches, over a waveform, and ballasting.

A group is m branches in parallel, each of n devices in series with a path resistance R_path.
Arrays carry Monte Carlo trials on the first axis: branch quantities have shape ``(trials, m)``.
Each device follows v = V_T0(T) + r_T(T) i for i > 0 (:mod:`stringcheck.physics.forward`), so a
branch is again a line, with threshold Theta_b = sum of its devices' V_T0(T) and resistance
rho_b = sum of their r_T(T) plus R_path. At an instant the branches share the group current at a
common voltage, sum_b max((v - Theta_b) / rho_b, 0) = i, solved exactly by
:func:`stringcheck.solvers.water_filling.water_fill` (the solver that also serves dynamic series
sharing). Over a waveform the branch I_AV, I_RMS and peak are exact for every branch: a dc or
square current is constant while it flows; a half-sine is cut where each branch starts to
conduct, and on each piece the branch currents are linear in the group current, so their
averages are closed forms (:func:`branch_currents`, O(m log m) per group) and a two-node rule per
piece integrates them exactly (:func:`phase_rule`, for the electro-thermal Jacobian). The
electro-thermal equilibrium built on this split is in :mod:`stringcheck.solvers.electrothermal`.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from stringcheck.physics.forward import peak_factor, phase_samples
from stringcheck.solvers.water_filling import water_fill

__all__ = [
    "Ballast",
    "BranchCurrents",
    "CurrentSplit",
    "PhaseRule",
    "ballast_for_share",
    "branch_currents",
    "phase_rule",
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


@dataclass(frozen=True)
class PhaseRule:
    """Nodes and weights of a quadrature over one period, exact for every branch of a group.

    Attributes
    ----------
    currents
        Group current at each node [A], shape ``(..., q)``.
    weights
        Fraction of the period each node stands for [-], shape ``(..., q)``; they add up to the
        conducting fraction of the period (1 for dc, 1/2 for half-sine and square).
    peak
        Peak group current I_pk [A], shape ``...``.
    """

    currents: NDArray[np.float64]
    weights: NDArray[np.float64]
    peak: NDArray[np.float64]


def phase_rule(
    branch_threshold: ArrayLike,
    branch_resistance: ArrayLike,
    average_current: ArrayLike,
    waveform: str,
) -> PhaseRule:
    """A quadrature over one period that is exact for the currents of every branch of a group.

    Parameters
    ----------
    branch_threshold
        Threshold voltage of each branch Theta_b [V], shape ``(..., m)``, finite.
    branch_resistance
        Resistance of each branch rho_b [ohm], broadcastable to ``branch_threshold``, > 0.
    average_current
        Average forward current of the whole group I_F(AV) [A], broadcastable to ``...``, >= 0.
    waveform
        ``"dc"``, ``"half-sine"`` or ``"square"`` (see :mod:`stringcheck.physics.forward`).

    Returns
    -------
    PhaseRule
        Nodes ``(..., q)`` [A] and weights ``(..., q)`` [-], q = 1 for dc and square and 2 m for
        a half-sine; the period average of any g(i_b) of degree <= 2 in the branch currents
        (I_AV, I_RMS^2, products of two branches) is ``sum(weights * g(split at currents))``,
        exact up to rounding.

    Notes
    -----
    dc and square: the current is constant while it flows, one node (I_F(AV), weight 1; or
    I_pk = 2 I_F(AV), weight 1/2). Half-sine, i = I_pk sin(theta) on (0, pi): branch c starts
    to conduct when the group current reaches

    .. math:: I_c = \\sum_b \\max(\\Theta_c - \\Theta_b, 0) / \\rho_b

    (the water-filling breakpoints), at the phase theta_c = arcsin(I_c / I_pk). Between two
    such phases the conducting set is fixed and every branch current is linear in i, so an
    integrand of degree <= 2 in the branch currents is a polynomial of degree <= 2 in
    s = sin(theta). On each piece [a, b] of (0, pi/2) (mirrored onto (pi/2, pi), sin being
    symmetric there), with h = (b - a) / 2, c = (a + b) / 2 and sinc(x) = sin(x) / x,

    .. math:: \\bar s = \\sin c \\,\\mathrm{sinc}\\,h, \\qquad
              \\overline{s^2} = \\tfrac12 (1 - \\mathrm{sinc}\\,2h) + \\mathrm{sinc}\\,2h \\sin^2 c

    (the integrals of sin and sin^2 over the piece divided by its width), and the two nodes
    s = s_bar -+ sigma, sigma^2 = mean(s^2) - s_bar^2, each of weight (b - a) / (2 pi),
    reproduce the piece's integrals of 1, s and s^2 exactly. The nodes lie inside the piece
    (they are clipped to it against rounding in pieces narrower than about 1e-7), so the split
    at a node has the piece's conducting set. The pieces' edges move with Theta and rho, but
    the branch currents are continuous across them, so the derivatives of the exact averages
    are the same rule applied to the piecewise derivatives of the split (Leibniz's rule: the
    edge terms cancel).

    References
    ----------
    .. [1] P. J. Davis and P. Rabinowitz, *Methods of Numerical Integration*, 2nd ed., Academic
       Press, 1984, chapter 2 (rules exact for polynomials; chapter from memory).
    """
    threshold = np.asarray(branch_threshold, dtype=float)
    resistance = np.asarray(branch_resistance, dtype=float)
    average = np.asarray(average_current, dtype=float)
    leading = np.broadcast_shapes(threshold.shape[:-1], resistance.shape[:-1], average.shape)
    samples = phase_samples(np.broadcast_to(average, leading), waveform, points=1)
    if waveform not in ("half-sine", "offset-sine"):
        return PhaseRule(currents=samples.currents,
                         weights=np.broadcast_to(samples.weights, samples.currents.shape),
                         peak=samples.peak)
    count = max(threshold.shape[-1], resistance.shape[-1])
    threshold = np.broadcast_to(threshold, leading + (count,))
    conductance = np.broadcast_to(1.0 / resistance, leading + (count,))
    onset = np.einsum("...b,...cb->...c", conductance,
                      np.maximum(threshold[..., :, None] - threshold[..., None, :], 0.0))
    peak = samples.peak[..., None]
    ratio = np.divide(onset, peak, out=np.ones_like(onset), where=peak > 0.0)
    lower = np.sort(np.arcsin(np.clip(ratio, 0.0, 1.0)), axis=-1)
    upper = np.concatenate([lower[..., 1:], np.full(leading + (1,), 0.5 * np.pi)], axis=-1)
    mean, square = _piece_moments(lower, upper)
    spread = np.sqrt(np.maximum(square - mean * mean, 0.0))
    low_end, high_end = np.sin(lower), np.sin(upper)
    nodes = np.concatenate([np.clip(mean - spread, low_end, high_end),
                            np.clip(mean + spread, low_end, high_end)], axis=-1)
    weight = 0.5 * (upper - lower) / np.pi  # (b - a) / (2 pi) per node, both halves of the sine
    return PhaseRule(currents=peak * nodes, weights=np.concatenate([weight, weight], axis=-1),
                     peak=samples.peak)


def _piece_moments(lower, upper):
    """Means of sin and sin^2 of the phase over pieces [lower, upper] of (0, pi/2) (their
    integrals divided by the width; the value at ``lower`` for an empty piece)."""
    centre, half = 0.5 * (upper + lower), 0.5 * (upper - lower)
    sine = np.sin(centre)
    whole = np.sinc(2.0 * half / np.pi)  # sin(2h) / (2h), 1 at h = 0
    return sine * np.sinc(half / np.pi), 0.5 * (1.0 - whole) + whole * sine * sine


def _half_sine_moments(threshold, resistance, average):
    """Exact I_AV and mean of i^2 of each branch over a half-sine, (..., m), in O(m log m) per
    row (see :func:`branch_currents`)."""
    threshold, resistance = np.broadcast_arrays(np.asarray(threshold, dtype=float),
                                                np.asarray(resistance, dtype=float))
    peak = peak_factor("half-sine") * np.asarray(average, dtype=float)
    leading = np.broadcast_shapes(threshold.shape[:-1], peak.shape)
    count = threshold.shape[-1]
    threshold = np.broadcast_to(threshold, leading + (count,))
    resistance = np.broadcast_to(resistance, leading + (count,))
    peak = np.broadcast_to(peak, leading)[..., None]
    order = np.argsort(threshold, axis=-1, kind="stable")
    # Thresholds from the lowest: only differences matter, and they are small.
    level = np.take_along_axis(threshold, order, axis=-1)
    level = level - level[..., :1]
    conductance = 1.0 / np.take_along_axis(resistance, order, axis=-1)
    total = np.cumsum(conductance, axis=-1)  # G_k over the k + 1 lowest branches
    moment = np.cumsum(conductance * level, axis=-1)  # S_k
    onset = np.maximum.accumulate(np.maximum(level * total - moment, 0.0), axis=-1)
    ratio = np.divide(onset, peak, out=np.ones_like(onset), where=peak > 0.0)
    lower = np.arcsin(np.clip(ratio, 0.0, 1.0))
    upper = np.concatenate([lower[..., 1:], np.full(leading + (1,), 0.5 * np.pi)], axis=-1)
    mean, mean_square = _piece_moments(lower, upper)
    # Moments of the group current over piece k (branches 0..k conducting), as fractions of
    # the period (both halves of the sine): of 1, i and i^2.
    weight = (upper - lower) / np.pi
    first = weight * peak * mean
    second = weight * peak * peak * mean_square
    # v = (i + S_k) / G_k on piece k: its integrals over the piece.
    voltage = (first + moment * weight) / total
    voltage_square = (second + 2.0 * moment * first + moment * moment * weight) / (total * total)

    def from_here(values):  # sums over the pieces k, k + 1, ... on which branch k conducts
        return np.flip(np.cumsum(np.flip(values, axis=-1), axis=-1), axis=-1)

    weights, voltages, squares = from_here(weight), from_here(voltage), from_here(voltage_square)
    branch_average = conductance * (voltages - level * weights)
    branch_square = conductance ** 2 * (squares - 2.0 * level * voltages + level ** 2 * weights)
    inverse = np.argsort(order, axis=-1)
    branch_average = np.take_along_axis(np.maximum(branch_average, 0.0), inverse, axis=-1)
    branch_square = np.take_along_axis(np.maximum(branch_square, 0.0), inverse, axis=-1)
    bad = (np.isnan(threshold) | np.isnan(resistance)).any(axis=-1, keepdims=True) \
        | np.isnan(peak)
    return np.where(bad, np.nan, branch_average), np.where(bad, np.nan, branch_square)


def branch_currents(
    branch_threshold: ArrayLike,
    branch_resistance: ArrayLike,
    average_current: ArrayLike,
    waveform: str,
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

    Returns
    -------
    BranchCurrents
        I_AV, I_RMS and peak of each branch [A], each of shape ``(..., m)``.

    Notes
    -----
    dc and square: the split of the constant current that flows (I_F(AV), or I_pk = 2 I_F(AV)
    for half the period). Half-sine, exact: with the branches sorted by threshold, G_k and S_k
    the sums of g = 1 / rho and of g Theta over the k + 1 lowest, branch k starts to conduct at
    the group current I_k = Theta_k G_k - S_k, i.e. at the phase arcsin(I_k / I_pk) (the pieces
    of :func:`phase_rule`). On piece j the common voltage is v = (i + S_j) / G_j and each
    conducting branch carries g_b (v - Theta_b), so

    .. math:: I_{AV,b} = g_b \\sum_{j \\ge b} \\left(\\langle v \\rangle_j
              - \\Theta_b \\langle 1 \\rangle_j\\right), \\qquad
              I_{RMS,b}^2 = g_b^2 \\sum_{j \\ge b} \\left(\\langle v^2 \\rangle_j
              - 2 \\Theta_b \\langle v \\rangle_j + \\Theta_b^2 \\langle 1 \\rangle_j\\right)

    where <.>_j is the period average over piece j, from the integrals of 1, sin and sin^2 of
    the phase over it (:func:`phase_rule`'s Notes); the sums over j are cumulative sums, so a
    row costs O(m log m) and no water-filling. Exact up to rounding, also for a branch that
    starts to conduct part-way up the sine. Each branch current is nondecreasing in the group
    current, so the branch peak is the split of the group peak.
    """
    threshold = np.asarray(branch_threshold, dtype=float)
    resistance = np.asarray(branch_resistance, dtype=float)
    peak_current = peak_factor(waveform) * np.asarray(average_current, dtype=float)
    if waveform in ("half-sine", "offset-sine"):
        average, mean_square = _half_sine_moments(threshold, resistance, average_current)
        rms = np.sqrt(mean_square)
        peak = split_current(threshold, resistance, peak_current).currents
    else:
        peak = split_current(threshold, resistance, peak_current).currents
        fraction = 1.0 if waveform == "dc" else 0.5  # of the period the current flows
        average, rms = fraction * peak, np.sqrt(fraction) * peak
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


def _share_and_loss(threshold, resistance, added, total, waveform):
    currents = branch_currents(threshold, resistance + added[..., None], total, waveform)
    share = currents.average.max(axis=-1) / currents.average.mean(axis=-1)
    return share, added * np.sum(currents.rms**2, axis=-1)


def ballast_for_share(
    branch_threshold: ArrayLike,
    branch_resistance: ArrayLike,
    total_current: ArrayLike,
    waveform: str,
    target_share: float,
    *,
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
    unballasted, _ = _share_and_loss(threshold, resistance, zero, total, waveform)
    low, high = zero.copy(), np.full(rows, np.inf)
    pending = np.flatnonzero(unballasted > target_share)
    if target_share > 1.0 and pending.size:
        spread = np.ptp(threshold[pending], axis=-1) * count / total[pending]
        trial = np.maximum(resistance[pending].max(axis=-1), spread)
        for _ in range(200):  # doublings of the upper end, all rows at once
            share, _ = _share_and_loss(threshold[pending], resistance[pending], trial,
                                       total[pending], waveform)
            met = share <= target_share
            high[pending[met]] = trial[met]
            pending, trial = pending[~met], 2.0 * trial[~met]
            if not pending.size:
                break
        active = np.flatnonzero(np.isfinite(high) & (unballasted > target_share))
        while active.size:
            middle = 0.5 * (low[active] + high[active])
            share, _ = _share_and_loss(threshold[active], resistance[active], middle,
                                       total[active], waveform)
            met = share <= target_share
            high[active[met]] = middle[met]
            low[active[~met]] = middle[~met]
            active = active[high[active] - low[active] > rtol * high[active]]
    added = np.where(unballasted > target_share, high, 0.0)
    finite = np.isfinite(added)
    share, loss = _share_and_loss(threshold, resistance, np.where(finite, added, 0.0), total,
                                  waveform)
    share = np.where(finite, share, np.nan)
    loss = np.where(finite, loss, np.nan)
    return Ballast(
        resistance=added.reshape(leading),
        share=share.reshape(leading),
        unballasted_share=unballasted.reshape(leading),
        loss=loss.reshape(leading),
    )
