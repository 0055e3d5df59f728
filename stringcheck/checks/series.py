"""The series checks of a string: static (blocking-state) and dynamic (turn-off) voltage sharing.

Both run inside the chunks of ``studies.check`` on the same drawn devices as the forward checks, in
the steps every check module has: set up from the design (:func:`series_setup`), evaluate a chunk
of drawn strings (:func:`run_series_chunk`), merge the chunks in trial order
(:class:`SeriesAccumulator`), finish (:func:`finish_series`), given to the workflow as
:data:`SERIES_STEPS` (``checks.steps``).

* ``static``: each stage's leakage against its grading resistor (``solvers.series_static``), the
  resistor at its temperature by its TCR (``physics.grading.resistance_at_temperature``); for a
  periodic duty also the reverse half-period followed in time across grading R, grading C + C_j
  and leakage (``solvers.series_ac``), each device judged by the worse of the two, and which one
  decided kept per trial. The leakage is taken at each device's junction temperature: ambient +
  its position's ``temperature_rise``, or the electro-thermal equilibrium's T_j of the same drawn
  device where the thermal check runs (``junction_temperature`` of :func:`run_series_chunk`).
* ``dynamic``: charge balance after reverse recovery (``solvers.series_dynamic``), each device's
  Q_rr carried to the application's turn-off (``checks.recovery_conditions``).

A trial fails a check when any device of it exceeds ``derating x V_RRM`` of its part, or when the
solver could not solve it (counted and reported, never dropped). Results are plain dataclasses;
nothing here formats text.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from dataclasses import field as dataclass_field
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
from stringcheck.solvers.series_ac import solve_ac_sharing
from stringcheck.physics.waveforms import reverse_voltage_shape as waveform_shape
from stringcheck.solvers.series_dynamic import solve_dynamic_sharing
from stringcheck.solvers.series_static import solve_static_sharing

SERIES_CHECKS = ("static", "dynamic")
# Time steps over the reverse half-period of the ac blocking state: with BDF2 the peaks are
# within 3e-4 of the closed form and of solve_ivp for stage time constants from 1/40 to 13 steps
# (tests/solvers/test_series_ac.py); it adds about 0.5 s of CPU to the demo's check (20,000
# strings of 24).
AC_STEPS = 64
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


def _text(value: str | None):
    return value if value else None


@dataclass(frozen=True, eq=False, kw_only=True, repr=False)
class StaticCheck(SeriesCheck):
    """The static (blocking-state) check: a series check, with which solution decided. For a
    periodic duty each device's stress is the worse of the dc solution (the peak reverse voltage
    held) and the ac one (the reverse half-period followed in time); ``decided_by`` says which gave
    the worst trial, ``ac_decided_share`` in what fraction of the trials the ac solution was the
    worse. ``junction_temperature`` says where the leakage's temperature came from."""

    json_order = SeriesCheck.json_order[:-1] + (
        "blocking_state", "decided_by", "ac_decided_share", "dc_worst_voltage",
        "ac_worst_voltage", "junction_temperature", "positions")

    # "dc" (the peak held: a dc duty, or no capacitance to share it in time) or "dc and ac".
    blocking_state: str = figure(default="dc")
    decided_by: str = figure(default="dc")
    ac_decided_share: float | None = figure(encode=json_number, default=None)
    dc_worst_voltage: float = figure(unit="V", encode=json_number, default=math.nan)
    ac_worst_voltage: float | None = figure(unit="V", encode=json_number, default=None)
    # "position" (ambient + temperature_rise) or "equilibrium" (the thermal check's T_j).
    junction_temperature: str = figure(default="position")


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

    # The reverse half-period of a periodic duty: its time grid [s] and the string voltage over
    # it [V] (None: dc, the peak held only).
    ac_times: np.ndarray | None = None
    ac_voltage: np.ndarray | None = None
    # Whether the ac solution starts from the offsets the recovery leaves (a reverse voltage that
    # rises from zero after the turn-off; see reverse_half_period).
    ac_recovery: bool = False
    # The string voltage [V] at the end of the recovery (the waveform at the recovery time).
    recovery_end_voltage: float = 0.0
    # Whether the leakage is taken at the thermal check's junction temperatures.
    self_heating: bool = False



