"""The series string check: draw built strings, solve static and dynamic sharing, count failures.

A trial is one built string (all its branches). A trial fails a check when any device of it exceeds
``derating x V_RRM`` of its part, or when the solver could not solve it (counted and reported, never
dropped). A check passes when the upper bound of the exact confidence interval of P(fail) is within
``[sizing] target_p_fail`` (default 1e-3): the same criterion the sizing search uses, and a run too
short to show it cannot pass. Results are plain dataclasses; nothing here formats text.
"""

from __future__ import annotations

from contextlib import nullcontext
from dataclasses import dataclass, field, replace
from typing import Callable, Mapping

import numpy as np

from ..design import Design, Part, Spread
from ..errors import DesignError
from ..physics.leakage import leakage_current
from ..physics.recovery import recovery_charge
from ..sampling import BLOCK_TRIALS, DrawnStrings, chunk_bounds, draw_strings
from ..solvers.series_dynamic import solve_dynamic_sharing
from ..solvers.series_static import solve_static_sharing
from ..stats import FailureEstimate, failure_estimate, histogram_counts, trials_for_upper_bound
from .forward_check import (
    ForwardAccumulator,
    ForwardChunk,
    ForwardSetup,
    finish_parallel,
    finish_thermal,
    forward_parameters,
    forward_reasons,
    forward_setup,
    run_forward_chunk,
)
from .transient_check import DEFAULT_WORST, run_transient
from .transient_check import not_run as not_run_transient
from .drivers import DRIVER_TRIALS, TOP_DRIVERS, Driver, chunk_features, label, rank_inputs
from .drivers import tightened
from .grading_summary import GradingSummary, grading_summary
from .rare_events import DEFAULT_SAMPLES, RareEstimate, rare_event_estimate
from .recovery_conditions import RecoveryRescaling, recovery_rescaling, rescale_charges
from .runner import WorkerPool, chunk_size, map_chunks, worker_pool

# A check's per-chunk array budget: chunks hold about this many device values, so memory stays flat
# in the trial count.
_CHUNK_ELEMENTS = 1_000_000
# Trials per slice of a chunk in the solvers (whole sampling blocks).
_SOLVE_TRIALS = 2 * BLOCK_TRIALS
RESISTOR_TCR_REFERENCE = 25.0  # [degC]; resistor TCR is specified from 25 degC (common practice)

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


@dataclass
class _Accumulator:
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

    def __post_init__(self) -> None:
        self.maximum = np.full(self.shape, -np.inf)
        self.failures_by_position = np.zeros(self.shape, dtype=np.int64)

    def merge(self, other: "_Accumulator") -> None:
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
        ratio = voltages / self.limits
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
        over = np.flatnonzero(trial_ratio > 1.0)
        if over.size:
            self.failures_by_position += np.count_nonzero(ratio[over] > 1.0, axis=0)
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


