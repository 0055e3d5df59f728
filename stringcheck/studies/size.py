"""Size the grading network: R, C, damping resistor R_d and, optionally, the device count.

The search runs the series check on common random numbers: the same seed draws the same devices and
the same latent component tolerances for every candidate value, so a candidate is judged on exactly
the strings its neighbours were judged on. Raising every nominal R scales every drawn resistance by the
same factor, which never lowers the worst static voltage; raising C never raises the worst dynamic
voltage (both are properties of the solvers, tested there). The pass/fail of a candidate is therefore
monotone along the preferred-value ladder, and a bisection over the ladder finds the boundary.

A candidate passes when the upper bound of its P(fail) (exact Clopper-Pearson at the design's confidence)
is at most ``[sizing] target_p_fail``.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Callable

import numpy as np

from stringcheck import eseries
from stringcheck.design.model import LOGNORMAL_PARAMETERS, MAX_DEVICES, Design
from stringcheck.errors import DesignError, ImpossibleDesignError, Setting, SizingError
from stringcheck.limits import within_limit
from stringcheck.physics.grading import (
    discharge_time,
    resistor_power,
    stored_energy,
    worst_case_dynamic_capacitance,
    worst_case_static_resistance,
)
from stringcheck.physics.leakage import leakage_current
from stringcheck.units import format_quantity
from stringcheck.montecarlo.quantile_maps import spread_quantile
from stringcheck.montecarlo.estimates import trials_for_upper_bound
from stringcheck.checks.findings import Finding, Value
from stringcheck.checks.grading_ratings import GradingSummary
from stringcheck.studies.check import CheckResult, run_check
from stringcheck.checks.preconditions import with_recovery_charge
from stringcheck.checks.recovery_conditions import recovery_rescaling, rescale_charges
from stringcheck.montecarlo.executor import WorkerPool, worker_pool

# Range of the ladders searched [ohm], [F]: wide enough for any grading network we know of.
_RESISTOR_RANGE = (1.0, 1e11)
_CAPACITOR_RANGE = (1e-13, 1e-3)
# Critical damping of the stray-inductance ring: damping ratio zeta = 1 (series RLC).
DAMPING_RATIO = 1.0
# Strings simulated per damping candidate: the worst charge-balance ones and a random sample.
_SEARCH_WORST = 20
_SEARCH_SAMPLE = 100
_MAX_CAPACITOR_STEPS = 6
# One capacitor step of the time-domain search: about x1.8 whatever the series (a quarter decade).
_CAPACITOR_STEP = {"E6": 1, "E12": 3, "E24": 6, "E48": 12, "E96": 24, "E192": 48}


@dataclass(frozen=True)
class Candidate:
    """One value tried by the search and how it fared."""

    value: float
    passed: bool
    failures: int
    p_fail_upper: float
    worst_ratio: float


@dataclass(frozen=True)
class LadderChoice:
    """The chosen preferred value and its rejected neighbour (None at the end of the ladder)."""

    series: str
    chosen: Candidate | None
    rejected_neighbour: Candidate | None
    textbook_bound: float | None


@dataclass(frozen=True)
class DampingCandidate:
    """One damping resistor tried in the time domain."""

    value: float
    worst_ratio: float
    energy: float
    within_limit: bool


@dataclass(frozen=True)
class SizingResult:
    """The proposed network, the evidence for it, and the check of the sized design."""

    design: Design
    resistor: LadderChoice
    capacitor: LadderChoice | None
    damping_resistor: float | None
    damping_rule: str
    series_count: int
    series_searched: bool
    # The sized network's summary with the ratings its parts must have (``GradingSummary``'s
    # sizing fields filled in).
    ratings: GradingSummary
    check: CheckResult
    target_p_fail: float
    # Findings (checks.findings): sizing's own, then the final check's network advisories.
    advisories: tuple[Finding, ...]
    damping_candidates: tuple[DampingCandidate, ...] = ()


Evaluate = Callable[[float], Candidate]


def size(design: Design, *, trials: int | None = None, seed: int | None = None,
         resistor_series: str | None = None, capacitor_series: str | None = None,
         find_series: bool = False, progress: Callable[[str], None] | None = None,
         workers: int = 1, transient: bool = False) -> SizingResult:
    """Propose the grading network of ``design`` from preferred values.

    Parameters
    ----------
    design
        A validated design; its grading values (if any) are replaced by the sized ones, its tolerances,
        TCR and ratings are kept.
    trials, seed
        Override the design's Monte Carlo settings.
    resistor_series, capacitor_series
        IEC 60063 series names (override ``[sizing]``).
    find_series
        Also find the smallest device count that passes with the chosen network.
    progress
        Called with a short description of each search step.
    workers
        Processes to run each check's trials in (one pool serves the whole search); the answer is
        the same for any number.
    transient
        Choose the damping resistor in the time domain (the E12 value with the least damping
        energy whose peak stays within the limit) and run the final check with the transient.
    """
    with worker_pool(workers) as pool:
        return _size(design, trials=trials, seed=seed, resistor_series=resistor_series,
                     capacitor_series=capacitor_series, find_series=find_series,
                     progress=progress, pool=pool, transient=transient)


def _size(design: Design, *, trials: int | None, seed: int | None, resistor_series: str | None,
          capacitor_series: str | None, find_series: bool,
          progress: Callable[[str], None] | None, pool: WorkerPool | None,
          transient: bool) -> SizingResult:
    trials = design.monte_carlo.trials if trials is None else trials
    seed = design.monte_carlo.seed if seed is None else seed
    r_series = eseries.canonical_series_name(resistor_series or design.sizing.resistor_series)
    c_series = eseries.canonical_series_name(capacitor_series or design.sizing.capacitor_series)
    target = design.sizing.target_p_fail
    confidence = design.monte_carlo.confidence
    needed = trials_for_upper_bound(target, confidence=confidence)
    if trials < needed:
        raise SizingError(
            f"{trials} trials cannot show P(fail) <= {target:g} at {confidence:.0%} confidence even "
            "with no failure; use ", Setting("trials", needed),
            " or more (or raise [sizing] target_p_fail)")
    say = progress or (lambda message: None)
    design = _enough_devices(design, find_series)

    def network(design: Design) -> tuple[LadderChoice, LadderChoice | None, Design]:
        """Size R (and C) for the design's device count; SizingError when none meets the target."""
        def evaluate(check_name: str, candidate_design: Design) -> Candidate:
            result = run_check(candidate_design, trials=trials, seed=seed, only=(check_name,),
                               pool=pool)
            outcome = result.checks[check_name]
            upper = outcome.estimate.ci_high
            return Candidate(value=math.nan, passed=upper <= target,
                             failures=outcome.estimate.failures, p_fail_upper=upper,
                             worst_ratio=outcome.worst_ratio)

        def with_resistor(value: float) -> Design:
            return replace(design, grading=replace(design.grading, resistor=value))

        say(f"resistor ({r_series})")
        resistor = _search(lambda value: replace(evaluate("static", with_resistor(value)),
                                                 value=value),
                           r_series, _static_bound(design), _RESISTOR_RANGE, larger_is_harder=True)
        if resistor.chosen is None:
            raise SizingError("no grading resistor between 1 ohm and 100 GOhm meets the target "
                              "(with a small R the sharing follows the resistor tolerance); add "
                              "devices (", Setting("find_series", True), ") or tighten "
                              "grading.resistor_tolerance")
        sized = with_resistor(resistor.chosen.value)

        capacitor = None
        dynamic_needed = not (design.duty.waveform == "dc" and design.duty.di_dt is None)
        if dynamic_needed:
            say(f"capacitor ({c_series})")

            def with_capacitor(value: float) -> Design:
                return replace(sized, grading=replace(sized.grading, capacitor=value))

            capacitor = _search(lambda value: replace(evaluate("dynamic", with_capacitor(value)),
                                                      value=value),
                                c_series, _dynamic_bound(sized), _CAPACITOR_RANGE,
                                larger_is_harder=False)
            if capacitor.chosen is None:
                raise SizingError("no grading capacitor up to 1 mF meets the target at turn-off "
                                  "(with a large C the sharing follows the capacitor tolerance); "
                                  "add devices (", Setting("find_series", True), "), tighten "
                                  "grading.capacitor_tolerance or the parts' Q_rr spread")
            sized = with_capacitor(capacitor.chosen.value)
        return resistor, capacitor, sized

    # With --find-series a count too short for any network is lengthened until one exists; the
    # smallest count that passes with that network is searched below.
    count_limit = max(2 * design.string.series, _minimum_series(design) + 8)
    while True:
        try:
            resistor, capacitor, sized = network(design)
            break
        except SizingError:
            if not find_series or design.string.series >= count_limit:
                raise
            design = _with_series(design, design.string.series + 1)
            say(f"no network at the present count; trying {design.string.series} devices")

    damping, rule = _damping_resistor(sized)
    candidates: tuple[DampingCandidate, ...] = ()
    raised = []
    if transient and damping is not None:
        # Charge balance knows no inductance: when no damping resistor keeps the ring within the
        # limit, the capacitor goes up its series, a step at a time, until one does.
        for _ in range(_MAX_CAPACITOR_STEPS + 1):
            say("damping resistor (time domain)")
            damping, rule, candidates = _damping_in_time_domain(sized, damping, rule, trials,
                                                                seed, pool)
            if any(c.within_limit for c in candidates) or not candidates:
                break
            previous = sized.grading.capacitor
            larger = float(eseries.step(previous, c_series, _CAPACITOR_STEP[c_series]))
            raised.append(Finding("size.capacitor_raised", {"previous": Value(previous, "F"),
                                                            "raised": Value(larger, "F")}))
            sized = replace(sized, grading=replace(sized.grading, capacitor=larger))
            damping, rule = _damping_resistor(sized)
    if damping is not None:
        sized = replace(sized, grading=replace(sized.grading, damping_resistor=damping))

    series_count = sized.string.series
    if find_series:
        say("device count")
        sized = _smallest_series(sized, trials, seed, pool)
        series_count = sized.string.series

    say("final check")
    check = run_check(sized, trials=trials, seed=seed, pool=pool, transient=transient)
    ratings = _ratings(sized, check)
    advisories = raised + list(check.grading.advisories)
    if sized.grading.capacitor is not None and damping is not None:
        recovery = [sized.parts[name].t_rr.typ for name in sized.parts_used()
                    if sized.parts[name].t_rr is not None]
        if recovery and damping * sized.grading.capacitor > min(recovery):
            advisories.append(Finding(
                "size.damping_slower_than_recovery",
                {"time_constant": Value(damping * sized.grading.capacitor, "s")},
                Value(min(recovery), "s")))
    return SizingResult(design=sized, resistor=resistor, capacitor=capacitor,
                        damping_resistor=damping, damping_rule=rule, series_count=series_count,
                        series_searched=find_series, ratings=ratings, check=check,
                        target_p_fail=target, advisories=tuple(advisories),
                        damping_candidates=candidates)


