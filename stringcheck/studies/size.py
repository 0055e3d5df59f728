"""Size the grading network: R, C, damping resistor R_d and, optionally, the device count.

The search runs the series check on common random numbers: the same seed draws the same devices and
the same latent component tolerances for every candidate value, so a candidate is judged on exactly
the strings its neighbours were judged on. Raising every nominal R scales every drawn resistance by the
same factor, which never lowers the worst static voltage; raising C never raises the worst dynamic
voltage (both are properties of the solvers, tested there). The pass/fail of a candidate is therefore
monotone along the preferred-value ladder, and a bisection over the ladder finds the boundary.

A candidate passes when the upper bound of its P(fail) (exact Clopper-Pearson at the design's confidence)
is at most ``[sizing] target_p_fail``. The ladder searched is cut to the engineering constraints of
``[sizing]`` (``physics.grading_limits``): a grading current at least ``grading_current_multiple``
times the hottest maximum leakage, a discharge below 60 V within ``discharge_time`` (counting
``duty.load_capacitance``), C at least ``capacitance_multiple`` x (C_j + ``stray_capacitance``), and
what the parts can realise (``resistor_min`` ... ``capacitor_max``). Each proposed value carries the
limit that bound it (a ``Finding``).

A value chosen at the edge of one sample's statistics is confirmed on an independent sample (new
random streams, as many trials; the rare-event estimator where the plain run cannot decide, as
``check`` does); a value that fails it steps once more along its series, and both runs are kept.

The damping resistor comes from the commutation loop's critical damping, capped so that the step
I_RM R_d at the snap fits the stage's margin (derating x V_RRM less the nominal share); with recovery
data it is then chosen in the time domain over a wide window (a small fraction of the critical value
upwards). A proposal passes every constraint and the final check, or it is not made:
:class:`NoProposal` carries the findings that say what cannot be met and what came closest.
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
from stringcheck.physics.grading_limits import (
    critical_damping_resistance,
    damping_ratio,
    discharge_limited_resistance,
    leakage_limited_resistance,
    recovery_step_voltage,
    stage_capacitance_floor,
    uniform_discharge_time,
)
from stringcheck.physics.leakage import leakage_current
from stringcheck.physics.recovery import peak_current_from_charge
from stringcheck.units import format_quantity
from stringcheck.montecarlo.quantile_maps import spread_quantile
from stringcheck.montecarlo.estimates import trials_for_upper_bound
from stringcheck.checks.findings import Finding, Value
from stringcheck.checks.grading_ratings import GradingSummary
from stringcheck.checks.transient import transient_reason
from stringcheck.studies.check import CheckResult, run_check
from stringcheck.checks.preconditions import with_recovery_charge
from stringcheck.checks.recovery_conditions import recovery_rescaling, rescale_charges
from stringcheck.montecarlo.executor import WorkerPool, worker_pool

__all__ = ["Candidate", "Confirmation", "DampingChoice", "LadderChoice", "NoProposal",
           "SizingResult", "confirmation_seed", "drawn_limits", "hottest_max_leakage", "size"]

# Critical damping of the stray-inductance ring: damping ratio zeta = 1 (series RLC).
DAMPING_RATIO = 1.0
# The time-domain window of R_d: from this fraction of the critical (or step-limited) value up to
# DAMPING_WINDOW_HIGH times the larger of the two, walked on E6 and refined on E12.
DAMPING_WINDOW_LOW = 1.0 / 30.0
DAMPING_WINDOW_HIGH = 3.0
# Strings simulated per damping candidate: the worst charge-balance ones and a random sample.
_SEARCH_WORST = 20
_SEARCH_SAMPLE = 100
_MAX_CAPACITOR_STEPS = 6
# The E12 refinement of R_d runs where the E3 scan's best peak is below this multiple of the limit.
_REFINE_BELOW = 1.15
# One capacitor step of the time-domain search: about x1.8 whatever the series (a quarter decade).
_CAPACITOR_STEP = {"E6": 1, "E12": 3, "E24": 6, "E48": 12, "E96": 24, "E192": 48}
# A capacitor placed at every stage only to read the parts' recovery data [F] (its value does
# not enter).
_ANY_CAPACITOR = 1e-9
# Spawn key of the confirmation's streams, apart from every stream of the draws.
_CONFIRMATION_STREAM = 0x51_2E


@dataclass(frozen=True)
class Candidate:
    """One value tried by the search and how it fared (P(fail) with its exact interval; the worst
    and 99th-percentile stage voltage over its limit)."""

    value: float
    passed: bool
    failures: int
    p_fail_upper: float
    worst_ratio: float
    p_fail: float = math.nan
    p_fail_lower: float = math.nan
    p99_ratio: float = math.nan
    trials: int = 0
    seed: int | None = None
    # Decided by the rare-event estimator (the plain run could not show the target).
    rare: bool = False


@dataclass(frozen=True)
class LadderChoice:
    """The chosen preferred value and its rejected neighbour (None at the end of the ladder).

    ``bound`` is the limit that bound the value (``size.bound.*``); ``curve`` every value the
    search evaluated on the search's sample, in increasing order; ``confirmations`` the runs on
    the independent sample (one, or two when the first failed and the value stepped)."""

    series: str
    chosen: Candidate | None
    rejected_neighbour: Candidate | None
    textbook_bound: float | None
    bound: Finding | None = None
    curve: tuple[Candidate, ...] = ()
    confirmations: tuple[Candidate, ...] = ()


Confirmation = Candidate


@dataclass(frozen=True)
class DampingCandidate:
    """One damping resistor tried in the time domain."""

    value: float
    worst_ratio: float
    energy: float
    within_limit: bool


@dataclass(frozen=True)
class DampingChoice:
    """The damping resistor, the rules behind it and its own ratings (SI units; NaN where a
    figure has no basis: no inductance, no di/dt, no frequency)."""

    value: float | None
    bound: Finding
    inductance: float = math.nan
    critical: float = math.nan
    peak_current: float = math.nan
    margin: float = math.nan
    step_limit: float = math.nan
    damping_ratio: float = math.nan
    pulse_voltage: float = math.nan
    energy_per_turn_off: float = math.nan
    power: float = math.nan
    time_domain: bool = False
    candidates: tuple[DampingCandidate, ...] = ()


@dataclass(frozen=True)
class SizingResult:
    """The proposed network, the evidence for it, and the check of the sized design."""

    design: Design
    resistor: LadderChoice
    capacitor: LadderChoice | None
    damping_resistor: float | None
    # The limit or rule that set R_d (a Finding; ``report.wording`` says it).
    damping_rule: Finding
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
    damping: DampingChoice | None = None
    confirmation_seed: int | None = None


class NoProposal(ImpossibleDesignError):
    """No network meets every constraint and check: ``findings`` say which cannot be met and what
    came closest (``size.unmet.*``; rating findings where a rating fails). The message lists their
    codes; ``report.wording`` says them."""

    def __init__(self, findings: tuple[Finding, ...]):
        super().__init__(", ".join(f.code for f in findings))
        self.findings = findings


class _Unmet(Exception):
    """Internal: the network at this device count cannot be made (caught by --find-series)."""

    def __init__(self, findings: list[Finding]):
        super().__init__(findings)
        self.findings = findings


def confirmation_seed(seed: int) -> int:
    """The seed of the confirmation sample: its streams are spawned apart from ``seed``'s
    (``numpy.random.SeedSequence`` spawn key), so the two samples are independent."""
    state = np.random.SeedSequence(seed, spawn_key=(_CONFIRMATION_STREAM,)).generate_state(
        1, np.uint32)
    value = int(state[0])
    return value if value != seed else value + 1


Evaluate = Callable[[float], Candidate]


def size(design: Design, *, trials: int | None = None, seed: int | None = None,
         resistor_series: str | None = None, capacitor_series: str | None = None,
         find_series: bool = False, progress: Callable[[str], None] | None = None,
         workers: int = 1, transient: bool | None = None, confirm: bool = True) -> SizingResult:
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
        Choose the damping resistor in the time domain and run the final check with the transient.
        None (default): whenever the design has the recovery data the transient needs; False skips
        it.
    confirm
        Confirm R and C on an independent sample (default; False only for studies of the search).

    Raises
    ------
    NoProposal
        When no network meets every constraint and the final check (with what came closest).
    SizingError
        When the trials cannot show the target at all.
    """
    with worker_pool(workers) as pool:
        return _size(design, trials=trials, seed=seed, resistor_series=resistor_series,
                     capacitor_series=capacitor_series, find_series=find_series,
                     progress=progress, pool=pool, transient=transient, confirm=confirm)


