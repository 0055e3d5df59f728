"""Device populations -> arrays of drawn parameters, shape (trials, parallel, series).

How a spread becomes a draw (docs/methods/monte-carlo.md):

* ``typ`` is the median; a datasheet limit sits ``sigma_at_limit`` standard deviations away from it.
  Leakage, recovery charge, peak recovery current and recovery time are lognormal, V_T0 and r_T normal.
  Where both limits are given and sit at different distances from typ, each side of the median takes its
  own standard deviation (a two-piece distribution; with symmetric limits it is the plain lognormal or
  normal). Where only one limit is given it sets both sides.
* Production-screened limits truncate the draw at min/max: the latent normal is mapped onto the
  truncated normal by its CDF, which keeps the Gaussian-copula dependence. Whether a row is screened
  is its own ``screened``, else the design-wide ``[monte_carlo] screened`` where given, else true
  for a row at 25 degC +- 10 K and false elsewhere (``design.model.row_screened``).
* A parameter given in rows at several temperatures draws one latent value per device; the value at
  any temperature is each row's quantile at that latent, interpolated
  (:mod:`stringcheck.montecarlo.temperature_rows`), so a device keeps its rank at every temperature.
* The streams give uniform scores u, one per device and parameter, and each drawn value is the
  spread's quantile function at u (:mod:`stringcheck.montecarlo.quantile_maps`); the latent normal of a score is
  z = Phi^-1(u), computed only where a copula or lot sharing mixes latent values. (Drawing u and
  mapping it costs about half of drawing a normal and mapping it through the truncation.)
* ``lot_share`` is the fraction of the latent variance common to every device of one part in one built
  string (same lot): z = sqrt(s) z_lot + sqrt(1 - s) z_device.
* Parameters of one device may be correlated through a Gaussian copula (``[monte_carlo.correlation]``).
* Grading resistors and capacitors: normal about the nominal value with the tolerance at
  ``sigma_at_limit``, always truncated at the tolerance (a component outside it is rejected by its
  maker), or uniform over the band (``resistor_distribution`` / ``capacitor_distribution``).

Random streams: trials are grouped in blocks of :data:`BLOCK_TRIALS`. Block b draws each component
(one parameter of the devices, the lot of one part, the resistors, the capacitors) from its own stream,
``SeedSequence(seed, spawn_key=(b, component))``. A run processes whole blocks in chunks, so the result
does not depend on the chunk size or on how chunks are shared out among processes, and drawing one more
parameter never changes the draws of the others. A string of many devices is evaluated in sub-blocks
(whole :data:`SUM_TRIALS` units, see :func:`evaluation_trials`) so that a chunk stays within the
memory budget: a sub-block draws its rows of the block's streams by skipping the rows before it
(``PCG64.advance``: one 64-bit step per uniform), so its draws are those of the whole block.

Mixed stock (``StringLayout.mix``, ``review --mix``): one more component draws a uniform u per device
and block; the device is the mix's part where u < fraction, else the part its position holds. Every
other draw is the one the design without the mix makes, so a mixed design and its baseline run on
common random numbers; and the devices substituted at a fraction f1 are a subset of those at f2 > f1.
"""

from __future__ import annotations

import zlib
from dataclasses import dataclass, field, replace
from typing import Mapping

import numpy as np
from scipy import special

from stringcheck.design.model import (
    LOGNORMAL_PARAMETERS,
    SPREAD_PARAMETERS,
    Design,
    correlation_matrix,
    row_screened,
)
from stringcheck.montecarlo.quantile_maps import normal_scores, spread_quantile, tolerance_draw

__all__ = ["BLOCK_TRIALS", "SUM_TRIALS", "DrawnStrings", "Latent", "chunk_bounds", "draw_latent", "draw_strings",
           "evaluation_trials", "latent_parameters", "spread_quantile", "strings_from_latent",
           "substituted_devices", "tolerance_draw"]

BLOCK_TRIALS = 4096
# The unit of the per-position sums (``montecarlo.accumulators``) and the smallest sub-block a large
# string is evaluated in: sums over these units, added in trial order, are the same bit for bit
# whichever sub-blocks a run was cut into.
SUM_TRIALS = 64

