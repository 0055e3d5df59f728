"""The transient check: time-domain turn-off of selected built strings (``check --transient``).

Charge balance gives the voltage left on each device after recovery; the transient engine
(``solvers.transient``, charge-control diodes with C_j, grading R, C and R_d, in a loop with the
commutation inductance) adds the overshoot of the stray inductance and a snappy recovery. It costs
milliseconds per string, so it runs on a selection of the trials of the check:

* the ``worst`` trials of the charge-balance (dynamic) check, every one of them simulated, and
* a uniform random ``sample`` of all trials (its own random stream), on which P(fail) is estimated
  with the exact interval, as for the other checks.

A trial fails when a device's peak reverse voltage exceeds ``derating x V_RRM``, or when the
engine could not finish it. The check passes only when the sample's P(fail) upper bound meets the
target and none of the worst trials fails. Each part's tau and T_M are fitted to its typical Q_rr
and I_RM (or t_rr) at the datasheet's test I_F and di/dt; the drawn Q_rr of each device maps onto
its tau (``physics.charge_control``), so the engine itself carries the recovery charge over from the
test conditions to the application's I_F and di/dt.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np

from stringcheck.checks.findings import Finding, Value, codes
from stringcheck.design.model import Design
from stringcheck.physics.charge_control_fit import lifetime_for_charge
from stringcheck.montecarlo.sampling import (
    BLOCK_TRIALS,
    DrawnStrings,
    draw_strings,
    evaluation_trials,
)
from stringcheck.solvers.transient import simulate_turn_off
from stringcheck.errors import Setting, StringcheckError
from stringcheck.limits import exceeds_limit, within_limit
from stringcheck.montecarlo.estimates import failure_estimate
from stringcheck.montecarlo.junction_scatter import junction_factors, scatters
from stringcheck.montecarlo.mixed_stock import device_part_grid, position_values
from stringcheck.montecarlo.temperature_rows import position_temperature, strings_at_temperature
from stringcheck.montecarlo.sensitivity import (
    TOP_DRIVERS,
    Driver,
    chunk_features,
    label,
    rank_inputs,
    tightenable,
)
from stringcheck.montecarlo.sensitivity import tightened
from stringcheck.checks.junction import needs_junction_law, part_junction
from stringcheck.checks.series import PositionStatistics
from stringcheck.checks.outcome import (
    CheckOutcome,
    figure,
    json_number,
    listed,
    records,
    turn_off_to_dict,
)
from stringcheck.montecarlo.executor import CHUNK_ELEMENTS
from stringcheck.checks.recovery_conditions import (
    TURN_OFF_TEST_CURRENT,
    InconsistentRecoveryData,
    PartFit,
    TurnOffCurrent,
    missing_recovery_finding,
    part_fits,
    turn_off_current,
)

# Stream of the random sample, apart from every stream of the draws (montecarlo/sampling.py uses < 3000 and
# part streams from 2000 up; this one is ours alone).
_SAMPLE_STREAM = 7001
# Trials simulated at once (memory of the engine's working set stays small).
_BATCH = 512
DEFAULT_WORST = 20


@dataclass(frozen=True, kw_only=True, repr=False)
class TransientPosition(PositionStatistics):
    """Peak reverse voltage of one position over the random sample [V], and its largest overshoot
    above the settled voltage [V]."""

    json_order = ("branch", "index", "part", "limit", "mean_voltage", "std_voltage", "max_voltage",
                  "max_overshoot", "failures")

    max_overshoot: float = figure(unit="V", encode=json_number)


@dataclass(frozen=True, eq=True, kw_only=True, repr=False)
class TransientCheck(CheckOutcome):
    """Outcome of the transient check (voltages [V], currents [A], energies [J])."""

    json_order = ("passed", "worst_voltage", "overshoot", "worst_ratio", "p50_ratio", "p99_ratio",
                  "failures", "p_fail", "p_fail_ci", "p_fail_relative_error",
                  "trials_for_relative_error", "unsolved", "worst_trial", "sampled",
                  "worst_simulated", "simulated", "worst_failures", "peak_recovery_current",
                  "damping_energy", "inductance", "forward_current", "turn_off_current",
                  "notes", "rare", "positions")

    worst_voltage: float = figure(unit="V", encode=json_number, idle=math.nan)
    overshoot: float = figure(unit="V", encode=json_number, idle=math.nan)
    sampled: int = figure(idle=0)
    worst_simulated: int = figure(idle=0)
    worst_failures: int = figure(idle=0)
    peak_recovery_current: float = figure(unit="A", encode=json_number, idle=math.nan)
    damping_energy: float = figure(unit="J", encode=json_number, idle=math.nan)
    inductance: float = figure(unit="H", encode=json_number, idle=math.nan)
    forward_current: float = figure(unit="A", encode=json_number, idle=math.nan)
    positions: tuple[TransientPosition, ...] = figure(encode=records, idle=())
    # How the simulated loop was chosen (findings ``transient.*``): their codes here, the
    # sentences written in their place by report.export.
    notes: tuple[Finding, ...] = figure(encode=codes, idle=())
    drivers: tuple[Driver, ...] = figure(None, default=())
    # The current each branch commutates from (``forward_current`` is its value [A]).
    turn_off_current: TurnOffCurrent | None = figure(unit="A", encode=turn_off_to_dict,
                                                     default=None)
    # Strings simulated in all: the random sample and the worst ones (a string in both counts
    # once).
    simulated: int = figure(default=0)

    def passes(self, upper_bound: float, target: float) -> bool:
        """The transient check also fails on any of its simulated worst charge-balance strings."""
        return upper_bound <= target and self.worst_failures == 0

    def per_position(self) -> tuple[TransientPosition, ...]:
        return self.positions


def not_run(reason: Finding) -> TransientCheck:
    """The transient check that did not run, and why."""
    return TransientCheck.not_run("transient", reason)


def transient_reason(design: Design) -> Finding | None:
    """Why the transient check cannot run for this design (None when it can)."""
    duty = design.duty
    if duty.stray_inductance is None and duty.di_dt is None:
        return Finding("not_run.no_commutation_loop")
    return missing_recovery_finding(design)


def _fits_or_reason(design: Design) -> tuple[dict[str, PartFit], Finding | None]:
    """Each part's fitted recovery model, or why the turn-off cannot be simulated."""
    reason = transient_reason(design)
    if reason is not None:
        return {}, reason
    try:
        return part_fits(design), None
    except InconsistentRecoveryData as error:
        return {}, Finding("not_run.inconsistent_recovery", {"part": Value(str(error))})


