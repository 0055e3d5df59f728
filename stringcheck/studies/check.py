"""The check workflow: draw built strings chunk by chunk, evaluate every check on them, finish.

Each check lives in its module of ``checks/`` with the same steps: set up from the design, evaluate
a chunk of drawn strings, merge the chunks in trial order, finish (the series checks in
``checks.series``, the parallel and thermal ones in ``checks.forward``; the transient check
simulates a selection of the trials afterwards, ``checks.transient``). This module only runs those
steps: it draws the chunks (in worker processes if asked), refuses a run the memory cannot hold,
adds the importance-sampling estimates (``--rare``) and the drivers, and forms the verdict. A check
passes when the upper bound of the exact confidence interval of P(fail) is within ``[sizing]
target_p_fail`` (default 1e-3): the same criterion the sizing search uses, and a run too short to
show it cannot pass. Results are plain dataclasses; nothing here formats text.
"""

from __future__ import annotations

import dataclasses
from contextlib import nullcontext
from dataclasses import dataclass, replace
from typing import Any, Callable, Mapping

import numpy as np

from stringcheck.design.model import Design
from stringcheck.errors import DesignError, Setting
from stringcheck.checks.findings import Finding, codes
from stringcheck.checks.outcome import CheckOutcome, Exported, figure, listed, positions_frame
from stringcheck.checks.outcome import drivers_to_list, record_or_null
from stringcheck.checks.plausibility import PlausibilityWarning, plausibility_warnings
from stringcheck.checks.series import (
    SERIES_CHECKS,
    DynamicCheck,
    PositionStatistics,
    SeriesAccumulator,
    SeriesCheck,
    SeriesChunk,
    SeriesSetup,
    finish_series,
    not_run_series,
    run_series_chunk,
    series_ratios,
    series_setup,
    static_offsets,
)
from stringcheck.montecarlo.sampling import DrawnStrings, chunk_bounds, draw_strings
from stringcheck.montecarlo.estimates import trials_for_upper_bound
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
from stringcheck.montecarlo.mixed_stock import position_values
from stringcheck.checks.recovery_conditions import recovery_rescaling
from stringcheck.montecarlo.executor import (
    CHUNK_ELEMENTS,
    WorkerPool,
    available_memory,
    chunk_size,
    map_chunks,
)
from stringcheck.montecarlo.executor import worker_pool

__all__ = ["CheckResult", "DynamicCheck", "PositionStatistics", "SeriesCheck", "run_check"]

# Version of the JSON result's layout (docs/json.md).
SCHEMA_VERSION = 1
# The checks whose inputs the drivers rank; --rare estimates these and the transient check by
# importance sampling.
RARE_CHECKS = SERIES_CHECKS + ("parallel", "thermal")
# The transient check's importance sampler: each string costs milliseconds of the turn-off engine.
TRANSIENT_RARE_SAMPLES = 2000
# Peak memory of the per-trial figures while the checks are summarised, in multiples of what the
# chunks keep. A series check joins its ratios into one array (its pieces then freed) and copies
# the finite ones for the percentiles (sorted in place): 2 for the static and dynamic checks by
# that count. The forward checks join several figures and derive (trials, parallel) arrays from
# them beside their chunks, hence the margin.
_SUMMARY_FACTOR = 3

ProgressCallback = Callable[[int, int], None]


def _checks_to_dict(checks: Mapping[str, CheckOutcome]) -> dict[str, Any]:
    return {name: check.to_dict() for name, check in checks.items() if check.ran}


def _skipped_to_dict(checks: Mapping[str, CheckOutcome]) -> dict[str, str]:
    return {name: check.reason for name, check in checks.items() if not check.ran}


def _design_to_dict(design: Design) -> dict[str, Any]:
    return {"title": design.title, "file": design.source}


def _warnings_to_list(warnings) -> list[dict[str, str]]:
    """The plausibility warnings as JSON objects {key, code} (``report.export`` adds each one's
    ``message``, in words)."""
    return [{"key": warning.key, "code": warning.finding.code} for warning in warnings]