# Stream numbers of the components that are not a device parameter.
_RESISTOR_STREAM = 1001
_CAPACITOR_STREAM = 1002
_MIX_STREAM = 1003
# The end-of-life drift of each grading resistor, and which stages carry surface leakage.
_DRIFT_STREAM = 1004
_SURFACE_STREAM = 1005
_LOT_STREAM_BASE = 2000
# Which devices of a measured lot stand in a string: one stream per part, apart from its lot stream.
_MEASURED_STREAM_BASE = 3_000_000


@dataclass(frozen=True)
class DrawnStrings:
    """One chunk of built strings.

    Attributes
    ----------
    first_trial
        Index of the chunk's first trial in the whole run.
    parameters
        Drawn device parameter [SI] by name, each of shape (trials, parallel, series).
    latent
        The latent value behind each drawn parameter (after lot sharing and correlation, before
        truncation), same shapes: a uniform score if ``latent_uniform``, else a standard normal.
        :meth:`latent_normals` gives the standard normals the drivers analysis uses.
    resistance
        Drawn grading resistance [ohm] at 25 degC, (trials, parallel, series); None without resistors.
    capacitance
        Drawn grading capacitance [F], (trials, parallel, series); None without capacitors.
    part_index
        With a mix: the part of every device, (trials, parallel, series), an index into
        ``part_names``; None without a mix (each position holds its part of ``part_grid``).
    part_names
        The names ``part_index`` points to.
    latent_uniform
        ``latent`` holds uniform scores u rather than standard normals z = Phi^-1(u).
    """

    first_trial: int
    parameters: Mapping[str, np.ndarray]
    latent: Mapping[str, np.ndarray]
    resistance: np.ndarray | None
    capacitance: np.ndarray | None
    part_index: np.ndarray | None = None
    part_names: tuple[str, ...] = ()
    latent_uniform: bool = False
    # End of life (``aged_strings``): a surface-leakage conductance across each stage [S],
    # (trials, parallel, series), 0 where a stage has none; None without.
    surface_conductance: np.ndarray | None = None

    def latent_normals(self, name: str, count: int | None = None) -> np.ndarray:
        """The standard-normal latent values of parameter ``name`` for the first ``count`` trials
        (all without ``count``)."""
        values = self.latent[name][:count]
        return normal_scores(values) if self.latent_uniform else values

    @property
    def trials(self) -> int:
        """Number of trials in the chunk."""
        first = next(iter(self.parameters.values()), None)
        if first is None:
            return 0 if self.resistance is None else self.resistance.shape[0]
        return first.shape[0]

    def trial_slice(self, start: int, count: int) -> "DrawnStrings":
        """Trials ``start`` .. ``start + count - 1`` of the chunk: every per-trial array cut on its
        leading axis (views, no copies), everything else as it is."""
        cut = slice(start, start + count)

        def part(value):
            if isinstance(value, np.ndarray):
                return value[cut]
            if isinstance(value, Mapping):
                return {name: part(array) for name, array in value.items()}
            return value

        fields = {name: part(getattr(self, name)) for name in self.__dataclass_fields__}
        fields["first_trial"] = self.first_trial + start
        return DrawnStrings(**fields)


def _stream(seed: int, block: int, component: int) -> np.random.Generator:
    return np.random.Generator(np.random.PCG64(np.random.SeedSequence(seed,
                                                                       spawn_key=(block, component))))


def _part_stream_id(name: str) -> int:
    # A stable number per part name, so that two designs sharing a part share its lot draws.
    return _LOT_STREAM_BASE + zlib.crc32(name.encode("utf-8")) % 1_000_000


def _block_draws(seed: int, first_trial: int, count: int, component: int, width: int,
                 draw, dtype=float, row_steps: int | None = None) -> np.ndarray:
    """(count, width) draws for trials first_trial.. of one component, block by block:
    ``draw(generator, rows)`` fills ``rows`` with the next rows of the block's draws.

    A block's draws are generated in order, so the first rows of a longer draw equal a shorter one;
    a chunk that starts inside a block skips the rows before it (every ``draw`` takes one 64-bit
    step of the generator per uniform, ``row_steps`` per row (default ``width``), so ``advance``
    lands on the row exactly).
    """
    out = np.empty((count, width), dtype=dtype)
    trial = first_trial
    end = first_trial + count
    while trial < end:
        block, offset = divmod(trial, BLOCK_TRIALS)
        take = min(BLOCK_TRIALS - offset, end - trial)
        generator = _stream(seed, block, component)
        if offset:
            generator.bit_generator.advance(offset * (width if row_steps is None else row_steps))
        draw(generator, out[trial - first_trial:trial - first_trial + take])
        trial += take
    return out