def series_setup(design: Design, *, run_static: bool, run_dynamic: bool,
                 rescaling: RecoveryRescaling | None, seed: int | None = None,
                 ac_recovery: bool = False, self_heating: bool = False) -> SeriesSetup:
    """The series checks' constants per position; with a mix each position's lowest value over
    the parts that can stand there (the limits shown per position), which the chunks replace by
    each drawn device's own (:func:`series_for_devices`). ``ac_recovery``: the static check's ac
    solution starts from the recovery's offsets (:func:`static_offsets`; the chunks then draw
    Q_rr); ``self_heating``: the chunks get each device's junction temperature from the thermal
    check's equilibrium."""
    constants = _part_constants(design, lambda attribute: position_values(design, attribute))
    half_period = reverse_half_period(design, constants["junction_capacitance"])
    times, voltage = half_period if half_period is not None else (None, None)
    return SeriesSetup(run_static=run_static, run_dynamic=run_dynamic,
                       temperature=design.duty.ambient + design.string.temperature_rise_grid(),
                       rescaling=rescaling, junction_law=needs_junction_law(design),
                       seed=seed if scatters(design) else None,
                       ac_times=times, ac_voltage=voltage,
                       ac_recovery=ac_recovery and voltage is not None,
                       recovery_end_voltage=recovery_end_voltage(design) if ac_recovery else 0.0,
                       self_heating=self_heating, **constants)


def static_offsets(design: Design) -> bool:
    """Whether the static check's ac solution starts from the offsets the recovery leaves: a
    turn-off (an ac waveform or a di_dt), a reverse voltage that rises from zero after it
    (:func:`rises_from_zero`), capacitance at every stage, and every part's recovery charge (its
    ``q_rr``, or ``i_rm`` and ``t_rr`` to derive it). Otherwise it starts from 0 V."""
    half_period = reverse_half_period(
        design, position_values(design, lambda p: p.c_j, pick=np.minimum))
    if half_period is None or not rises_from_zero(half_period[1]):
        return False
    parts = [design.parts[name] for name in design.parts_used()]
    if design.grading.capacitor is None and any(part.c_j <= 0 for part in parts):
        return False
    return all(part.q_rr is not None or (part.i_rm is not None and part.t_rr is not None)
               for part in parts)


def recovery_time(design: Design) -> float:
    """How long the recovery lasts [s]: the longest over the parts used of the datasheet's t_rr
    (its max, else typ), else 2 Q_rr / I_RM, else sqrt(2 Q_rr / (di/dt)) at the duty's di/dt
    (Q_rr its max, else typ; the triangular recovery of DESIGN.md section 4, Rashid ch. 2), else 0.
    The recovery's offsets develop only over this time: after it, the charge the string current
    has not extracted recombines."""
    longest = 0.0
    for name in design.parts_used():
        part = design.parts[name]
        charge = part.q_rr
        if part.t_rr is not None:
            value = part.t_rr.high if part.t_rr.high is not None else part.t_rr.typ
        elif charge is not None and part.i_rm is not None:
            value = 2.0 * (charge.high or charge.typ) / (part.i_rm.high or part.i_rm.typ)
        elif charge is not None and design.duty.di_dt:
            value = math.sqrt(2.0 * (charge.high or charge.typ) / design.duty.di_dt)
        else:
            value = 0.0
        longest = max(longest, float(value))
    return longest