def run_transient(design: Design, *, dynamic_ratios: np.ndarray, trials: int, seed: int,
                  worst: int, sample: int, confidence: float, target: float,
                  drivers: bool = False) -> TransientCheck:
    """Simulate the worst ``worst`` charge-balance trials and a random ``sample`` of all trials.

    With ``drivers``, rank the inputs by the rank correlation of their mismatch with the worst
    peak over limit on the sample (``montecarlo.sensitivity``), and simulate the same sampled strings
    again with each of the top inputs' spread halved (the worst set kept)."""
    fits, reason = _fits_or_reason(design)
    if reason is not None:
        return not_run(reason)
    worst = min(worst, trials)
    sample = min(sample, trials)
    order = np.argsort(-np.nan_to_num(dynamic_ratios, nan=np.inf), kind="stable")
    worst_set = np.sort(order[:worst])
    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(_SAMPLE_STREAM,)))
    sample_set = np.sort(rng.choice(trials, size=sample, replace=False))
    selected = np.union1d(worst_set, sample_set)

    layout = design.string
    grid = layout.part_labels()
    # Per position the lowest limit of the parts that can stand there (a mix); each simulated
    # device is judged against its own part's.
    limits = layout.derating * position_values(design, lambda p: p.v_rrm)
    inductance, forward, notes = _loop(design, fits)
    notes = list(notes)
    turn_off = turn_off_current(design, fits)

    peaks, overshoots, currents, energies, solved, device_limits = _simulate(
        design, fits, selected, trials, seed, inductance, forward)
    ratio = np.max(peaks / device_limits, axis=(1, 2))
    ratio = np.where(solved, ratio, np.inf)
    failed = ~within_limit(ratio)
    in_sample = np.isin(selected, sample_set)
    in_worst = np.isin(selected, worst_set)
    estimate = failure_estimate(int(np.count_nonzero(failed[in_sample])), sample,
                                confidence=confidence)
    worst_failures = int(np.count_nonzero(failed[in_worst]))
    sample_peaks = peaks[in_sample]
    finite = ratio[in_sample][np.isfinite(ratio[in_sample])]
    good = sample_peaks[solved[in_sample]]
    positions = []
    for b in range(grid.shape[0]):
        for k in range(grid.shape[1]):
            values = good[:, b, k]
            positions.append(TransientPosition(
                branch=b + 1, index=k + 1, part=str(grid[b, k]), limit=float(limits[b, k]),
                mean_voltage=float(values.mean()) if values.size else math.nan,
                std_voltage=float(values.std(ddof=1)) if values.size > 1 else math.nan,
                max_voltage=float(values.max()) if values.size else math.nan,
                max_overshoot=float(np.nanmax(overshoots[:, b, k])),
                failures=int(np.count_nonzero(exceeds_limit(
                    sample_peaks[:, b, k], device_limits[in_sample][:, b, k])))))
    top = int(np.argmax(ratio))
    ranked = ()
    if drivers:
        options = dict(dynamic_ratios=dynamic_ratios, trials=trials, seed=seed, worst=worst,
                       sample=sample, confidence=confidence, target=target)
        ranked = _rank(design, sample_set, ratio[in_sample], trials, seed, options)
    return TransientCheck(
        name="transient", ran=True, reason=None,
        passed=estimate.ci_high <= target and worst_failures == 0,
        worst_voltage=float(np.nanmax(np.where(solved[:, None, None], peaks, np.nan))),
        worst_ratio=float(ratio[top]),
        p50_ratio=float(np.percentile(finite, 50)) if finite.size else math.nan,
        p99_ratio=float(np.percentile(finite, 99)) if finite.size else math.nan,
        overshoot=float(np.nanmax(overshoots)), estimate=estimate,
        unsolved=int(np.count_nonzero(~solved)), worst_trial=int(selected[top]),
        sampled=sample, worst_simulated=worst, worst_failures=worst_failures,
        peak_recovery_current=float(np.nanmax(currents)),
        damping_energy=float(np.nanmax(energies)), inductance=float(inductance / layout.parallel),
        forward_current=float(forward), positions=tuple(positions), notes=tuple(notes),
        drivers=ranked, turn_off_current=turn_off, simulated=int(selected.size))