def _evaluate(check_name: str, design: Design, trials: int, seed: int, pool: WorkerPool | None,
              value: float, *, rare: bool | None = False) -> Candidate:
    """Run one series check of ``design`` and keep its figures as a candidate of ``value``."""
    result = run_check(design, trials=trials, seed=seed, only=(check_name,), pool=pool, rare=rare)
    outcome = result.checks[check_name]
    estimate = outcome.estimate
    decided_rare = outcome.rare is not None and bool(getattr(outcome.rare, "decides", False))
    upper = float(outcome.rare.ci_high) if decided_rare else float(estimate.ci_high)
    return Candidate(value=value, passed=bool(outcome.passed), failures=int(estimate.failures),
                     p_fail_upper=upper, worst_ratio=float(outcome.worst_ratio),
                     p_fail=float(estimate.p_fail), p_fail_lower=float(estimate.ci_low),
                     p99_ratio=float(outcome.p99_ratio), trials=trials, seed=seed,
                     rare=decided_rare)


def _item(name: str) -> Value:
    return Value(name)


def _p_fail_bound(item: str, check: str, chosen: Candidate, rejected: Candidate,
                  target: float, unit: str) -> Finding:
    return Finding("size.bound.p_fail", {
        "item": _item(item), "check": Value(check), "value": Value(chosen.value, unit),
        "p_fail_upper": Value(chosen.p_fail_upper), "failures": Value(chosen.failures),
        "next": Value(rejected.value, unit), "next_p_fail_upper": Value(rejected.p_fail_upper)},
        Value(target))