@dataclass(frozen=True, eq=False, kw_only=True, repr=False)
class CheckResult(Exported):
    """Everything ``stringcheck check`` found.

    ``to_dict()`` is the JSON result without what the report writes in words (the sections
    ``lots`` and ``cautions``, and the sentences of the findings: ``impossible``, the network's
    ``rating_problems`` and ``advisories`` and each warning's ``message``, whose codes it gives;
    ``report.export.result_to_dict`` adds them);
    ``to_frame()`` the per-position figures of every check that ran, one row per check and
    position.
    """

    json_order = ("schema", "design", "trials", "seed", "confidence", "target_p_fail",
                  "trials_needed", "verdict", "impossible_codes", "checks", "skipped", "network",
                  "drivers", "assumption_codes", "no_scatter", "warnings")

    design: Design = figure(encode=_design_to_dict)
    trials: int = figure()
    seed: int = figure()
    target_p_fail: float = figure()
    trials_needed: int = figure()
    checks: Mapping[str, CheckOutcome] = figure(encode=_checks_to_dict)
    grading: GradingSummary = figure("network", encode=record_or_null)
    verdict: str = figure()
    # Why no built string can pass (findings; empty when it can): their codes here, the text
    # (``impossible``) written beside them by report.export.
    impossible: tuple[Finding, ...] = figure("impossible_codes", encode=codes)
    assumptions: tuple[Finding, ...] = figure("assumption_codes", encode=codes)
    no_scatter: tuple[str, ...] = figure(encode=listed)
    drivers: tuple[Driver, ...] = figure(encode=drivers_to_list, default=())
    # Valid values that are probably slips (``plausibility``): shown by the report, never fatal.
    warnings: tuple[PlausibilityWarning, ...] = figure(encode=_warnings_to_list, default=())

    def to_dict(self) -> dict[str, Any]:
        data = super().to_dict()
        # Read from the design and the checks, not fields of their own.
        extra = {"schema": SCHEMA_VERSION, "confidence": self.design.monte_carlo.confidence,
                 "skipped": _skipped_to_dict(self.checks)}
        merged = {**data, **extra}
        ordered = {key: merged.pop(key) for key in self.json_order if key in merged}
        ordered.update(merged)
        return ordered

    def to_frame(self):
        """The per-position figures of every check that ran, one row per check and position (the
        parallel check's per branch), a ``check`` column first."""
        import pandas as pd

        frames = [positions_frame(check.per_position(), check=name)
                  for name, check in self.checks.items() if check.ran]
        return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()

    def __repr__(self) -> str:
        shown = ", ".join(f"{name} {'pass' if check.passed else 'FAIL'}" if check.ran else
                          f"{name} not run" for name, check in self.checks.items())
        return (f"CheckResult({self.design.title!r}, {self.verdict}, {self.trials:,} trials, "
                f"seed {self.seed}: {shown})")


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
    _refuse(design, trials, rare)
    if only is None or "dynamic" in only or static_offsets(design):
        design = with_recovery_charge(design)
    plan = _plan(design, seed, only, drivers)
    confidence = design.monte_carlo.confidence
    target = design.sizing.target_p_fail
    with worker_pool(workers) if pool is None else nullcontext(pool) as active:
        run = _run_chunks(plan, trials, chunk_trials, progress, active)
    grid = design.string.part_labels()
    series = plan.context.series
    turn_off = None if series.rescaling is None else series.rescaling.turn_off
    checks: dict[str, CheckOutcome] = {}
    for name in SERIES_CHECKS:
        sums = run.series.sums.get(name)
        checks[name] = not_run_series(name, plan.reasons[name]) if sums is None else \
            finish_series(name, sums, grid, confidence, trials, target, turn_off=turn_off,
                          static=run.series.static_figures() if name == "static" else None)
    if transient:
        checks["transient"] = _transient(design, run.series.sums.get("dynamic"), plan, trials,
                                         seed, transient_worst, transient_sample, drivers)
    if plan.run_forward:
        forward = plan.context.forward
        checks["parallel"] = finish_parallel(design, forward, plan.reasons["parallel"],
                                             run.forward, confidence, target, trials)
        checks["thermal"] = finish_thermal(design, forward, plan.reasons["thermal"],
                                           run.forward, confidence, target, trials)
    grading = grading_summary(design, checks, _hottest_junctions(series.temperature, checks),
                              position_values(design, lambda p: p.c_j, pick=np.maximum))
    if rare is not False:
        for name in RARE_CHECKS + ("transient",):
            check = checks.get(name)
            wanted = check is not None and check.ran and (
                name in rare if isinstance(rare, tuple) else rare or needs_rare(check, target))
            if wanted:
                checks[name] = _with_rare(check, plan.context, seed, confidence, target,
                                          rare_samples, automatic=rare is None)
    ranking: tuple[Driver, ...] = ()
    if drivers and run.features:
        ranking = _drivers(design, checks, run.features, run.ratios, trials=trials, seed=seed,
                           pool=pool)
    if drivers and transient and checks["transient"].ran:
        ranking += _transient_drivers(checks["transient"])
    impossible = impossibility(design)
    passed = all(check.passed for check in checks.values() if check.ran)
    # A check the user asked for that could not run never lets the design pass.
    requested_missing = transient and not checks["transient"].ran
    verdict = "pass" if passed and not impossible and not grading.rating_problems \
        and not requested_missing else "fail"
    return CheckResult(design=design, trials=trials, seed=seed, target_p_fail=target,
                       trials_needed=trials_for_upper_bound(target, confidence=confidence),
                       checks=checks, grading=grading,
                       verdict=verdict, impossible=impossible,
                       assumptions=design.assumptions + model_assumptions(
                           design, plan.note, ac_blocking=series.ac_times is not None,
                           self_heating=series.self_heating),
                       no_scatter=no_scatter(design, plan.context.parameters), drivers=ranking,
                       warnings=plausibility_warnings(design,
                                                      grading_loss=grading.total_grading_loss))