def _rank(design: Design, sample_set: np.ndarray, ratios: np.ndarray, trials: int, seed: int,
          options: dict) -> tuple[Driver, ...]:
    """The drivers of the transient check on its sample (see :func:`run_transient`)."""
    features: dict[str, list] = {}
    for _, rows, drawn in _redrawn(design, sample_set, trials, seed):
        for name, values in chunk_features(drawn, design, drawn.trials).items():
            features.setdefault(name, []).append(values[rows])
    joined = {name: np.concatenate(parts) for name, parts in features.items()}
    out = []
    for position, (name, rho) in enumerate(rank_inputs("transient", joined, ratios)):
        p99 = upper = None
        if position < TOP_DRIVERS and tightenable(design, name):
            again = run_transient(tightened(design, name), **options)
            p99, upper = again.p99_ratio, again.estimate.ci_high
        out.append(Driver(check="transient", input=name, label=label(name), rank_correlation=rho,
                          tightened_p99_ratio=p99, tightened_p_fail_upper=upper))
    return tuple(out)


def _stage_rows(design: Design, fits, selected: np.ndarray, trials: int, seed: int) -> dict:
    """Redraw the selected trials (block by block); the engine's stage inputs
    (:func:`_engine_inputs`)."""
    layout = design.string
    shape = (selected.size, layout.parallel, layout.series)
    grid = np.empty(shape, dtype=object)
    charge = np.empty(shape)
    resistance = np.full(shape, np.inf)
    capacitance = np.zeros(shape)
    # Each device's C_j factor, as the dynamic check drew it (montecarlo.junction_scatter).
    factor = np.ones(shape) if scatters(design) else None
    for where, rows, drawn in _redrawn(design, selected, trials, seed):
        drawn = strings_at_temperature(design, drawn, position_temperature(design), ("q_rr",))
        charge[where] = drawn.parameters["q_rr"][rows]
        parts = device_part_grid(design, drawn)
        grid[where] = parts if parts.ndim == 2 else parts[rows]
        if drawn.resistance is not None:
            resistance[where] = drawn.resistance[rows]
        if drawn.capacitance is not None:
            capacitance[where] = drawn.capacitance[rows]
        if factor is not None:
            factor[where] = junction_factors(design, parts, drawn.first_trial, drawn.trials,
                                             seed)[rows]
    stage = _engine_inputs(design, fits, grid, charge, resistance, capacitance)
    if factor is not None:
        stage["junction_capacitance"] = stage["junction_capacitance"] * factor.reshape(
            stage["junction_capacitance"].shape)
    return stage