def _unmet_p_fail(item: str, check: str, closest: Candidate, target: float, unit: str,
                  low: float, high: float) -> Finding:
    return Finding("size.unmet.p_fail", {
        "item": _item(item), "check": Value(check), "value": Value(closest.value, unit),
        "p_fail_upper": Value(closest.p_fail_upper), "failures": Value(closest.failures),
        "low": Value(low, unit), "high": Value(high, unit)}, Value(target))


def _unmet_range(item: str, low: Finding, high: Finding, unit: str) -> Finding:
    """The constraints on ``item`` leave no value: ``low`` (a lower limit's finding) is above
    ``high`` (an upper limit's)."""
    return Finding("size.unmet.range", {
        "item": _item(item), "low_code": Value(low.code), "high_code": Value(high.code),
        "low": Value(low.limit.number, unit), "high": Value(high.limit.number, unit)})


def hottest_max_leakage(design: Design) -> float:
    """The hottest device's maximum leakage [A]: each part's max (typ where none is given) at its
    datasheet voltage, carried to the hottest position it can hold (as the check's grading summary
    takes it)."""
    hottest = 0.0
    for name in design.parts_used():
        part = design.parts[name]
        spread = part.i_r
        maximum = spread.high if spread.high is not None else spread.typ
        values = leakage_current(maximum, spread.at_voltage, _part_temperatures(design, name),
                                 reference_voltage=spread.at_voltage,
                                 reference_temperature=spread.at_temperature,
                                 doubling_temperature=part.doubling_temperature,
                                 voltage_exponent=part.voltage_exponent)
        hottest = max(hottest, float(np.max(values)))
    return hottest


def _junction_capacitance(design: Design) -> float:
    """The largest C_j of the parts used [F] (the stage's own capacitance, conservative)."""
    return max(design.parts[name].c_j for name in design.parts_used())


def _resistor_top(design: Design) -> Finding:
    """The tightest upper limit on R (grading current, or what the parts realise), as the finding
    that names it; its ``limit`` is the value [ohm]."""
    limits = design.sizing
    n = design.string.series
    stage = design.duty.reverse_voltage / n
    leakage = hottest_max_leakage(design)
    realisable = Finding("size.bound.resistor_max", {"item": _item("resistor")},
                         Value(limits.resistor_max, "ohm"))
    if not leakage > 0:
        return realisable
    value = float(leakage_limited_resistance(stage, leakage, limits.grading_current_multiple))
    if value >= limits.resistor_max:
        return realisable
    return Finding("size.bound.grading_current", {
        "item": _item("resistor"), "multiple": Value(limits.grading_current_multiple),
        "leakage": Value(leakage, "A"), "stage_voltage": Value(stage, "V"),
        "current": Value(limits.grading_current_multiple * leakage, "A")}, Value(value, "ohm"))


def _capacitor_floor(design: Design) -> Finding:
    """The tightest lower limit on C (the stage's own capacitance, or what the parts realise)."""
    limits = design.sizing
    junction = _junction_capacitance(design)
    value = float(stage_capacitance_floor(junction, limits.stray_capacitance,
                                          limits.capacitance_multiple))
    if value <= limits.capacitor_min:
        return Finding("size.bound.capacitor_min", {"item": _item("capacitor")},
                       Value(limits.capacitor_min, "F"))
    return Finding("size.bound.stage_capacitance", {
        "item": _item("capacitor"), "multiple": Value(limits.capacitance_multiple),
        "junction": Value(junction, "F"), "stray": Value(limits.stray_capacitance, "F")},
        Value(value, "F"))


def _discharge_limit(design: Design, capacitor: float | None) -> tuple[Finding, float]:
    """The largest R that discharges the stack below 60 V within ``[sizing] discharge_time``,
    with ``capacitor`` (None: none) and ``duty.load_capacitance``."""
    limits = design.sizing
    n = design.string.series
    stage_capacitance = (capacitor or 0.0) + _junction_capacitance(design)
    value = float(discharge_limited_resistance(design.duty.reverse_voltage, stage_capacitance,
                                               design.duty.load_capacitance, n,
                                               limits.discharge_time))
    return Finding("size.bound.discharge", {
        "item": _item("resistor"), "stage_capacitance": Value(stage_capacitance, "F"),
        "load_capacitance": Value(design.duty.load_capacitance, "F"), "series": Value(n)},
        Value(limits.discharge_time, "s")), value