def _lot_rows(seed: int, first_trial: int, count: int, component: int, devices: int,
              take: int) -> np.ndarray:
    """Indices (count, take) of ``take`` distinct devices out of ``devices`` per trial, in
    uniformly random order (a uniformly random ordered sample without replacement).

    Notes
    -----
    Floyd's algorithm picks the set (J. Bentley, "Programming pearls: a sample of brilliance",
    Communications of the ACM 30 (9), 1987): for j = devices - take .. devices - 1 draw t uniform
    on 0..j and take t, or j when t is taken already. Each t is floor(u (j + 1)) of a uniform u on
    [0, 1), and a second set of ``take`` uniforms, sorted, puts the set in random order: 2 take
    uniforms per trial whatever the lot's size, drawn row by row, so a shorter draw is the first
    rows of a longer one (the block scheme of :func:`_block_draws`).
    """

    def draw(generator: np.random.Generator, rows: np.ndarray) -> None:
        uniforms = generator.random((rows.shape[0], 2 * take))
        chosen = rows
        for i, j in enumerate(range(devices - take, devices)):
            t = np.minimum((uniforms[:, i] * (j + 1)).astype(np.int64), j)
            taken = np.any(chosen[:, :i] == t[:, None], axis=1)
            chosen[:, i] = np.where(taken, j, t)
        order = np.argsort(uniforms[:, take:], axis=1)
        rows[...] = np.take_along_axis(chosen, order, axis=1)

    return _block_draws(seed, first_trial, count, component, take, draw, dtype=np.int64,
                        row_steps=2 * take)


@dataclass(frozen=True)
class Latent:
    """The independent latent values behind a set of built strings: uniform scores u in [0, 1)
    (``uniform``, the Monte Carlo's streams) or standard normals z (the rare-event estimator); the
    two are one variable, z = Phi^-1(u).

    ``device``: per parameter, shape (trials, parallel, series); ``lot``: per part, shape
    (trials, len(SPREAD_PARAMETERS)) (empty without ``lot_share``); ``resistor`` and ``capacitor``:
    (trials, parallel, series), a :class:`StreamScores` not drawn yet, or None (no such grading
    component, or not wanted); ``measured_rows``: per part resampled from a measured lot,
    the lot row of each position that may draw it, (trials, parallel, series), -1 elsewhere. The
    Monte Carlo draws them from seeded streams; the rare-event estimator chooses the normal values
    itself (and refuses resampled lots).
    """

    device: Mapping[str, np.ndarray]
    lot: Mapping[str, np.ndarray]
    resistor: np.ndarray | StreamScores | None
    capacitor: np.ndarray | StreamScores | None
    measured_rows: Mapping[str, np.ndarray] = field(default_factory=dict)
    uniform: bool = False
    # With a mix: each device's substitution score, (trials, parallel, series); the device is the
    # mix's part where the score (u, or Phi(z)) is below the fraction. None: the mix's own stream.
    mix: np.ndarray | None = None


@dataclass(frozen=True)
class StreamScores:
    """Uniform scores of one stream not drawn yet, (count, parallel, series): the grading
    components' scores are drawn and mapped block by block where they are used
    (:func:`_mapped_scores`), so that they never fill an array of their own."""

    seed: int
    first_trial: int
    count: int
    component: int
    shape: tuple[int, int]


def latent_parameters(design: Design, parameters: tuple[str, ...]) -> tuple[str, ...]:
    """The device parameters whose latent values ``parameters`` need: all of them when the design
    correlates parameters (the copula mixes them in the order of SPREAD_PARAMETERS)."""
    if _correlated(design):
        return SPREAD_PARAMETERS
    # A fitted lot's copula mixes all of its columns: draw them all, whichever were asked for.
    fitted = {parameter for name in design.parts_used()
              for parameter in _fitted_lot_parameters(design, name)}
    return tuple(p for p in SPREAD_PARAMETERS if p in fitted or p in parameters)


def _fitted_lot_parameters(design: Design, name: str) -> tuple[str, ...]:
    lot = design.parts[name].measured
    return lot.parameters if lot is not None and not lot.resampled else ()