def run_check(design: Design, *, trials: int | None = None, seed: int | None = None,
              chunk_trials: int | None = None, only: tuple[str, ...] | None = None,
              progress: ProgressCallback | None = None, workers: int = 1,
              pool: WorkerPool | None = None, transient: bool = False,
              transient_worst: int = DEFAULT_WORST,
              transient_sample: int | None = None, drivers: bool = False,
              rare: bool = False, rare_samples: int = DEFAULT_SAMPLES) -> CheckResult:
    """Run the series check of ``design`` (static sharing always, dynamic when there is a turn-off).

    Parameters
    ----------
    design
        A validated design.
    trials, seed
        Override the design's Monte Carlo settings.
    chunk_trials
        Trials per chunk (rounded to whole sampling blocks); the result does not depend on it.
    only
        Run only these of ("static", "dynamic") (the sizing search uses it); a check left out is
        reported as not run.
    progress
        Called with (trials done, trials in all) after each chunk.
    workers, pool
        Run the chunks in ``workers`` processes, or in an open ``pool`` (see ``runner.worker_pool``);
        the result is identical to a run in this process.
    transient, transient_worst, transient_sample
        Also run the time-domain turn-off (``studies.transient_check``) on the worst
        ``transient_worst`` charge-balance trials and a random sample of ``transient_sample``
        trials (default: the trials the target needs, so that the check can pass).
    rare, rare_samples
        Estimate each series check's P(fail) by importance sampling (``studies.rare_events``)
        with ``rare_samples`` strings; the check then passes on that estimate's upper bound.
    drivers
        Rank the inputs by their influence on each series check's worst stress, and rerun the
        check with each of the top inputs tightened (``studies.drivers``).
    """
    trials = design.monte_carlo.trials if trials is None else trials
    seed = design.monte_carlo.seed if seed is None else seed
    if trials < 1:
        raise DesignError(f"--trials must be at least 1, got {trials}", key="monte_carlo.trials")
    if design.grading.resistor is None and any(
            design.parts[name].leakage_voltage_exponent == 0.0 for name in design.parts_used()):
        raise DesignError("missing; with voltage-independent leakage (leakage_voltage_exponent = 0) "
                          "the string voltage is undetermined without grading resistors (or run "
                          "`stringcheck size` to choose them)", source=design.source,
                          key="grading.resistor")
    if only is None or "dynamic" in only:
        design = _with_recovery_charge(design)
    layout = design.string
    shape = (layout.parallel, layout.series)
    grid = layout.part_grid()
    parts = [design.parts[name] for name in grid.ravel()]

    def per_position(attribute: Callable[[Part], float]) -> np.ndarray:
        return np.array([attribute(part) for part in parts], dtype=float).reshape(shape)

    limits = layout.derating * per_position(lambda p: p.v_rrm)
    temperature = design.duty.ambient + layout.temperature_rise_grid()
    reference_voltage = per_position(lambda p: p.i_r.at_voltage)
    reference_temperature = per_position(lambda p: p.i_r.at_temperature)
    doubling = per_position(lambda p: p.leakage_doubling)
    exponent = per_position(lambda p: p.leakage_voltage_exponent)
    junction_capacitance = per_position(lambda p: p.c_j)

    dynamic_reason = "not requested" if only is not None and "dynamic" not in only else \
        _dynamic_reason(design)
    run_dynamic = dynamic_reason == ""
    run_static = only is None or "static" in only
    parameters = ("i_r", "q_rr") if run_dynamic else ("i_r",)
    run_forward = only is None
    parallel_reason, thermal_reason = forward_reasons(design) if run_forward else \
        ("not requested", "not requested")
    forward = None
    if not (parallel_reason and thermal_reason):
        forward = forward_setup(design, parallel_reason, thermal_reason)
        parameters = tuple(dict.fromkeys(parameters + forward_parameters(design)))
    forward_sums = ForwardAccumulator()
    static = _Accumulator(shape, limits) if run_static else None
    dynamic = _Accumulator(shape, limits) if run_dynamic else None
    rescaling, rescaling_note = recovery_rescaling(design) if run_dynamic else (None, "")
    context = _ChunkContext(design=design, seed=seed, parameters=parameters, run_static=run_static,
                            run_dynamic=run_dynamic, limits=limits, temperature=temperature,
                            reference_voltage=reference_voltage,
                            reference_temperature=reference_temperature, doubling=doubling,
                            exponent=exponent, junction_capacitance=junction_capacitance,
                            forward=forward, rescaling=rescaling,
                            driver_trials=DRIVER_TRIALS if drivers else 0)
    features: dict[str, list] = {}
    ratios: dict[str, list] = {"static": [], "dynamic": []}
    with worker_pool(workers) if pool is None else nullcontext(pool) as active:
        if chunk_trials is None:
            chunk_trials = chunk_size(trials, _CHUNK_ELEMENTS // (layout.series * layout.parallel),
                                      active)
        bounds = chunk_bounds(trials, chunk_trials)
        for outcome in map_chunks(_run_chunk, context, bounds, pool=active, progress=progress):
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
                        ratios[name].append(accumulator.worst_ratios[0][:count])

    confidence = design.monte_carlo.confidence
    target = design.sizing.target_p_fail
    checks = {"static": _finish("static", static, grid, confidence, trials, target)
              if static is not None
              else _not_run("static", "not requested")}
    if dynamic is not None:
        checks["dynamic"] = _finish("dynamic", dynamic, grid, confidence, trials, target)
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
                confidence=confidence, target=target)
    if run_forward:
        checks["parallel"] = finish_parallel(design, forward, parallel_reason, forward_sums,
                                             confidence, target, trials)
        checks["thermal"] = finish_thermal(design, forward, thermal_reason, forward_sums,
                                           confidence, target, trials)

    impossible = _impossibility(design, limits)
    grading = grading_summary(design, checks, temperature, reference_voltage, reference_temperature,
                               doubling, exponent, junction_capacitance)
    passed = all(check.passed for check in checks.values() if check.ran)
    if rare:
        for name in ("static", "dynamic"):
            if checks[name].ran:
                checks[name] = _with_rare(checks[name], context, seed, confidence, target,
                                          rare_samples)
    ranking: tuple[Driver, ...] = ()
    if drivers and features:
        ranking = _drivers(design, checks, features, ratios, trials=trials, seed=seed,
                           pool=pool if pool is not None else None)
    # A check the user asked for that could not run never lets the design pass.
    requested_missing = transient and not checks["transient"].ran
    verdict = "pass" if passed and impossible is None and not grading.rating_problems \
        and not requested_missing else "fail"
    return CheckResult(design=design, trials=trials, seed=seed, target_p_fail=target,
                       trials_needed=trials_for_upper_bound(target, confidence=confidence),
                       checks=checks, grading=grading,
                       verdict=verdict, impossible=impossible,
                       assumptions=design.assumptions + _model_assumptions(design, rescaling_note),
                       no_scatter=_no_scatter(design, parameters), drivers=ranking)


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
    doubling: np.ndarray
    exponent: np.ndarray
    junction_capacitance: np.ndarray
    forward: ForwardSetup | None
    rescaling: RecoveryRescaling | None
    driver_trials: int