def _hottest_junctions(position: np.ndarray, checks: Mapping[str, CheckOutcome]) -> np.ndarray:
    """Each position's hottest junction temperature [degC] (parallel, series) for the grading
    network's leakage figure: the thermal check's highest equilibrium T_j where it ran (and found
    one), else ambient + the position's temperature rise."""
    thermal = checks.get("thermal")
    hottest = np.array(position, dtype=float)
    if thermal is None or not thermal.ran:
        return hottest
    for device in thermal.per_position():
        value = device.max_temperature
        if np.isfinite(value):
            row, column = device.branch - 1, device.index - 1
            hottest[row, column] = max(hottest[row, column], value)
    return hottest


def _refuse(design: Design, trials: int, rare) -> None:
    """Refuse, before drawing, a run that cannot give an answer."""
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


@dataclass(frozen=True)
class _ChunkContext:
    """What every chunk needs: picklable, so that chunks can run in worker processes."""

    design: Design
    seed: int
    parameters: tuple[str, ...]
    series: SeriesSetup
    forward: ForwardSetup | None
    driver_trials: int


@dataclass(frozen=True)
class _Plan:
    """Which checks run (the reason of each that does not), and what their chunks need."""

    context: _ChunkContext
    reasons: dict[str, str]
    run_forward: bool
    note: Finding | None  # how the recovery charge was carried to the application (an assumption)


