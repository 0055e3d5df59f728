"""The series string check: draw built strings, solve static and dynamic sharing, count failures.

A trial is one built string (all its branches). A trial fails a check when any device of it exceeds
``derating x V_RRM`` of its part, or when the solver could not solve it (counted and reported, never
dropped). A check passes when the upper bound of the exact confidence interval of P(fail) is within
``[sizing] target_p_fail`` (default 1e-3): the same criterion the sizing search uses, and a run too
short to show it cannot pass. Results are plain dataclasses; nothing here formats text.
"""

from __future__ import annotations

from contextlib import nullcontext
from dataclasses import dataclass, replace
from typing import Callable, Mapping

import numpy as np

from stringcheck.constants import RESISTOR_TCR_REFERENCE
from stringcheck.design.model import Design, Part
from stringcheck.errors import DesignError, Setting
from stringcheck.limits import within_limit
from stringcheck.physics.leakage import leakage_current
from stringcheck.checks.plausibility import PlausibilityWarning, plausibility_warnings
from stringcheck.montecarlo.sampling import BLOCK_TRIALS, DrawnStrings, chunk_bounds, draw_strings
from stringcheck.solvers.series_dynamic import solve_dynamic_sharing
from stringcheck.solvers.series_static import solve_static_sharing
from stringcheck.montecarlo.estimates import (
    FailureEstimate,
    failure_estimate,
    histogram_counts,
    trials_for_upper_bound,
)
from stringcheck.checks.forward import (
    ForwardAccumulator,
    ForwardChunk,
    ForwardSetup,
    finish_parallel,
    finish_thermal,
    forward_for_devices,
    forward_parameters,
    forward_ratios,
    forward_reasons,
    forward_setup,
    run_forward_chunk,
)
from stringcheck.checks.transient import DEFAULT_WORST, run_transient, transient_evaluator
from stringcheck.checks.transient import not_run as not_run_transient
from stringcheck.montecarlo.sensitivity import (
    DRIVER_TRIALS,
    TEMPERATURE_CHECKS,
    TOP_DRIVERS,
    Driver,
    chunk_features,
)
from stringcheck.montecarlo.sensitivity import cooler, label, rank_inputs, tightenable, tightened
from stringcheck.checks.grading_ratings import GradingSummary, grading_summary
from stringcheck.montecarlo.importance import (
    COARSE_SEARCH,
    DEFAULT_SAMPLES,
    RareEstimate,
    SearchEffort,
    needs_rare,
    rare_design,
    rare_event_estimate,
)
from stringcheck.checks.preconditions import (
    dynamic_check_reason,
    impossibility,
    model_assumptions,
    no_scatter,
    with_recovery_charge,
)
from stringcheck.montecarlo.mixed_stock import device_values, position_values
from stringcheck.checks.recovery_conditions import (
    RecoveryRescaling,
    TurnOffCurrent,
    carried_charges,
    recovery_rescaling,
)
from stringcheck.montecarlo.accumulators import PositionSums
from stringcheck.montecarlo.executor import (
    CHUNK_ELEMENTS,
    WorkerPool,
    available_memory,
    chunk_size,
    map_chunks,
)
from stringcheck.montecarlo.executor import worker_pool

# The checks whose inputs the drivers rank; --rare estimates these and the transient check by
# importance sampling.
RARE_CHECKS = ("static", "dynamic", "parallel", "thermal")
# The transient check's importance sampler: each string costs milliseconds of the turn-off engine.
TRANSIENT_RARE_SAMPLES = 2000
# Trials per slice of a chunk in the solvers (whole sampling blocks).
_SOLVE_TRIALS = 2 * BLOCK_TRIALS
# Peak memory of the per-trial figures while the checks are summarised, in multiples of what the
# chunks keep. A series check joins its ratios into one array (its pieces then freed) and copies
# the finite ones for the percentiles (sorted in place): 2 for the static and dynamic checks by
# that count. The forward checks join several figures and derive (trials, parallel) arrays from
# them beside their chunks, hence the margin.
_SUMMARY_FACTOR = 3

