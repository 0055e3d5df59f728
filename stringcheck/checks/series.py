"""The series checks of a string: static (blocking-state) and dynamic (turn-off) voltage sharing.

Both run inside the chunks of ``studies.check`` on the same drawn devices as the forward checks, in
the steps every check module has: set up from the design (:func:`series_setup`), evaluate a chunk
of drawn strings (:func:`run_series_chunk`), merge the chunks in trial order
(:class:`SeriesAccumulator`), finish (:func:`finish_series`), given to the workflow as
:data:`SERIES_STEPS` (``checks.steps``).

* ``static``: each stage's leakage against its grading resistor (``solvers.series_static``), the
  resistor at its temperature by its TCR (``physics.grading.resistance_at_temperature``).
* ``dynamic``: charge balance after reverse recovery (``solvers.series_dynamic``), each device's
  Q_rr carried to the application's turn-off (``checks.recovery_conditions``).

A trial fails a check when any device of it exceeds ``derating x V_RRM`` of its part, or when the
solver could not solve it (counted and reported, never dropped). Results are plain dataclasses;
nothing here formats text.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Callable

import numpy as np

from stringcheck.checks.outcome import CheckOutcome, Exported, figure, json_number, records
from stringcheck.checks.outcome import turn_off_to_dict
from stringcheck.checks.preconditions import dynamic_check_reason
from stringcheck.checks.steps import CheckSteps, RunFigures
from stringcheck.constants import RESISTOR_TCR_REFERENCE
from stringcheck.checks.recovery_conditions import (
    RecoveryRescaling,
    TurnOffCurrent,
    carried_charges,
)
from stringcheck.checks.junction import junction_arrays, needs_junction_law
from stringcheck.design.model import Design, Part
from stringcheck.checks.findings import Finding
from stringcheck.limits import within_limit
from stringcheck.montecarlo.accumulators import PositionSums
from stringcheck.montecarlo.estimates import failure_estimate, histogram_counts
from stringcheck.montecarlo.junction_scatter import junction_factors, scatters
from stringcheck.montecarlo.mixed_stock import device_part_grid, device_values, position_values
from stringcheck.montecarlo.sampling import BLOCK_TRIALS, DrawnStrings
from stringcheck.physics.grading import resistance_at_temperature
from stringcheck.montecarlo.temperature_rows import (
    parameter_at_temperature,
    strings_at_temperature,
    temperature_dependent,
)
from stringcheck.physics.leakage import leakage_current
from stringcheck.solvers.capacitive_sharing import solve_capacitive_sharing
from stringcheck.solvers.aged_sharing import (
    solve_dynamic_sharing_dc_bias,
    solve_static_sharing_voltage_coefficient,
)
from stringcheck.solvers.series_dynamic import solve_dynamic_sharing
from stringcheck.solvers.series_static import solve_static_sharing

SERIES_CHECKS = ("static", "dynamic")
# Trials per slice of a chunk in the solvers (whole sampling blocks).
_SOLVE_TRIALS = 2 * BLOCK_TRIALS


@dataclass(frozen=True, kw_only=True, repr=False)
class PositionStatistics(Exported):
    """Statistics of one device position over all trials [V]."""

    branch: int = figure()
    index: int = figure()
    part: str = figure()
    limit: float = figure(unit="V")
    mean_voltage: float = figure(unit="V", encode=json_number)
    std_voltage: float = figure(unit="V", encode=json_number)
    max_voltage: float = figure(unit="V", encode=json_number)
    failures: int = figure()
    # The 99th percentile over the trials, where the run kept it (``run_check``'s
    # ``position_percentiles``; None otherwise): the review's per-position change, not the JSON.
    p99_voltage: float | None = figure(None, unit="V", default=None)


@dataclass(frozen=True, eq=False, kw_only=True, repr=False)
class SeriesCheck(CheckOutcome):
    """The outcome of a series check (static or dynamic) over the whole run."""

    json_order = ("passed", "worst_voltage", "worst_ratio", "p50_ratio", "p99_ratio", "failures",
                  "unsolved", "p_fail", "p_fail_ci", "p_fail_relative_error",
                  "trials_for_relative_error", "worst_trial", "rare", "positions")

    worst_voltage: float = figure(unit="V", encode=json_number, idle=math.nan)
    worst_string: np.ndarray = figure(None, unit="V", idle_factory=lambda: np.empty((0, 0)))
    positions: tuple[PositionStatistics, ...] = figure(encode=records, idle=())
    # (low edge, high edge, count) of the worst-ratio histogram, for the terminal report.
    histogram: tuple[tuple[float, float, int], ...] = figure(None, idle=())

    def per_position(self) -> tuple[PositionStatistics, ...]:
        return self.positions


@dataclass(frozen=True, eq=False, kw_only=True, repr=False)
class DynamicCheck(SeriesCheck):
    """The dynamic (charge-balance) check: a series check, with the current each branch commutates
    from, to which Q_rr was carried (None: Q_rr taken at the datasheet's test conditions)."""

    json_order = SeriesCheck.json_order[:-1] + ("turn_off_current", "positions")

    turn_off_current: TurnOffCurrent | None = figure(unit="A", encode=turn_off_to_dict,
                                                     default=None)


@dataclass(frozen=True)
class SeriesSetup:
    """Per-position constants of the series checks, shape (parallel, series), or with a mix each
    drawn device's own, (trials, parallel, series) (picklable: it travels to worker processes)."""

    run_static: bool
    run_dynamic: bool
    limits: np.ndarray
    temperature: np.ndarray
    reference_voltage: np.ndarray
    reference_temperature: np.ndarray
    doubling_temperature: np.ndarray
    voltage_exponent: np.ndarray
    junction_capacitance: np.ndarray
    rescaling: RecoveryRescaling | None
    # Largest voltages kept per position for its 99th percentile (0: none; accumulators.top_count).
    top_count: int = 0
    # The junction law (checks.junction) where the charge balance needs it (C_j rows or a
    # capacitive part): C_j0 [F], phi [V], gamma [1], 1 for a stored charge (0: capacitive).
    junction_law: bool = False
    junction_zero_bias: np.ndarray | None = None
    junction_potential: np.ndarray | None = None
    junction_exponent: np.ndarray | None = None
    stored_charge: np.ndarray | None = None
    # The run's seed, for the junction factors' stream (montecarlo.junction_scatter); None: C_j
    # at typ.
    seed: int | None = None


def series_setup(design: Design, *, run_static: bool, run_dynamic: bool,
                 rescaling: RecoveryRescaling | None, seed: int | None = None) -> SeriesSetup:
    """The series checks' constants per position; with a mix each position's lowest value over
    the parts that can stand there (the limits shown per position), which the chunks replace by
    each drawn device's own (:func:`series_for_devices`)."""
    return SeriesSetup(run_static=run_static, run_dynamic=run_dynamic,
                       temperature=design.duty.ambient + design.string.temperature_rise_grid(),
                       rescaling=rescaling, junction_law=needs_junction_law(design),
                       seed=seed if scatters(design) else None,
                       **_part_constants(design, lambda attribute: position_values(design,
                                                                                   attribute)))


def series_for_devices(design: Design, setup: SeriesSetup, drawn: DrawnStrings) -> SeriesSetup:
    """``setup`` with the constants of each drawn device's own part (a mix), else itself."""
    if drawn.part_index is None:
        return setup
    return replace(setup, **_part_constants(
        design, lambda attribute: device_values(design, drawn, attribute)))


def _part_constants(design: Design, values: Callable[[Callable[[Part], float]], np.ndarray]) -> dict:
    junction = junction_arrays(values) if needs_junction_law(design) else {}
    return dict(**junction,limits=design.string.derating * values(lambda p: p.v_rrm),
                reference_voltage=values(lambda p: p.i_r.at_voltage),
                reference_temperature=values(lambda p: p.i_r.at_temperature),
                doubling_temperature=values(lambda p: p.doubling_temperature),
                voltage_exponent=values(lambda p: p.voltage_exponent),
                junction_capacitance=values(lambda p: p.c_j))


@dataclass
class SeriesChunk:
    """The per-position sums of one chunk of each series check that runs (None: not run)."""

    static: PositionSums | None
    dynamic: PositionSums | None

    def sums(self) -> dict[str, PositionSums]:
        return {name: sums for name, sums in (("static", self.static), ("dynamic", self.dynamic))
                if sums is not None}


def run_series_chunk(design: Design, setup: SeriesSetup, drawn: DrawnStrings) -> SeriesChunk:
    """Solve the series checks of one chunk of drawn strings; its sums, to be merged in trial
    order."""
    shape = setup.limits.shape
    static = PositionSums(shape, setup.limits, top_count=setup.top_count) \
        if setup.run_static else None
    dynamic = PositionSums(shape, setup.limits, top_count=setup.top_count) \
        if setup.run_dynamic else None
    devices = series_for_devices(design, setup, drawn)
    if drawn.part_index is None:
        # The solvers work through the chunk in slices of whole sampling blocks, small enough for
        # their temporaries to stay in cache; the accumulators take them in trial order.
        count = drawn.trials
        slices = [drawn.trial_slice(start, _SOLVE_TRIALS) for start in range(0, count, _SOLVE_TRIALS)]
    else:
        # With a mix, each drawn device's own part constants, (trials, parallel, series), cover
        # the whole chunk at once.
        slices = [drawn]
    own_limits = None if drawn.part_index is None else devices.limits
    for part in slices:
        if static is not None:
            static.device_limits = own_limits
            static_chunk(design, part, static, devices)
            static.device_limits = None
        if dynamic is not None:
            dynamic.device_limits = own_limits
            dynamic_chunk(design, part, dynamic, devices)
            dynamic.device_limits = None
    return SeriesChunk(static=static, dynamic=dynamic)


def static_chunk(design: Design, drawn: DrawnStrings, accumulator: PositionSums,
                 devices: SeriesSetup) -> None:
    """Solve the static sharing of ``drawn`` into ``accumulator`` (constants of ``devices``)."""
    reference_current, reference_temperature = drawn.parameters["i_r"], \
        devices.reference_temperature
    if temperature_dependent(design, "i_r", rows_only=True):
        # Leakage rows at several temperatures: each device's own value at its temperature.
        reference_current = parameter_at_temperature(design, drawn, "i_r", devices.temperature)
        reference_temperature = devices.temperature
    leakage = leakage_current(reference_current, devices.reference_voltage,
                              devices.temperature, reference_voltage=devices.reference_voltage,
                              reference_temperature=reference_temperature,
                              doubling_temperature=devices.doubling_temperature,
                              voltage_exponent=devices.voltage_exponent)
    conductance = _grading_conductance(design, drawn, devices.temperature)
    aged = design.end_of_life
    surface = 0.0 if drawn.surface_conductance is None else drawn.surface_conductance
    if aged.enabled and aged.resistor_voltage_coefficient and drawn.resistance is not None:
        # End of life: R(V) = R (1 + gamma V), a nonlinear solve (solvers.aged_sharing).
        solution = solve_static_sharing_voltage_coefficient(
            design.duty.reverse_voltage, 1.0 / conductance, leakage,
            reference_voltage=devices.reference_voltage, voltage_exponent=devices.voltage_exponent,
            voltage_coefficient=aged.resistor_voltage_coefficient, shunt_conductance=surface)
    else:
        solution = solve_static_sharing(design.duty.reverse_voltage, conductance + surface,
                                        leakage, reference_voltage=devices.reference_voltage,
                                        voltage_exponent=devices.voltage_exponent)
    converged = np.asarray(solution.converged).reshape(solution.voltages.shape[0], -1).all(axis=1)
    accumulator.add(solution.voltages, converged, drawn.first_trial)


def _grading_conductance(design: Design, drawn: DrawnStrings, temperature: np.ndarray) -> np.ndarray:
    if drawn.resistance is None:
        return np.zeros_like(drawn.parameters["i_r"])
    resistance = resistance_at_temperature(drawn.resistance, design.grading.resistor_tcr,
                                           temperature,
                                           reference_temperature=RESISTOR_TCR_REFERENCE)
    return 1.0 / resistance


def dynamic_chunk(design: Design, drawn: DrawnStrings, accumulator: PositionSums,
                  devices: SeriesSetup) -> None:
    """Solve the charge balance of ``drawn`` into ``accumulator`` (constants of ``devices``)."""
    junction_capacitance = devices.junction_capacitance
    capacitance = junction_capacitance if drawn.capacitance is None else \
        drawn.capacitance + junction_capacitance
    charge = carried_charges(design, strings_at_temperature(design, drawn, devices.temperature,
                                                            ("q_rr",)), devices.rescaling)
    if devices.junction_law:
        _nonlinear_dynamic_chunk(design, drawn, accumulator, devices, charge)
        return
    capacitance = np.broadcast_to(capacitance, charge.shape)
    aged = design.end_of_life
    if aged.enabled and aged.capacitor_dc_bias and drawn.capacitance is not None:
        # End of life: the grading capacitors lose capacitance under dc bias (solvers.aged_sharing).
        solution = solve_dynamic_sharing_dc_bias(
            design.duty.reverse_voltage, charge, drawn.capacitance, junction_capacitance,
            dc_bias_loss=aged.capacitor_dc_bias, rated_voltage=design.grading.capacitor_rated_voltage)
    else:
        solution = solve_dynamic_sharing(design.duty.reverse_voltage, charge, capacitance)
    solved = np.ones(solution.voltages.shape[0], dtype=bool)
    accumulator.add(solution.voltages, solved, drawn.first_trial)


def _nonlinear_dynamic_chunk(design: Design, drawn: DrawnStrings, accumulator: PositionSums,
                             devices: SeriesSetup, charge: np.ndarray) -> None:
    """The charge balance with each junction's C_j(V) (``solvers.capacitive_sharing``): a
    capacitive device's recovery charge is its junction's, up to its own stage voltage."""
    grading = 0.0 if drawn.capacitance is None else drawn.capacitance
    zero_bias = devices.junction_zero_bias
    if devices.seed is not None:
        zero_bias = zero_bias * junction_factors(design, device_part_grid(design, drawn),
                                                 drawn.first_trial, drawn.trials, devices.seed)
    solution = solve_capacitive_sharing(
        design.duty.reverse_voltage, charge * devices.stored_charge, grading,
        zero_bias, built_in_potential=devices.junction_potential,
        grading_exponent=devices.junction_exponent)
    shape = solution.voltages.shape
    voltages = solution.voltages.reshape(shape[0], *charge.shape[1:])
    solved = np.asarray(solution.converged).reshape(shape[0], -1).all(axis=1)
    accumulator.add(voltages, solved, drawn.first_trial)


class SeriesAccumulator:
    """The series checks' sums over the chunks, merged in trial order."""

    def __init__(self, setup: SeriesSetup) -> None:
        shape = setup.limits.shape
        self.sums = {name: PositionSums(shape, setup.limits, top_count=setup.top_count)
                     for name, runs in
                     (("static", setup.run_static), ("dynamic", setup.run_dynamic)) if runs}

    def merge(self, chunk: SeriesChunk) -> None:
        for name, sums in chunk.sums().items():
            self.sums[name].merge(sums)


def finish_series(name: str, accumulator: PositionSums, grid: np.ndarray, confidence: float,
                  trials: int, target: float, *, turn_off: TurnOffCurrent | None = None
                  ) -> SeriesCheck:
    """Summarise one series check. It passes when the upper confidence bound of P(fail) is within
    ``target`` ([sizing] target_p_fail): a run too short to show that cannot pass. ``turn_off``:
    the dynamic check's turn-off current (a :class:`DynamicCheck` for ``"dynamic"``)."""
    ratios = np.concatenate(accumulator.worst_ratios)
    # One copy of the per-trial ratios from here on (the transient check reads them again).
    accumulator.worst_ratios[:] = [ratios]
    failures = int(np.count_nonzero(~within_limit(ratios)))
    estimate = failure_estimate(failures, trials, confidence=confidence)
    moments = accumulator.moments()
    # No solved trial: the mean of nothing is 0 shifted by nothing, as before (the limit).
    mean = moments.mean if moments.count else accumulator.limits.copy()
    # One solved trial has no spread to speak of: 0, as before.
    variance = moments.variance(ddof=1) if moments.count > 1 else np.zeros(grid.shape)
    p99 = accumulator.position_percentile(99.0)
    positions = []
    for branch in range(grid.shape[0]):
        for index in range(grid.shape[1]):
            positions.append(PositionStatistics(
                branch=branch + 1, index=index + 1, part=str(grid[branch, index]),
                limit=float(accumulator.limits[branch, index]),
                mean_voltage=float(mean[branch, index]),
                std_voltage=float(np.sqrt(variance[branch, index])),
                max_voltage=float(accumulator.maximum[branch, index]),
                failures=int(accumulator.failures_by_position[branch, index]),
                p99_voltage=None if p99 is None else float(p99[branch, index])))
    finite = ratios[np.isfinite(ratios)]
    # Both percentiles from one partial sort of ``finite`` in place (no further copy); the
    # histogram below does not depend on the order.
    p50, p99 = np.percentile(finite, [50, 99], overwrite_input=True) if finite.size else \
        (float("nan"), float("nan"))
    worst_string = accumulator.worst_string if accumulator.worst_string is not None else \
        np.full(grid.shape, np.nan)
    figures = dict(
        name=name, ran=True, reason=None, passed=estimate.ci_high <= target,
        worst_voltage=float(np.max(accumulator.maximum)) if accumulator.count else float("nan"),
        worst_ratio=float(np.max(ratios)),
        p50_ratio=float(p50), p99_ratio=float(p99),
        estimate=estimate, unsolved=accumulator.unsolved, worst_trial=accumulator.worst_trial,
        worst_string=worst_string, positions=tuple(positions),
        histogram=tuple(histogram_counts(finite, bins=12)) if finite.size else ())
    if name == "dynamic":
        return DynamicCheck(**figures, turn_off_current=turn_off)
    return SeriesCheck(**figures)


def not_run_series(name: str, reason: Finding) -> SeriesCheck:
    """A series check that did not run, and why."""
    return (DynamicCheck if name == "dynamic" else SeriesCheck).not_run(name, reason)


def series_ratios(design: Design, setup: SeriesSetup, drawn: DrawnStrings, check: str) -> np.ndarray:
    """Each drawn string's worst stress ratio in ``check`` ("static" or "dynamic"), inf unsolved:
    the function g of the rare-event estimator (fails when > 1). With a mix each device is judged
    with its own part's constants and limit."""
    devices = series_for_devices(design, setup, drawn)
    accumulator = PositionSums(setup.limits.shape, setup.limits)
    if drawn.part_index is not None:
        accumulator.device_limits = devices.limits
    if check == "static":
        static_chunk(design, drawn, accumulator, devices)
    else:
        dynamic_chunk(design, drawn, accumulator, devices)
    return np.concatenate(accumulator.worst_ratios)


def _reasons(design: Design, names: tuple[str, ...]) -> dict[str, Finding | None]:
    """The static check always runs; the dynamic check needs a turn-off
    (``preconditions.dynamic_check_reason``)."""
    return {name: None if name == "static" else dynamic_check_reason(design) for name in names}


def _setup(design: Design, reasons, rescaling: RecoveryRescaling | None,
           seed: int | None = None) -> SeriesSetup:
    return series_setup(design, seed=seed, run_static=reasons["static"] is None,
                        run_dynamic=reasons["dynamic"] is None, rescaling=rescaling)


def _parameters(design: Design, reasons) -> tuple[str, ...]:
    return ("i_r", "q_rr") if reasons["dynamic"] is None else ("i_r",)


def _finish(design: Design, setup: SeriesSetup, reasons, accumulator: SeriesAccumulator,
            run: RunFigures) -> dict[str, SeriesCheck]:
    grid = design.string.part_labels()
    turn_off = None if setup.rescaling is None else setup.rescaling.turn_off
    out = {}
    for name in SERIES_CHECKS:
        sums = accumulator.sums.get(name)
        out[name] = not_run_series(name, reasons[name]) if sums is None else \
            finish_series(name, sums, grid, run.confidence, run.trials, run.target,
                          turn_off=turn_off)
    return out


def _chunk_ratios(chunk: SeriesChunk, count: int) -> dict[str, np.ndarray]:
    return {name: np.concatenate(sums.worst_ratios)[:count] for name, sums in chunk.sums().items()}


def _chunk_bytes(chunk: SeriesChunk, count: int) -> int:
    return sum(ratios.nbytes for sums in chunk.sums().values() for ratios in sums.worst_ratios)


def _trial_ratios(accumulator: SeriesAccumulator, name: str) -> np.ndarray | None:
    sums = accumulator.sums.get(name)
    return None if sums is None else np.concatenate(sums.worst_ratios)


def _rare_parameters(design: Design, name: str) -> tuple[str, ...]:
    return ("i_r",) if name == "static" else ("q_rr",)


# The series checks' steps for the check workflow (``checks.steps``; ``studies.check.CHECK_STEPS``).
SERIES_STEPS = CheckSteps(
    names=SERIES_CHECKS, reasons=_reasons, setup=_setup, parameters=_parameters,
    evaluate=run_series_chunk, accumulator=SeriesAccumulator, finish=_finish,
    chunk_ratios=_chunk_ratios, chunk_bytes=_chunk_bytes, trial_ratios=_trial_ratios,
    ratios=series_ratios, rare_parameters=_rare_parameters)