def _redrawn(design: Design, selected: np.ndarray, trials: int, seed: int):
    """The sampling blocks (for a long string, the sub-blocks within the chunk budget,
    ``sampling.evaluation_trials``) that hold the (sorted) ``selected`` trials, redrawn one at a
    time: (mask of ``selected`` in the piece, their rows in it, the piece's strings drawn with
    ``("q_rr",)``). A sub-block's draws are those rows of its block."""
    layout = design.string
    piece = min(BLOCK_TRIALS, evaluation_trials(layout.series * layout.parallel, CHUNK_ELEMENTS))
    pieces = selected // piece
    for number in np.unique(pieces):
        first = int(number) * piece
        drawn = draw_strings(design, ("q_rr",), first, min(piece, trials - first), seed=seed)
        where = pieces == number
        yield where, selected[where] - first, drawn


def _engine_inputs(design: Design, fits, grid: np.ndarray, charge: np.ndarray,
                   resistance: np.ndarray, capacitance: np.ndarray) -> dict:
    """The engine's stage inputs, one row per branch of each string, shape (strings x parallel,
    series), from each device's part (``grid``), drawn Q_rr [C] and grading R [ohm] and C [F],
    (strings, parallel, series); and each device's limit derating x V_RRM [V], (strings,
    parallel, series)."""
    layout = design.string
    shape = charge.shape
    # The part of each device (with a mix it varies from trial to trial).
    transit = np.empty(shape)
    lifetime = np.empty(shape)
    junction = np.empty(shape)
    limit = np.empty(shape)
    for name, fit in fits.items():
        mask = grid == name
        transit[mask] = fit.transit_time
        lifetime[mask] = lifetime_for_charge(charge[mask], fit.transit_time, fit.test_current,
                                             fit.test_rate)
        junction[mask] = design.parts[name].c_j
        limit[mask] = layout.derating * design.parts[name].v_rrm
    rows_shape = (shape[0] * layout.parallel, layout.series)
    law = {}
    if needs_junction_law(design):
        # C_j(V) of each part's junction law (checks.junction): C_j0, phi and gamma.
        potential, exponent = np.empty(shape), np.empty(shape)
        for name in fits:
            mask = grid == name
            fitted = part_junction(design.parts[name])
            junction[mask] = fitted.zero_bias_capacitance
            potential[mask] = fitted.built_in_potential
            exponent[mask] = fitted.grading_exponent
        law = {"junction_potential": potential.reshape(rows_shape),
               "junction_exponent": exponent.reshape(rows_shape)}
    return {"lifetime": lifetime.reshape(rows_shape),
            "transit_time": transit.reshape(rows_shape),
            "junction_capacitance": junction.reshape(rows_shape),
            "grading_resistance": resistance.reshape(rows_shape),
            "grading_capacitance": capacitance.reshape(rows_shape), "limit": limit, **law}