def _size(design: Design, *, trials: int | None, seed: int | None, resistor_series: str | None,
          capacitor_series: str | None, find_series: bool,
          progress: Callable[[str], None] | None, pool: WorkerPool | None,
          transient: bool | None, confirm: bool) -> SizingResult:
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
    second_seed = confirmation_seed(seed) if confirm else None

    def network(design: Design) -> tuple[LadderChoice, LadderChoice | None, Design]:
        """Size R (and C) for the design's device count; _Unmet when none meets every limit."""
        return _network(design, trials=trials, seed=seed, second_seed=second_seed,
                        r_series=r_series, c_series=c_series, pool=pool, say=say)

    # With --find-series a count too short for any network is lengthened until one exists; the
    # smallest count that passes with that network is searched below.
    count_limit = max(2 * design.string.series, _minimum_series(design) + 8)
    while True:
        try:
            resistor, capacitor, sized = network(design)
            break
        except _Unmet as unmet:
            if not find_series or design.string.series >= count_limit:
                raise NoProposal(tuple(unmet.findings)) from None
            design = _with_series(design, design.string.series + 1)
            say(f"no network at the present count; trying {design.string.series} devices")

    time_domain = transient
    if time_domain is None:
        time_domain = sized.grading.capacitor is not None and not transient_reason(sized)
    damping = _damping_rule(sized)
    advisories: list[Finding] = []
    if time_domain and damping.value is not None:
        last_tried, last_capacitor = damping, sized.grading.capacitor
        for _ in range(_MAX_CAPACITOR_STEPS + 1):
            say("damping resistor (time domain)")
            tried = _damping_in_time_domain(sized, damping, trials, seed, pool)
            if tried is None:  # the transient cannot run for this design
                advisories.append(Finding("size.transient_not_run",
                                          causes=(transient_reason(sized),)))
                time_domain = False
                break
            damping = last_tried = tried
            last_capacitor = sized.grading.capacitor
            if damping.time_domain:
                break
            previous = sized.grading.capacitor
            larger = float(eseries.step(previous, c_series, _CAPACITOR_STEP[c_series]))
            if larger > sized.sizing.capacitor_max:
                break
            advisories.append(Finding("size.capacitor_raised", {"previous": Value(previous, "F"),
                                                                "raised": Value(larger, "F")}))
            raised = advisories[-1]
            sized = replace(sized, grading=replace(sized.grading, capacitor=larger))
            # The raised value on the search's sample (it passes there: more C never worsens
            # the charge balance), the proposal's figures and a point of the curve.
            at_raised = _evaluate("dynamic", sized, trials, seed, pool, larger)
            capacitor = replace(capacitor, chosen=at_raised, rejected_neighbour=None, bound=raised,
                                curve=tuple(sorted(capacitor.curve + (at_raised,),
                                                   key=lambda c: c.value)))
            resistor = _clamp_for_discharge(sized, resistor, trials, seed, pool)
            sized = replace(sized, grading=replace(sized.grading, resistor=resistor.chosen.value))
            damping = _damping_rule(sized)
        if not damping.time_domain and time_domain:
            tried_values = last_tried.candidates
            closest = min(tried_values, key=lambda c: c.worst_ratio)
            raise NoProposal((Finding("size.unmet.transient", {
                "low": Value(min(c.value for c in tried_values), "ohm"),
                "high": Value(max(c.value for c in tried_values), "ohm"),
                "capacitor": Value(last_capacitor, "F"),
                "value": Value(closest.value, "ohm"), "ratio": Value(closest.worst_ratio)}),))
    if damping.value is not None:
        sized = replace(sized, grading=replace(sized.grading, damping_resistor=damping.value))

    series_count = sized.string.series
    if find_series:
        say("device count")
        sized = _smallest_series(sized, trials, seed, pool)
        series_count = sized.string.series

    say("final check")
    check = run_check(sized, trials=trials, seed=seed, pool=pool, transient=bool(time_domain))
    unmet = _final_unmet(check, sized)
    if unmet:
        raise NoProposal(tuple(unmet))
    ratings = _ratings(sized, check)
    damping = _damping_ratings(sized, damping, check)
    advisories += list(check.grading.advisories)
    if sized.grading.capacitor is not None and damping.value is not None and not time_domain:
        recovery = [sized.parts[name].t_rr.typ for name in sized.parts_used()
                    if sized.parts[name].t_rr is not None]
        if recovery and damping.value * sized.grading.capacitor > min(recovery):
            advisories.append(Finding(
                "size.damping_slower_than_recovery",
                {"time_constant": Value(damping.value * sized.grading.capacitor, "s")},
                Value(min(recovery), "s")))
    return SizingResult(design=sized, resistor=resistor, capacitor=capacitor,
                        damping_resistor=damping.value, damping_rule=damping.bound,
                        series_count=series_count, series_searched=find_series, ratings=ratings,
                        check=check, target_p_fail=target, advisories=tuple(advisories),
                        damping_candidates=damping.candidates, damping=damping,
                        confirmation_seed=second_seed)


