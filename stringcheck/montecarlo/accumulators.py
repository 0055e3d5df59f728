"""Per-position sums of a series check, kept chunk by chunk so that memory stays flat in the trial
count: each position's count, mean and sum of squared deviations (``stats.Moments``), maxima,
failures per position and each trial's worst stress ratio.

Figures are formed in one fixed way whatever the run was cut into: each unit of ``SUM_TRIALS``
consecutive trials (counted from trial 0; the last unit may be short) gets its moments by the
shifted-data algorithm (:func:`unit_moments`, vectorized over the units); a sampling block's moments
are its units' merged pairwise in unit order (:class:`BlockMoments`, which holds the units of a block
cut over several chunks until it is complete); and the blocks are merged pairwise in block order at
the end (``stats.merge_moments``). numpy's reduction of a unit depends only on the unit's values,
not on how many units one call holds nor where they sit in memory (tests/montecarlo/test_sub_blocks.py
checks sub-blocks against whole blocks bit for bit), so a run gives the same figures bit for bit
whatever its chunk size, its sub-blocks (a string too large for a block in memory) or its number of
worker processes. A position without scatter has a sum of squared deviations of exactly 0.

:func:`unit_sums` and :class:`BlockSums` form plain sums the same way (the forward checks'
junction-temperature sums).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from stringcheck.limits import exceeds_limit
from stringcheck.montecarlo.sampling import BLOCK_TRIALS, SUM_TRIALS
from stringcheck.montecarlo.estimates import Moments, merge_moment_rows, merge_moments

_UNITS_PER_BLOCK = BLOCK_TRIALS // SUM_TRIALS


def unit_sums(values: np.ndarray) -> np.ndarray:
    """Sums over each ``SUM_TRIALS`` rows of ``values`` (rows, ...), (units, ...); a short last
    unit is padded with zero rows, so that every unit is reduced alike."""
    rows = values.shape[0]
    whole = rows // SUM_TRIALS * SUM_TRIALS
    parts = []
    if whole:
        parts.append(_group_sums(values[:whole].reshape((whole // SUM_TRIALS, SUM_TRIALS)
                                                         + values.shape[1:])))
    if whole < rows:
        padded = np.zeros((1, SUM_TRIALS) + values.shape[1:])
        padded[0, :rows - whole] = values[whole:]
        parts.append(_group_sums(padded))
    return np.concatenate(parts) if parts else np.zeros((0,) + values.shape[1:])


def _group_sums(grouped: np.ndarray) -> np.ndarray:
    """Sum over axis 1 of (groups, n, ...) for each group, (groups, ...)."""
    return np.einsum("ui...->u...", grouped)


@dataclass
class BlockSums:
    """Sums per sampling block from the unit sums (:func:`unit_sums`) of its 64 units; the units of a block that arrive in several pieces (chunks that start or end inside
    it) are held until it is complete. ``blocks()`` gives the sums of the blocks so far in block
    order, the open one last (its missing units count as zero)."""

    done: list = field(default_factory=list)
    open_units: np.ndarray | None = None
    open_block: int = -1

    def add(self, units: np.ndarray, first_unit: int) -> None:
        """Take ``units`` (units, ...), the unit sums of units ``first_unit``.. of the run."""
        unit = first_unit
        while units.shape[0]:
            block, place = divmod(unit, _UNITS_PER_BLOCK)
            if place == 0 and units.shape[0] >= _UNITS_PER_BLOCK:
                # Runs of whole blocks: the same reduction, vectorized over the blocks.
                whole = units.shape[0] // _UNITS_PER_BLOCK * _UNITS_PER_BLOCK
                self._close()
                self.done.extend(_group_sums(
                    units[:whole].reshape((-1, _UNITS_PER_BLOCK) + units.shape[1:])))
                unit += whole
                units = units[whole:]
                continue
            take = min(_UNITS_PER_BLOCK - place, units.shape[0])
            if self.open_block != block:
                self._close()
                self.open_units = np.zeros((_UNITS_PER_BLOCK,) + units.shape[1:])
                self.open_block = block
            self.open_units[place:place + take] = units[:take]
            if place + take == _UNITS_PER_BLOCK:
                self._close()
            unit += take
            units = units[take:]

    def _close(self) -> None:
        if self.open_units is not None:
            self.done.append(self._open_sum())
            self.open_units, self.open_block = None, -1

    def _open_sum(self) -> np.ndarray:
        return _group_sums(self.open_units[None])[0]

    def blocks(self) -> list:
        """The block sums so far in block order, the open block's last."""
        return self.done + ([] if self.open_units is None else [self._open_sum()])