def _junction_law(stage: dict, rows: slice) -> dict:
    """The engine's junction-law keywords for ``rows`` of ``stage`` (none: C_j constant)."""
    return {key: stage[key][rows] for key in ("junction_potential", "junction_exponent")
            if key in stage}


def transient_evaluator(design: Design) -> Callable[[DrawnStrings], np.ndarray]:
    """The worst peak reverse voltage of each built string over its limit, inf where the engine
    could not finish: the failure function of the transient check for the importance sampler
    (strings drawn with ``("q_rr",)``; with a mix each device with its own part's recovery fit and
    limit). The design must pass :func:`transient_reason`."""
    fits, reason = _fits_or_reason(design)
    if reason is not None:
        raise ValueError(f"the turn-off cannot be simulated: {reason.code}")
    inductance, forward, _ = _loop(design, fits)

    def evaluate(drawn: DrawnStrings) -> np.ndarray:
        drawn = strings_at_temperature(design, drawn, position_temperature(design), ("q_rr",))
        charge = drawn.parameters["q_rr"]
        shape = charge.shape
        grid = np.broadcast_to(device_part_grid(design, drawn), shape)
        resistance = np.full(shape, np.inf) if drawn.resistance is None else drawn.resistance
        capacitance = np.zeros(shape) if drawn.capacitance is None else drawn.capacitance
        stage = _engine_inputs(design, fits, grid, charge, resistance, capacitance)
        peaks, _, _, _, solved = _run_engine(design, stage, shape[0], inductance, forward)
        ratio = np.max(peaks / stage["limit"], axis=(1, 2))
        return np.where(solved, ratio, np.inf)

    return evaluate


def _loop(design: Design, fits) -> tuple[float, float, tuple[Finding, ...]]:
    """Inductance per branch loop [H], I_F per branch at the turn-off [A]
    (:func:`recovery_conditions.turn_off_current`, as the dynamic check's), and the notes on how
    they were chosen."""
    layout = design.string
    duty = design.duty
    notes = []
    inductance = duty.stray_inductance if duty.stray_inductance is not None else \
        duty.reverse_voltage / duty.di_dt
    turn_off = turn_off_current(design, fits)
    # The engine starts in a steady state: from the steady current that leaves the typical
    # device the stored charge the waveform's history leaves at the zero (recovery_conditions).
    forward = turn_off.steady_equivalent if math.isfinite(turn_off.steady_equivalent) else \
        turn_off.current
    if turn_off.basis == TURN_OFF_TEST_CURRENT:
        notes.append(Finding("transient.test_current", {"current": Value(forward, "A")}))
    if layout.parallel > 1:
        notes.append(Finding("transient.branch_loops", {"parallel": Value(layout.parallel)}))
    notes.append(Finding("transient.left_out"))
    return inductance * layout.parallel, forward, tuple(notes)


def _one_trial(design: Design, trial: int, trials: int | None, seed: int | None, branch: int):
    """The part fits, run size and seed for one trial of the run, after checking that the
    design has a turn-off to simulate and that ``trial`` and ``branch`` exist."""
    trials = design.monte_carlo.trials if trials is None else trials
    seed = design.monte_carlo.seed if seed is None else seed
    fits, reason = _fits_or_reason(design)
    if reason is not None:
        raise StringcheckError(f"{design.source}: cannot simulate the turn-off: ", reason)
    if not 1 <= branch <= design.string.parallel:
        raise StringcheckError(Setting("branch"), f" must be in 1..{design.string.parallel}, "
                               f"got {branch}")
    if not 0 <= trial < trials:
        raise StringcheckError(Setting("trial"), f" must be in 0..{trials - 1} (the run has "
                               f"{trials} trials), got {trial}")
    return fits, trials, seed


