"""The check workflow: draw built strings chunk by chunk, evaluate every check on them, finish.

Each check lives in its module of ``checks/`` with the same steps (``checks.steps.CheckSteps``):
set up from the design, evaluate a chunk of drawn strings, merge the chunks in trial order, finish
(the series checks in ``checks.series``, the parallel and thermal ones in ``checks.forward``; the
transient check simulates a selection of the trials afterwards, ``checks.transient``). The
registry :data:`CHECK_STEPS` lists the chunked ones, and :func:`run_check` runs their steps in a
loop: it draws the chunks (in worker processes if asked), refuses a run the memory cannot hold,
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
from stringcheck.checks.findings import Finding, Value, codes
from stringcheck.checks.outcome import CheckOutcome, Exported, figure, listed, positions_frame
from stringcheck.checks.outcome import drivers_to_list, record_or_null
from stringcheck.checks.plausibility import PlausibilityWarning, plausibility_warnings
from stringcheck.checks.series import (
    SERIES_CHECKS,
    SERIES_STEPS,
    DynamicCheck,
    PositionStatistics,
    SeriesCheck,
    recovery_offsets,
    series_ratios,
    static_offsets,
)
from stringcheck.checks.steps import CheckSteps, RunFigures
from stringcheck.montecarlo.sampling import DrawnStrings, chunk_bounds, draw_strings
from stringcheck.montecarlo.estimates import trials_for_upper_bound
from stringcheck.checks.forward import FORWARD_STEPS, forward_chunk, forward_parameters
from stringcheck.montecarlo.accumulators import top_count
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
# The registry of the check modules evaluated chunk by chunk, in the order the result lists their
# checks (``checks.steps``): a check is added by adding its module's steps here. The transient
# check is no chunk step: it simulates a selection of the trials after the chunks, from the
# dynamic check's worst ones (listed after it).
CHECK_STEPS: tuple[CheckSteps, ...] = (SERIES_STEPS, FORWARD_STEPS)
# The transient check's importance sampler: each string costs milliseconds of the turn-off engine.
TRANSIENT_RARE_SAMPLES = 2000
# Peak memory of the per-trial figures while the checks are summarised, in multiples of what the
# chunks keep. A series check joins its ratios into one array (its pieces then freed) and copies
# the finite ones for the percentiles (sorted in place): 2 for the static and dynamic checks by
# that count. The forward checks join several figures and derive (trials, parallel) arrays from
# them beside their chunks, hence the margin.
_SUMMARY_FACTOR = 3

ProgressCallback = Callable[[int, int], None]


def chunked_checks() -> tuple[str, ...]:
    """The checks of the registry, in its order: the drivers rank their inputs, and ``--rare``
    estimates them (and the transient check) by importance sampling."""
    return tuple(name for steps in CHECK_STEPS for name in steps.names)


def _checks_to_dict(checks: Mapping[str, CheckOutcome]) -> dict[str, Any]:
    return {name: check.to_dict() for name, check in checks.items() if check.ran}


def _skipped_to_dict(checks: Mapping[str, CheckOutcome]) -> dict[str, str]:
    """Each check that did not run -> the code of its reason (``report.export`` writes the
    sentence in its place)."""
    return {name: check.reason.code for name, check in checks.items() if not check.ran}


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
    ``report.export.result_to_dict`` adds them), and with codes where that JSON has the
    sentences: ``skipped`` (name -> the code of the reason), ``no_scatter`` and each check's
    ``rare.estimator`` (lists of codes) and ``rare.note`` (a code or null);
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
    # Inputs drawn without scatter (findings): their codes here, the text written in their place
    # by report.export.
    no_scatter: tuple[Finding, ...] = figure(encode=codes)
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
              rare_samples: int = DEFAULT_SAMPLES,
              position_percentiles: bool = False) -> CheckResult:
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
    position_percentiles
        Also give each position of the static and dynamic checks its 99th-percentile voltage
        (``PositionStatistics.p99_voltage``, else None; the review's per-position change), from the largest
        1 % of each position's voltages kept over the run.
    """
    trials = design.monte_carlo.trials if trials is None else trials
    seed = design.monte_carlo.seed if seed is None else seed
    _refuse(design, trials, rare)
    if only is None or "dynamic" in only or static_offsets(design):
        design = with_recovery_charge(design)
    plan = _plan(design, seed, only, drivers)
    if position_percentiles:
        # The series checks' setup keeps each position's largest 1 % of voltages.
        setups = tuple(replace(setup, top_count=top_count(trials)) if steps is SERIES_STEPS
                       else setup for steps, setup in zip(plan.steps, plan.context.setups))
        plan = replace(plan, context=replace(plan.context, setups=setups))
    confidence = design.monte_carlo.confidence
    target = design.sizing.target_p_fail
    with worker_pool(workers) if pool is None else nullcontext(pool) as active:
        run = _run_chunks(plan, trials, chunk_trials, progress, active)
    figures = RunFigures(trials=trials, confidence=confidence, target=target)
    checks: dict[str, CheckOutcome] = {}
    for steps, setup, accumulator in zip(plan.steps, plan.context.setups, run.accumulators):
        checks.update(steps.finish(design, setup, plan.reasons, accumulator, figures))
        if "dynamic" in steps.names and transient:
            # The transient check simulates the dynamic check's worst trials and a sample.
            checks["transient"] = _transient(design, steps.trial_ratios(accumulator, "dynamic"),
                                             plan, trials, seed, transient_worst,
                                             transient_sample, drivers)
    if transient and "transient" not in checks:
        checks["transient"] = not_run_transient(_needs_dynamic(plan))
    temperature = design.duty.ambient + design.string.temperature_rise_grid()
    grading = grading_summary(design, checks, _hottest_junctions(temperature, checks),
                              position_values(design, lambda p: p.c_j, pick=np.maximum))
    if rare is not False:
        for name in chunked_checks() + ("transient",):
            check = checks.get(name)
            wanted = check is not None and check.ran and (
                name in rare if isinstance(rare, tuple) else rare or needs_rare(check, target))
            if wanted:
                checks[name] = _with_rare(check, plan, seed, confidence, target,
                                          rare_samples, automatic=rare is None)
    ranking: tuple[Driver, ...] = ()
    if drivers and run.features:
        ranking = _drivers(design, checks, run.features, run.ratios, trials=trials, seed=seed,
                           pool=pool)
    if drivers and transient and checks["transient"].ran:
        ranking += _transient_drivers(checks["transient"])
    impossible = impossibility(design)
    series = _series_setup(plan)
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
                           design, plan.note,
                           ac_blocking=series is not None and series.ac_times is not None,
                           self_heating=series is not None and series.self_heating),
                       no_scatter=no_scatter(design, plan.context.parameters), drivers=ranking,
                       warnings=plausibility_warnings(design,
                                                      grading_loss=grading.total_grading_loss))