ProgressCallback = Callable[[int, int], None]


@dataclass(frozen=True)
class PositionStatistics:
    """Statistics of one device position over all trials [V]."""

    branch: int
    index: int
    part: str
    limit: float
    mean_voltage: float
    std_voltage: float
    max_voltage: float
    failures: int


@dataclass(frozen=True)
class SeriesCheck:
    """The outcome of one check (static or dynamic) over the whole run."""

    name: str
    ran: bool
    reason: str
    passed: bool
    worst_voltage: float
    worst_ratio: float
    p50_ratio: float
    p99_ratio: float
    estimate: FailureEstimate | None
    unsolved: int
    worst_trial: int
    worst_string: np.ndarray
    positions: tuple[PositionStatistics, ...]
    histogram: tuple[tuple[float, float, int], ...]
    rare: RareEstimate | None = None
    # The dynamic check: the current each branch commutates from, to which Q_rr was carried
    # (None: Q_rr taken at the datasheet's test conditions; the static check has none).
    turn_off_current: TurnOffCurrent | None = None


@dataclass(frozen=True)
class CheckResult:
    """Everything ``stringcheck check`` found."""

    design: Design
    trials: int
    seed: int
    target_p_fail: float
    trials_needed: int
    checks: Mapping[str, SeriesCheck]
    grading: GradingSummary
    verdict: str
    impossible: str | None
    assumptions: tuple[str, ...]
    no_scatter: tuple[str, ...]
    drivers: tuple[Driver, ...] = ()
    # Valid values that are probably slips (``plausibility``): shown by the report, never fatal.
    warnings: tuple[PlausibilityWarning, ...] = ()


