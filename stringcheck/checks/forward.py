"""The forward checks of a string: current sharing of parallel branches, and electro-thermal stability.

Both run inside the chunks of ``studies.check`` on the same drawn devices as the series checks,
in the steps every chunked check module gives the workflow (:data:`FORWARD_STEPS`,
``checks.steps``): set up (:func:`forward_setup`), evaluate a chunk (:func:`forward_chunk`), merge
(:class:`ForwardAccumulator`), finish (:func:`finish_parallel`, :func:`finish_thermal`).

* ``parallel`` (``parallel >= 2`` and a forward current): the share of each built group, max branch
  I_AV / mean branch I_AV, and each device's branch I_AV against its part's ``i_fav`` (I_F(AV)).
  A trial fails when a device carries more than its rated average current.
* ``thermal`` (a forward current and the thermal data: every part's ``r_th_jc`` and ``t_j_max``, and
  ``thermal.r_th_sa``): the electro-thermal equilibrium of every built group
  (``solvers.electrothermal``); a trial fails when a junction is above its T_j,max or the group runs
  away (no equilibrium, or an unstable one). When the thermal check runs, the parallel check takes
  its branch currents from the equilibrium (hot devices of a negative-tempco part take more); without
  it, from the isothermal split at ambient + each position's ``temperature_rise``.

Results are plain arrays and scalars; nothing here formats text.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace

import numpy as np

from stringcheck import eseries
from stringcheck.constants import DATASHEET_TEMPERATURE
from stringcheck.design.model import Design
from stringcheck.checks.findings import Finding, Value
from stringcheck.errors import DesignError, SizingError
from stringcheck.limits import exceeds_limit, within_limit
from stringcheck.montecarlo.sampling import BLOCK_TRIALS, SUM_TRIALS, DrawnStrings
from stringcheck.solvers.electrothermal import (
    OVER_LIMIT,
    RUNAWAY,
    STABLE,
    ParallelDevices,
    ParallelDuty,
    runaway_ambient,
    solve_equilibrium,
)
from stringcheck.solvers.parallel import ballast_for_share, branch_currents
from stringcheck.physics.forward import slope_resistance, threshold_voltage
from stringcheck.montecarlo.estimates import FailureEstimate, failure_estimate
from stringcheck.montecarlo.mixed_stock import device_values, position_values
from stringcheck.montecarlo.accumulators import BlockSums, unit_sums
from stringcheck.checks.outcome import (
    CheckOutcome,
    Exported,
    figure,
    json_number,
    numbers_by_key,
    record_or_null,
    records,
    runaway_keys,
    turn_off_to_dict,
)
from stringcheck.montecarlo.temperature_rows import device_coefficient, strings_at_temperature
from stringcheck.checks.steps import CheckSteps, RunFigures
from stringcheck.checks.recovery_conditions import (
    RecoveryRescaling,
    TurnOffCurrent,
    carried_charges,
)

# Runaway ambient is searched on the first trials of each sampling block only (a bisection costs
# some fifteen equilibrium solves); its percentiles describe the margin, the pass/fail rests on the
# equilibrium. Per block, not per chunk: the sample is the same whatever the chunking or workers.
RUNAWAY_SAMPLE = 64
# Share target of the ballast advice when [sizing] target_share is not given: max / mean branch
# current within 10 % (common practice for a well-shared group; the report states the value used).
DEFAULT_TARGET_SHARE = 1.1
# Relative bracket of the ballast bisection: far finer than the E12 step it is rounded to.
_BALLAST_RTOL = 1e-6


@dataclass(frozen=True, kw_only=True, repr=False)
class BranchStatistics(Exported):
    """Statistics of one branch over all trials."""

    branch: int = figure()
    limit_current: float = figure(unit="A", encode=json_number)
    mean_current: float = figure(unit="A", encode=json_number)
    max_current: float = figure(unit="A", encode=json_number)
    mean_share: float = figure(encode=json_number)
    max_share: float = figure(encode=json_number)
    failures: int = figure()


@dataclass(frozen=True, kw_only=True, repr=False)
class DeviceTemperature(Exported):
    """Junction temperature of one device position over the converged trials [degC]."""

    branch: int = figure()
    index: int = figure()
    part: str = figure()
    limit: float = figure(unit="degC")
    mean_temperature: float = figure("mean_tj", unit="degC", encode=json_number)
    max_temperature: float = figure("max_tj", unit="degC", encode=json_number)
    failures: int = figure()


@dataclass(frozen=True, kw_only=True, repr=False)
class BallastAdvice(Exported):
    """The series ballast per branch that brings the share under ``target_share``."""

    target_share: float = figure()
    resistance: float | None = figure(unit="ohm", encode=json_number)
    exact_resistance: float = figure(unit="ohm", encode=json_number)
    loss: float | None = figure(unit="W", encode=json_number)
    quantile: float = figure()
    reachable: bool = figure()


@dataclass(frozen=True, eq=True, kw_only=True, repr=False)
class ParallelCheck(CheckOutcome):
    """Current sharing of the parallel branches (shares and ratios [-], currents [A])."""

    json_order = ("passed", "worst_share", "p99_share", "worst_ratio", "p50_ratio", "p99_ratio",
                  "failures", "p_fail", "p_fail_ci", "p_fail_relative_error",
                  "trials_for_relative_error", "rare", "unsolved", "worst_trial",
                  "required_derating", "electro_thermal", "branches", "ballast")

    worst_share: float = figure(encode=json_number, idle=np.nan)
    p99_share: float = figure(encode=json_number, idle=np.nan)
    required_derating: float = figure(encode=json_number, idle=np.nan)
    electro_thermal: bool = figure(idle=False)
    branches: tuple[BranchStatistics, ...] = figure(encode=records, idle=())
    ballast: BallastAdvice | None = figure(encode=record_or_null, idle=None)

    def per_position(self) -> tuple[BranchStatistics, ...]:
        return self.branches


@dataclass(frozen=True, eq=True, kw_only=True, repr=False)
class ThermalCheck(CheckOutcome):
    """Electro-thermal equilibrium of the group: junction temperatures [degC] and runaway."""

    json_order = ("passed", "worst_tj", "p99_tj", "worst_ratio", "p50_ratio", "p99_ratio",
                  "failures", "p_fail", "p_fail_ci", "p_fail_relative_error",
                  "trials_for_relative_error", "rare", "p_runaway", "p_runaway_ci",
                  "runaway_trials", "over_tj_max_trials", "worst_trial", "runaway_ambient",
                  "runaway_ambient_trials", "runaway_search_limit", "mean_total_power",
                  "turn_off_current", "positions")

    # The groups that ran away: in the JSON as runaway_trials.
    unsolved: int = figure(None, idle=0)
    worst_tj: float = figure(unit="degC", encode=json_number, idle=np.nan)
    p99_tj: float = figure(unit="degC", encode=json_number, idle=np.nan)
    runaway: FailureEstimate | None = figure(encode=runaway_keys, spread=True, idle=None)
    over_limit: int = figure("over_tj_max_trials", idle=0)
    runaway_ambient: dict[str, float] = figure(unit="degC", encode=numbers_by_key,
                                               idle_factory=dict)
    runaway_ambient_trials: int = figure(idle=0)
    runaway_search_limit: float = figure(unit="degC", idle=np.nan)
    positions: tuple[DeviceTemperature, ...] = figure(encode=records, idle=())
    total_power_mean: float = figure("mean_total_power", unit="W", encode=json_number,
                                     idle=np.nan)
    # The current each branch commutates from, to which the recovery loss's Q_rr was carried
    # (None: Q_rr at the datasheet's test conditions, or no turn-off).
    turn_off_current: TurnOffCurrent | None = figure(unit="A", encode=turn_off_to_dict,
                                                     default=None)

    def per_position(self) -> tuple[DeviceTemperature, ...]:
        return self.positions


@dataclass(frozen=True)
class ForwardSetup:
    """Per-position constants of the forward checks (picklable: it travels to worker processes)."""

    run_parallel: bool
    run_thermal: bool
    forward_reference_temperature: np.ndarray
    resistance_reference_temperature: np.ndarray
    threshold_tempco: np.ndarray
    resistance_tempco: np.ndarray
    leakage_reference_voltage: np.ndarray
    leakage_reference_temperature: np.ndarray
    doubling_temperature: np.ndarray
    voltage_exponent: np.ndarray
    junction_to_sink: np.ndarray
    max_junction_temperature: np.ndarray
    rated_current: np.ndarray
    position_temperature: np.ndarray
    search_limit: float
    target_share: float
    # Carries each drawn Q_rr to the application, as for the dynamic check (None: the drawn
    # value at the datasheet's test conditions).
    rescaling: RecoveryRescaling | None = None


@dataclass
class ForwardChunk:
    """Per-trial figures of one chunk, merged in trial order."""

    first_trial: int
    share: np.ndarray
    current_ratio: np.ndarray
    branch_current: np.ndarray
    tj_ratio: np.ndarray | None = None
    worst_tj: np.ndarray | None = None
    classification: np.ndarray | None = None
    tj_sum: np.ndarray | None = None
    tj_max: np.ndarray | None = None
    tj_count: int = 0
    tj_over: np.ndarray | None = None
    power_total: np.ndarray | None = None
    ballast: np.ndarray | None = None
    ballast_loss_per_ohm: np.ndarray | None = None
    branch_limit: np.ndarray | None = None
    runaway_ambient: np.ndarray | None = None
    # Each device's junction temperature [degC] (trials, parallel, series) where the thermal
    # check ran: the series checks of the same chunk take it (and the failure-rate study), and it
    # is dropped before merging.
    junction_temperature: np.ndarray | None = None


def forward_reasons(design: Design) -> tuple[Finding | None, Finding | None]:
    """Why the parallel and the thermal check cannot run (None for a check that can)."""
    duty = design.duty
    layout = design.string
    parts = [design.parts[name] for name in design.parts_used()]

    def named(code: str, names: list[str]) -> Finding:
        return Finding(code, {"parts": Value(", ".join(names))})

    if duty.forward_current is None:
        missing = Finding("not_run.no_forward_current")
        return missing, missing
    lacking = [p.name for p in parts if p.v_t0 is None or p.r_t is None]
    if lacking:
        missing = named("not_run.no_forward_line", lacking)
        return missing, missing
    parallel = None if layout.parallel >= 2 else Finding("not_run.one_branch")
    if parallel is None:
        unrated = [p.name for p in parts if p.i_fav is None]
        if unrated:
            parallel = named("not_run.no_rated_current", unrated)
    thermal = None
    no_resistance = [p.name for p in parts if p.r_th_jc is None]
    no_limit = [p.name for p in parts if p.t_j_max is None]
    if no_resistance:
        thermal = named("not_run.no_junction_to_case", no_resistance)
    elif no_limit:
        thermal = named("not_run.no_junction_limit", no_limit)
    elif design.thermal.r_th_sa is None:
        thermal = Finding("not_run.no_heatsink")
    return parallel, thermal


def forward_setup(design: Design, parallel_reason: Finding | None,
                  thermal_reason: Finding | None,
                  rescaling: RecoveryRescaling | None = None) -> ForwardSetup:
    """The per-position constants, shape (parallel, series); with a mix each position's lowest
    value over the parts that can stand there (the limits shown per position), which the chunks
    replace by each drawn device's own (``forward_for_devices``). ``rescaling``: the dynamic
    check's (``recovery_conditions.recovery_rescaling``), so that the recovery loss takes the
    same carried Q_rr as the charge balance."""
    layout = design.string
    parts = [design.parts[name] for name in design.parts_used()]
    return ForwardSetup(
        run_parallel=parallel_reason is None, run_thermal=thermal_reason is None,
        **_part_constants(lambda attribute: position_values(design, attribute)),
        position_temperature=design.duty.ambient + layout.temperature_rise_grid(),
        # The runaway-ambient search ends at the highest T_j,max: no ambient above it is usable.
        search_limit=float(max((p.t_j_max for p in parts if p.t_j_max is not None),
                               default=design.duty.ambient + 100.0)),
        target_share=design.sizing.target_share or DEFAULT_TARGET_SHARE,
        rescaling=rescaling,
    )


def forward_for_devices(design: Design, setup: ForwardSetup, drawn: DrawnStrings) -> ForwardSetup:
    """``setup`` with the constants of each drawn device's own part, (trials, parallel, series)
    (a mix: ``sampling.DrawnStrings.part_index``)."""
    return replace(setup, **_part_constants(lambda attribute: device_values(design, drawn,
                                                                            attribute)))


def _part_constants(values) -> dict[str, np.ndarray]:
    """The ForwardSetup fields that follow the part, each from ``values(attribute)``."""

    def limit_or_nan(value: float | None) -> float:
        return np.nan if value is None else value

    return dict(
        # Each row of the forward line has its own test temperature (V_T0 and r_T may be given
        # at different ones).
        forward_reference_temperature=values(lambda p: _reference(p.v_t0.at_temperature)),
        resistance_reference_temperature=values(lambda p: _reference(p.r_t.at_temperature)),
        threshold_tempco=values(lambda p: p.tempco_v_t0),
        resistance_tempco=values(lambda p: p.tempco_r_t),
        leakage_reference_voltage=values(lambda p: p.i_r.at_voltage),
        leakage_reference_temperature=values(lambda p: p.i_r.at_temperature),
        doubling_temperature=values(lambda p: p.doubling_temperature),
        voltage_exponent=values(lambda p: p.voltage_exponent),
        junction_to_sink=values(lambda p: limit_or_nan(p.r_th_jc) + (p.r_th_cs or 0.0)),
        max_junction_temperature=values(lambda p: limit_or_nan(p.t_j_max)),
        rated_current=values(lambda p: limit_or_nan(p.i_fav)),
    )


def _reference(temperature: float | None) -> float:
    return DATASHEET_TEMPERATURE if temperature is None else temperature


def forward_parameters(design: Design) -> tuple[str, ...]:
    """The device parameters the forward checks draw (beyond the series checks' ones)."""
    names = ["v_t0", "r_t", "i_r"]
    if all(design.parts[name].q_rr is not None for name in design.parts_used()):
        names.append("q_rr")
    return tuple(names)


def run_forward_chunk(design: Design, setup: ForwardSetup, drawn: DrawnStrings, *,
                      summaries: bool = True, keep_temperature: bool = False) -> ForwardChunk:
    """Solve the forward checks of one chunk of drawn strings (``summaries``: also the runaway
    ambient of the chunk's first trials and the ballast each trial needs; ``keep_temperature``:
    also each device's junction temperature)."""
    duty = design.duty
    parameters = drawn.parameters
    count = drawn.trials
    # Rows at several temperatures: each device's own law through its rows (its tempcos and
    # leakage doubling, (trials, parallel, series)); the parts' own values otherwise.
    setup = replace(setup, **{
        field: device_coefficient(design, drawn, parameter, getattr(setup, field))
        for field, parameter in (("threshold_tempco", "v_t0"), ("resistance_tempco", "r_t"),
                                 ("doubling_temperature", "i_r")) if parameter in parameters})
    threshold = parameters["v_t0"]
    resistance = parameters["r_t"]
    shape = threshold.shape
    # Q_rr at the application's turn-off, the value the dynamic check takes for the same device.
    charge = carried_charges(design, strings_at_temperature(
        design, drawn, setup.position_temperature, ("q_rr",)), setup.rescaling) \
        if "q_rr" in parameters else np.zeros(shape)
    outcome_tj = None
    if setup.run_thermal:
        devices = ParallelDevices(
            threshold_voltage=threshold, slope_resistance=resistance,
            forward_reference_temperature=setup.forward_reference_temperature,
            resistance_reference_temperature=setup.resistance_reference_temperature,
            threshold_tempco=setup.threshold_tempco, resistance_tempco=setup.resistance_tempco,
            leakage_current=parameters["i_r"],
            leakage_reference_voltage=setup.leakage_reference_voltage,
            leakage_reference_temperature=setup.leakage_reference_temperature,
            doubling_temperature=setup.doubling_temperature,
            voltage_exponent=setup.voltage_exponent,
            recovery_charge=charge, junction_to_sink=setup.junction_to_sink,
            max_junction_temperature=setup.max_junction_temperature)
        operating = _duty(design)
        equilibrium = solve_equilibrium(devices, operating)
        temperature = equilibrium.junction_temperature
        average = equilibrium.branch_average
        converged = equilibrium.converged
        rise_allowed = setup.max_junction_temperature - duty.ambient
        with np.errstate(invalid="ignore", divide="ignore"):
            ratio = np.max((temperature - duty.ambient) / rise_allowed, axis=(1, 2))
        runaway = equilibrium.classification == "runaway"
        tj_ratio = np.where(runaway | ~np.isfinite(ratio), np.inf, ratio)
        good = converged & ~runaway
        hot = temperature[good]
        outcome_tj = dict(
            tj_ratio=tj_ratio,
            worst_tj=np.where(runaway, np.inf, temperature.max(axis=(1, 2))),
            classification=equilibrium.classification,
            # Per unit of SUM_TRIALS trials, folded into block sums in trial order as chunks
            # are merged (position_sums.BlockSums): the same figures bit for bit whatever the
            # chunking, the sub-blocks or the number of workers.
            tj_sum=unit_sums(np.where(good[:, None, None], temperature, 0.0)),
            tj_max=hot.max(axis=0) if hot.size else np.full(shape[1:], -np.inf),
            tj_count=int(np.count_nonzero(good)),
            tj_over=np.count_nonzero(exceeds_limit(temperature, setup.max_junction_temperature),
                                  axis=0),
            power_total=equilibrium.power.sum(axis=(1, 2)),
        )
        # The first RUNAWAY_SAMPLE trials of every sampling block, so that the sample does not
        # depend on how the run is cut into chunks.
        rows = np.flatnonzero((drawn.first_trial + np.arange(count)) % BLOCK_TRIALS
                              < RUNAWAY_SAMPLE) if summaries else np.zeros(0, dtype=np.intp)
        if rows.size:
            found = runaway_ambient(_rows(devices, rows), _duty(design),
                                    upper_limit=setup.search_limit)
            outcome_tj["runaway_ambient"] = found.ambient
        elif summaries:  # a sub-block past the sample rows of its block: none of its own
            outcome_tj["runaway_ambient"] = np.zeros(0)
        branch_threshold, branch_resistance = _branch_lines(design, setup, threshold,
                                                            resistance, temperature)
    else:
        temperature = np.broadcast_to(setup.position_temperature, shape)
        branch_threshold, branch_resistance = _branch_lines(design, setup, threshold,
                                                            resistance, temperature)
        average = branch_currents(branch_threshold, branch_resistance, duty.forward_current,
                                  duty.waveform).average
    mean = average.mean(axis=-1)
    share = average.max(axis=-1) / mean
    with np.errstate(invalid="ignore", divide="ignore"):
        current_ratio = np.max(average[..., None] / setup.rated_current, axis=(1, 2))
    chunk = ForwardChunk(first_trial=drawn.first_trial, share=share, current_ratio=current_ratio,
                         branch_current=average, **(outcome_tj or {}))
    if setup.run_thermal:
        # The equilibrium is solved at the ambient; each position's own temperature_rise (its
        # local air) shifts its junction by as much (one pass, as the methods page says).
        chunk.junction_temperature = settled_temperature(
            temperature + (setup.position_temperature - duty.ambient), converged & ~runaway,
            setup.max_junction_temperature, setup.position_temperature)
    if setup.run_parallel and summaries:
        # Each branch's rated current, its weakest device's (with a mix, of the parts drawn).
        chunk.branch_limit = np.broadcast_to(np.min(setup.rated_current, axis=-1), average.shape)
        needs = share > setup.target_share
        ballast = np.zeros(count)
        loss_per_ohm = np.zeros(count)
        if np.any(needs):
            found = ballast_for_share(branch_threshold[needs], branch_resistance[needs],
                                      duty.forward_current, duty.waveform, setup.target_share,
                                      rtol=_BALLAST_RTOL)
            ballast[needs] = found.resistance
        rms = branch_currents(branch_threshold, branch_resistance, duty.forward_current,
                              duty.waveform).rms
        loss_per_ohm = np.sum(rms ** 2, axis=-1)
        chunk.ballast = ballast
        chunk.ballast_loss_per_ohm = loss_per_ohm
    return chunk


def _branch_lines(design: Design, setup: ForwardSetup, threshold: np.ndarray,
                  resistance: np.ndarray, temperature: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Threshold [V] and resistance [ohm] of each branch at the junction temperatures, each
    device's V_T0 and r_T referred from its own row's temperature."""
    branch_threshold = threshold_voltage(threshold, setup.threshold_tempco, temperature,
                                         setup.forward_reference_temperature).sum(axis=-1)
    branch_resistance = slope_resistance(resistance, setup.resistance_tempco, temperature,
                                         setup.resistance_reference_temperature).sum(axis=-1)
    return branch_threshold, branch_resistance + design.thermal.path_resistance


def forward_ratios(design: Design, setup: ForwardSetup, drawn: DrawnStrings,
                   check: str) -> np.ndarray:
    """Each drawn group's failure ratio in ``check`` ("parallel": max device I_AV / I_F(AV);
    "thermal": max (T_j - T_a) / (T_j,max - T_a)), inf where it cannot be solved, runs away or
    has no equilibrium below T_j,max: the function g of the rare-event estimator (fails when > 1)."""
    chunk = run_forward_chunk(design, setup, drawn, summaries=False)
    if check == "parallel":
        solved = np.isfinite(chunk.current_ratio) & np.isfinite(chunk.share)
        return np.where(solved, chunk.current_ratio, np.inf)
    failed = np.isin(chunk.classification, (RUNAWAY, OVER_LIMIT))
    ratio = np.where(np.isnan(chunk.tj_ratio), np.inf, chunk.tj_ratio)
    return np.where(failed & within_limit(ratio), np.inf, ratio)


def settled_temperature(temperature: np.ndarray, settled: np.ndarray, maximum: np.ndarray,
                        position: np.ndarray) -> np.ndarray:
    """Each device's junction temperature [degC] for the checks that take it from the
    equilibrium: the equilibrium's where the group ``settled`` (converged, no runaway), else the
    part's T_j,max (a group that runs away is at least that hot; the thermal check fails it),
    or the position's temperature where T_j,max is not given."""
    fallback = np.where(np.isfinite(maximum), maximum, position)
    good = settled[:, None, None] & np.isfinite(temperature)
    return np.where(good, temperature, np.broadcast_to(fallback, temperature.shape))


def _duty(design: Design) -> ParallelDuty:
    duty = design.duty
    return ParallelDuty(
        forward_current=duty.forward_current, waveform=duty.waveform, ambient=duty.ambient,
        blocking_voltage=duty.reverse_voltage / design.string.series,
        frequency=duty.frequency or 0.0, path_resistance=design.thermal.path_resistance,
        sink_to_ambient=design.thermal.r_th_sa, heatsink=design.thermal.heatsink)


def _rows(devices: ParallelDevices, rows: np.ndarray) -> ParallelDevices:
    """Trials ``rows`` of the drawn devices (per-position constants kept as they are)."""
    values = {}
    for name in ParallelDevices.__dataclass_fields__:
        value = np.asarray(getattr(devices, name))
        values[name] = value[rows] if value.ndim == 3 else value
    return ParallelDevices(**values)


# The equilibrium classes of the accumulated chunks, one byte per trial (as text, numpy's '<U12'
# takes 48 bytes a trial).
_CLASS_CODES = {STABLE: 0, OVER_LIMIT: 1, RUNAWAY: 2}


def _class_codes(classes: np.ndarray) -> np.ndarray:
    codes = np.zeros(classes.shape, dtype=np.int8)
    for name, code in _CLASS_CODES.items():
        codes[classes == name] = code
    return codes


@dataclass
class ForwardAccumulator:
    """Chunks of the forward checks, kept in trial order; their junction-temperature sums are
    folded into block sums (``tj_blocks``) as they come."""

    chunks: list = field(default_factory=list)
    tj_blocks: BlockSums = field(default_factory=BlockSums)

    def merge(self, chunk: ForwardChunk) -> None:
        if chunk.classification is not None and chunk.classification.dtype.kind in "UO":
            chunk.classification = _class_codes(chunk.classification)
        if chunk.tj_sum is not None:
            self.tj_blocks.add(chunk.tj_sum, chunk.first_trial // SUM_TRIALS)
            chunk.tj_sum = None
        self.chunks.append(chunk)

    def joined(self, name: str) -> np.ndarray | None:
        parts = [getattr(chunk, name) for chunk in self.chunks]
        if any(part is None for part in parts) or not parts:
            return None
        return np.concatenate(parts)


def finish_parallel(design: Design, setup: ForwardSetup, reason: Finding | None,
                    accumulator: ForwardAccumulator, confidence: float, target: float,
                    trials: int) -> ParallelCheck:
    """Summarise the parallel check over the whole run (not run, with ``reason``, when given)."""
    if reason is not None:
        return ParallelCheck.not_run("parallel", reason)
    share = accumulator.joined("share")
    ratio = accumulator.joined("current_ratio")
    currents = accumulator.joined("branch_current")
    unsolved = ~np.isfinite(ratio) | ~np.isfinite(share)
    failed = unsolved | exceeds_limit(ratio)
    estimate = failure_estimate(int(np.count_nonzero(failed)), trials, confidence=confidence)
    finite = ratio[np.isfinite(ratio)]
    mean = currents.mean(axis=-1, keepdims=True)
    branch_share = currents / mean
    limit = np.nanmin(setup.rated_current, axis=-1)  # with a mix the lowest the branch can have
    drawn_limit = accumulator.joined("branch_limit")
    branches = tuple(
        BranchStatistics(branch=b + 1, limit_current=float(limit[b]),
                         mean_current=float(np.nanmean(currents[:, b])),
                         max_current=float(np.nanmax(currents[:, b])),
                         mean_share=float(np.nanmean(branch_share[:, b])),
                         max_share=float(np.nanmax(branch_share[:, b])),
                         failures=int(np.count_nonzero(exceeds_limit(currents[:, b], drawn_limit[:, b]))))
        for b in range(currents.shape[1]))
    worst_share = float(np.nanmax(share))
    ballast = _ballast_advice(setup.target_share, accumulator.joined("ballast"),
                              accumulator.joined("ballast_loss_per_ohm"), target,
                              source=design.source)
    return ParallelCheck(
        name="parallel", ran=True, reason=None, passed=estimate.ci_high <= target,
        worst_share=worst_share, p99_share=float(np.nanpercentile(share, 99)),
        worst_ratio=float(np.max(np.where(unsolved, np.inf, ratio))),
        p50_ratio=float(np.percentile(finite, 50)) if finite.size else np.nan,
        p99_ratio=float(np.percentile(finite, 99)) if finite.size else np.nan,
        estimate=estimate, unsolved=int(np.count_nonzero(unsolved)),
        worst_trial=int(np.argmax(np.where(unsolved, np.inf, ratio))),
        # The group carries m x I_F(AV) only at perfect sharing; at the worst share seen, the
        # rated current of the group must be derated to 1 / share of that.
        required_derating=1.0 / worst_share, electro_thermal=setup.run_thermal,
        branches=branches, ballast=ballast)


def _ballast_advice(target_share: float, per_trial: np.ndarray | None,
                    loss_per_ohm: np.ndarray | None, target_p_fail: float, *,
                    source: str | None = None) -> BallastAdvice:
    """Ballast that meets the share target in all but ``target_p_fail`` of the built groups,
    rounded up to E12 (common practice for a power resistor); its loss at the mean branch RMS.

    Raises DesignError (naming ``source``) when the ballast lies outside the range preferred
    values are made for: only a unit slip in the forward current or characteristic gets there."""
    quantile = 1.0 - target_p_fail
    exact = float(np.quantile(per_trial, quantile, method="higher"))
    if not np.isfinite(exact):
        return BallastAdvice(target_share=target_share, resistance=None, exact_resistance=exact,
                             loss=None, quantile=quantile, reachable=False)
    if exact <= 0.0:
        return BallastAdvice(target_share=target_share, resistance=0.0, exact_resistance=0.0,
                             loss=0.0, quantile=quantile, reachable=True)
    try:
        chosen = float(eseries.round_up(exact, "E12"))
    except SizingError:
        raise DesignError(f"the series ballast that brings the branch share within "
                          f"{target_share:g} works out at {exact:.3g} ohm, beyond any resistor; "
                          "check the unit of duty.forward_current (the group's average, e.g. "
                          '"40 A") and of the parts\' v_t0 and r_t', source=source,
                          key="duty.forward_current") from None
    return BallastAdvice(target_share=target_share, resistance=chosen, exact_resistance=exact,
                         loss=float(chosen * np.mean(loss_per_ohm)), quantile=quantile,
                         reachable=True)


def finish_thermal(design: Design, setup: ForwardSetup, reason: Finding | None,
                   accumulator: ForwardAccumulator, confidence: float, target: float,
                   trials: int) -> ThermalCheck:
    """Summarise the thermal check over the whole run (not run, with ``reason``, when given)."""
    if reason is not None:
        return ThermalCheck.not_run("thermal", reason)
    ratio = accumulator.joined("tj_ratio")
    worst = accumulator.joined("worst_tj")
    classes = accumulator.joined("classification")
    runaway = classes == _CLASS_CODES[RUNAWAY]
    over = classes == _CLASS_CODES[OVER_LIMIT]
    failed = runaway | over | ~within_limit(ratio)
    estimate = failure_estimate(int(np.count_nonzero(failed)), trials, confidence=confidence)
    runaway_estimate = failure_estimate(int(np.count_nonzero(runaway)), trials,
                                        confidence=confidence)
    finite = ratio[np.isfinite(ratio)]
    count = sum(chunk.tj_count for chunk in accumulator.chunks)
    total = np.sum(accumulator.tj_blocks.blocks(), axis=0)
    maximum = np.max([chunk.tj_max for chunk in accumulator.chunks], axis=0)
    exceed = sum(chunk.tj_over for chunk in accumulator.chunks)
    grid = design.string.part_labels()
    positions = tuple(
        DeviceTemperature(branch=b + 1, index=k + 1, part=str(grid[b, k]),
                          limit=float(setup.max_junction_temperature[b, k]),
                          mean_temperature=float(total[b, k] / count) if count else np.nan,
                          max_temperature=float(maximum[b, k]),
                          failures=int(exceed[b, k]))
        for b in range(grid.shape[0]) for k in range(grid.shape[1]))
    ambient = accumulator.joined("runaway_ambient")
    percentiles = {}
    if ambient is not None and ambient.size:
        for label, q in (("min", 0.0), ("p1", 1.0), ("p50", 50.0), ("p99", 99.0)):
            percentiles[label] = float(np.percentile(ambient, q, method="lower"))
    finite_worst = worst[np.isfinite(worst)]
    power = accumulator.joined("power_total")
    settled = ~runaway & np.isfinite(power)
    return ThermalCheck(
        name="thermal", ran=True, reason=None, passed=estimate.ci_high <= target,
        worst_tj=float(np.max(worst)), p99_tj=float(np.percentile(finite_worst, 99))
        if finite_worst.size else np.nan,
        worst_ratio=float(np.max(ratio)),
        p50_ratio=float(np.percentile(finite, 50)) if finite.size else np.nan,
        p99_ratio=float(np.percentile(finite, 99)) if finite.size else np.nan,
        estimate=estimate, runaway=runaway_estimate, over_limit=int(np.count_nonzero(over)),
        unsolved=int(np.count_nonzero(runaway)), worst_trial=int(np.argmax(ratio)),
        runaway_ambient=percentiles,
        runaway_ambient_trials=0 if ambient is None else int(ambient.size),
        runaway_search_limit=setup.search_limit, positions=positions,
        # Over the groups with an equilibrium, as the temperatures: a group that runs away has
        # no steady loss (its last iterate's is not one), and would make the mean infinite.
        total_power_mean=float(np.mean(power[settled])) if np.any(settled) else np.nan,
        turn_off_current=None if setup.rescaling is None or design.duty.waveform == "dc"
        else setup.rescaling.turn_off)



FORWARD_CHECKS = ("parallel", "thermal")


def forward_chunk(design: Design, setup: ForwardSetup, drawn: DrawnStrings) -> ForwardChunk:
    """:func:`run_forward_chunk` with each drawn device's own constants under a mix."""
    return run_forward_chunk(design, _devices(design, setup, drawn), drawn)


def _devices(design: Design, setup: ForwardSetup, drawn: DrawnStrings) -> ForwardSetup:
    return setup if drawn.part_index is None else forward_for_devices(design, setup, drawn)


def _reasons(design: Design, names: tuple[str, ...]) -> dict[str, Finding | None]:
    reasons = dict(zip(FORWARD_CHECKS, forward_reasons(design)))
    return {name: reasons[name] for name in names}


def _handoff(chunk: ForwardChunk) -> dict:
    """Each device's equilibrium junction temperature, for the series checks of the same chunk
    (taken out of the chunk: the merged chunks do not keep it)."""
    temperature, chunk.junction_temperature = chunk.junction_temperature, None
    return {} if temperature is None else {"junction_temperature": temperature}


def _setup(design: Design, reasons, rescaling: RecoveryRescaling | None,
           seed: int | None = None) -> ForwardSetup | None:
    if reasons["parallel"] is not None and reasons["thermal"] is not None:
        return None
    return forward_setup(design, reasons["parallel"], reasons["thermal"], rescaling)


def _parameters(design: Design, reasons) -> tuple[str, ...]:
    runs = reasons["parallel"] is None or reasons["thermal"] is None
    return forward_parameters(design) if runs else ()


def _finish(design: Design, setup: ForwardSetup | None, reasons,
            accumulator: ForwardAccumulator, run: RunFigures) -> dict[str, CheckOutcome]:
    return {"parallel": finish_parallel(design, setup, reasons["parallel"], accumulator,
                                        run.confidence, run.target, run.trials),
            "thermal": finish_thermal(design, setup, reasons["thermal"], accumulator,
                                      run.confidence, run.target, run.trials)}


def _chunk_ratios(chunk: ForwardChunk, count: int) -> dict[str, np.ndarray]:
    out = {"parallel": chunk.current_ratio[:count]}
    if chunk.tj_ratio is not None:
        out["thermal"] = chunk.tj_ratio[:count]
    return out


def _chunk_bytes(chunk: ForwardChunk, count: int) -> int:
    total = 0
    for name, value in vars(chunk).items():
        # (The runaway-ambient sample is a few rows per block, not per trial.)
        if name != "runaway_ambient" and isinstance(value, np.ndarray) and value.ndim \
                and value.shape[0] == count:
            total += value.nbytes
    return total


def _trial_ratios(accumulator: ForwardAccumulator, name: str) -> np.ndarray | None:
    return accumulator.joined("current_ratio" if name == "parallel" else "tj_ratio")


def _ratios(design: Design, setup: ForwardSetup, drawn: DrawnStrings, name: str) -> np.ndarray:
    return forward_ratios(design, _devices(design, setup, drawn), drawn, name)


def _rare_parameters(design: Design, name: str) -> tuple[str, ...]:
    # The forward checks depend on V_T0 and r_T and, through the losses and the junction
    # temperatures, on the leakage and recovery charge.
    return forward_parameters(design)


# The forward checks' steps for the check workflow (``checks.steps``;
# ``studies.check.CHECK_STEPS``).
FORWARD_STEPS = CheckSteps(
    names=FORWARD_CHECKS, reasons=_reasons, setup=_setup, parameters=_parameters,
    evaluate=forward_chunk, accumulator=lambda setup: ForwardAccumulator(), finish=_finish,
    chunk_ratios=_chunk_ratios, chunk_bytes=_chunk_bytes, trial_ratios=_trial_ratios,
    ratios=_ratios, rare_parameters=_rare_parameters, handoff=_handoff)