def _search(evaluate: Evaluate, series: str, start: float | None, value_range: tuple[float, float],
            *, larger_is_harder: bool) -> LadderChoice:
    """Bisection along the preferred-value ladder for the pass/fail boundary.

    ``larger_is_harder``: True for R (choose the largest passing value), False for C (the smallest).
    """
    ladder = eseries.values_between(value_range[0], value_range[1], series)
    cache: dict[int, Candidate] = {}

    def at(index: int) -> Candidate:
        if index not in cache:
            cache[index] = evaluate(float(ladder[index]))
        return cache[index]

    # "good" = passes. For R, passing indices form a prefix; for C a suffix.
    def good(index: int) -> bool:
        return at(index).passed

    # The corner is reported as given (None: there is none); the search starts mid-range then.
    bound = start if start is not None and math.isfinite(start) and start > 0 else None
    if bound is None:
        start = float(np.sqrt(value_range[0] * value_range[1]))
    middle = int(np.clip(np.searchsorted(ladder, start), 0, len(ladder) - 1))
    step = len(eseries.series_values(series))  # one decade of the ladder
    # Bracket: find a passing and a failing index around the start, a decade at a time.
    if larger_is_harder:
        low, high = middle, middle
        if good(middle):
            while high < len(ladder) - 1 and good(high):
                low, high = high, min(high + step, len(ladder) - 1)
            if good(high):
                return LadderChoice(series, at(high), None, bound)
        else:
            while low > 0 and not good(low):
                high, low = low, max(low - step, 0)
            if not good(low):
                return LadderChoice(series, None, at(low), bound)
        while high - low > 1:
            mid = (low + high) // 2
            low, high = (mid, high) if good(mid) else (low, mid)
        return LadderChoice(series, at(low), at(high), bound)
    low, high = middle, middle
    if good(middle):
        while low > 0 and good(low):
            high, low = low, max(low - step, 0)
        if good(low):
            return LadderChoice(series, at(low), None, bound)
    else:
        while high < len(ladder) - 1 and not good(high):
            low, high = high, min(high + step, len(ladder) - 1)
        if not good(high):
            return LadderChoice(series, None, at(high), bound)
    while high - low > 1:
        mid = (low + high) // 2
        low, high = (low, mid) if good(mid) else (mid, high)
    return LadderChoice(series, at(high), at(low), bound)