def run_check(design: Design, *, trials: int | None = None, seed: int | None = None,
              chunk_trials: int | None = None, only: tuple[str, ...] | None = None,
              progress: ProgressCallback | None = None, workers: int = 1,
              pool: WorkerPool | None = None, transient: bool = False,
              transient_worst: int = DEFAULT_WORST,
              transient_sample: int | None = None, drivers: bool = False,
              rare: bool | None | tuple[str, ...] = False,
              rare_samples: int = DEFAULT_SAMPLES) -> CheckResult:
    """Run the series check of ``design`` (static sharing always, dynamic when there is a turn-off).

    Parameters
    ----------
    design
        A validated design.
    trials, seed
        Override the design's Monte Carlo settings.
    chunk_trials
        Trials per chunk (rounded to whole sampling blocks, or below a block to a sub-block of
        ``sampling.SUM_TRIALS`` x 2^k); the result does not depend on it, bit for bit.
    only
        Run only these of ("static", "dynamic") (the sizing search uses it); a check left out is
        reported as not run.
    progress
        Called with (trials done, trials in all) after each chunk.
    workers, pool
        Run the chunks in ``workers`` processes, or in an open ``pool`` (see ``runner.worker_pool``);
        the result is identical to a run in this process.
    transient, transient_worst, transient_sample
        Also run the time-domain turn-off (``checks.transient``) on the worst
        ``transient_worst`` charge-balance trials and a random sample of ``transient_sample``
        trials (default: the trials the target needs, so that the check can pass).
    rare, rare_samples
        Estimate the P(fail) of every check (static, dynamic, transient, parallel, thermal) by
        importance sampling (``montecarlo.importance``) with ``rare_samples`` strings (the transient
        check at most ``TRANSIENT_RARE_SAMPLES``); each check then passes on that estimate's upper
        bound (the plain exact interval decides when the two disagree or the estimator declines).
        None: automatically, for each check whose plain run could not decide it with fewer than
        ``rare_events.AUTO_RARE_FAILURES`` failures (``rare_events.needs_rare``). A tuple of
        check names: for those (``review`` gives both designs the same).
    drivers
        Rank the inputs by their influence on each series check's worst stress, and rerun the
        check with each of the top inputs tightened (``montecarlo.sensitivity``).
    """
    trials = design.monte_carlo.trials if trials is None else trials
    seed = design.monte_carlo.seed if seed is None else seed
    if trials < 1:
        raise DesignError(Setting("trials"), f" must be at least 1, got {trials}",
                          key="monte_carlo.trials")
    if design.grading.resistor is None and any(
            design.parts[name].voltage_exponent == 0.0 for name in design.parts_used()):
        raise DesignError("missing; with voltage-independent leakage (leakage_voltage_exponent = 0) "
                          "the string voltage is undetermined without grading resistors (or run "
                          "`stringcheck size` to choose them)", source=design.source,
                          key="grading.resistor")
    if rare:
        rare_design(design)  # a lot too small to fit is refused before the run
    if only is None or "dynamic" in only:
        design = with_recovery_charge(design)
    layout = design.string
    shape = (layout.parallel, layout.series)
    grid = layout.part_labels()

    def per_position(attribute: Callable[[Part], float]) -> np.ndarray:
        # With a mix these are each position's lowest values; chunks use each device's own.
        return position_values(design, attribute)

    limits = layout.derating * per_position(lambda p: p.v_rrm)
    temperature = design.duty.ambient + layout.temperature_rise_grid()
    reference_voltage = per_position(lambda p: p.i_r.at_voltage)
    reference_temperature = per_position(lambda p: p.i_r.at_temperature)
    doubling_temperature = per_position(lambda p: p.doubling_temperature)
    voltage_exponent = per_position(lambda p: p.voltage_exponent)
    junction_capacitance = per_position(lambda p: p.c_j)

    dynamic_reason = "not requested" if only is not None and "dynamic" not in only else \
        dynamic_check_reason(design)
    run_dynamic = dynamic_reason == ""
    run_static = only is None or "static" in only
    parameters = ("i_r", "q_rr") if run_dynamic else ("i_r",)
    run_forward = only is None
    parallel_reason, thermal_reason = forward_reasons(design) if run_forward else \
        ("not requested", "not requested")
    # The recovery charge carried to the application's turn-off: one value per drawn device for
    # the dynamic check and the thermal check's recovery loss (a turn-off exactly when the
    # dynamic check can run: an ac waveform or a di_dt).
    rescaling, rescaling_note = recovery_rescaling(design) if run_dynamic else (None, "")
    forward = None
    if not (parallel_reason and thermal_reason):
        forward = forward_setup(design, parallel_reason, thermal_reason, rescaling)
        parameters = tuple(dict.fromkeys(parameters + forward_parameters(design)))
    forward_sums = ForwardAccumulator()
    static = PositionSums(shape, limits) if run_static else None
    dynamic = PositionSums(shape, limits) if run_dynamic else None
    context = _ChunkContext(design=design, seed=seed, parameters=parameters, run_static=run_static,
                            run_dynamic=run_dynamic, limits=limits, temperature=temperature,
                            reference_voltage=reference_voltage,
                            reference_temperature=reference_temperature,
                            doubling_temperature=doubling_temperature,
                            voltage_exponent=voltage_exponent,
                            junction_capacitance=junction_capacitance,
                            forward=forward, rescaling=rescaling,
                            driver_trials=DRIVER_TRIALS if drivers else 0)
    features: dict[str, list] = {}
    ratios: dict[str, list] = {"static": [], "dynamic": [], "parallel": [], "thermal": []}
    with worker_pool(workers) if pool is None else nullcontext(pool) as active:
        if chunk_trials is None:
            chunk_trials = chunk_size(trials, CHUNK_ELEMENTS // (layout.series * layout.parallel),
                                      active)
        bounds = chunk_bounds(trials, chunk_trials)
        for number, outcome in enumerate(map_chunks(_run_chunk, context, bounds, pool=active,
                                                    progress=progress)):
            if static is not None:
                static.merge(outcome.static)
            if dynamic is not None:
                dynamic.merge(outcome.dynamic)
            if outcome.forward is not None:
                forward_sums.merge(outcome.forward)
            if outcome.features is not None:
                for name, values in outcome.features.items():
                    features.setdefault(name, []).append(values)
                count = len(next(iter(outcome.features.values())))
                for name, accumulator in (("static", outcome.static),
                                          ("dynamic", outcome.dynamic)):
                    if accumulator is not None:
                        ratios[name].append(np.concatenate(accumulator.worst_ratios)[:count])
                if outcome.forward is not None:
                    ratios["parallel"].append(outcome.forward.current_ratio[:count])
                    if outcome.forward.tj_ratio is not None:
                        ratios["thermal"].append(outcome.forward.tj_ratio[:count])
            if number == 0 and len(bounds) > 1:
                # What the first chunk keeps, as merged, tells what the whole run will keep.
                _check_memory(design, trials, _per_trial_bytes(outcome, bounds[0][1]))

    confidence = design.monte_carlo.confidence
    target = design.sizing.target_p_fail
    checks = {"static": _finish("static", static, grid, confidence, trials, target)
              if static is not None
              else _not_run("static", "not requested")}
    if dynamic is not None:
        checks["dynamic"] = replace(_finish("dynamic", dynamic, grid, confidence, trials, target),
                                    turn_off_current=None if rescaling is None
                                    else rescaling.turn_off)
    else:
        checks["dynamic"] = _not_run("dynamic", dynamic_reason)
    if transient:
        if dynamic is None:
            checks["transient"] = not_run_transient(f"needs the dynamic check, which did not run: "
                                                    f"{dynamic_reason}")
        else:
            needed = trials_for_upper_bound(target, confidence=confidence)
            checks["transient"] = run_transient(
                design, dynamic_ratios=np.concatenate(dynamic.worst_ratios), trials=trials,
                seed=seed, worst=transient_worst,
                sample=needed if transient_sample is None else transient_sample,
                confidence=confidence, target=target, drivers=drivers)
    if run_forward:
        checks["parallel"] = finish_parallel(design, forward, parallel_reason, forward_sums,
                                             confidence, target, trials)
        checks["thermal"] = finish_thermal(design, forward, thermal_reason, forward_sums,
                                           confidence, target, trials)

    impossible = impossibility(design)
    grading = grading_summary(design, checks, temperature,
                              position_values(design, lambda p: p.c_j, pick=np.maximum))
    if rare is not False:
        for name in RARE_CHECKS + ("transient",):
            wanted = name in rare if isinstance(rare, tuple) else \
                (rare or needs_rare(checks[name], target)) if name in checks else False
            if name in checks and checks[name].ran and wanted:
                checks[name] = _with_rare(checks[name], context, seed, confidence, target,
                                          rare_samples, automatic=rare is None)
    passed = all(check.passed for check in checks.values() if check.ran)
    ranking: tuple[Driver, ...] = ()
    if drivers and features:
        ranking = _drivers(design, checks, features, ratios, trials=trials, seed=seed,
                           pool=pool if pool is not None else None)
    if drivers and transient and checks["transient"].ran:
        rare_estimate = checks["transient"].rare
        shares = {item.input: item.share for item in rare_estimate.importance} \
            if rare_estimate is not None and rare_estimate.found_failure_point else {}
        ranking += tuple(replace(driver, failure_point_share=shares.get(driver.input))
                         for driver in checks["transient"].drivers)
    # A check the user asked for that could not run never lets the design pass.
    requested_missing = transient and not checks["transient"].ran
    verdict = "pass" if passed and impossible is None and not grading.rating_problems \
        and not requested_missing else "fail"
    return CheckResult(design=design, trials=trials, seed=seed, target_p_fail=target,
                       trials_needed=trials_for_upper_bound(target, confidence=confidence),
                       checks=checks, grading=grading,
                       verdict=verdict, impossible=impossible,
                       assumptions=design.assumptions + model_assumptions(design, rescaling_note),
                       no_scatter=no_scatter(design, parameters), drivers=ranking,
                       warnings=plausibility_warnings(design,
                                                      grading_loss=grading.total_grading_loss))