def recovery_end_voltage(design: Design) -> float:
    """The string voltage [V] the reverse waveform reaches by the end of the recovery
    (:func:`recovery_time`), capped at its peak."""
    duty = design.duty
    if duty.waveform in ("dc", "offset-sine") or not duty.frequency:
        return 0.0
    phase = min(2.0 * math.pi * duty.frequency * recovery_time(design), math.pi / 2)
    return float(duty.reverse_voltage * reverse_voltage_shape(duty.waveform, np.array(phase)))


def rises_from_zero(voltage: np.ndarray) -> bool:
    """Whether the string voltage ``voltage`` [V] over the reverse half-period rises from zero
    after the turn-off (below a tenth of its peak at the first step: a half-sine's natural
    commutation), rather than stepping onto its peak (a square wave). Only then does the recovery
    happen at a low string voltage and leave offsets that the blocking half carries to its peak;
    after a step, the recovery's charge balance at the full voltage is the dynamic check's own
    result, and the ac solution starts from the capacitive split of the step."""
    return bool(voltage.size > 1 and voltage[1] < 0.1 * voltage.max())


def reverse_voltage_shape(waveform: str, phase: np.ndarray) -> np.ndarray:
    """The string's reverse voltage over the reverse half-period as a fraction of its peak [-],
    at ``phase`` = omega t in [0, pi] from the end of conduction: the waveform's own shape
    (``physics.waveforms.reverse_voltage_shape``) over its blocking half, pi + phase (sin(phase)
    for a half-sine; 1 from the first instant on for a square wave, 0 at phase 0, where the
    forward half leaves the string)."""
    if waveform not in ("half-sine", "square"):
        raise ValueError(f"waveform: {waveform!r} has no reverse half-period")
    shape = waveform_shape(waveform, np.pi + np.asarray(phase, dtype=float))
    return np.where(np.asarray(phase) > 0.0, shape, 0.0) if waveform == "square" else shape


def reverse_half_period(design: Design, junction_capacitance: np.ndarray
                        ) -> tuple[np.ndarray, np.ndarray] | None:
    """The time grid [s] of the reverse half-period and the string voltage over it [V], or None
    where the blocking state is dc: a dc waveform, no frequency, or no capacitance at any stage
    (the stages then share each instant's voltage as the dc solution shares the peak)."""
    duty = design.duty
    # An offset sine blocks over the whole period: its blocking state is judged at the peak as
    # dc (an ac solution over its period is not built yet).
    if duty.waveform in ("dc", "offset-sine") or not duty.frequency:
        return None
    if design.grading.capacitor is None and (
            not np.any(junction_capacitance > 0)
            or (design.grading.resistor is None and np.any(junction_capacitance <= 0))):
        return None
    half = 0.5 / duty.frequency
    times = np.linspace(0.0, half, AC_STEPS + 1)
    voltage = duty.reverse_voltage * reverse_voltage_shape(duty.waveform,
                                                           np.pi * times / half)
    return times, voltage


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
class StaticSolutions:
    """Which blocking-state solution decided, per trial of a chunk (trial order), and the highest
    stage voltage of each (NaN: not solved)."""

    ac_decided: list = dataclass_field(default_factory=list)
    dc_worst: float = -math.inf
    ac_worst: float = -math.inf

    def add(self, other: "StaticSolutions") -> None:
        self.ac_decided.extend(other.ac_decided)
        self.dc_worst = max(self.dc_worst, other.dc_worst)
        self.ac_worst = max(self.ac_worst, other.ac_worst)


@dataclass
class SeriesChunk:
    """The per-position sums of one chunk of each series check that runs (None: not run)."""

    static: PositionSums | None
    dynamic: PositionSums | None
    static_solutions: StaticSolutions | None = None

    def sums(self) -> dict[str, PositionSums]:
        return {name: sums for name, sums in (("static", self.static), ("dynamic", self.dynamic))
                if sums is not None}


