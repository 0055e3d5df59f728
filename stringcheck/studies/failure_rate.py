"""Failure rate of every device and of the stack from the check's stresses (``check --failure-rate``).

The parts-stress model of MIL-HDBK-217F Notice 2 section 6.1 (``physics.failure_rate``) is applied
to each device of each built string, on the check's draws (same seed, same trials): its voltage
stress V_S is its static (blocking) voltage over its V_RRM, its junction temperature that of the
thermal check's electro-thermal solve, or, where the thermal check cannot run, its stage
temperature (ambient plus its position's temperature rise; the result says which). The stack's
rate is the sum over its devices (the handbook's series-system sum: any device failure counts,
redundancy is not credited). Each figure is given as its median and 99th percentile across the
built strings. Rates in FIT (failures per 10^9 device hours).

Results are plain dataclasses; nothing here formats text.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Callable

import numpy as np

from stringcheck.checks.forward import (
    forward_for_devices,
    forward_parameters,
    forward_reasons,
    forward_setup,
    run_forward_chunk,
)
from stringcheck.findings import Finding
from stringcheck.checks.outcome import Exported, figure, json_number, records
from stringcheck.checks.preconditions import dynamic_check_reason, with_recovery_charge
from stringcheck.checks.recovery_conditions import recovery_rescaling
from stringcheck.checks.series import series_for_devices, series_setup, static_chunk
from stringcheck.design.model import Design
from stringcheck.errors import DesignError, Setting
from stringcheck.montecarlo.mixed_stock import device_values
from stringcheck.montecarlo.sampling import BLOCK_TRIALS, chunk_bounds, draw_strings
from stringcheck.physics.failure_rate import (
    BASE_RATES,
    CONTACT_FACTORS,
    ENVIRONMENT_FACTORS,
    QUALITY_FACTORS,
    diode_failure_rate,
)

__all__ = ["FailureRateStudy", "PositionRate", "run_failure_rate"]

# FIT per (failure / 10^6 h): 10^9 h / 10^6 h.
FIT_PER_HANDBOOK_UNIT = 1000.0
_CHUNK_TRIALS = 4 * BLOCK_TRIALS


@dataclass(frozen=True, kw_only=True, repr=False)
class PositionRate(Exported):
    """One position's failure rate [FIT] and its inputs, median and 99th percentile over the built
    strings."""

    branch: int = figure()
    index: int = figure()
    part: str = figure()
    junction_temperature_p50: float = figure(unit="degC", encode=json_number)
    junction_temperature_p99: float = figure(unit="degC", encode=json_number)
    voltage_stress_p50: float = figure(encode=json_number)
    voltage_stress_p99: float = figure(encode=json_number)
    fit_p50: float = figure(unit="FIT", encode=json_number)
    fit_p99: float = figure(unit="FIT", encode=json_number)


@dataclass(frozen=True, kw_only=True, repr=False)
class FailureRateStudy(Exported):
    """The failure rate of each device and of the stack, with the model and its factors."""

    json_order = ("model", "source", "trials", "seed", "device_type", "base_rate",
                  "base_rate_from_memory", "quality", "quality_factor", "environment",
                  "environment_factor", "contact", "contact_factor", "factors_from_memory",
                  "temperature_basis", "stack_fit_p50", "stack_fit_p99", "worst_position",
                  "positions")

    model: str = figure()
    source: str = figure()
    trials: int = figure()
    seed: int = figure()
    device_type: str = figure()
    base_rate: float = figure(unit="1/(1e6 h)")  # lambda_b
    base_rate_from_memory: bool = figure()
    quality: str = figure()
    quality_factor: float = figure()
    environment: str = figure()
    environment_factor: float = figure()
    contact: str = figure()
    contact_factor: float = figure()
    factors_from_memory: bool = figure()
    # "thermal": the thermal check's junction temperatures; "stage": ambient + position rise.
    temperature_basis: str = figure()
    # Why the thermal check's temperatures were not used (a finding; None if they were): its code
    # here, the sentence written beside it by report.failure_rate.
    temperature_note: Finding | None = figure("temperature_note_code",
                                              encode=lambda note: None if note is None
                                              else note.code)
    stack_fit_p50: float = figure(unit="FIT", encode=json_number)
    stack_fit_p99: float = figure(unit="FIT", encode=json_number)
    worst_position: PositionRate = figure(encode=lambda item: item.to_dict())
    positions: tuple[PositionRate, ...] = figure(encode=records)


def run_failure_rate(design: Design, *, trials: int | None = None, seed: int | None = None,
                     progress: Callable[[int, int], None] | None = None) -> FailureRateStudy:
    """The MIL-HDBK-217F N2 section 6.1 failure rate of every device and of the stack over the
    draws of ``run_check(design, trials=trials, seed=seed)`` (factors from
    ``design.reliability``)."""
    trials = design.monte_carlo.trials if trials is None else trials
    seed = design.monte_carlo.seed if seed is None else seed
    if trials < 1:
        raise DesignError(Setting("trials"), f" must be at least 1, got {trials}",
                          key="monte_carlo.trials")
    # On the initial network (the end-of-life changes are check --end-of-life's).
    design = replace(design, end_of_life=replace(design.end_of_life, enabled=False))
    settings = design.reliability
    design = with_recovery_charge(design)
    run_dynamic = dynamic_check_reason(design) is None
    rescaling = recovery_rescaling(design)[0] if run_dynamic else None
    series = series_setup(design, run_static=True, run_dynamic=False, rescaling=rescaling)
    parameters = ("i_r", "q_rr") if run_dynamic else ("i_r",)
    parallel_reason, thermal_reason = forward_reasons(design)
    forward = None
    if not thermal_reason:
        forward = forward_setup(design, parallel_reason, thermal_reason, rescaling)
        parameters = tuple(dict.fromkeys(parameters + forward_parameters(design)))
    base_rate = settings.base_rate if settings.base_rate is not None else \
        BASE_RATES[settings.device_type]
    factors = dict(base_rate=base_rate, contact_factor=CONTACT_FACTORS[settings.contact],
                   quality_factor=QUALITY_FACTORS[settings.quality],
                   environment_factor=ENVIRONMENT_FACTORS[settings.environment])
    stage_temperature = design.duty.ambient + design.string.temperature_rise_grid()
    temperatures, stresses = [], []
    for first, count in chunk_bounds(trials, _CHUNK_TRIALS):
        drawn = draw_strings(design, parameters, first, count, seed=seed)
        capture = _Voltages()
        static_chunk(design, drawn, capture, series_for_devices(design, series, drawn))
        rated = device_values(design, drawn, lambda part: part.v_rrm)
        stresses.append(capture.voltages / rated)
        if forward is None:
            temperatures.append(np.broadcast_to(stage_temperature, capture.voltages.shape))
        else:
            devices = forward if drawn.part_index is None else \
                forward_for_devices(design, forward, drawn)
            chunk = run_forward_chunk(design, devices, drawn, summaries=False,
                                      keep_temperature=True)
            temperatures.append(chunk.junction_temperature)
        if progress is not None:
            progress(first + count, trials)
    temperature = np.concatenate(temperatures)
    stress = np.concatenate(stresses)
    fit = FIT_PER_HANDBOOK_UNIT * diode_failure_rate(temperature, stress, **factors)
    stack = fit.sum(axis=(1, 2))
    grid = design.string.part_labels()
    positions = []
    for branch in range(grid.shape[0]):
        for index in range(grid.shape[1]):
            t50, t99 = _percentiles(temperature[:, branch, index])
            s50, s99 = _percentiles(stress[:, branch, index])
            f50, f99 = _percentiles(fit[:, branch, index])
            positions.append(PositionRate(branch=branch + 1, index=index + 1,
                                          part=str(grid[branch, index]),
                                          junction_temperature_p50=t50,
                                          junction_temperature_p99=t99, voltage_stress_p50=s50,
                                          voltage_stress_p99=s99, fit_p50=f50, fit_p99=f99))
    worst = max(positions, key=lambda item: item.fit_p99 if math.isfinite(item.fit_p99)
                else math.inf)
    stack50, stack99 = _percentiles(stack)
    return FailureRateStudy(
        model="lambda_p = lambda_b pi_T pi_S pi_C pi_Q pi_E; pi_T = exp(-3091 (1/(T_j + 273) - "
              "1/298)); pi_S = 0.054 (V_S <= 0.3), V_S^2.43 (0.3 < V_S <= 1)",
        source="MIL-HDBK-217F Notice 2 (1995), section 6.1, Diodes, Low Frequency",
        trials=trials, seed=seed, device_type=settings.device_type, base_rate=base_rate,
        base_rate_from_memory=settings.base_rate is None, quality=settings.quality,
        quality_factor=factors["quality_factor"], environment=settings.environment,
        environment_factor=factors["environment_factor"], contact=settings.contact,
        contact_factor=factors["contact_factor"], factors_from_memory=True,
        temperature_basis="stage" if forward is None else "thermal",
        temperature_note=thermal_reason, stack_fit_p50=stack50, stack_fit_p99=stack99,
        worst_position=worst, positions=tuple(positions))


class _Voltages:
    """Takes the static solve's stage voltages of one chunk (in place of the check's
    accumulator): the failure rate needs each device's, not their statistics."""

    voltages: np.ndarray

    def add(self, voltages: np.ndarray, solved: np.ndarray, first_trial: int) -> None:
        self.voltages = np.where(solved[:, None, None], voltages, np.nan)


def _percentiles(values: np.ndarray) -> tuple[float, float]:
    """Median and 99th percentile of the finite values (NaN for none)."""
    finite = values[np.isfinite(values)]
    if not finite.size:
        return math.nan, math.nan
    p50, p99 = np.percentile(finite, [50, 99])
    return float(p50), float(p99)