def _final_unmet(check: CheckResult, design: Design) -> list[Finding]:
    """What keeps the final check of the sized network from passing (empty when it passes)."""
    if check.verdict == "pass":
        return []
    grading = design.grading
    network = {"resistor": Value(grading.resistor, "ohm"),
               "capacitor": Value(grading.capacitor or math.nan, "F"),
               "damping_resistor": Value(grading.damping_resistor or math.nan, "ohm")}
    found = []
    for name, outcome in check.checks.items():
        if outcome.ran and not outcome.passed:
            upper = outcome.estimate.ci_high if outcome.estimate is not None else math.nan
            found.append(Finding("size.unmet.check", {
                "check": Value(name), "p_fail_upper": Value(float(upper)),
                "ratio": Value(float(outcome.worst_ratio)), **network},
                Value(check.target_p_fail)))
    found += list(check.grading.rating_problems)
    if not found:
        found.append(Finding("size.unmet.verdict", {"verdict": Value(check.verdict), **network}))
    return found


def _network(design: Design, *, trials: int, seed: int, second_seed: int | None, r_series: str,
             c_series: str, pool: WorkerPool | None, say: Callable[[str], None]
             ) -> tuple[LadderChoice, LadderChoice | None, Design]:
    limits = design.sizing
    target = limits.target_p_fail

    def with_resistor(base: Design, value: float) -> Design:
        return replace(base, grading=replace(base.grading, resistor=value))

    def with_capacitor(base: Design, value: float) -> Design:
        return replace(base, grading=replace(base.grading, capacitor=value))

    # R: the largest preferred value that passes, below the tightest upper limit.
    top = _resistor_top(design)
    bottom = Finding("size.bound.resistor_min", {"item": _item("resistor")},
                     Value(limits.resistor_min, "ohm"))
    r_high = float(top.limit.number)
    ladder = eseries.values_between(limits.resistor_min, r_high, r_series) \
        if r_high >= limits.resistor_min else np.array([])
    if ladder.size == 0:
        raise _Unmet([_unmet_range("resistor", bottom, top, "ohm")])
    say(f"resistor ({r_series})")
    resistor = _search(
        lambda value: _evaluate("static", with_resistor(design, value), trials, seed, pool, value),
        r_series, ladder, _static_bound(design), larger_is_harder=True)
    if resistor.chosen is None:
        raise _Unmet([_unmet_p_fail("resistor", "static", resistor.rejected_neighbour, target,
                                    "ohm", float(ladder[0]), float(ladder[-1]))])
    bound = top if resistor.rejected_neighbour is None else _p_fail_bound(
        "resistor", "static", resistor.chosen, resistor.rejected_neighbour, target, "ohm")
    resistor = replace(resistor, bound=bound)
    sized = with_resistor(design, resistor.chosen.value)

    capacitor = None
    dynamic_needed = not (design.duty.waveform == "dc" and design.duty.di_dt is None)
    if dynamic_needed:
        floor = _capacitor_floor(design)
        ceiling = Finding("size.bound.capacitor_max", {"item": _item("capacitor")},
                          Value(limits.capacitor_max, "F"))
        c_low = float(floor.limit.number)
        ladder = eseries.values_between(c_low, limits.capacitor_max, c_series) \
            if c_low <= limits.capacitor_max else np.array([])
        if ladder.size == 0:
            raise _Unmet([_unmet_range("capacitor", floor, ceiling, "F")])
        say(f"capacitor ({c_series})")
        base = sized
        capacitor = _search(
            lambda value: _evaluate("dynamic", with_capacitor(base, value), trials, seed, pool,
                                    value),
            c_series, ladder, _dynamic_bound(sized), larger_is_harder=False)
        if capacitor.chosen is None:
            raise _Unmet([_unmet_p_fail("capacitor", "dynamic", capacitor.rejected_neighbour,
                                        target, "F", float(ladder[0]), float(ladder[-1]))])
        bound = floor if capacitor.rejected_neighbour is None else _p_fail_bound(
            "capacitor", "dynamic", capacitor.chosen, capacitor.rejected_neighbour, target, "F")
        capacitor = replace(capacitor, bound=bound)
        if second_seed is not None:
            say("capacitor (independent sample)")
            capacitor = _confirm(capacitor, "capacitor", "dynamic",
                                 lambda value: with_capacitor(base, value), +1,
                                 limits.capacitor_max, trials, second_seed, pool, target, "F")
        sized = with_capacitor(sized, capacitor.chosen.value)

    resistor = _clamp_for_discharge(sized, resistor, trials, seed, pool)
    sized = with_resistor(sized, resistor.chosen.value)
    if second_seed is not None:
        say("resistor (independent sample)")
        base = sized
        resistor = _confirm(resistor, "resistor", "static", lambda value: with_resistor(base, value),
                            -1, limits.resistor_min, trials, second_seed, pool, target, "ohm")
        sized = with_resistor(sized, resistor.chosen.value)
    return resistor, capacitor, sized