def _correlated(design: Design) -> bool:
    matrix = correlation_matrix(design.monte_carlo.correlation, SPREAD_PARAMETERS)
    return not np.allclose(matrix, np.eye(len(SPREAD_PARAMETERS)))


def draw_latent(design: Design, parameters: tuple[str, ...], first_trial: int, count: int,
                seed: int) -> Latent:
    """The seeded latent values of trials ``first_trial`` .. ``first_trial + count - 1``."""
    layout = design.string
    shape = (count, layout.parallel, layout.series)
    devices = layout.parallel * layout.series
    device = {}
    for parameter in latent_parameters(design, parameters):
        component = SPREAD_PARAMETERS.index(parameter)
        device[parameter] = _uniforms(seed, first_trial, count, component, devices).reshape(shape)
    lot = {}
    if design.monte_carlo.lot_share > 0:
        for name in design.parts_used():
            lot[name] = _uniforms(seed, first_trial, count, _part_stream_id(name),
                                 len(SPREAD_PARAMETERS))
    grading = design.grading
    resistor = capacitor = None
    positions = (layout.parallel, layout.series)
    if grading.resistor is not None:
        resistor = StreamScores(seed, first_trial, count, _RESISTOR_STREAM, positions)
    if grading.capacitor is not None:
        capacitor = StreamScores(seed, first_trial, count, _CAPACITOR_STREAM, positions)
    rows = {}
    for name in design.parts_used():
        measured = design.parts[name].measured
        if measured is not None and measured.resampled:
            # Every position that may draw the part (with a mix, in either variant) gets its own
            # device of one sample without replacement, so that whichever variant a device comes
            # from, no lot device stands twice in a string.
            slots = design.lot_positions(name)
            take = int(np.count_nonzero(slots))
            if take:
                pool = _lot_pool(design, name)
                picked = _lot_rows(seed, first_trial, count, _measured_stream_id(name),
                                   len(pool), take)
                per_position = np.full((count,) + slots.shape, -1, dtype=np.int64)
                per_position[:, slots] = pool[picked]
                rows[name] = per_position
    return Latent(device=device, lot=lot, resistor=resistor, capacitor=capacitor,
                  measured_rows=rows, uniform=True)


def _measured_stream_id(name: str) -> int:
    return _MEASURED_STREAM_BASE + zlib.crc32(name.encode("utf-8")) % 1_000_000


def _lot_pool(design: Design, name: str) -> np.ndarray:
    """Rows of part ``name``'s lot free to be drawn: those not placed by serial number."""
    lot = design.parts[name].measured
    layout = design.string
    placed = {lot.row_of(serial) for serial, part in zip(layout.serial_grid().ravel(),
                                                         layout.part_grid().ravel())
              if serial is not None and part == name}
    return np.array([row for row in range(lot.devices) if row not in placed], dtype=np.int64)


def _apply_measured(design: Design, parameters: tuple[str, ...], latent: Latent,
                    values: dict[str, np.ndarray], scores: dict[str, np.ndarray]) -> None:
    """Put the devices of measured lots into ``values`` [SI] and their scores into ``scores``.

    Resampled: the lot rows chosen per trial (``latent.measured_rows``). Fitted: the lot's Gaussian
    copula on the independent device normals, through each column's fitted distribution. Placed by
    serial: that device's row in every trial.
    """
    layout = design.string
    grid = layout.part_grid()
    serials = layout.serial_grid()
    for name in design.parts_used():
        lot = design.parts[name].measured
        if lot is None:
            continue
        measured = [p for p in parameters if p in lot.parameters]
        if not measured:
            continue
        drawn = design.lot_positions(name)
        if np.any(drawn):
            if lot.resampled:
                if name not in latent.measured_rows:
                    raise ValueError(f"part {name!r} is resampled from a measured lot: its rows "
                                     "are not latent normal values")
                rows = latent.measured_rows[name][:, drawn]
                for parameter in measured:
                    column = lot.parameters.index(parameter)
                    values[parameter][:, drawn] = lot.values[rows, column]
                    scores[parameter][:, drawn] = lot.scores[rows, column]
            else:
                stacked = np.stack([latent.device[p][:, drawn] for p in lot.parameters], axis=-1)
                correlated = stacked @ np.linalg.cholesky(lot.correlation).T
                for parameter in measured:
                    column = lot.parameters.index(parameter)
                    values[parameter][:, drawn] = lot.columns[column].quantile(
                        correlated[..., column])
                    scores[parameter][:, drawn] = correlated[..., column]
        for (branch, index), serial in np.ndenumerate(serials):
            if serial is None or grid[branch, index] != name:
                continue
            row = lot.row_of(serial)
            for parameter in measured:
                column = lot.parameters.index(parameter)
                values[parameter][:, branch, index] = lot.values[row, column]
                scores[parameter][:, branch, index] = lot.scores[row, column]