def _corner_limits(design: Design) -> tuple[int, float]:
    layout = design.string
    limits = [layout.derating * design.parts[name].v_rrm for name in design.parts_used()]
    return layout.series, min(limits)


def drawn_limits(design: Design, name: str, parameter: str) -> tuple[float, float]:
    """The least and the greatest value of ``parameter`` of part ``name`` that the Monte Carlo
    draws at the datasheet's limit level [SI unit of the parameter].

    A limit the datasheet gives is itself; a missing one is the value the draw puts at
    ``sigma_at_limit`` standard deviations on that side (the two-piece spread mirrors the limit
    given: typ^2 / max for a lognormal parameter, 2 typ - max for a normal one); a fixed ``{typ}``
    is typ on both sides. A measured lot's column gives its least and greatest device when
    resampled, its fit's values at -+ ``sigma_at_limit`` when fitted. (The draw itself is not
    bounded where screening does not truncate it: these are the corner's values, not extremes.)
    """
    part = design.parts[name]
    sigma = design.monte_carlo.sigma_at_limit
    lot = part.measured
    if lot is not None and parameter in lot.parameters:
        column = lot.columns[lot.parameters.index(parameter)]
        if lot.resampled:
            return float(column.low), float(column.high)
        low, high = column.quantile(np.array([-sigma, sigma]))
        return float(low), float(high)
    spread = part.spread(parameter)
    low, high = spread_quantile(spread, np.array([-sigma, sigma]),
                                lognormal=parameter in LOGNORMAL_PARAMETERS,
                                sigma_at_limit=sigma, screened=False)
    return (float(low) if spread.low is None else spread.low,
            float(high) if spread.high is None else spread.high)