def run_series_chunk(design: Design, setup: SeriesSetup, drawn: DrawnStrings, *,
                     junction_temperature: np.ndarray | None = None) -> SeriesChunk:
    """Solve the series checks of one chunk of drawn strings; its sums, to be merged in trial
    order. ``junction_temperature``: each drawn device's T_j [degC] (trials, parallel, series)
    from the thermal check's equilibrium (None: ambient + each position's temperature_rise)."""
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
        starts = range(0, count, _SOLVE_TRIALS)
        slices = [drawn.trial_slice(start, _SOLVE_TRIALS) for start in starts]
        temperatures = [None if junction_temperature is None else
                        junction_temperature[start:start + _SOLVE_TRIALS] for start in starts]
    else:
        # With a mix, each drawn device's own part constants, (trials, parallel, series), cover
        # the whole chunk at once.
        slices = [drawn]
        temperatures = [junction_temperature]
    own_limits = None if drawn.part_index is None else devices.limits
    solutions = StaticSolutions() if static is not None else None
    for part, temperature in zip(slices, temperatures):
        if static is not None:
            static.device_limits = own_limits
            solutions.add(static_chunk(design, part, static, devices, temperature=temperature))
            static.device_limits = None
        if dynamic is not None:
            dynamic.device_limits = own_limits
            dynamic_chunk(design, part, dynamic, devices)
            dynamic.device_limits = None
    return SeriesChunk(static=static, dynamic=dynamic, static_solutions=solutions)


def static_chunk(design: Design, drawn: DrawnStrings, accumulator: PositionSums,
                 devices: SeriesSetup, *, temperature: np.ndarray | None = None
                 ) -> StaticSolutions:
    """Solve the static sharing of ``drawn`` into ``accumulator`` (constants of ``devices``):
    the dc solution, and for a periodic duty the ac one, each device's stress the worse of the
    two. ``temperature``: each device's junction temperature [degC] (None: its position's).
    Returns which solution decided each trial."""
    junction = devices.temperature if temperature is None else temperature
    reference_current, reference_temperature = drawn.parameters["i_r"], \
        devices.reference_temperature
    if temperature_dependent(design, "i_r", rows_only=True):
        # Leakage rows at several temperatures: each device's own value at its temperature.
        reference_current = parameter_at_temperature(design, drawn, "i_r", junction)
        reference_temperature = junction
    leakage = leakage_current(reference_current, devices.reference_voltage,
                              junction, reference_voltage=devices.reference_voltage,
                              reference_temperature=reference_temperature,
                              doubling_temperature=devices.doubling_temperature,
                              voltage_exponent=devices.voltage_exponent)
    # The grading resistor sits at its position's temperature (ambient + temperature_rise): it
    # does not share its diode's self-heating.
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
    voltages = solution.voltages
    outcome = StaticSolutions(dc_worst=_finite_maximum(voltages))
    if devices.ac_times is not None:
        capacitance = devices.junction_capacitance if drawn.capacitance is None else \
            drawn.capacitance + devices.junction_capacitance
        initial = None
        if devices.ac_recovery and "q_rr" in drawn.parameters:
            # The offsets the recovery leaves: the charge balance at the string voltage reached
            # by the end of the recovery (the rest of the stored charge recombines).
            charge = carried_charges(design, strings_at_temperature(
                design, drawn, devices.temperature, ("q_rr",)), devices.rescaling)
            initial = solve_dynamic_sharing(
                np.full(charge.shape[:-1], devices.recovery_end_voltage), charge,
                np.broadcast_to(capacitance, charge.shape)).voltages
        ac = solve_ac_sharing(devices.ac_times, devices.ac_voltage,
                              np.broadcast_to(conductance, leakage.shape), capacitance, leakage,
                              reference_voltage=devices.reference_voltage,
                              voltage_exponent=devices.voltage_exponent,
                              initial_voltages=initial)
        limits = devices.limits
        dc_ratio = np.max(voltages / limits, axis=(1, 2))
        ac_ratio = np.max(ac.peak_voltages / limits, axis=(1, 2))
        outcome = StaticSolutions(ac_decided=[ac_ratio > dc_ratio], dc_worst=outcome.dc_worst,
                                  ac_worst=_finite_maximum(ac.peak_voltages))
        voltages = np.maximum(voltages, ac.peak_voltages)
    accumulator.add(voltages, converged, drawn.first_trial)
    return outcome