@dataclass(frozen=True)
class _ChunkOutcome:
    static: _Accumulator | None
    dynamic: _Accumulator | None
    forward: ForwardChunk | None
    features: dict[str, np.ndarray] | None


def _run_chunk(context: _ChunkContext, first: int, count: int) -> _ChunkOutcome:
    """Draw and solve one chunk of trials; its sums, to be merged in trial order."""
    design = context.design
    shape = context.limits.shape
    drawn = draw_strings(design, context.parameters, first, count, seed=context.seed)
    static = _Accumulator(shape, context.limits) if context.run_static else None
    dynamic = _Accumulator(shape, context.limits) if context.run_dynamic else None
    # The solvers work through the chunk in slices of whole sampling blocks, small enough for
    # their temporaries to stay in cache; the accumulators take them in trial order.
    for start in range(0, count, _SOLVE_TRIALS):
        part = drawn.trial_slice(start, _SOLVE_TRIALS)
        if static is not None:
            _static_chunk(design, part, static, context.temperature, context.reference_voltage,
                          context.reference_temperature, context.doubling, context.exponent)
        if dynamic is not None:
            _dynamic_chunk(design, part, dynamic, context.junction_capacitance, context.rescaling)
    forward = None
    if context.forward is not None:
        forward = run_forward_chunk(design, context.forward, drawn)
    features = None
    if first < context.driver_trials:
        features = chunk_features(drawn, design, min(count, context.driver_trials - first))
    return _ChunkOutcome(static=static, dynamic=dynamic, forward=forward, features=features)


def _static_chunk(design: Design, drawn: DrawnStrings, accumulator: _Accumulator,
                  temperature: np.ndarray, reference_voltage: np.ndarray,
                  reference_temperature: np.ndarray, doubling: np.ndarray,
                  exponent: np.ndarray) -> None:
    leakage = leakage_current(drawn.parameters["i_r"], reference_voltage, temperature,
                              reference_voltage=reference_voltage,
                              reference_temperature=reference_temperature,
                              doubling_temperature=doubling, voltage_exponent=exponent)
    conductance = _grading_conductance(design, drawn, temperature)
    solution = solve_static_sharing(design.duty.reverse_voltage, conductance, leakage,
                                    reference_voltage=reference_voltage, voltage_exponent=exponent)
    converged = np.asarray(solution.converged).reshape(solution.voltages.shape[0], -1).all(axis=1)
    accumulator.add(solution.voltages, converged, drawn.first_trial)


def _grading_conductance(design: Design, drawn: DrawnStrings, temperature: np.ndarray) -> np.ndarray:
    if drawn.resistance is None:
        return np.zeros_like(drawn.parameters["i_r"])
    tcr = design.grading.resistor_tcr
    resistance = drawn.resistance * (1.0 + tcr * (temperature - RESISTOR_TCR_REFERENCE))
    return 1.0 / resistance


def _dynamic_chunk(design: Design, drawn: DrawnStrings, accumulator: _Accumulator,
                   junction_capacitance: np.ndarray, rescaling: RecoveryRescaling | None) -> None:
    capacitance = junction_capacitance if drawn.capacitance is None else \
        drawn.capacitance + junction_capacitance
    charge = drawn.parameters["q_rr"]
    if rescaling is not None:
        charge = rescale_charges(charge, design.string.part_grid(), rescaling)
    capacitance = np.broadcast_to(capacitance, charge.shape)
    solution = solve_dynamic_sharing(design.duty.reverse_voltage, charge, capacitance)
    solved = np.ones(solution.voltages.shape[0], dtype=bool)
    accumulator.add(solution.voltages, solved, drawn.first_trial)