@dataclass(frozen=True)
class _ChunkContext:
    """What every chunk needs: picklable, so that chunks can run in worker processes."""

    design: Design
    seed: int
    parameters: tuple[str, ...]
    run_static: bool
    run_dynamic: bool
    limits: np.ndarray
    temperature: np.ndarray
    reference_voltage: np.ndarray
    reference_temperature: np.ndarray
    doubling_temperature: np.ndarray
    voltage_exponent: np.ndarray
    junction_capacitance: np.ndarray
    forward: ForwardSetup | None
    rescaling: RecoveryRescaling | None
    driver_trials: int


@dataclass(frozen=True)
class _ChunkOutcome:
    static: PositionSums | None
    dynamic: PositionSums | None
    forward: ForwardChunk | None
    features: dict[str, np.ndarray] | None


def _run_chunk(context: _ChunkContext, first: int, count: int) -> _ChunkOutcome:
    """Draw and solve one chunk of trials; its sums, to be merged in trial order."""
    design = context.design
    shape = context.limits.shape
    drawn = draw_strings(design, context.parameters, first, count, seed=context.seed)
    static = PositionSums(shape, context.limits) if context.run_static else None
    dynamic = PositionSums(shape, context.limits) if context.run_dynamic else None
    devices = _devices(context, drawn)
    if drawn.part_index is None:
        # The solvers work through the chunk in slices of whole sampling blocks, small enough for
        # their temporaries to stay in cache; the accumulators take them in trial order.
        slices = [drawn.trial_slice(start, _SOLVE_TRIALS) for start in range(0, count, _SOLVE_TRIALS)]
    else:
        # With a mix, each drawn device's own part constants, (trials, parallel, series), cover
        # the whole chunk at once.
        slices = [drawn]
    own_limits = None if drawn.part_index is None else devices.limits
    for part in slices:
        if static is not None:
            static.device_limits = own_limits
            _static_chunk(design, part, static, devices.temperature, devices.reference_voltage,
                          devices.reference_temperature, devices.doubling_temperature,
                          devices.voltage_exponent)
            static.device_limits = None
        if dynamic is not None:
            dynamic.device_limits = own_limits
            _dynamic_chunk(design, part, dynamic, devices.junction_capacitance, context.rescaling)
            dynamic.device_limits = None
    forward = None
    if context.forward is not None:
        forward = run_forward_chunk(design, devices.forward, drawn)
    features = None
    if first < context.driver_trials:
        features = chunk_features(drawn, design, min(count, context.driver_trials - first))
    return _ChunkOutcome(static=static, dynamic=dynamic, forward=forward, features=features)