def _finite_maximum(values: np.ndarray) -> float:
    finite = values[np.isfinite(values)]
    return float(finite.max()) if finite.size else -math.inf


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
            dc_bias_loss=aged.capacitor_dc_bias, rated_voltage=design.grading.capacitor_rated_voltage,
            dc_bias_curve=aged.capacitor_dc_bias_curve)
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
        self.static_solutions = StaticSolutions()
        self.ac = setup.ac_times is not None
        self.self_heating = setup.self_heating

    def merge(self, chunk: SeriesChunk) -> None:
        for name, sums in chunk.sums().items():
            self.sums[name].merge(sums)
        if chunk.static_solutions is not None:
            self.static_solutions.add(chunk.static_solutions)

    def static_figures(self) -> dict:
        """The static check's figures of which blocking-state solution decided."""
        solutions = self.static_solutions
        sums = self.sums.get("static")
        figures = dict(blocking_state="dc and ac" if self.ac else "dc",
                       junction_temperature="equilibrium" if self.self_heating else "position",
                       dc_worst_voltage=solutions.dc_worst if math.isfinite(solutions.dc_worst)
                       else math.nan, decided_by="dc")
        if self.ac and solutions.ac_decided:
            decided = np.concatenate(solutions.ac_decided)
            worst = -1 if sums is None else sums.worst_trial
            figures.update(
                ac_decided_share=float(np.count_nonzero(decided)) / max(decided.size, 1),
                ac_worst_voltage=solutions.ac_worst if math.isfinite(solutions.ac_worst)
                else math.nan,
                decided_by="ac" if 0 <= worst < decided.size and decided[worst] else "dc")
        return figures


def finish_series(name: str, accumulator: PositionSums, grid: np.ndarray, confidence: float,
                  trials: int, target: float, *, turn_off: TurnOffCurrent | None = None,
                  static: dict | None = None) -> SeriesCheck:
    """Summarise one series check. It passes when the upper confidence bound of P(fail) is within
    ``target`` ([sizing] target_p_fail): a run too short to show that cannot pass. ``turn_off``:
    the dynamic check's turn-off current (a :class:`DynamicCheck` for ``"dynamic"``); ``static``:
    the static check's figures of :meth:`SeriesAccumulator.static_figures` (a
    :class:`StaticCheck` for ``"static"``)."""
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
    return StaticCheck(**figures, **(static or {}))


def not_run_series(name: str, reason: Finding) -> SeriesCheck:
    """A series check that did not run, and why."""
    return (DynamicCheck if name == "dynamic" else StaticCheck).not_run(name, reason)


def series_ratios(design: Design, setup: SeriesSetup, drawn: DrawnStrings, check: str, *,
                  junction_temperature: np.ndarray | None = None) -> np.ndarray:
    """Each drawn string's worst stress ratio in ``check`` ("static" or "dynamic"), inf unsolved:
    the function g of the rare-event estimator (fails when > 1). With a mix each device is judged
    with its own part's constants and limit. ``junction_temperature`` as for
    :func:`run_series_chunk`."""
    devices = series_for_devices(design, setup, drawn)
    accumulator = PositionSums(setup.limits.shape, setup.limits)
    if drawn.part_index is not None:
        accumulator.device_limits = devices.limits
    if check == "static":
        static_chunk(design, drawn, accumulator, devices, temperature=junction_temperature)
    else:
        dynamic_chunk(design, drawn, accumulator, devices)
    return np.concatenate(accumulator.worst_ratios)


def _reasons(design: Design, names: tuple[str, ...]) -> dict[str, Finding | None]:
    """The static check always runs; the dynamic check needs a turn-off
    (``preconditions.dynamic_check_reason``)."""
    return {name: None if name == "static" else dynamic_check_reason(design) for name in names}