def _clamp_for_discharge(design: Design, resistor: LadderChoice, trials: int, seed: int,
                         pool: WorkerPool | None) -> LadderChoice:
    """``resistor`` lowered to the discharge limit where it discharges the stack too slowly
    (a lower R never worsens the static sharing, so the lowered value still passes)."""
    limit, value = _discharge_limit(design, design.grading.capacitor)
    if resistor.chosen.value <= value:
        return resistor
    lowered = float(eseries.round_down(value, resistor.series))
    if lowered < design.sizing.resistor_min:
        bottom = Finding("size.bound.resistor_min", {"item": _item("resistor")},
                         Value(design.sizing.resistor_min, "ohm"))
        raise _Unmet([_unmet_range("resistor", bottom, replace(limit, limit=Value(value, "ohm")),
                                   "ohm")])
    checked = _evaluate("static", replace(design, grading=replace(design.grading,
                                                                  resistor=lowered)),
                        trials, seed, None, lowered)
    time = float(uniform_discharge_time(design.duty.reverse_voltage, lowered,
                                        limit.number("stage_capacitance"),
                                        design.duty.load_capacitance, design.string.series))
    bound = Finding(limit.code, {**limit.values, "time": Value(time, "s"),
                                 "resistance": Value(value, "ohm")}, limit.limit)
    curve = tuple(sorted(resistor.curve + (checked,), key=lambda c: c.value))
    return replace(resistor, chosen=checked, rejected_neighbour=None, bound=bound, curve=curve)


def _confirm(choice: LadderChoice, item: str, check: str, designed: Callable[[float], Design],
             direction: int, end: float, trials: int, seed: int, pool: WorkerPool | None,
             target: float, unit: str) -> LadderChoice:
    """Confirm ``choice`` on the independent sample ``seed``; one step along the series
    (``direction``: -1 down for R, +1 up for C, never past ``end``) where it fails."""
    first = _evaluate(check, designed(choice.chosen.value), trials, seed, pool,
                      choice.chosen.value, rare=None)
    if first.passed:
        return replace(choice, confirmations=(first,))
    stepped = float(eseries.step(choice.chosen.value, choice.series, direction))
    past = stepped < end if direction < 0 else stepped > end
    second = None if past else _evaluate(check, designed(stepped), trials, seed, pool, stepped,
                                         rare=None)
    if second is None or not second.passed:
        closest = second or first
        raise _Unmet([Finding("size.unmet.confirmation", {
            "item": _item(item), "check": Value(check), "value": Value(closest.value, unit),
            "first": Value(first.value, unit), "p_fail_upper": Value(closest.p_fail_upper),
            "failures": Value(closest.failures), "seed": Value(seed)}, Value(target))])
    bound = Finding("size.bound.confirmation", {
        "item": _item(item), "check": Value(check), "first": Value(first.value, unit),
        "first_p_fail_upper": Value(first.p_fail_upper), "first_failures": Value(first.failures),
        "value": Value(stepped, unit), "p_fail_upper": Value(second.p_fail_upper),
        "failures": Value(second.failures), "seed": Value(seed)}, Value(target))
    # The stepped value on the search's own sample: it passes there too (monotone), for the curve.
    on_search = _evaluate(check, designed(stepped), trials, choice.chosen.seed, pool, stepped)
    curve = tuple(sorted(choice.curve + (on_search,), key=lambda c: c.value))
    return replace(choice, chosen=on_search, rejected_neighbour=choice.chosen, bound=bound,
                   curve=curve, confirmations=(first, second))


def _search(evaluate: Evaluate, series: str, ladder: np.ndarray, start: float | None, *,
            larger_is_harder: bool) -> LadderChoice:
    """Bisection along the preferred-value ``ladder`` (increasing) for the pass/fail boundary.

    ``larger_is_harder``: True for R (choose the largest passing value), False for C (the smallest).
    """
    cache: dict[int, Candidate] = {}

    def at(index: int) -> Candidate:
        if index not in cache:
            cache[index] = evaluate(float(ladder[index]))
        return cache[index]

    def done(chosen: int | None, rejected: int | None) -> LadderChoice:
        curve = tuple(cache[i] for i in sorted(cache))
        return LadderChoice(series, None if chosen is None else at(chosen),
                            None if rejected is None else at(rejected), bound, curve=curve)

    # "good" = passes. For R, passing indices form a prefix; for C a suffix.
    def good(index: int) -> bool:
        return at(index).passed

    # The corner is reported as given (None: there is none); the search starts mid-range then.
    bound = start if start is not None and math.isfinite(start) and start > 0 else None
    if bound is None:
        start = float(np.sqrt(ladder[0] * ladder[-1]))
    middle = int(np.clip(np.searchsorted(ladder, start), 0, len(ladder) - 1))
    step = len(eseries.series_values(series))  # one decade of the ladder
    last = len(ladder) - 1
    # Bracket: find a passing and a failing index around the start, a decade at a time.
    if larger_is_harder:
        low, high = middle, middle
        if good(middle):
            while high < last and good(high):
                low, high = high, min(high + step, last)
            if good(high):
                return done(high, None)
        else:
            while low > 0 and not good(low):
                high, low = low, max(low - step, 0)
            if not good(low):
                return done(None, low)
        while high - low > 1:
            mid = (low + high) // 2
            low, high = (mid, high) if good(mid) else (low, mid)
        return done(low, high)
    low, high = middle, middle
    if good(middle):
        while low > 0 and good(low):
            high, low = low, max(low - step, 0)
        if good(low):
            return done(low, None)
    else:
        while high < last and not good(high):
            low, high = high, min(high + step, last)
        if not good(high):
            return done(None, high)
    while high - low > 1:
        mid = (low + high) // 2
        low, high = (low, mid) if good(mid) else (mid, high)
    return done(high, low)


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
                                                     capacitor=_ANY_CAPACITOR))
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