def _part_temperatures(design: Design, name: str) -> np.ndarray:
    """Junction temperatures [degC] of the positions that can hold part ``name``."""
    temperature = design.duty.ambient + design.string.temperature_rise_grid()
    return np.concatenate([temperature[grid == name] for grid in design.string.part_grids()])


def _static_bound(design: Design) -> float | None:
    """The textbook worst-case R (n V_DM - V_s) / ((n - 1) dI_R) for the leakages the Monte Carlo
    draws: dI_R from the greatest drawn leakage at the hottest position to the least at the coolest
    (``drawn_limits``); None where nothing scatters (no corner: any R passes)."""
    n, v_dm = _corner_limits(design)
    if n < 2:
        return None
    highs, lows = [], []
    for name in design.parts_used():
        part = design.parts[name]
        spread = part.i_r
        factors = leakage_current(1.0, spread.at_voltage, _part_temperatures(design, name),
                                  reference_voltage=spread.at_voltage,
                                  reference_temperature=spread.at_temperature,
                                  doubling_temperature=part.doubling_temperature,
                                  voltage_exponent=part.voltage_exponent)
        low, high = drawn_limits(design, name, "i_r")
        highs.append(float(np.max(factors)) * high)
        lows.append(float(np.min(factors)) * low)
    spread_current = max(highs) - min(lows)
    if not spread_current > 0 or n * v_dm <= design.duty.reverse_voltage:
        return None
    return float(worst_case_static_resistance(n, v_dm, design.duty.reverse_voltage, spread_current))