def _per_trial_bytes(outcome: _ChunkOutcome, count: int) -> float:
    """Bytes per trial of the figures a chunk's outcome keeps until the end of the run (the worst
    ratio of each trial in each check, the forward checks' per-trial figures)."""
    total = 0
    for sums in (outcome.static, outcome.dynamic):
        if sums is not None:
            total += sum(ratios.nbytes for ratios in sums.worst_ratios)
    if outcome.forward is not None:
        for name, value in vars(outcome.forward).items():
            # (The runaway-ambient sample is a few rows per block, not per trial.)
            if name != "runaway_ambient" and isinstance(value, np.ndarray) and value.ndim \
                    and value.shape[0] == count:
                total += value.nbytes
    return total / max(count, 1)


def _check_memory(design: Design, trials: int, per_trial: float) -> None:
    """Refuse, after the first chunk, a run whose per-trial figures the machine cannot hold."""
    available = available_memory()
    if available is None or per_trial <= 0:
        return
    kept = per_trial * trials
    needed = _SUMMARY_FACTOR * kept
    if needed <= available:
        return
    most = int(available / (_SUMMARY_FACTOR * per_trial)) // 1000 * 1000
    raise DesignError(
        f"{trials:,} trials keep {per_trial:.0f} bytes of figures each ({_bytes(kept)}), and "
        f"summarising them takes about {_SUMMARY_FACTOR} times that ({_bytes(needed)}), more than "
        f"the {_bytes(available)} of memory available: use at most {most:,} trials (",
        Setting("trials"), " or monte_carlo.trials)", source=design.source, key="monte_carlo.trials")