def _needs_normals(design: Design) -> bool:
    """Whether the design mixes latent values (lot sharing, a copula, a measured lot's scores), so
    that its device latents must be standard normals rather than uniform scores."""
    return (design.monte_carlo.lot_share > 0 or _correlated(design)
            or any(design.parts[name].measured is not None for name in design.parts_used()))


def strings_from_latent(design: Design, parameters: tuple[str, ...], latent: Latent,
                        first_trial: int = 0, *, normal_latent: bool | None = None,
                        seed: int | None = None) -> DrawnStrings:
    """Map latent values onto built strings: lot sharing, copula, spreads and tolerances.

    Uniform device scores are turned into standard normals first where the design mixes them
    (``normal_latent``, by default :func:`_needs_normals`); the grading components keep theirs.
    A design with a mix picks each device's part by ``latent.mix``, or without it by the mix's
    own stream of ``seed``.
    """
    mix = design.string.mix
    if mix is not None:
        if latent.mix is None and seed is None and 0.0 < mix.fraction < 1.0:
            raise ValueError("a design with a mix needs latent.mix or the seed of its stream")
        return _mixed_strings(design, parameters, latent, first_trial, seed)
    grading_uniform = latent.uniform
    if normal_latent is None:
        normal_latent = _needs_normals(design)
    if latent.uniform and normal_latent:
        latent = replace(latent, uniform=False,
                         device={k: normal_scores(v) for k, v in latent.device.items()},
                         lot={k: normal_scores(v) for k, v in latent.lot.items()})
    device_uniform = latent.uniform
    monte_carlo = design.monte_carlo
    layout = design.string
    grid = layout.part_grid()
    used = design.parts_used()
    share = monte_carlo.lot_share
    names = latent_parameters(design, parameters)
    device_latent = dict(latent.device)
    shape = next(iter(device_latent.values())).shape if device_latent else None
    if share > 0:
        for name in used:
            lot = latent.lot[name]
            mask = grid == name
            for parameter in names:
                column = lot[:, SPREAD_PARAMETERS.index(parameter)]
                mixed = np.sqrt(share) * column[:, None, None] + np.sqrt(1 - share) * device_latent[
                    parameter]
                device_latent[parameter] = np.where(mask, mixed, device_latent[parameter])
    # With correlations the copula is applied over every spread parameter in the fixed order of
    # SPREAD_PARAMETERS, so that a parameter's draws never depend on which others were asked for.
    if _correlated(design):
        factor = np.linalg.cholesky(correlation_matrix(monte_carlo.correlation, SPREAD_PARAMETERS))
        stacked = np.stack([device_latent[p] for p in SPREAD_PARAMETERS], axis=-1) @ factor.T
        device_latent = {p: stacked[..., SPREAD_PARAMETERS.index(p)] for p in parameters}

    values = {}
    for parameter in parameters:
        out = None if len(used) == 1 else np.empty(shape)
        for name in used:
            mask = grid == name
            spread = design.parts[name].spread(parameter)
            if spread is None:
                raise ValueError(f"part {name!r} has no {parameter}")
            options = dict(lognormal=parameter in LOGNORMAL_PARAMETERS,
                           sigma_at_limit=monte_carlo.sigma_at_limit,
                           screened=row_screened(spread, monte_carlo), uniform=device_uniform)
            if out is None:  # one part everywhere: no gather and scatter by position
                out = spread_quantile(spread, device_latent[parameter], **options)
            else:
                out[:, mask] = spread_quantile(spread, device_latent[parameter][:, mask], **options)
        values[parameter] = out
    if any(design.parts[name].measured is not None for name in used):
        device_latent = {p: np.array(device_latent[p], dtype=float) for p in parameters}
        _apply_measured(design, parameters, latent, values, device_latent)

    grading = design.grading
    resistance = capacitance = None
    for nominal, tolerance, scores, name, shape in (
            (grading.resistor, grading.resistor_tolerance, latent.resistor, "resistance",
             grading.resistor_distribution),
            (grading.capacitor, grading.capacitor_tolerance, latent.capacitor, "capacitance",
             grading.capacitor_distribution)):
        if nominal is None or scores is None:
            continue
        options = dict(sigma_at_limit=monte_carlo.sigma_at_limit, uniform=grading_uniform,
                       distribution=shape)
        if isinstance(scores, StreamScores):
            drawn = _mapped_scores(scores, lambda u, out: tolerance_draw(nominal, tolerance, u,
                                                                         out=out, **options))
        else:
            drawn = tolerance_draw(nominal, tolerance, scores, **options)
        if name == "resistance":
            resistance = drawn
        else:
            capacitance = drawn
    return DrawnStrings(first_trial=first_trial, parameters=values, latent=device_latent,
                        resistance=resistance, capacitance=capacitance,
                        latent_uniform=device_uniform)