def _finish(name: str, accumulator: _Accumulator, grid: np.ndarray, confidence: float,
            trials: int, target: float) -> SeriesCheck:
    """Summarise one check. It passes when the upper confidence bound of P(fail) is within
    ``target`` ([sizing] target_p_fail): a run too short to show that cannot pass."""
    ratios = np.concatenate(accumulator.worst_ratios)
    failures = int(np.count_nonzero(~(ratios <= 1.0)))
    estimate = failure_estimate(failures, trials, confidence=confidence)
    count = max(accumulator.count, 1)
    total = np.zeros(grid.shape)
    total_squares = np.zeros(grid.shape)
    for block_total, block_squares in zip(accumulator.block_totals, accumulator.block_squares):
        total += block_total
        total_squares += block_squares
    mean_shift = total / count
    variance = np.maximum(total_squares / count - mean_shift ** 2, 0.0)
    if accumulator.count > 1:
        variance *= accumulator.count / (accumulator.count - 1)
    mean = mean_shift + accumulator.limits
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
    worst_string = accumulator.worst_string if accumulator.worst_string is not None else \
        np.full(grid.shape, np.nan)
    return SeriesCheck(
        name=name, ran=True, reason="", passed=estimate.ci_high <= target,
        worst_voltage=float(np.max(accumulator.maximum)) if accumulator.count else float("nan"),
        worst_ratio=float(np.max(ratios)),
        p50_ratio=float(np.percentile(finite, 50)) if finite.size else float("nan"),
        p99_ratio=float(np.percentile(finite, 99)) if finite.size else float("nan"),
        estimate=estimate, unsolved=accumulator.unsolved, worst_trial=accumulator.worst_trial,
        worst_string=worst_string, positions=tuple(positions),
        histogram=tuple(histogram_counts(finite, bins=12)) if finite.size else ())


def _not_run(name: str, reason: str) -> SeriesCheck:
    return SeriesCheck(name=name, ran=False, reason=reason, passed=False, worst_voltage=float("nan"),
                       worst_ratio=float("nan"), p50_ratio=float("nan"), p99_ratio=float("nan"),
                       estimate=None, unsolved=0, worst_trial=-1, worst_string=np.empty((0, 0)),
                       positions=(), histogram=())


def _dynamic_reason(design: Design) -> str:
    """Why the dynamic check cannot run ("" when it can)."""
    if design.duty.waveform == "dc" and design.duty.di_dt is None:
        return ("dc duty with no turn-off: give duty.di_dt (or an ac waveform) to check the "
                "voltage sharing at turn-off")
    if design.grading.capacitor is None:
        bare = [name for name in design.parts_used() if design.parts[name].c_j <= 0]
        if bare:
            raise DesignError(
                "the dynamic check needs capacitance at every stage: give grading.capacitor, or "
                f"the junction capacitance c_j of part(s) {', '.join(bare)}",
                source=design.source, key="grading.capacitor")
    return ""


def _with_recovery_charge(design: Design) -> Design:
    """Fill in Q_rr from I_RM and t_rr (Q_rr = 1/2 I_RM t_rr) where a part gives those but not Q_rr."""
    if _dynamic_reason(design):
        return design
    parts = dict(design.parts)
    notes = []
    for name in design.parts_used():
        part = parts[name]
        if part.q_rr is not None:
            continue
        if part.i_rm is None or part.t_rr is None:
            raise DesignError("missing; the dynamic check needs the recovery charge, or both i_rm "
                              "and t_rr to derive it", source=design.source,
                              key=f"parts.{name}.q_rr")
        typ = float(recovery_charge(part.i_rm.typ, part.t_rr.typ))
        high = None
        if part.i_rm.high is not None or part.t_rr.high is not None:
            high = float(recovery_charge(part.i_rm.high or part.i_rm.typ,
                                         part.t_rr.high or part.t_rr.typ))
        parts[name] = replace(part, q_rr=Spread(typ=typ, high=high, at_di_dt=part.i_rm.at_di_dt,
                                                typ_assumed=True))
        notes.append(f"parts.{name}.q_rr derived as 1/2 I_RM t_rr from i_rm and t_rr "
                     "(max from the product of maxima: conservative)")
    if not notes:
        return design
    return replace(design, parts=parts, assumptions=design.assumptions + tuple(notes))