def _setup(design: Design, reasons, rescaling: RecoveryRescaling | None,
           seed: int | None = None) -> SeriesSetup:
    # The static check's ac solution starts from the recovery's offsets whether or not the
    # dynamic check runs alongside (the sizing search runs it alone): the same figure either way.
    # Each device's leakage at its own junction temperature where the thermal check runs (one
    # pass: that equilibrium takes the leakage loss at the nominal share).
    return series_setup(design, seed=seed, run_static=reasons["static"] is None,
                        run_dynamic=reasons["dynamic"] is None, rescaling=rescaling,
                        ac_recovery=recovery_offsets(design, reasons),
                        self_heating="thermal" in reasons and reasons["thermal"] is None)



def recovery_offsets(design: Design, reasons) -> bool:
    """Whether the static check, asked for in ``reasons``, starts its ac solution from the
    recovery's offsets (:func:`static_offsets`; the chunks then draw Q_rr)."""
    return "static" in reasons and reasons["static"] is None and static_offsets(design)


def _parameters(design: Design, reasons) -> tuple[str, ...]:
    wanted = reasons["dynamic"] is None or recovery_offsets(design, reasons)
    return ("i_r", "q_rr") if wanted else ("i_r",)


def _evaluate(design: Design, setup: SeriesSetup, drawn: DrawnStrings, *,
              handed=None) -> SeriesChunk:
    """:func:`run_series_chunk` with each device's equilibrium junction temperature where the
    thermal check ran on the same chunk (``handed``, from the forward checks)."""
    temperature = None
    if setup.self_heating and handed:
        temperature = handed.get("junction_temperature")
    return run_series_chunk(design, setup, drawn, junction_temperature=temperature)


def _finish(design: Design, setup: SeriesSetup, reasons, accumulator: SeriesAccumulator,
            run: RunFigures) -> dict[str, SeriesCheck]:
    grid = design.string.part_labels()
    turn_off = None if setup.rescaling is None else setup.rescaling.turn_off
    out = {}
    for name in SERIES_CHECKS:
        sums = accumulator.sums.get(name)
        out[name] = not_run_series(name, reasons[name]) if sums is None else \
            finish_series(name, sums, grid, run.confidence, run.trials, run.target,
                          turn_off=turn_off,
                          static=accumulator.static_figures() if name == "static" else None)
    return out


def _chunk_ratios(chunk: SeriesChunk, count: int) -> dict[str, np.ndarray]:
    return {name: np.concatenate(sums.worst_ratios)[:count] for name, sums in chunk.sums().items()}


def _chunk_bytes(chunk: SeriesChunk, count: int) -> int:
    return sum(ratios.nbytes for sums in chunk.sums().values() for ratios in sums.worst_ratios)


def _trial_ratios(accumulator: SeriesAccumulator, name: str) -> np.ndarray | None:
    sums = accumulator.sums.get(name)
    return None if sums is None else np.concatenate(sums.worst_ratios)


def _rare_parameters(design: Design, name: str) -> tuple[str, ...]:
    if name == "static":
        # The ac solution starts from the recovery's offsets: the sampler moves Q_rr too.
        return ("i_r", "q_rr") if static_offsets(design) else ("i_r",)
    return ("q_rr",)


# The series checks' steps for the check workflow (``checks.steps``; ``studies.check.CHECK_STEPS``).
SERIES_STEPS = CheckSteps(
    names=SERIES_CHECKS, reasons=_reasons, setup=_setup, parameters=_parameters,
    evaluate=_evaluate, accumulator=SeriesAccumulator, finish=_finish, takes_handoff=True,
    chunk_ratios=_chunk_ratios, chunk_bytes=_chunk_bytes, trial_ratios=_trial_ratios,
    ratios=series_ratios, rare_parameters=_rare_parameters)