def draw_strings(design: Design, parameters: tuple[str, ...], first_trial: int, count: int,
                 *, seed: int | None = None) -> DrawnStrings:
    """Draw ``count`` built strings, trials ``first_trial`` .. ``first_trial + count - 1``.

    Parameters
    ----------
    design
        The validated design.
    parameters
        The device parameters to draw (names from SPREAD_PARAMETERS); every part used must give them
        (the studies check this before drawing).
    first_trial, count
        Which trials of the run to draw.
    seed
        Overrides the design's seed.
    """
    seed = design.monte_carlo.seed if seed is None else seed
    latent = draw_latent(design, parameters, first_trial, count, seed)
    drawn = strings_from_latent(design, parameters, latent, first_trial, seed=seed)
    return aged_strings(design, drawn, seed) if design.end_of_life.enabled else drawn


def aged_strings(design: Design, drawn: DrawnStrings, seed: int) -> DrawnStrings:
    """``drawn`` at the end of life (``design.end_of_life``): each grading resistor drifted by a
    uniform draw within +-drift (band) or between 0 and drift (one-sided shift), and a surface
    shunt 1 / surface_resistance across each stage with probability surface_fraction, each from
    its own stream of ``seed`` (block by block, so the same whatever the chunks)."""
    aged = design.end_of_life
    layout = design.string
    count = drawn.trials
    shape = (count, layout.parallel, layout.series)
    width = layout.parallel * layout.series
    resistance = drawn.resistance
    if resistance is not None and aged.resistor_drift:
        scores = _uniforms(seed, drawn.first_trial, count, _DRIFT_STREAM, width).reshape(shape)
        spread = 2.0 * scores - 1.0 if aged.resistor_drift_mode == "band" else scores
        resistance = resistance * (1.0 + aged.resistor_drift * spread)
    surface = None
    if aged.surface_resistance is not None:
        scores = _uniforms(seed, drawn.first_trial, count, _SURFACE_STREAM, width).reshape(shape)
        surface = np.where(scores < aged.surface_fraction, 1.0 / aged.surface_resistance, 0.0)
    return replace(drawn, resistance=resistance, surface_conductance=surface)


def _mapped_scores(scores: StreamScores, mapper) -> np.ndarray:
    """``mapper(u, out)`` of a stream's uniform scores, drawn and mapped one sampling block at a
    time: the block's scores stay in cache and are not kept."""
    width = scores.shape[0] * scores.shape[1]

    def draw(generator: np.random.Generator, rows: np.ndarray) -> None:
        mapper(generator.random((rows.shape[0], width)), rows)

    return _block_draws(scores.seed, scores.first_trial, scores.count, scores.component, width,
                        draw).reshape((scores.count,) + scores.shape)


def _uniforms(seed: int, first_trial: int, count: int, component: int, width: int) -> np.ndarray:
    """Uniforms on [0, 1), (count, width), for trials first_trial.. of one component, block by
    block: a longer draw begins with a shorter one."""
    def draw(generator: np.random.Generator, rows: np.ndarray) -> None:
        generator.random(out=rows)

    return _block_draws(seed, first_trial, count, component, width, draw)