def trial_trace(design: Design, trial: int, *, trials: int | None = None,
                seed: int | None = None, branch: int = 1):
    """The recorded turn-off of one trial (one branch) of the design's Monte Carlo run, for
    ``stringcheck wave``. Returns (TurnOff with its trace, notes)."""
    fits, trials, seed = _one_trial(design, trial, trials, seed, branch)
    inductance, forward, notes = _loop(design, fits)
    stage = _stage_rows(design, fits, np.array([trial]), trials, seed)
    row = slice(branch - 1, branch)
    result = simulate_turn_off(
        design.duty.reverse_voltage, inductance, forward, stage["lifetime"][row],
        stage["transit_time"][row], stage["junction_capacitance"][row],
        stage["grading_resistance"][row], stage["grading_capacitance"][row],
        design.grading.damping_resistor or 0.0, temperature=design.duty.ambient + 273.15,
        record=True, **_junction_law(stage, row))
    return result, notes


def trial_limits(design: Design, trial: int, *, trials: int | None = None,
                 seed: int | None = None, branch: int = 1) -> np.ndarray:
    """The limit of each stage of one trial (one branch) of the design's Monte Carlo run, the
    one the transient check compares the stage's peak with: derating x V_RRM of the part drawn
    at that position [V], shape ``(series,)`` (with a mix the part, so the limit, varies from
    trial to trial). Same arguments and checks as :func:`trial_trace`; for ``stringcheck
    wave``'s limit band."""
    fits, trials, seed = _one_trial(design, trial, trials, seed, branch)
    stage = _stage_rows(design, fits, np.array([trial]), trials, seed)
    return stage["limit"][0, branch - 1].astype(float)


def _simulate(design: Design, fits, selected: np.ndarray, trials: int, seed: int,
              inductance: float, forward: float):
    """Run each branch of the selected trials through the engine, in batches."""
    stage = _stage_rows(design, fits, selected, trials, seed)
    return _run_engine(design, stage, selected.size, inductance, forward) + (stage["limit"],)


def _run_engine(design: Design, stage: dict, strings: int, inductance: float, forward: float):
    """Each branch of ``strings`` strings (``stage``: :func:`_engine_inputs`) through the engine,
    in batches: peaks, overshoots and damping energies (strings, parallel, series) [V, V, J],
    peak recovery currents (strings, parallel) [A], and whether each string was solved."""
    layout = design.string
    shape = (strings, layout.parallel, layout.series)
    damping = design.grading.damping_resistor or 0.0
    temperature = design.duty.ambient + 273.15
    flat = strings * layout.parallel
    rows_shape = (flat, layout.series)
    peaks = np.empty(rows_shape)
    overshoot = np.empty(rows_shape)
    current = np.empty(flat)
    energy = np.empty(rows_shape)
    converged = np.empty(flat, dtype=bool)
    for start in range(0, flat, _BATCH):
        part = slice(start, start + _BATCH)
        result = simulate_turn_off(
            design.duty.reverse_voltage, inductance, forward, stage["lifetime"][part],
            stage["transit_time"][part], stage["junction_capacitance"][part],
            stage["grading_resistance"][part], stage["grading_capacitance"][part], damping,
            temperature=temperature, **_junction_law(stage, part))
        peaks[part] = result.peak_voltage
        overshoot[part] = result.overshoot
        current[part] = result.peak_current
        energy[part] = result.damping_energy
        converged[part] = result.converged & np.all(np.isfinite(result.peak_voltage), axis=1)
    per_trial = (strings, layout.parallel)
    solved = converged.reshape(per_trial).all(axis=1)
    return (peaks.reshape(shape), overshoot.reshape(shape), current.reshape(per_trial),
            energy.reshape(shape), solved)