def _series_setup(plan: _Plan):
    """The series checks' setup of ``plan`` (None where they take no part)."""
    return next((setup for steps, setup in zip(plan.steps, plan.context.setups)
                 if steps is SERIES_STEPS), None)


def _forward_setup(plan: _Plan):
    """The forward checks' setup of ``plan`` (None where they take no part or none runs)."""
    return next((setup for steps, setup in zip(plan.steps, plan.context.setups)
                 if steps is FORWARD_STEPS), None)


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
    """What every chunk needs: picklable, so that chunks can run in worker processes. ``steps``
    indexes :data:`CHECK_STEPS` (the check modules taking part), ``setups`` their setups (None
    for one whose checks all cannot run: it evaluates no chunk)."""

    design: Design
    seed: int
    parameters: tuple[str, ...]
    steps: tuple[int, ...]
    setups: tuple[Any, ...]
    driver_trials: int


@dataclass(frozen=True)
class _Plan:
    """Which checks run (the reason of each that does not), and what their chunks need."""

    context: _ChunkContext
    steps: tuple[CheckSteps, ...]
    reasons: dict[str, Finding | None]
    note: Finding | None  # how the recovery charge was carried to the application (an assumption)


NOT_REQUESTED = Finding("not_run.not_requested")


def _plan(design: Design, seed: int, only: tuple[str, ...] | None, drivers: bool) -> _Plan:
    """Set every check module up from the design: which of its checks run, their constants, the
    parameters drawn. A module none of whose checks is asked for (``only``) takes no part; a
    check of a taking part that is not asked for is not run ("not requested")."""
    taking: list[int] = []
    reasons: dict[str, Finding | None] = {}
    for number, steps in enumerate(CHECK_STEPS):
        asked = tuple(name for name in steps.names if only is None or name in only)
        if not asked:
            continue
        taking.append(number)
        found = steps.reasons(design, asked)
        reasons.update({name: found[name] if name in asked else NOT_REQUESTED
                        for name in steps.names})
    # The recovery charge carried to the application's turn-off: one value per drawn device for
    # the dynamic check and the thermal check's recovery loss (a turn-off exactly when the
    # dynamic check can run: an ac waveform or a di_dt).
    run_dynamic = "dynamic" in reasons and reasons["dynamic"] is None
    # The static check's ac solution may start from the recovery's offsets (checks.series), which
    # carry the recovery charge too.
    carried = run_dynamic or recovery_offsets(design, reasons)
    rescaling, note = recovery_rescaling(design) if carried else (None, None)
    parameters: tuple[str, ...] = ()
    setups = []
    for number in taking:
        steps = CHECK_STEPS[number]
        setups.append(steps.setup(design, reasons, rescaling, seed))
        parameters += steps.parameters(design, reasons)
    context = _ChunkContext(design=design, seed=seed, parameters=tuple(dict.fromkeys(parameters)),
                            steps=tuple(taking), setups=tuple(setups),
                            driver_trials=DRIVER_TRIALS if drivers else 0)
    return _Plan(context=context, steps=tuple(CHECK_STEPS[number] for number in taking),
                 reasons=reasons, note=note)