def _dynamic_bound(design: Design) -> float | None:
    """The textbook worst-case C (n - 1) dQ_rr / (n V_DM - V_s) for the recovery charges the
    Monte Carlo draws (``drawn_limits``), carried to the application's I_F and di/dt where the
    dynamic check carries them (``recovery_conditions``); None where nothing scatters."""
    n, v_dm = _corner_limits(design)
    if n < 2 or n * v_dm <= design.duty.reverse_voltage:
        return None
    # The charges the dynamic check draws, once a capacitor stands at every stage (its value does
    # not enter: only the parts' recovery data are read).
    with_capacitor = replace(design, grading=replace(design.grading,
                                                     capacitor=_CAPACITOR_RANGE[1]))
    try:
        design = with_recovery_charge(with_capacitor)
    except DesignError:
        return None
    if any(design.parts[name].q_rr is None for name in design.parts_used()):
        return None
    rescaling, _ = recovery_rescaling(design)
    highs, lows = [], []
    for name in design.parts_used():
        limits = np.array(drawn_limits(design, name, "q_rr"))
        if rescaling is not None:
            limits = rescale_charges(limits.reshape(1, 1, 2), np.full((1, 2), name, dtype=object),
                                     rescaling).reshape(2)
        lows.append(float(limits[0]))
        highs.append(float(limits[1]))
    charge = max(highs) - min(lows)
    if not charge > 0:
        return None
    return float(worst_case_dynamic_capacitance(n, v_dm, design.duty.reverse_voltage, charge))


def _damping_resistor(design: Design) -> tuple[float | None, str]:
    """R_d from two rules; the larger wins, rounded up to E12.

    1. Damp the ring of the commutation loop: the stray inductance L in series with the n grading
       capacitors (C/n) and n damping resistors (n R_d) is a series RLC with damping ratio
       zeta = (n R_d / 2) sqrt((C/n) / L) (any circuit-theory text, e.g. C. K. Alexander,
       M. N. O. Sadiku, Fundamentals of Electric Circuits, series RLC step response). zeta = 1 gives
       R_d = 2 sqrt(L / (n C)). L is duty.stray_inductance, or V_s / (di/dt) when only di_dt is given.
    2. Limit the capacitor's discharge into a device at turn-on to the forward current: R_d >= V_k / I_F
       with V_k the nominal stage voltage (common practice for RC snubbers: the discharge should not add
       more than the load current to the device).
    """
    grading, duty = design.grading, design.duty
    if grading.capacitor is None:
        return None, "no grading capacitor: no damping resistor needed"
    n = design.string.series
    candidates, reasons = [], []
    inductance = duty.stray_inductance
    source = "duty.stray_inductance"
    if inductance is None and duty.di_dt is not None:
        inductance = duty.reverse_voltage / duty.di_dt
        source = "V_s / (di/dt)"
    if inductance is not None:
        value = 2.0 * math.sqrt(inductance / (n * grading.capacitor)) * DAMPING_RATIO
        candidates.append(value)
        reasons.append(f"critical damping of L = {inductance:.3g} H ({source}) with the string's "
                       f"capacitors: R_d >= 2 sqrt(L / (n C)) = {value:.3g} ohm")
    if duty.forward_current is not None:
        value = (duty.reverse_voltage / n) / duty.forward_current
        candidates.append(value)
        reasons.append(f"turn-on discharge limited to I_F: R_d >= V_s / (n I_F) = {value:.3g} ohm")
    if not candidates:
        if grading.damping_resistor is not None:
            return grading.damping_resistor, "kept the design's value (no L, di/dt or I_F to size it)"
        return None, ("not sized: give duty.stray_inductance (or di_dt) or duty.forward_current "
                      "to size the damping resistor")
    chosen = float(eseries.round_up(max(candidates), "E12"))
    return chosen, "; ".join(reasons) + f"; rounded up to E12: {chosen:.3g} ohm"