def _bytes(count: float) -> str:
    for scale, unit in ((2 ** 40, "TiB"), (2 ** 30, "GiB"), (2 ** 20, "MiB"), (2 ** 10, "KiB")):
        if count >= scale:
            return f"{count / scale:.3g} {unit}"
    return f"{count:.0f} B"


def _for_devices(context: _ChunkContext, drawn: DrawnStrings) -> _ChunkContext:
    """The context with each drawn device's own part constants (a mix), (trials, parallel, series)."""
    design = context.design

    def values(attribute: Callable[[Part], float]) -> np.ndarray:
        return device_values(design, drawn, attribute)

    return replace(
        context, limits=design.string.derating * values(lambda p: p.v_rrm),
        reference_voltage=values(lambda p: p.i_r.at_voltage),
        reference_temperature=values(lambda p: p.i_r.at_temperature),
        doubling_temperature=values(lambda p: p.doubling_temperature),
        voltage_exponent=values(lambda p: p.voltage_exponent),
        junction_capacitance=values(lambda p: p.c_j),
        forward=None if context.forward is None else forward_for_devices(design, context.forward,
                                                                          drawn))


def _static_chunk(design: Design, drawn: DrawnStrings, accumulator: PositionSums,
                  temperature: np.ndarray, reference_voltage: np.ndarray,
                  reference_temperature: np.ndarray, doubling_temperature: np.ndarray,
                  voltage_exponent: np.ndarray) -> None:
    leakage = leakage_current(drawn.parameters["i_r"], reference_voltage, temperature,
                              reference_voltage=reference_voltage,
                              reference_temperature=reference_temperature,
                              doubling_temperature=doubling_temperature,
                              voltage_exponent=voltage_exponent)
    conductance = _grading_conductance(design, drawn, temperature)
    solution = solve_static_sharing(design.duty.reverse_voltage, conductance, leakage,
                                    reference_voltage=reference_voltage,
                                    voltage_exponent=voltage_exponent)
    converged = np.asarray(solution.converged).reshape(solution.voltages.shape[0], -1).all(axis=1)
    accumulator.add(solution.voltages, converged, drawn.first_trial)


def _grading_conductance(design: Design, drawn: DrawnStrings, temperature: np.ndarray) -> np.ndarray:
    if drawn.resistance is None:
        return np.zeros_like(drawn.parameters["i_r"])
    tcr = design.grading.resistor_tcr
    resistance = drawn.resistance * (1.0 + tcr * (temperature - RESISTOR_TCR_REFERENCE))
    return 1.0 / resistance


def _dynamic_chunk(design: Design, drawn: DrawnStrings, accumulator: PositionSums,
                   junction_capacitance: np.ndarray, rescaling: RecoveryRescaling | None) -> None:
    capacitance = junction_capacitance if drawn.capacitance is None else \
        drawn.capacitance + junction_capacitance
    charge = carried_charges(design, drawn, rescaling)
    capacitance = np.broadcast_to(capacitance, charge.shape)
    solution = solve_dynamic_sharing(design.duty.reverse_voltage, charge, capacitance)
    solved = np.ones(solution.voltages.shape[0], dtype=bool)
    accumulator.add(solution.voltages, solved, drawn.first_trial)