def substituted_devices(design: Design, first_trial: int, count: int, seed: int,
                        latent: Latent | None = None) -> np.ndarray:
    """Which devices of trials ``first_trial`` .. are the mix's part, (count, parallel, series).

    A device is substituted when its uniform u (the mix's own stream) is below the fraction, so it
    is substituted with probability ``fraction`` independently of every other device and draw.
    With ``latent.mix`` given, that score decides instead: u < fraction for uniform scores,
    z < Phi^-1(fraction) for standard normals (the rare-event estimator's), the same event.
    """
    layout = design.string
    width = layout.parallel * layout.series
    fraction = layout.mix.fraction
    if latent is not None and latent.mix is not None:
        scores = latent.mix.reshape(count, width)
        chosen = scores < fraction if latent.uniform else scores < special.ndtri(fraction)
    else:
        chosen = _uniforms(seed, first_trial, count, _MIX_STREAM, width) < fraction
    # A device placed by serial number is the one built in: never substituted.
    placed = layout.placed_by_serial()
    return chosen.reshape(count, layout.parallel, layout.series) & ~placed


def _mixed_strings(design: Design, parameters: tuple[str, ...], latent: Latent, first_trial: int,
                   seed: int | None) -> DrawnStrings:
    """Built strings of a design with a mix: every device takes the draw its own part gives its
    latent values (lot sharing within each part), chosen device by device."""
    layout = design.string
    mix = layout.mix
    names = design.parts_used()
    lookup = {name: number for number, name in enumerate(names)}
    plain, everywhere = design.mix_variants()
    # Both variants read the latent values alike, so that a device's draw is its own part's map
    # of one latent value whichever part it turns out to be.
    normal_latent = _needs_normals(plain) or _needs_normals(everywhere)
    if mix.fraction == 1.0:
        drawn = strings_from_latent(everywhere, parameters, latent, first_trial,
                                    normal_latent=normal_latent)
        index = np.full((drawn.trials, layout.parallel, layout.series), lookup[mix.part],
                        dtype=np.int16)
        return replace(drawn, part_index=index, part_names=names)
    base = strings_from_latent(plain, parameters, latent, first_trial,
                               normal_latent=normal_latent)
    grid = np.array([[lookup[name] for name in row] for row in layout.part_grid()], dtype=np.int16)
    index = np.broadcast_to(grid, (base.trials,) + grid.shape).copy()
    if mix.fraction == 0.0:
        return replace(base, part_index=index, part_names=names)
    # Only the devices are picked from the other variant: its grading is not drawn again.
    other = strings_from_latent(everywhere, parameters,
                                replace(latent, resistor=None, capacitor=None), first_trial,
                                normal_latent=normal_latent)
    swap = substituted_devices(design, first_trial, base.trials, seed, latent)
    index[swap] = lookup[mix.part]

    def pick(a: Mapping[str, np.ndarray], b: Mapping[str, np.ndarray]) -> dict:
        return {key: np.where(swap, b[key], a[key]) for key in a}

    return replace(base, parameters=pick(base.parameters, other.parameters),
                   latent=pick(base.latent, other.latent), part_index=index, part_names=names)


def evaluation_trials(devices: int, elements: int) -> int:
    """Trials a chunk of strings of ``devices`` devices may hold within ``elements`` device values:
    whole sampling blocks when one block fits, else the largest sub-block of ``SUM_TRIALS`` x 2^k
    trials that fits (at least ``SUM_TRIALS``), which divides a block."""
    fitting = elements // max(devices, 1)
    if fitting >= BLOCK_TRIALS:
        return fitting // BLOCK_TRIALS * BLOCK_TRIALS
    piece = SUM_TRIALS
    while 2 * piece <= fitting:
        piece *= 2
    return piece


def chunk_bounds(trials: int, chunk_trials: int) -> list[tuple[int, int]]:
    """(first_trial, count) of each chunk; chunks hold whole blocks except the last, or, below a
    block, whole sub-blocks (:func:`evaluation_trials`) that divide it."""
    if chunk_trials >= BLOCK_TRIALS:
        chunk = chunk_trials // BLOCK_TRIALS * BLOCK_TRIALS
    else:
        chunk = evaluation_trials(1, max(chunk_trials, 1))
    return [(start, min(chunk, trials - start)) for start in range(0, trials, chunk)]