@dataclass(frozen=True)
class _ChunkOutcome:
    chunks: tuple[Any, ...]  # each taking check module's figures (None: it evaluates none)
    features: dict[str, np.ndarray] | None


@dataclass
class _Run:
    """The chunks merged: each check module's accumulator, and the drivers' features and
    ratios."""

    accumulators: tuple[Any, ...]
    features: dict[str, list]
    ratios: dict[str, list]


def _run_chunks(plan: _Plan, trials: int, chunk_trials: int | None,
                progress: ProgressCallback | None, pool: WorkerPool | None) -> _Run:
    """Evaluate every chunk (in ``pool``'s workers if any) and merge them in trial order."""
    context = plan.context
    design = context.design
    layout = design.string
    run = _Run(accumulators=tuple(steps.accumulator(setup)
                                  for steps, setup in zip(plan.steps, context.setups)),
               features={}, ratios={name: [] for name in chunked_checks()})
    if chunk_trials is None:
        chunk_trials = chunk_size(trials, CHUNK_ELEMENTS // (layout.series * layout.parallel), pool)
    bounds = chunk_bounds(trials, chunk_trials)
    for number, outcome in enumerate(map_chunks(_run_chunk, context, bounds, pool=pool,
                                                progress=progress)):
        for accumulator, chunk in zip(run.accumulators, outcome.chunks):
            if chunk is not None:
                accumulator.merge(chunk)
        if outcome.features is not None:
            _keep_driver_figures(run, plan, outcome)
        if number == 0 and len(bounds) > 1:
            # What the first chunk keeps, as merged, tells what the whole run will keep.
            _check_memory(design, trials, _per_trial_bytes(plan, outcome, bounds[0][1]))
    return run


def _keep_driver_figures(run: _Run, plan: _Plan, outcome: _ChunkOutcome) -> None:
    """The drivers' inputs and each check's worst ratio of the chunk's first trials."""
    for name, values in outcome.features.items():
        run.features.setdefault(name, []).append(values)
    count = len(next(iter(outcome.features.values())))
    for steps, chunk in zip(plan.steps, outcome.chunks):
        if chunk is not None:
            for name, ratios in steps.chunk_ratios(chunk, count).items():
                run.ratios[name].append(ratios)


def _run_chunk(context: _ChunkContext, first: int, count: int) -> _ChunkOutcome:
    """Draw one chunk of trials and evaluate every check on it; its figures, to be merged in
    trial order."""
    design = context.design
    drawn = draw_strings(design, context.parameters, first, count, seed=context.seed)
    chunks: list = [None] * len(context.setups)
    handed: dict = {}
    # A module that hands figures on (the forward checks' junction temperatures) goes first.
    order = sorted(range(len(context.setups)),
                   key=lambda k: CHECK_STEPS[context.steps[k]].handoff is None)
    for k in order:
        steps, setup = CHECK_STEPS[context.steps[k]], context.setups[k]
        if setup is None:
            continue
        chunk = steps.evaluate(design, setup, drawn, handed=handed) if steps.takes_handoff \
            else steps.evaluate(design, setup, drawn)
        if steps.handoff is not None:
            handed.update(steps.handoff(chunk))
        chunks[k] = chunk
    chunks = tuple(chunks)
    features = None
    if first < context.driver_trials:
        features = chunk_features(drawn, design, min(count, context.driver_trials - first))
    return _ChunkOutcome(chunks=chunks, features=features)


def _needs_dynamic(plan: _Plan) -> Finding:
    """Why the transient check cannot run when the dynamic check did not."""
    return Finding("not_run.needs_dynamic", causes=(plan.reasons.get("dynamic", NOT_REQUESTED),))


def _transient(design: Design, dynamic_ratios: np.ndarray | None, plan: _Plan, trials: int,
               seed: int, worst: int, sample: int | None, drivers: bool) -> CheckOutcome:
    """The transient check on the dynamic check's worst trials and a random sample."""
    if dynamic_ratios is None:
        return not_run_transient(_needs_dynamic(plan))
    confidence = design.monte_carlo.confidence
    target = design.sizing.target_p_fail
    needed = trials_for_upper_bound(target, confidence=confidence)
    return run_transient(design, dynamic_ratios=dynamic_ratios,
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


def _per_trial_bytes(plan: _Plan, outcome: _ChunkOutcome, count: int) -> float:
    """Bytes per trial of the figures a chunk's outcome keeps until the end of the run (the worst
    ratio of each trial in each check, the forward checks' per-trial figures)."""
    total = 0
    for steps, chunk in zip(plan.steps, outcome.chunks):
        if chunk is not None:
            total += steps.chunk_bytes(chunk, count)
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


def _with_rare(check, plan: _Plan, seed: int, confidence: float, target: float,
               samples: int, *, automatic: bool = False):
    """The check with its P(fail) estimated by importance sampling, passing on that estimate's
    upper bound, unless that bound lies below the plain run's exact lower bound (then the plain
    interval decides, and the estimate says so)."""
    name = check.name
    context = plan.context
    effort = SearchEffort()
    if name == "transient":
        parameters = ("q_rr",)
        evaluate = transient_evaluator(context.design)
        effort = COARSE_SEARCH
        samples = min(samples, TRANSIENT_RARE_SAMPLES)
    elif name == "static" and _series_setup(plan) is not None and (
            _series_setup(plan).ac_recovery or _series_setup(plan).self_heating):
        series = _series_setup(plan)
        forward = _forward_setup(plan)
        parameters = ("i_r",) + (("q_rr",) if series.ac_recovery else ())
        if series.self_heating and forward is not None:
            # The junction temperatures come from each drawn string's own equilibrium.
            parameters = tuple(dict.fromkeys(parameters + forward_parameters(context.design)))

        def evaluate(drawn: DrawnStrings) -> np.ndarray:
            temperature = None
            if series.self_heating and forward is not None:
                temperature = forward_chunk(context.design, forward, drawn).junction_temperature
            return series_ratios(context.design, series, drawn, "static",
                                 junction_temperature=temperature)
    else:
        steps, setup = next((steps, setup) for steps, setup in zip(plan.steps, context.setups)
                            if name in steps.names)
        parameters = steps.rare_parameters(context.design, name)

        def evaluate(drawn: DrawnStrings) -> np.ndarray:
            return steps.ratios(context.design, setup, drawn, name)
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
            Finding("estimator.refitted_lots", {"parts": Value(", ".join(refitted))}),))
        if not estimate.found_failure_point:
            estimate = replace(estimate, decides=False,
                               note=Finding("rare.fit_without_failure_point"))
    if estimate.found_failure_point and plain is not None and estimate.ci_high < plain.ci_low:
        # Two intervals of one probability that do not meet: one of the estimators is wrong, and
        # the importance sampler is the one that can be (a failure region it never sampled, such
        # as a failure point it did not find). The exact plain interval decides.
        note = Finding("rare.estimators_disagree",
                       {"rare_high": Value(estimate.ci_high), "plain_low": Value(plain.ci_low),
                        "failures": Value(plain.failures), "trials": Value(plain.trials)})
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

    for name in chunked_checks():
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