def _minimum_series(design: Design) -> int:
    """The fewest devices that can hold V_s even with perfect sharing: ceil(V_s / (derating V_RRM))."""
    _, v_dm = _corner_limits(design)
    return max(1, math.ceil(design.duty.reverse_voltage / v_dm))


def _with_series(design: Design, count: int) -> Design:
    """The design with ``count`` devices per branch; DesignError past the device cap."""
    layout = design.string
    if count * layout.parallel > MAX_DEVICES:
        raise _over_cap(design, count)
    positions = tuple(p for p in layout.positions if p.index <= count)
    return replace(design, string=replace(layout, series=count, positions=positions))


def _over_cap(design: Design, count: int) -> DesignError:
    """The error for a device count past MAX_DEVICES, with the arithmetic of the minimum count
    (a slip of kV for MV in the string voltage, or of V for kV in V_RRM, asks for thousands)."""
    layout = design.string
    _, v_dm = _corner_limits(design)
    minimum = _minimum_series(design)
    branches = f" x {layout.parallel} branches" if layout.parallel > 1 else ""
    cap = MAX_DEVICES // layout.parallel
    if minimum > cap:
        why = (f"needs {minimum:,} devices in series{branches} "
               f"({format_quantity(design.duty.reverse_voltage, 'V')} / "
               f"{format_quantity(v_dm, 'V')} per device at derating {layout.derating:g})")
    else:
        why = f"the search for a device count reached {count:,} devices in series{branches}"
    return DesignError(f"{why}; the cap is {MAX_DEVICES:,} devices: check the unit of "
                       "duty.reverse_voltage and of the parts' v_rrm",
                       source=design.source, key="duty.reverse_voltage")


def _enough_devices(design: Design, find_series: bool) -> Design:
    """The design itself, or (with --find-series) the design raised to the minimum device count.

    Raises ImpossibleDesignError, with the arithmetic, when the string is too short and the device
    count is not to be searched: no grading network can make up for missing devices.
    """
    layout = design.string
    grid = design.string.part_grid()
    capacity = min(sum(layout.derating * design.parts[name].v_rrm for name in row) for row in grid)
    if capacity >= design.duty.reverse_voltage:
        return design
    minimum = max(_minimum_series(design), layout.series + 1)
    if find_series:
        return _with_series(design, minimum)
    raise ImpossibleDesignError(
        f"{design.source or 'design'}: the string cannot hold {design.duty.reverse_voltage:g} V even "
        f"with perfect sharing: derating x V_RRM summed over the {layout.series} devices of a branch "
        f"is {capacity:g} V (derating {layout.derating:g}); no grading network can fix that: use "
        f"string.series >= {minimum}, or add ", Setting("find_series", True))