def _impossibility(design: Design, limits: np.ndarray) -> str | None:
    """Why no built string can pass whatever is drawn (with the arithmetic), or None."""
    layout = design.string
    reasons = []
    capacity = limits.sum(axis=1)
    weakest = float(capacity.min())
    if design.duty.reverse_voltage > weakest:
        reasons.append(
            f"the string cannot hold {design.duty.reverse_voltage:g} V even with perfect "
            f"sharing: the sum of derating x V_RRM over the {layout.series} devices of a branch "
            f"is {weakest:g} V (derating {layout.derating:g})")
    grid = layout.part_grid()
    ratings = [[design.parts[name].i_fav for name in row] for row in grid]
    current = design.duty.forward_current
    if current is not None and all(r is not None for row in ratings for r in row):
        # A branch carries no more than its weakest device's I_F(AV); perfect sharing at best
        # brings every branch to that limit at once.
        group = sum(min(row) for row in ratings)
        if current > group:
            reasons.append(
                f"the group cannot carry {current:g} A average even with perfect sharing: the "
                f"{layout.parallel} branch(es) together are rated {group:g} A (the sum over the "
                "branches of the weakest device's i_fav)")
    return "; ".join(reasons) if reasons else None


def evaluate_strings(context: _ChunkContext, drawn: DrawnStrings, check: str) -> np.ndarray:
    """Each drawn string's worst stress ratio in ``check`` ("static" or "dynamic"); inf unsolved."""
    accumulator = _Accumulator(context.limits.shape, context.limits)
    if check == "static":
        _static_chunk(context.design, drawn, accumulator, context.temperature,
                      context.reference_voltage, context.reference_temperature, context.doubling,
                      context.exponent)
    else:
        _dynamic_chunk(context.design, drawn, accumulator, context.junction_capacitance,
                       context.rescaling)
    return accumulator.worst_ratios[0]


def _with_rare(check: SeriesCheck, context: _ChunkContext, seed: int, confidence: float,
               target: float, samples: int) -> SeriesCheck:
    parameters = ("i_r",) if check.name == "static" else ("q_rr",)
    estimate = rare_event_estimate(context.design, check.name, parameters,
                                   lambda drawn: evaluate_strings(context, drawn, check.name),
                                   seed=seed, confidence=confidence, samples=samples)
    return replace(check, rare=estimate, passed=estimate.ci_high <= target)


def _drivers(design: Design, checks, features: dict[str, list], ratios: dict[str, list], *,
             trials: int, seed: int, pool: WorkerPool | None) -> tuple[Driver, ...]:
    """Rank the inputs of each series check that ran, and rerun it with the top ones tightened."""
    joined = {name: np.concatenate(parts) for name, parts in features.items()}
    out = []
    for name in ("static", "dynamic"):
        if not checks[name].ran or not ratios[name]:
            continue
        ranked = rank_inputs(name, joined, np.concatenate(ratios[name]))
        for position, (driver, rho) in enumerate(ranked):
            p99 = upper = None
            if position < TOP_DRIVERS:
                rerun = run_check(tightened(design, driver), trials=trials, seed=seed,
                                  only=(name,), pool=pool).checks[name]
                p99, upper = rerun.p99_ratio, rerun.estimate.ci_high
            out.append(Driver(check=name, input=driver, label=label(driver), rank_correlation=rho,
                              tightened_p99_ratio=p99, tightened_p_fail_upper=upper))
    return tuple(out)


def _model_assumptions(design: Design, rescaling_note: str) -> tuple[str, ...]:
    notes = [
        "static: the peak reverse voltage is held as dc; at line frequency the grading capacitors "
        "also share the voltage, which this check does not credit",
        "junction temperature = ambient + the position's temperature_rise (no self-heating); "
        "leakage referred from its datasheet temperature with the part's doubling temperature",
        f"grading resistor TCR referred to {RESISTOR_TCR_REFERENCE:g} degC, resistor at its "
        "diode's temperature",
    ]
    if rescaling_note:
        notes.append(rescaling_note + "; junction temperature does not enter Q_rr; the whole "
                     "string voltage is assumed to appear after recovery (hard commutation)")
    return tuple(notes)


def _no_scatter(design: Design, parameters: tuple[str, ...]) -> tuple[str, ...]:
    notes = []
    for name in design.parts_used():
        for parameter in parameters:
            spread = design.parts[name].spread(parameter)
            if spread is not None and spread.fixed:
                notes.append(f"parts.{name}.{parameter}")
    grading = design.grading
    if grading.resistor is not None and grading.resistor_tolerance == 0:
        notes.append("grading.resistor (no tolerance given)")
    if grading.capacitor is not None and grading.capacitor_tolerance == 0:
        notes.append("grading.capacitor (no tolerance given)")
    return tuple(notes)