def _plan(design: Design, seed: int, only: tuple[str, ...] | None, drivers: bool) -> _Plan:
    """Set every check up from the design: which run, their constants, the parameters drawn."""
    reasons = {"static": "" if only is None or "static" in only else "not requested",
               "dynamic": "not requested" if only is not None and "dynamic" not in only else
               dynamic_check_reason(design)}
    run_dynamic = reasons["dynamic"] == ""
    # The static check's ac solution starts from the recovery's offsets whether or not the dynamic
    # check runs alongside (the sizing search runs it alone): the same figure either way.
    offsets = reasons["static"] == "" and static_offsets(design)
    parameters = ("i_r", "q_rr") if run_dynamic or offsets else ("i_r",)
    run_forward = only is None
    reasons["parallel"], reasons["thermal"] = forward_reasons(design) if run_forward else \
        ("not requested", "not requested")
    # The recovery charge carried to the application's turn-off: one value per drawn device for
    # the dynamic check and the thermal check's recovery loss (a turn-off exactly when the
    # dynamic check can run: an ac waveform or a di_dt).
    rescaling, note = recovery_rescaling(design) if run_dynamic or offsets else (None, None)
    forward = None
    if not (reasons["parallel"] and reasons["thermal"]):
        forward = forward_setup(design, reasons["parallel"], reasons["thermal"], rescaling)
        parameters = tuple(dict.fromkeys(parameters + forward_parameters(design)))
    # Each device's leakage at its own junction temperature: the thermal check's equilibrium
    # where it runs (one pass: that equilibrium takes the leakage loss at the nominal share).
    series = series_setup(design, run_static=reasons["static"] == "", run_dynamic=run_dynamic,
                          rescaling=rescaling, ac_recovery=offsets,
                          self_heating=forward is not None and forward.run_thermal)
    context = _ChunkContext(design=design, seed=seed, parameters=parameters, series=series,
                            forward=forward, driver_trials=DRIVER_TRIALS if drivers else 0)
    return _Plan(context=context, reasons=reasons, run_forward=run_forward, note=note)


@dataclass(frozen=True)
class _ChunkOutcome:
    series: SeriesChunk
    forward: ForwardChunk | None
    features: dict[str, np.ndarray] | None


@dataclass
class _Run:
    """The chunks merged: each check's accumulator, and the drivers' features and ratios."""

    series: SeriesAccumulator
    forward: ForwardAccumulator
    features: dict[str, list]
    ratios: dict[str, list]