def _loop_inductance(design: Design) -> tuple[float | None, str]:
    """The commutation-loop inductance [H] and where it comes from (``duty.stray_inductance``,
    else V_s / (di/dt): the inductance that sets the turn-off slope at the string voltage)."""
    duty = design.duty
    if duty.stray_inductance is not None:
        return duty.stray_inductance, "duty.stray_inductance"
    if duty.di_dt is not None:
        return duty.reverse_voltage / duty.di_dt, "di_dt"
    return None, ""


def _peak_recovery_current(design: Design) -> float | None:
    """The largest I_RM [A] the draws give at the application's turn-off: sqrt(2 Q_rr di/dt)
    (``physics.recovery.peak_current_from_charge``) at each part's greatest drawn Q_rr, carried to
    the application's I_F and di/dt as the dynamic check carries it; None without di/dt or Q_rr."""
    if design.duty.di_dt is None:
        return None
    try:
        design = with_recovery_charge(design)
    except DesignError:
        return None
    if any(design.parts[name].q_rr is None for name in design.parts_used()):
        return None
    rescaling, _ = recovery_rescaling(design)
    highs = []
    for name in design.parts_used():
        limits = np.array(drawn_limits(design, name, "q_rr"))
        if rescaling is not None:
            limits = rescale_charges(limits.reshape(1, 1, 2), np.full((1, 2), name, dtype=object),
                                     rescaling).reshape(2)
        highs.append(float(limits[1]))
    return float(peak_current_from_charge(max(highs), design.duty.di_dt))


def _damping_rule(design: Design) -> DampingChoice:
    """R_d from the diode rules: critical damping of the commutation loop, 2 sqrt(L / (n C)),
    rounded up to E12, unless the step I_RM R_d at the snap would then exceed the stage's margin
    (derating x V_RRM less the nominal share V_s / n): then the largest E12 value within it."""
    grading = design.grading
    if grading.capacitor is None:
        return DampingChoice(None, Finding("size.damping.no_capacitor"))
    n = design.string.series
    inductance, source = _loop_inductance(design)
    current = _peak_recovery_current(design)
    _, v_dm = _corner_limits(design)
    margin = v_dm - design.duty.reverse_voltage / n
    if inductance is None:
        if grading.damping_resistor is not None:
            return DampingChoice(grading.damping_resistor, Finding("size.damping.kept", {
                "value": Value(grading.damping_resistor, "ohm")}))
        return DampingChoice(None, Finding("size.damping.not_sized"))
    critical = float(critical_damping_resistance(inductance, grading.capacitor, n)) * DAMPING_RATIO
    step_limit = margin / current if current else math.inf
    shared = {"critical": Value(critical, "ohm"), "inductance": Value(inductance, "H"),
              "inductance_source": Value(source), "series": Value(n),
              "capacitor": Value(grading.capacitor, "F")}
    rounded = float(eseries.round_up(critical, "E12"))
    if rounded <= step_limit:
        value = rounded
        bound = Finding("size.bound.critical_damping", {"value": Value(value, "ohm"), **shared})
    else:
        value = float(eseries.round_down(step_limit, "E12")) if step_limit > 0 else math.nan
        bound = Finding("size.bound.recovery_step", {
            "value": Value(value, "ohm"), "peak_current": Value(current, "A"),
            "step": Value(float(recovery_step_voltage(current, value)), "V"), **shared},
            Value(margin, "V"))
        if not value > 0:
            raise NoProposal((Finding("size.unmet.damping_margin", {
                "limit_voltage": Value(v_dm, "V"),
                "share": Value(design.duty.reverse_voltage / n, "V")}),))
    return DampingChoice(value, bound, inductance=inductance, critical=critical,
                         peak_current=math.nan if current is None else current, margin=margin,
                         step_limit=step_limit,
                         damping_ratio=float(damping_ratio(value, inductance, grading.capacitor, n)))