def _finish(name: str, accumulator: PositionSums, grid: np.ndarray, confidence: float,
            trials: int, target: float) -> SeriesCheck:
    """Summarise one check. It passes when the upper confidence bound of P(fail) is within
    ``target`` ([sizing] target_p_fail): a run too short to show that cannot pass."""
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
    positions = []
    for branch in range(grid.shape[0]):
        for index in range(grid.shape[1]):
            positions.append(PositionStatistics(
                branch=branch + 1, index=index + 1, part=str(grid[branch, index]),
                limit=float(accumulator.limits[branch, index]),
                mean_voltage=float(mean[branch, index]),
                std_voltage=float(np.sqrt(variance[branch, index])),
                max_voltage=float(accumulator.maximum[branch, index]),
                failures=int(accumulator.failures_by_position[branch, index])))
    finite = ratios[np.isfinite(ratios)]
    # Both percentiles from one partial sort of ``finite`` in place (no further copy); the
    # histogram below does not depend on the order.
    p50, p99 = np.percentile(finite, [50, 99], overwrite_input=True) if finite.size else \
        (float("nan"), float("nan"))
    worst_string = accumulator.worst_string if accumulator.worst_string is not None else \
        np.full(grid.shape, np.nan)
    return SeriesCheck(
        name=name, ran=True, reason="", passed=estimate.ci_high <= target,
        worst_voltage=float(np.max(accumulator.maximum)) if accumulator.count else float("nan"),
        worst_ratio=float(np.max(ratios)),
        p50_ratio=float(p50), p99_ratio=float(p99),
        estimate=estimate, unsolved=accumulator.unsolved, worst_trial=accumulator.worst_trial,
        worst_string=worst_string, positions=tuple(positions),
        histogram=tuple(histogram_counts(finite, bins=12)) if finite.size else ())


def _not_run(name: str, reason: str) -> SeriesCheck:
    return SeriesCheck(name=name, ran=False, reason=reason, passed=False, worst_voltage=float("nan"),
                       worst_ratio=float("nan"), p50_ratio=float("nan"), p99_ratio=float("nan"),
                       estimate=None, unsolved=0, worst_trial=-1, worst_string=np.empty((0, 0)),
                       positions=(), histogram=())


def evaluate_strings(context: _ChunkContext, drawn: DrawnStrings, check: str) -> np.ndarray:
    """Each drawn string's worst stress ratio in ``check`` ("static" or "dynamic"); inf unsolved.
    With a mix each device is judged with its own part's constants and limit."""
    devices = _devices(context, drawn)
    accumulator = PositionSums(context.limits.shape, context.limits)
    if drawn.part_index is not None:
        accumulator.device_limits = devices.limits
    if check == "static":
        _static_chunk(context.design, drawn, accumulator, devices.temperature,
                      devices.reference_voltage, devices.reference_temperature,
                      devices.doubling_temperature, devices.voltage_exponent)
    else:
        _dynamic_chunk(context.design, drawn, accumulator, devices.junction_capacitance,
                       context.rescaling)
    return np.concatenate(accumulator.worst_ratios)


def _devices(context: _ChunkContext, drawn: DrawnStrings) -> _ChunkContext:
    """The context with per-device constants under a mix (:func:`_for_devices`), else itself."""
    return context if drawn.part_index is None else _for_devices(context, drawn)