def _run_chunks(plan: _Plan, trials: int, chunk_trials: int | None,
                progress: ProgressCallback | None, pool: WorkerPool | None) -> _Run:
    """Evaluate every chunk (in ``pool``'s workers if any) and merge them in trial order."""
    context = plan.context
    design = context.design
    layout = design.string
    run = _Run(series=SeriesAccumulator(context.series), forward=ForwardAccumulator(),
               features={}, ratios={name: [] for name in RARE_CHECKS})
    if chunk_trials is None:
        chunk_trials = chunk_size(trials, CHUNK_ELEMENTS // (layout.series * layout.parallel), pool)
    bounds = chunk_bounds(trials, chunk_trials)
    for number, outcome in enumerate(map_chunks(_run_chunk, context, bounds, pool=pool,
                                                progress=progress)):
        run.series.merge(outcome.series)
        if outcome.forward is not None:
            run.forward.merge(outcome.forward)
        if outcome.features is not None:
            _keep_driver_figures(run, outcome)
        if number == 0 and len(bounds) > 1:
            # What the first chunk keeps, as merged, tells what the whole run will keep.
            _check_memory(design, trials, _per_trial_bytes(outcome, bounds[0][1]))
    return run


def _keep_driver_figures(run: _Run, outcome: _ChunkOutcome) -> None:
    """The drivers' inputs and each check's worst ratio of the chunk's first trials."""
    for name, values in outcome.features.items():
        run.features.setdefault(name, []).append(values)
    count = len(next(iter(outcome.features.values())))
    for name, accumulator in outcome.series.sums().items():
        run.ratios[name].append(np.concatenate(accumulator.worst_ratios)[:count])
    if outcome.forward is not None:
        run.ratios["parallel"].append(outcome.forward.current_ratio[:count])
        if outcome.forward.tj_ratio is not None:
            run.ratios["thermal"].append(outcome.forward.tj_ratio[:count])


def _run_chunk(context: _ChunkContext, first: int, count: int) -> _ChunkOutcome:
    """Draw one chunk of trials and evaluate every check on it; its sums, to be merged in trial
    order."""
    design = context.design
    drawn = draw_strings(design, context.parameters, first, count, seed=context.seed)
    forward = None
    temperature = None
    if context.forward is not None:
        forward = run_forward_chunk(design, _forward_devices(context, drawn), drawn)
        # The series checks take each device's equilibrium T_j; the merged chunks do not keep it.
        temperature, forward.junction_temperature = forward.junction_temperature, None
    series = run_series_chunk(design, context.series, drawn, junction_temperature=temperature)
    features = None
    if first < context.driver_trials:
        features = chunk_features(drawn, design, min(count, context.driver_trials - first))
    return _ChunkOutcome(series=series, forward=forward, features=features)


def _forward_devices(context: _ChunkContext, drawn: DrawnStrings) -> ForwardSetup:
    """The forward checks' constants, each drawn device's own under a mix."""
    if drawn.part_index is None:
        return context.forward
    return forward_for_devices(context.design, context.forward, drawn)


def _transient(design: Design, dynamic, plan: _Plan, trials: int, seed: int, worst: int,
               sample: int | None, drivers: bool) -> CheckOutcome:
    """The transient check on the dynamic check's worst trials and a random sample."""
    if dynamic is None:
        return not_run_transient(f"needs the dynamic check, which did not run: "
                                 f"{plan.reasons['dynamic']}")
    confidence = design.monte_carlo.confidence
    target = design.sizing.target_p_fail
    needed = trials_for_upper_bound(target, confidence=confidence)
    return run_transient(design, dynamic_ratios=np.concatenate(dynamic.worst_ratios),
                         trials=trials, seed=seed, worst=worst,
                         sample=needed if sample is None else sample, confidence=confidence,
                         target=target, drivers=drivers)


def _transient_drivers(check) -> tuple[Driver, ...]:
    """The transient check's drivers, with their share of its failure point."""
    rare_estimate = check.rare
    shares = {item.input: item.share for item in rare_estimate.importance} \
        if rare_estimate is not None and rare_estimate.found_failure_point else {}
    return tuple(replace(driver, failure_point_share=shares.get(driver.input))
                 for driver in check.drivers)


def _per_trial_bytes(outcome: _ChunkOutcome, count: int) -> float:
    """Bytes per trial of the figures a chunk's outcome keeps until the end of the run (the worst
    ratio of each trial in each check, the forward checks' per-trial figures)."""
    total = 0
    for sums in outcome.series.sums().values():
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
        series = context.series
        if name == "static" and series.ac_recovery:
            parameters += ("q_rr",)  # the ac solution starts from the recovery's offsets
        if name == "static" and series.self_heating:
            # The junction temperatures come from each drawn string's own equilibrium.
            parameters = tuple(dict.fromkeys(parameters + forward_parameters(context.design)))

        def evaluate(drawn: DrawnStrings) -> np.ndarray:
            temperature = None
            if name == "static" and series.self_heating:
                temperature = run_forward_chunk(context.design, _forward_devices(context, drawn),
                                                drawn, summaries=False).junction_temperature
            return series_ratios(context.design, series, drawn, name,
                                 junction_temperature=temperature)
    else:
        # The forward checks depend on V_T0 and r_T and, through the losses and the junction
        # temperatures, on the leakage and recovery charge.
        parameters = forward_parameters(context.design)

        def evaluate(drawn: DrawnStrings) -> np.ndarray:
            return forward_ratios(context.design, _forward_devices(context, drawn), drawn, name)
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
    return replace(check, rare=estimate, passed=check.passes(bound, target))


def _drivers(design: Design, checks, features: dict[str, list], ratios: dict[str, list], *,
             trials: int, seed: int, pool: WorkerPool | None) -> tuple[Driver, ...]:
    """Rank the inputs of each check that ran, and rerun it with the top ones tightened and with a
    cooler ambient."""
    joined = {name: np.concatenate(parts) for name, parts in features.items()}
    out = []

    def rerun(changed: Design, name: str) -> tuple[float, float]:
        only = (name,) if name in SERIES_CHECKS else None
        again = run_check(changed, trials=trials, seed=seed, only=only, pool=pool).checks[name]
        return again.p99_ratio, again.estimate.ci_high

    for name in RARE_CHECKS:
        if name not in checks or not checks[name].ran or not ratios[name]:
            continue
        shares = {}
        rare = checks[name].rare
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