def _damping_in_time_domain(design: Design, rule: DampingChoice, trials: int, seed: int,
                            pool: WorkerPool | None) -> DampingChoice | None:
    """R_d chosen in the time domain, in the window from ``DAMPING_WINDOW_LOW`` x the smaller of
    the critical and the step-limited value up to ``DAMPING_WINDOW_HIGH`` x the larger: a descent
    along E6 from the critical value to the valley of the worst simulated peak (the worst
    charge-balance strings and a random sample), refined on E12; the value whose peak is lowest
    among those within derating x V_RRM (the least energy per turn-off on a tie). ``time_domain`` False in the result when none keeps the peak within the limit;
    None when the transient cannot run for this design."""
    known = [v for v in (rule.critical, rule.step_limit, rule.value) if math.isfinite(v) and v > 0]
    low, high = min(known) * DAMPING_WINDOW_LOW, max(known) * DAMPING_WINDOW_HIGH
    tried: dict[float, DampingCandidate] = {}

    def run(value: float) -> DampingCandidate | None:
        if value in tried:
            return tried[value]
        candidate = replace(design, grading=replace(design.grading, damping_resistor=value))
        result = run_check(candidate, trials=trials, seed=seed, only=("dynamic",), pool=pool,
                           transient=True, transient_worst=_SEARCH_WORST,
                           transient_sample=_SEARCH_SAMPLE)
        check = result.checks["transient"]
        if not check.ran:
            return None
        tried[value] = DampingCandidate(value=value, worst_ratio=check.worst_ratio,
                                        energy=check.damping_energy,
                                        within_limit=bool(within_limit(check.worst_ratio)))
        return tried[value]

    # The worst peak falls with R_d while R_d damps the ring and rises again once the step
    # I_RM R_d dominates: a descent along E6 from the critical value finds the valley, and E12
    # refines it. The window bounds the walk.
    ladder = eseries.values_between(eseries.round_down(low, "E6"), high, "E6")
    start = rule.critical if math.isfinite(rule.critical) else rule.value
    index = int(np.clip(np.searchsorted(ladder, start), 0, len(ladder) - 1))
    if run(float(ladder[index])) is None:
        return None
    for direction in (-1, +1):
        position = index
        while 0 <= position + direction < len(ladder):
            here = run(float(ladder[position]))
            there = run(float(ladder[position + direction]))
            if there.worst_ratio >= here.worst_ratio:
                break
            position += direction

    def best() -> DampingCandidate | None:
        good = [c for c in tried.values() if c.within_limit]
        return min(good, key=lambda c: (c.worst_ratio, c.energy)) if good else None

    centre = best() or min(tried.values(), key=lambda c: c.worst_ratio)
    # Refine on E12 only where the scan came near the limit; far from it the capacitor steps up.
    near = centre.within_limit or centre.worst_ratio < _REFINE_BELOW
    for steps in (-1, 1) if near else ():
        value = float(eseries.step(eseries.round_up(centre.value, "E12"), "E12", steps))
        if low <= value <= high:
            run(value)
    chosen = best()
    candidates = tuple(sorted(tried.values(), key=lambda c: c.value))
    if chosen is None:
        return replace(rule, candidates=candidates, time_domain=False)
    bound = Finding("size.bound.time_domain", {
        "value": Value(chosen.value, "ohm"), "ratio": Value(chosen.worst_ratio),
        "low": Value(low, "ohm"), "high": Value(high, "ohm"),
        "critical": Value(rule.critical, "ohm"), "step_limit": Value(rule.step_limit, "ohm"),
        "rule": Value(rule.value, "ohm")})
    n = design.string.series
    return replace(rule, value=chosen.value, bound=bound, candidates=candidates, time_domain=True,
                   damping_ratio=float(damping_ratio(chosen.value, rule.inductance,
                                                     design.grading.capacitor, n)))


def _damping_ratings(design: Design, damping: DampingChoice, check: CheckResult) -> DampingChoice:
    """R_d's own ratings: the pulse voltage I_RM R_d at the snap, the energy per turn-off (the
    simulated one where the transient ran, else C V^2 / 2 at the worst stage voltage: charging a
    capacitor through a resistor dissipates the energy it stores, Nilsson & Riedel, Electric
    Circuits, chapter 7) and the power at the duty's frequency, the turn-off's energy plus the
    turn-on discharge C (V_s / n)^2 / 2 through R_d, each cycle."""
    value, capacitor = damping.value, design.grading.capacitor
    if value is None or capacitor is None:
        return damping
    transient = check.checks.get("transient")
    ran = transient is not None and transient.ran
    current = float(transient.peak_recovery_current) if ran else damping.peak_current
    energy = float(transient.damping_energy) if ran else float(
        stored_energy(capacitor, check.grading.worst_stage_voltage))
    frequency = design.duty.frequency
    nominal = design.duty.reverse_voltage / design.string.series
    power = (energy + float(stored_energy(capacitor, nominal))) * frequency \
        if frequency is not None and design.duty.waveform != "dc" else math.nan
    return replace(damping, pulse_voltage=float(recovery_step_voltage(current, value)),
                   energy_per_turn_off=energy, power=power)


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
    raise NoProposal((Finding("size.unmet.series", {"first": Value(start), "last": Value(last)}),))


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