def _damping_in_time_domain(design: Design, rule_value: float, rule: str, trials: int, seed: int,
                            pool: WorkerPool | None
                            ) -> tuple[float, str, tuple[DampingCandidate, ...]]:
    """The E12 damping resistor, from rule/4 to 4 x rule, with the least energy per turn-off among
    those whose worst simulated peak stays within derating x V_RRM (the worst charge-balance
    strings and a random sample of them); the rule's value when none does."""
    low, high = rule_value / 4.0, rule_value * 4.0
    tried = []
    for value in eseries.values_between(low, high, "E12"):
        candidate = replace(design, grading=replace(design.grading, damping_resistor=float(value)))
        result = run_check(candidate, trials=trials, seed=seed, only=("dynamic",), pool=pool,
                           transient=True, transient_worst=_SEARCH_WORST,
                           transient_sample=_SEARCH_SAMPLE)
        check = result.checks["transient"]
        if not check.ran:
            return rule_value, rule + f"; not chosen in the time domain: {check.reason}", ()
        tried.append(DampingCandidate(value=float(value), worst_ratio=check.worst_ratio,
                                      energy=check.damping_energy,
                                      within_limit=bool(within_limit(check.worst_ratio))))
    good = [c for c in tried if c.within_limit]
    if not good:
        return rule_value, rule + ("; no E12 value from rule/4 to 4 x rule keeps the simulated "
                                   "peak within the limit: kept the rule's value"), tuple(tried)
    best = min(good, key=lambda c: (c.energy, c.worst_ratio))
    return best.value, (f"time domain: least energy per turn-off ({best.energy:.3g} J) among the "
                        f"E12 values whose worst simulated peak stays within the limit "
                        f"(peak/limit {best.worst_ratio:.3f}); the damping rule gave "
                        f"{rule_value:.3g} ohm"), tuple(tried)


def _smallest_series(design: Design, trials: int, seed: int, pool: WorkerPool | None) -> Design:
    """The smallest device count that passes the whole check with the design's network."""
    layout = design.string
    target = design.sizing.target_p_fail
    start = _minimum_series(design)
    last = min(max(start * 4, layout.series * 2), MAX_DEVICES // layout.parallel)
    for count in range(start, last + 1):
        candidate = _with_series(design, count)
        result = run_check(candidate, trials=trials, seed=seed, pool=pool)
        ran = [check for check in result.checks.values() if check.ran]
        if all(check.estimate.ci_high <= target for check in ran) and not result.impossible:
            return candidate
    raise SizingError(f"no device count up to {last} passes with this network")


def _ratings(design: Design, check: CheckResult) -> GradingSummary:
    """The check's grading summary with the ratings the sized network's parts must have. The
    stack's stored energy and discharge time are taken at the first branch's parts, with their
    mean capacitance (as ``size`` has always reported them; the check's own summary takes every
    branch)."""
    grading, duty, layout = design.grading, design.duty, design.string
    derating = layout.derating
    stages = layout.series * layout.parallel
    nominal = duty.reverse_voltage / layout.series
    static = check.checks["static"].worst_voltage
    worst = check.grading.worst_stage_voltage
    r = grading.resistor
    continuous = float(resistor_power(static, r, waveform="dc")) if r else None
    duty_power = float(resistor_power(static, r, waveform=duty.waveform)) if r else None
    loss = float(stages * resistor_power(nominal, r, waveform=duty.waveform)) if r else None
    c = grading.capacitor
    damping_loss = None
    if c is not None and duty.frequency is not None and duty.waveform != "dc":
        # Each cycle the capacitor charges and discharges through R_d: C V^2 f per stage.
        damping_loss = c * nominal ** 2 * duty.frequency
    junction = np.array([design.parts[name].c_j for name in layout.part_grid()[0]])
    capacitance = junction + (c or 0.0)
    resistances = np.full(layout.series, np.inf if r is None else r)
    time = float(discharge_time(np.full(layout.series, nominal), resistances, capacitance))
    return replace(
        check.grading,
        resistor_voltage_required=worst / derating if r else None,
        resistor_power_continuous=continuous,
        resistor_power_duty=duty_power,
        resistor_power_required=duty_power / derating if duty_power is not None else None,
        total_grading_loss=loss,
        capacitor_voltage_required=worst / derating if c else None,
        damping_loss_per_stage=damping_loss,
        damping_loss_total=damping_loss * stages if damping_loss is not None else None,
        stage_energy=float(stored_energy(c, worst)) if c else None,
        total_energy=float(stages * stored_energy(capacitance.mean(), nominal)),
        discharge_time=time,
        derating=derating,
    )