@dataclass(eq=False)
class UnitMoments:
    """The moments of consecutive ``SUM_TRIALS``-trial units as rows: ``count`` (units,) [1],
    ``reference``, ``offset``, ``squares`` (units, ...) as the fields of
    :class:`~stringcheck.montecarlo.estimates.Moments`."""

    count: np.ndarray
    reference: np.ndarray
    offset: np.ndarray
    squares: np.ndarray

    def rows(self, start: int, stop: int) -> "UnitMoments":
        """Units ``start``..``stop - 1`` of these."""
        return UnitMoments(self.count[start:stop], self.reference[start:stop],
                           self.offset[start:stop], self.squares[start:stop])

    @staticmethod
    def join(parts: list) -> "UnitMoments":
        """The units of ``parts`` one after another."""
        return UnitMoments(*(np.concatenate([getattr(part, name) for part in parts])
                             for name in ("count", "reference", "offset", "squares")))

    def merged(self) -> Moments:
        """The moments of all these units together, merged pairwise in unit order."""
        return merge_moment_rows(self.count, self.reference, self.offset, self.squares)


def unit_moments(values: np.ndarray, solved: np.ndarray) -> UnitMoments:
    """The moments of each ``SUM_TRIALS`` rows of ``values`` (rows, ...) over their solved rows
    (``solved``, (rows,) bool); a short last unit holds the rows there are.

    Notes
    -----
    The shifted-data algorithm of ``estimates.block_moments`` (Chan, Golub and LeVeque, The
    American Statistician 37(3), 1983, section 3), shifted by each unit's first solved row and
    vectorized over the units; a unit with no solved row has count 0. Each unit's figures depend
    only on its own rows.
    """
    rows = values.shape[0]
    whole = rows // SUM_TRIALS
    parts = []
    if whole:
        parts.append(_unit_rows(values[:whole * SUM_TRIALS], solved[:whole * SUM_TRIALS]))
    if whole * SUM_TRIALS < rows:
        tail = np.zeros((SUM_TRIALS,) + values.shape[1:])
        tail[:rows - whole * SUM_TRIALS] = values[whole * SUM_TRIALS:]
        mask = np.zeros(SUM_TRIALS, dtype=bool)
        mask[:rows - whole * SUM_TRIALS] = solved[whole * SUM_TRIALS:]
        parts.append(_unit_rows(tail, mask))
    if not parts:
        empty = np.zeros((0,) + values.shape[1:])
        return UnitMoments(np.zeros(0, dtype=np.int64), empty, empty, empty)
    return parts[0] if len(parts) == 1 else UnitMoments.join(parts)


def _unit_rows(values: np.ndarray, solved: np.ndarray) -> UnitMoments:
    """:func:`unit_moments` of whole units."""
    units = values.shape[0] // SUM_TRIALS
    extra = (1,) * (values.ndim - 1)
    grouped = values.reshape((units, SUM_TRIALS) + values.shape[1:])
    mask = solved.reshape(units, SUM_TRIALS)
    if mask.all():
        counts = np.full(units, SUM_TRIALS, dtype=np.int64)
        shift = grouped[:, 0].copy()
        deviation = grouped - shift[:, None]
    else:
        counts = np.count_nonzero(mask, axis=1).astype(np.int64)
        shift = grouped[np.arange(units), np.argmax(mask, axis=1)]
        shift[counts == 0] = 0.0
        keep = mask.reshape(mask.shape + extra)
        deviation = np.where(keep, grouped - shift[:, None], 0.0)
    total = _group_sums(deviation)
    squares = _group_sums(np.square(deviation, out=deviation))
    with np.errstate(invalid="ignore", divide="ignore"):
        offset = np.where(counts.reshape((units,) + extra) > 0,
                          total / np.maximum(counts, 1).reshape((units,) + extra), 0.0)
    # S = sum d^2 - (sum d)^2 / n >= 0; rounding may leave a few ulps below zero.
    return UnitMoments(counts, shift, offset, np.maximum(squares - total * offset, 0.0))


@dataclass
class BlockMoments:
    """Moments per sampling block from the moments of its 64 units (:func:`unit_moments`), merged
    pairwise in unit order; the units of a block that arrive in several pieces (chunks that start
    or end inside it) are held until it is complete. ``blocks()`` gives the moments of the blocks
    so far in block order, the open one last."""

    done: list = field(default_factory=list)
    open_units: list = field(default_factory=list)
    open_block: int = -1

    def add(self, units: UnitMoments, first_unit: int) -> None:
        """Take ``units``, the moments of units ``first_unit``.. of the run, in order."""
        start, total = 0, units.count.shape[0]
        while start < total:
            block, place = divmod(first_unit + start, _UNITS_PER_BLOCK)
            if block != self.open_block:
                self._close()
                self.open_block = block
            take = min(_UNITS_PER_BLOCK - place, total - start)
            self.open_units.append(units.rows(start, start + take))
            start += take
            if place + take == _UNITS_PER_BLOCK:
                self._close()

    def _close(self) -> None:
        if self.open_units:
            self.done.append(UnitMoments.join(self.open_units).merged())
        self.open_units, self.open_block = [], -1

    def blocks(self) -> list:
        """The block moments so far in block order, the open block's last."""
        return self.done + ([UnitMoments.join(self.open_units).merged()] if self.open_units else [])


