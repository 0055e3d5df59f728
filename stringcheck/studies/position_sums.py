"""Per-position sums of a series check, kept chunk by chunk so that memory stays flat in the trial
count: counts, block sums of the voltages and their squares (shifted by the limit), maxima, failures
per position and each trial's worst stress ratio. Sums are kept per sampling block and added up in
block order at the end, so a run gives the same figures bit for bit whatever its chunk size or number
of worker processes.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ..limits import exceeds_limit
from ..sampling import BLOCK_TRIALS


@dataclass
class PositionSums:
    """Running per-position sums of one check, merged chunk by chunk (memory flat in trials)."""

    shape: tuple[int, int]
    limits: np.ndarray
    count: int = 0
    block_totals: list = field(default_factory=list)
    block_squares: list = field(default_factory=list)
    maximum: np.ndarray = field(init=False)
    failures_by_position: np.ndarray = field(init=False)
    worst_ratios: list = field(default_factory=list)
    unsolved: int = 0
    worst_ratio: float = -np.inf
    worst_trial: int = -1
    worst_string: np.ndarray | None = None
    # With a mix: the limit of each drawn device (trials, parallel, series) for the chunk in hand;
    # ``limits`` then holds each position's lowest limit, for the per-position figures.
    device_limits: np.ndarray | None = None

    def __post_init__(self) -> None:
        self.maximum = np.full(self.shape, -np.inf)
        self.failures_by_position = np.zeros(self.shape, dtype=np.int64)

    def merge(self, other: "PositionSums") -> None:
        """Add the sums of a later chunk (chunks are merged in trial order)."""
        self.count += other.count
        self.block_totals.extend(other.block_totals)
        self.block_squares.extend(other.block_squares)
        self.maximum = np.maximum(self.maximum, other.maximum)
        self.failures_by_position += other.failures_by_position
        self.worst_ratios.extend(other.worst_ratios)
        self.unsolved += other.unsolved
        if other.worst_ratio > self.worst_ratio:
            self.worst_ratio = other.worst_ratio
            self.worst_trial = other.worst_trial
            self.worst_string = other.worst_string

    def add(self, voltages: np.ndarray, solved: np.ndarray, first_trial: int) -> None:
        rows = voltages.shape[0]
        with np.errstate(invalid="ignore"):
            # A NaN or infinite voltage makes its trial's sum NaN or infinite (the sum of finite
            # voltages would overflow only beyond 1e307 V).
            solved = solved & np.isfinite(np.einsum("ijk->i", voltages))
        ratio = voltages / (self.limits if self.device_limits is None else self.device_limits)
        trial_ratio = np.where(solved, _trial_maximum(ratio), np.inf)
        unsolved = int(np.count_nonzero(~solved))
        self.unsolved += unsolved
        # Sums are shifted by the limit to keep the variance sum well conditioned, and are kept
        # per sampling block (chunks start on block boundaries) and added up in block order at the
        # end, so that they are the same bit for bit whatever the chunk size or the number of
        # worker processes.
        for start in range(0, rows, BLOCK_TRIALS):
            block = slice(start, start + BLOCK_TRIALS)
            shifted = voltages[block] - self.limits if not unsolved else \
                voltages[block][solved[block]] - self.limits
            self.block_totals.append(np.einsum("ijk->jk", shifted))
            self.block_squares.append(np.einsum("ijk->jk", np.square(shifted, out=shifted)))
        good = voltages if not unsolved else voltages[solved]
        self.count += good.shape[0]
        if good.shape[0]:
            self.maximum = np.maximum(self.maximum, _position_maximum(good))
        # A position above its limit puts its trial's ratio above 1: only those trials count.
        over = np.flatnonzero(exceeds_limit(trial_ratio))
        if over.size:
            self.failures_by_position += np.count_nonzero(exceeds_limit(ratio[over]), axis=0)
        self.worst_ratios.append(trial_ratio)
        best = int(np.argmax(trial_ratio))
        if trial_ratio[best] > self.worst_ratio:
            self.worst_ratio = float(trial_ratio[best])
            self.worst_trial = first_trial + best
            self.worst_string = voltages[best].copy()


def _trial_maximum(values: np.ndarray) -> np.ndarray:
    """Largest value of each trial (axis 0) over its positions; NaN if any is NaN."""
    flat = values.reshape(-1)
    width = flat.size // max(values.shape[0], 1)
    # reduceat over the rows of the flat array is about twice as fast as max(axis=1) on short rows.
    return np.maximum.reduceat(flat, np.arange(0, flat.size, width)) if flat.size else \
        np.full(values.shape[0], -np.inf)


def _position_maximum(values: np.ndarray) -> np.ndarray:
    """Largest value of each position over the trials (axis 0), by halving: much faster than
    max(axis=0) on a few positions per trial."""
    while values.shape[0] > 1:
        half = values.shape[0] // 2
        folded = np.maximum(values[:half], values[half:2 * half])
        if values.shape[0] % 2:
            folded[0] = np.maximum(folded[0], values[-1])
        values = folded
    return values[0]