def _with_rare(check, context: _ChunkContext, seed: int, confidence: float, target: float,
               samples: int, *, automatic: bool = False):
    """The check with its P(fail) estimated by importance sampling, passing on that estimate's
    upper bound, unless that bound lies below the plain run's exact lower bound (then the plain
    interval decides, and the estimate says so)."""
    name = check.name
    effort = SearchEffort()
    if name == "transient":
        parameters = ("q_rr",)
        evaluate = transient_evaluator(context.design)
        effort = COARSE_SEARCH
        samples = min(samples, TRANSIENT_RARE_SAMPLES)
    elif name in ("static", "dynamic"):
        parameters = ("i_r",) if name == "static" else ("q_rr",)

        def evaluate(drawn: DrawnStrings) -> np.ndarray:
            return evaluate_strings(context, drawn, name)
    else:
        # The forward checks depend on V_T0 and r_T and, through the losses and the junction
        # temperatures, on the leakage and recovery charge.
        parameters = forward_parameters(context.design)

        def evaluate(drawn: DrawnStrings) -> np.ndarray:
            return forward_ratios(context.design, _devices(context, drawn).forward, drawn, name)
    plain = check.estimate
    try:
        design, refitted = rare_design(context.design)
    except DesignError:
        if not automatic:
            raise
        return check  # automatic: a lot too small to fit keeps the plain estimate
    # A refitted lot is a model of the lot, the plain run's draws are the lot itself: the two are
    # not pooled, and without a failure point the plain run decides.
    estimate = rare_event_estimate(design, name, parameters, evaluate, seed=seed,
                                   confidence=confidence, samples=samples,
                                   plain=None if refitted else plain, effort=effort)
    estimate = replace(estimate, automatic=automatic)
    # The transient check also fails on any of its simulated worst charge-balance strings.
    worst_ok = getattr(check, "worst_failures", 0) == 0
    if refitted:
        estimate = replace(estimate, estimator=estimate.estimator + (
            f"; the resampled lot(s) of {', '.join(refitted)} drawn from their fit (per column "
            "lognormal or normal, Gaussian copula)"))
        if not estimate.found_failure_point:
            note = ("no failure point found and the sampler drew the lot's fit, not the lot: the "
                    "plain run (the lot itself) decides")
            estimate = replace(estimate, decides=False, note=note)
    if estimate.found_failure_point and plain is not None and estimate.ci_high < plain.ci_low:
        # Two intervals of one probability that do not meet: one of the estimators is wrong, and
        # the importance sampler is the one that can be (a failure region it never sampled, such
        # as a failure point it did not find). The exact plain interval decides.
        note = (f"the importance-sampling upper bound {estimate.ci_high:.2g} lies below the plain "
                f"Monte Carlo lower bound {plain.ci_low:.2g} ({plain.failures:,} of "
                f"{plain.trials:,}): the estimators disagree, so the plain interval decides")
        estimate = replace(estimate, decides=False, note=note)
    # An estimate that does not decide (the cases above, or an incomplete orbit or a search that
    # cannot rule out a failure region it missed, which the estimator declines itself) leaves the
    # verdict to the plain interval.
    bound = estimate.ci_high if estimate.decides else plain.ci_high
    return replace(check, rare=estimate, passed=bound <= target and worst_ok)


def _drivers(design: Design, checks, features: dict[str, list], ratios: dict[str, list], *,
             trials: int, seed: int, pool: WorkerPool | None) -> tuple[Driver, ...]:
    """Rank the inputs of each check that ran, and rerun it with the top ones tightened and with a
    cooler ambient."""
    joined = {name: np.concatenate(parts) for name, parts in features.items()}
    out = []

    def rerun(changed: Design, name: str) -> tuple[float, float]:
        only = (name,) if name in ("static", "dynamic") else None
        again = run_check(changed, trials=trials, seed=seed, only=only, pool=pool).checks[name]
        return again.p99_ratio, again.estimate.ci_high

    for name in RARE_CHECKS:
        if name not in checks or not checks[name].ran or not ratios[name]:
            continue
        shares = {}
        rare = getattr(checks[name], "rare", None)
        if rare is not None and rare.found_failure_point:
            shares = {item.input: item.share for item in rare.importance}
        ranked = rank_inputs(name, joined, np.concatenate(ratios[name]))
        for position, (driver, rho) in enumerate(ranked):
            p99 = upper = None
            if position < TOP_DRIVERS and tightenable(design, driver):
                p99, upper = rerun(tightened(design, driver), name)
            out.append(Driver(check=name, input=driver, label=label(driver), rank_correlation=rho,
                              tightened_p99_ratio=p99, tightened_p_fail_upper=upper,
                              failure_point_share=shares.get(driver)))
        if name in TEMPERATURE_CHECKS:
            p99, upper = rerun(cooler(design), name)
            out.append(Driver(check=name, input="ambient", label=label("ambient"),
                              rank_correlation=float("nan"), tightened_p99_ratio=p99,
                              tightened_p_fail_upper=upper))
    return tuple(out)