@dataclass
class PositionSums:
    """Running per-position sums of one check, merged chunk by chunk (memory flat in trials)."""

    shape: tuple[int, int]
    limits: np.ndarray
    count: int = 0
    # Unit moments of this accumulator's own ``add`` calls, (first unit, moments), not yet folded
    # into the block moments; ``merge`` folds those of a later chunk after its own.
    pending: list = field(default_factory=list)
    blocks: BlockMoments = field(default_factory=BlockMoments)
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
    # Keep each position's ``top_count`` largest solved voltages (0: none), from which
    # :meth:`position_percentile` takes an upper percentile exactly (:func:`top_count`).
    top_count: int = 0
    top: np.ndarray | None = None

    def __post_init__(self) -> None:
        self.maximum = np.full(self.shape, -np.inf)
        self.failures_by_position = np.zeros(self.shape, dtype=np.int64)

    def moments(self) -> Moments:
        """Count, mean [V] and sum of squared deviations [V^2] of each position over the solved
        trials."""
        self._fold(self.pending)
        blocks = self.blocks.blocks()
        if not blocks:
            zeros = np.zeros(self.shape)
            return Moments(count=0, reference=zeros, offset=zeros, squares=zeros)
        return merge_moments(blocks)

    def _fold(self, pending: list) -> None:
        for first_unit, units in pending:
            self.blocks.add(units, first_unit)
        if pending is self.pending:
            self.pending = []

    def merge(self, other: "PositionSums") -> None:
        """Add the sums of a later chunk (chunks are merged in trial order)."""
        self.count += other.count
        self._fold(self.pending)
        self._fold(other.pending)
        self.maximum = np.maximum(self.maximum, other.maximum)
        self.failures_by_position += other.failures_by_position
        self.worst_ratios.extend(other.worst_ratios)
        if other.top is not None:
            self.top = _largest(self.top, other.top, self.top_count)
        self.unsolved += other.unsolved
        if other.worst_ratio > self.worst_ratio:
            self.worst_ratio = other.worst_ratio
            self.worst_trial = other.worst_trial
            self.worst_string = other.worst_string

    def add(self, voltages: np.ndarray, solved: np.ndarray, first_trial: int) -> None:
        with np.errstate(invalid="ignore"):
            # A NaN or infinite voltage makes its trial's sum NaN or infinite (the sum of finite
            # voltages would overflow only beyond 1e307 V).
            solved = solved & np.isfinite(np.einsum("ijk->i", voltages))
        ratio = voltages / (self.limits if self.device_limits is None else self.device_limits)
        trial_ratio = np.where(solved, _trial_maximum(ratio), np.inf)
        unsolved = int(np.count_nonzero(~solved))
        self.unsolved += unsolved
        # Moments formed unit by unit in a fixed order (module docstring), so that they are the same
        # bit for bit whatever the chunks and sub-blocks; an unsolved trial is left out.
        # (Chunks of a run start on a unit; another caller's strings just form their own units.)
        self.pending.append((first_trial // SUM_TRIALS, unit_moments(voltages, solved)))
        good = voltages if not unsolved else voltages[solved]
        self.count += good.shape[0]
        if good.shape[0]:
            self.maximum = np.maximum(self.maximum, _position_maximum(good))
            if self.top_count:
                self.top = _largest(self.top, good, self.top_count)
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

    def position_percentile(self, q: float) -> np.ndarray | None:
        """Each position's ``q``-th percentile [V] over the solved trials, as
        ``numpy.percentile`` (linear interpolation) gives it over all of them, from the largest
        voltages kept; None where none were kept or too few for ``q`` (or no trial solved)."""
        if self.top is None or not self.count:
            return None
        rank = (self.count - 1) * q / 100.0
        low = int(np.floor(rank))
        # The sorted values x[low] and x[low + 1] are the (count - 1 - low)-th and the
        # (count - 2 - low)-th largest, counted from 0.
        above = self.count - 1 - low
        if above >= self.top.shape[0]:
            return None
        ordered = -np.sort(-self.top, axis=0)
        lower = ordered[above]
        upper = ordered[max(above - 1, 0)]
        return lower + (rank - low) * (upper - lower)


def top_count(trials: int, q: float = 99.0) -> int:
    """How many of the largest values of ``trials`` [1] hold the ``q``-th percentile and the one
    above it: (100 - q) % of them and two more."""
    return int(np.ceil(trials * (100.0 - q) / 100.0)) + 2


def _largest(kept: np.ndarray | None, values: np.ndarray, count: int) -> np.ndarray:
    """The ``count`` largest of ``kept`` and ``values`` along axis 0 (any order): exact whatever
    the chunks they came in."""
    joined = values if kept is None else np.concatenate([kept, values], axis=0)
    if joined.shape[0] <= count:
        return joined.copy() if joined is values else joined
    return np.partition(joined, joined.shape[0] - count, axis=0)[joined.shape[0] - count:]


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
