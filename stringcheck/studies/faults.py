"""Single faults of the string, judged on the same built strings as the check (``check --faults``).

For every single fault of each kind chosen (``[faults] kinds``, default all that apply), the series
checks (static and dynamic voltage sharing) are solved again on the very draws of the check (same
seed, same trials) with the fault in place, and each faulted string is judged against the same
limits and the same target as the check:

* ``device_short``: a device fails short. Its stage (device and grading network) carries no
  voltage; the other stages of its branch share the string voltage.
* ``resistor_open``: a grading resistor fails open. Its stage's static voltage is set by the
  leakage balance alone; the turn-off sharing is unchanged.
* ``capacitor_open``: a grading capacitor fails open. Its stage keeps only its junction
  capacitance in the charge balance; the static sharing is unchanged.
* ``capacitor_short``: a grading capacitor fails short. It puts the damping resistor (kilo-ohms)
  across its stage, against grading resistors of mega-ohms: the stage is taken as shorted in
  both checks, so the other stages share as for a shorted device (the same stage voltages).
* ``damping_open``: a damping resistor fails open. It disconnects its stage's grading capacitor,
  so the charge balance is that of an open capacitor (the same stage voltages).

A fault in one branch of a parallel string changes that branch alone (the branches block the
string voltage side by side); each faulted string's worst stress is the larger of its faulted
branch's and of the other branches' unchanged ones. A faulted string fails when any device of
it is over its limit in either check (or its solve fails); P(fail) is the exact
(Clopper-Pearson) interval of those failures, and a fault passes when its upper bound is within
``[sizing] target_p_fail``, the check's criterion.

Cost: the draws of each chunk are made once and every fault is solved on them (no redraw); the
two kinds that share their stage voltages with another are not solved again, and a fault that
changes one check leaves the other at its unfaulted solve. On a string of n devices in p
branches that is n p solves of both checks (shorts), n p static (open resistors) and n p dynamic
(open capacitors), each of one branch, plus the redundancy count below.

Redundancy: the largest number m of devices that can be shorted and leave a passing string. The
positions are ranked by their single short (most failures, then the worst stress), and the m
worst-ranked of the worst branch are shorted together; m grows until the string fails. (For
positions that are alike, any m positions give the same distribution; with hot or odd
positions the ranking puts the most harmful first, a heuristic, not a search of every
placement.)

Results are plain dataclasses; nothing here formats text.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Callable

import numpy as np

from stringcheck.checks.outcome import Exported, estimate_keys, figure, json_number, listed, records
from stringcheck.checks.outcome import record_or_null
from stringcheck.findings import Finding
from stringcheck.checks.preconditions import dynamic_check_reason, with_recovery_charge
from stringcheck.checks.recovery_conditions import carried_charges, recovery_rescaling
from stringcheck.checks.series import SeriesSetup, dynamic_chunk, series_setup, static_chunk
from stringcheck.design.model import FAULT_KINDS, Design
from stringcheck.errors import DesignError, Setting
from stringcheck.limits import within_limit
from stringcheck.montecarlo.accumulators import PositionSums
from stringcheck.montecarlo.estimates import FailureEstimate, failure_estimate
from stringcheck.montecarlo.sampling import BLOCK_TRIALS, DrawnStrings, chunk_bounds, draw_strings
from stringcheck.montecarlo.temperature_rows import (
    parameter_at_temperature,
    strings_at_temperature,
    temperature_dependent,
)

__all__ = ["FAULT_KINDS", "FaultKind", "FaultOutcome", "FaultStudy", "Redundancy", "run_faults"]

# Kinds whose faulted stage voltages are those of another kind (see the module docstring).
SAME_AS = {"capacitor_short": "device_short", "damping_open": "capacitor_open"}
# Trials per chunk: whole sampling blocks (the draws do not depend on it).
_CHUNK_TRIALS = 4 * BLOCK_TRIALS


@dataclass(frozen=True, eq=False, kw_only=True, repr=False)
class FaultOutcome(Exported):
    """One faulted string (or the unfaulted one, kind ``"none"``) over every trial.

    ``branch`` and ``index`` are 1-based (0 for the unfaulted string); ``stage_voltages`` [V] are
    the faulted branch's stage voltages in the trial of the worst stress, one per position (0 at
    a shorted stage), and ``positions`` the shorted or opened positions (several for the
    redundancy count).
    """

    json_order = ("kind", "branch", "index", "positions", "passed", "worst_ratio", "p99_ratio",
                  "static_worst_ratio", "dynamic_worst_ratio", "worst_voltage")

    kind: str = figure()
    branch: int = figure()
    index: int = figure()
    positions: tuple[int, ...] = figure(encode=listed)
    passed: bool = figure()
    worst_ratio: float = figure(encode=json_number)
    p99_ratio: float = figure(encode=json_number)
    static_worst_ratio: float = figure(encode=json_number)
    dynamic_worst_ratio: float = figure(encode=json_number)
    worst_voltage: float = figure(unit="V", encode=json_number)
    estimate: FailureEstimate = figure(encode=estimate_keys, spread=True)
    worst_trial: int = figure()
    stage_voltages: tuple[float, ...] = figure(unit="V", encode=lambda values: [
        json_number(value) for value in values])


@dataclass(frozen=True, eq=False, kw_only=True, repr=False)
class FaultKind(Exported):
    """Every single fault of one kind: the worst of them, whether the string survives each."""

    json_order = ("kind", "ran", "reason", "same_as", "survives", "faults_evaluated", "worst",
                  "faults")

    kind: str = figure()
    ran: bool = figure()
    # Why the kind was not evaluated (a finding; None when it was): its code here, the sentence
    # written in its place by report.faults.
    reason: Finding | None = figure(encode=lambda reason: None if reason is None else reason.code)
    same_as: str = figure()  # the kind whose stage voltages it shares ("" for none)
    survives: bool = figure()  # every fault of the kind passes at the target
    worst: FaultOutcome | None = figure(encode=record_or_null)
    faults: tuple[FaultOutcome, ...] = figure(encode=lambda items: [
        {"branch": item.branch, "index": item.index, "passed": item.passed,
         "worst_ratio": json_number(item.worst_ratio), "p_fail": item.estimate.p_fail,
         "p_fail_ci": [item.estimate.ci_low, item.estimate.ci_high]} for item in items])

    @property
    def faults_evaluated(self) -> int:
        return len(self.faults)

    def to_dict(self):
        data = super().to_dict()
        data["faults_evaluated"] = self.faults_evaluated
        order = {key: data.pop(key) for key in self.json_order if key in data}
        order.update(data)
        return order


@dataclass(frozen=True, eq=False, kw_only=True, repr=False)
class Redundancy(Exported):
    """The largest number of shorted devices that leaves a passing string (``shorted``), the
    positions shorted for it (1-based, in ``branch``), and each count tried."""

    shorted: int = figure()
    branch: int = figure()
    positions: tuple[int, ...] = figure(encode=listed)
    steps: tuple[FaultOutcome, ...] = figure(encode=records)


@dataclass(frozen=True, eq=False, kw_only=True, repr=False)
class FaultStudy(Exported):
    """Every single fault of the kinds asked for, on the check's draws (``check --faults``)."""

    json_order = ("trials", "seed", "target_p_fail", "confidence", "survives", "checks",
                  "baseline", "kinds", "redundancy", "solves")

    trials: int = figure()
    seed: int = figure()
    target_p_fail: float = figure()
    confidence: float = figure()
    checks: tuple[str, ...] = figure(encode=listed)  # the checks a fault is judged on
    survives: bool = figure()  # every single fault of every kind evaluated passes
    baseline: FaultOutcome = figure(encode=record_or_null)
    kinds: tuple[FaultKind, ...] = figure(encode=lambda items: {item.kind: item.to_dict()
                                                                for item in items})
    redundancy: Redundancy | None = figure(encode=record_or_null)
    solves: int = figure()  # branch solves of one check over all trials, the study's cost


@dataclass(frozen=True)
class _Fault:
    kind: str
    branch: int  # 0-based
    shorted: tuple[int, ...] = ()  # 0-based positions taken out of the branch
    resistor_open: int | None = None
    capacitor_open: int | None = None


def check_fault_kinds(kinds, *, source: str = "", key: str = "faults.kinds") -> tuple[str, ...]:
    """``kinds`` as a tuple of known fault kinds; raises DesignError for an unknown one."""
    out = []
    for kind in kinds:
        if kind not in FAULT_KINDS:
            raise DesignError(f"unknown fault kind {kind!r}; valid kinds: {', '.join(FAULT_KINDS)}",
                              source=source, key=key)
        out.append(kind)
    return tuple(dict.fromkeys(out))


def run_faults(design: Design, *, trials: int | None = None, seed: int | None = None,
               kinds: tuple[str, ...] | None = None, redundancy: bool = True,
               progress: Callable[[int, int], None] | None = None) -> FaultStudy:
    """Evaluate every single fault of ``kinds`` (default: ``design.faults.kinds``) on the draws of
    ``run_check(design, trials=trials, seed=seed)``.

    Parameters
    ----------
    design
        A validated design (no mixed stock).
    trials, seed
        Override the design's Monte Carlo settings (as for the check).
    kinds
        Fault kinds among :data:`FAULT_KINDS`.
    redundancy
        Also count the shorted devices the string tolerates.
    progress
        Called with (trials done, trials in all) after each chunk of each pass over the draws.
    """
    trials = design.monte_carlo.trials if trials is None else trials
    seed = design.monte_carlo.seed if seed is None else seed
    if trials < 1:
        raise DesignError(Setting("trials"), f" must be at least 1, got {trials}",
                          key="monte_carlo.trials")
    if design.string.mix is not None:
        raise DesignError("the fault study does not take mixed stock", source=design.source,
                          key="string")
    kinds = check_fault_kinds(design.faults.kinds if kinds is None else kinds,
                              source=design.source)
    shorting = [kind for kind in kinds if kind in ("device_short", "capacitor_short")]
    if design.string.series < 2 and (shorting or redundancy):
        raise DesignError(f"a string of one device in series has no device left when it is "
                          f"shorted ({', '.join(shorting) or 'the redundancy count'}): leave "
                          "device_short and capacitor_short out of faults.kinds, or give "
                          "string.series >= 2", source=design.source, key="faults.kinds")
    # On the initial network (the end-of-life changes are check --end-of-life's).
    design = replace(design, end_of_life=replace(design.end_of_life, enabled=False))
    design = with_recovery_charge(design)
    run_dynamic = dynamic_check_reason(design) is None
    rescaling = recovery_rescaling(design)[0] if run_dynamic else None
    setup = series_setup(design, run_static=True, run_dynamic=run_dynamic, rescaling=rescaling)
    if setup.junction_law:
        raise DesignError("the fault study does not yet take a voltage-dependent junction "
                          "capacitance (c_j given as rows, or a capacitive part): give c_j as one "
                          "value to study faults", source=design.source, key="faults.kinds")
    parameters = ("i_r", "q_rr") if run_dynamic else ("i_r",)
    layout = design.string
    reasons = _kind_reasons(design, run_dynamic)
    faults: list[_Fault] = [_Fault("none", branch) for branch in range(layout.parallel)]
    solved_kinds = [kind for kind in kinds if not reasons[kind] and kind not in SAME_AS]
    for kind in kinds:
        if kind in SAME_AS and not reasons[kind] and SAME_AS[kind] not in solved_kinds:
            solved_kinds.append(SAME_AS[kind])
    for kind in FAULT_KINDS:
        if kind not in solved_kinds:
            continue
        for branch in range(layout.parallel):
            for index in range(layout.series):
                faults.append(_fault(kind, branch, index))
    evaluation = _Evaluation(design, setup, parameters, trials, seed, progress)
    outcomes = evaluation.run(faults)
    baseline = _baseline(evaluation, outcomes[:layout.parallel])
    by_kind: dict[str, list[FaultOutcome]] = {}
    for fault, outcome in zip(faults[layout.parallel:], outcomes[layout.parallel:]):
        by_kind.setdefault(fault.kind, []).append(outcome)
    results = []
    for kind in kinds:
        if reasons[kind]:
            results.append(FaultKind(kind=kind, ran=False, reason=reasons[kind], same_as="",
                                     survives=True, worst=None, faults=()))
            continue
        source_kind = SAME_AS.get(kind, kind)
        items = tuple(replace(item, kind=kind) for item in by_kind[source_kind])
        worst = max(items, key=_severity)
        results.append(FaultKind(kind=kind, ran=True, reason=None, same_as=SAME_AS.get(kind, ""),
                                 survives=all(item.passed for item in items), worst=worst,
                                 faults=items))
    count = None
    if redundancy:
        shorts = by_kind.get("device_short")
        if shorts is None:
            shorts = evaluation.run([_fault("device_short", branch, index)
                                     for branch in range(layout.parallel)
                                     for index in range(layout.series)])
        count = _redundancy(evaluation, shorts)
    return FaultStudy(trials=trials, seed=seed, target_p_fail=design.sizing.target_p_fail,
                      confidence=design.monte_carlo.confidence,
                      checks=("static", "dynamic") if run_dynamic else ("static",),
                      survives=all(item.survives for item in results), baseline=baseline,
                      kinds=tuple(results), redundancy=count, solves=evaluation.solves)


def _kind_reasons(design: Design, run_dynamic: bool) -> dict[str, Finding | None]:
    """Why each kind cannot be evaluated (a finding ``fault.*``; None when it can): its part of
    the network is absent."""
    grading = design.grading
    no_capacitor = Finding("fault.no_capacitor") if grading.capacitor is None else None
    if no_capacitor is None and not run_dynamic:
        no_capacitor = Finding("fault.no_turn_off")
    damping = no_capacitor or (Finding("fault.no_damping_resistor")
                               if grading.damping_resistor is None else None)
    return {"device_short": None,
            "resistor_open": Finding("fault.no_resistor") if grading.resistor is None else None,
            "capacitor_open": no_capacitor,
            "capacitor_short": Finding("fault.no_capacitor")
            if grading.capacitor is None else None,
            "damping_open": damping}


def _fault(kind: str, branch: int, index: int) -> _Fault:
    if kind == "device_short":
        return _Fault(kind, branch, shorted=(index,))
    if kind == "resistor_open":
        return _Fault(kind, branch, resistor_open=index)
    return _Fault(kind, branch, capacitor_open=index)


def _severity(outcome: FaultOutcome) -> tuple[float, float]:
    """The order of the worst fault: most failures, then the highest stress."""
    worst = outcome.worst_ratio
    return (outcome.estimate.failures, worst if math.isfinite(worst) else math.inf)


class _Evaluation:
    """The check's draws, chunk by chunk, and every fault of a list solved on each chunk."""

    def __init__(self, design: Design, setup: SeriesSetup, parameters: tuple[str, ...],
                 trials: int, seed: int, progress: Callable[[int, int], None] | None) -> None:
        self.design, self.setup, self.parameters = design, setup, parameters
        # The drawn leakage and recovery charge are taken to each position's temperature on the
        # whole string, before a fault cuts it; the cut strings are then solved with the parts'
        # temperature laws left out (the values already at temperature).
        self.leakage_rows = temperature_dependent(design, "i_r", rows_only=True)
        self.flat = replace(design, parts={
            name: replace(part, temperature_rows=(), recovery_rates=())
            for name, part in design.parts.items()})
        self.progress = progress
        self.trials, self.seed = trials, seed
        self.solves = 0
        # The unfaulted per-trial worst ratio of each branch, (trials, parallel): static,
        # dynamic, and the larger of the two.
        self.unfaulted: tuple[np.ndarray, np.ndarray] | None = None
        self.branch_ratios: np.ndarray | None = None

    def run(self, faults: list[_Fault]) -> list[FaultOutcome]:
        """Solve every fault of ``faults`` on every chunk of the draws; the unfaulted branches
        (kind ``"none"``) first, whose figures the others take where they leave a check or a
        branch as it is."""
        design, setup = self.design, self.setup
        layout = design.string
        sums = [self._sums(fault) for fault in faults]
        for first, count in chunk_bounds(self.trials, _CHUNK_TRIALS):
            drawn = draw_strings(design, self.parameters, first, count, seed=self.seed)
            values = dict(drawn.parameters)
            if self.leakage_rows:
                values["i_r"] = parameter_at_temperature(design, drawn, "i_r", setup.temperature)
            if setup.run_dynamic:
                warm = strings_at_temperature(design, drawn, setup.temperature, ("q_rr",))
                values["q_rr"] = carried_charges(design, warm, setup.rescaling)
            drawn = replace(drawn, parameters=values)
            for fault, (static, dynamic) in zip(faults, sums):
                kept = tuple(i for i in range(layout.series) if i not in fault.shorted)
                cut = _branch(drawn, fault, kept)
                constants = _branch_setup(setup, fault.branch, kept,
                                          leakage_at_temperature=self.leakage_rows)
                if static is not None:
                    static_chunk(self.flat, cut, static, constants)
                    self.solves += 1
                if dynamic is not None:
                    dynamic_chunk(self.flat, cut, dynamic, constants)
                    self.solves += 1
            if self.progress is not None:
                self.progress(first + count, self.trials)
        ratios = [(self._ratio(fault, static, 0), self._ratio(fault, dynamic, 1))
                  if fault.kind == "none" else None for fault, (static, dynamic) in zip(faults, sums)]
        if any(item is not None for item in ratios):
            static_ratios = np.stack([item[0] for item in ratios if item is not None], axis=1)
            dynamic_ratios = np.stack([item[1] for item in ratios if item is not None], axis=1)
            self.unfaulted = (static_ratios, dynamic_ratios)
            self.branch_ratios = np.maximum(static_ratios, dynamic_ratios)
        return [self._outcome(fault, static, dynamic) for fault, (static, dynamic)
                in zip(faults, sums)]

    def _sums(self, fault: _Fault) -> tuple[PositionSums | None, PositionSums | None]:
        """The accumulators of the checks the fault changes (None: the check as unfaulted)."""
        kept = [i for i in range(self.design.string.series) if i not in fault.shorted]
        limits = self.setup.limits[fault.branch:fault.branch + 1, kept]
        static = None if fault.capacitor_open is not None else PositionSums(limits.shape, limits)
        dynamic = PositionSums(limits.shape, limits) if self.setup.run_dynamic and \
            fault.resistor_open is None else None
        return static, dynamic

    def _outcome(self, fault: _Fault, static: PositionSums | None,
                 dynamic: PositionSums | None) -> FaultOutcome:
        layout = self.design.string
        static_ratio = self._ratio(fault, static, 0)
        dynamic_ratio = self._ratio(fault, dynamic, 1)
        ratio = np.maximum(static_ratio, dynamic_ratio)
        if layout.parallel > 1 and fault.kind != "none":
            others = np.delete(self.branch_ratios, fault.branch, axis=1)
            ratio = np.maximum(ratio, others.max(axis=1))
        failures = int(np.count_nonzero(~within_limit(ratio)))
        estimate = failure_estimate(failures, self.trials,
                                    confidence=self.design.monte_carlo.confidence)
        voltages = self._voltages(fault, static, dynamic, static_ratio, dynamic_ratio)
        finite = ratio[np.isfinite(ratio)]
        positions = fault.shorted or tuple(i for i in (fault.resistor_open, fault.capacitor_open)
                                           if i is not None)
        worst_voltage = max((float(np.max(item.maximum)) for item in (static, dynamic)
                             if item is not None and item.count), default=math.nan)
        return FaultOutcome(
            kind=fault.kind, branch=fault.branch + 1, index=positions[0] + 1 if len(positions) == 1
            else 0, positions=tuple(i + 1 for i in positions),
            passed=estimate.ci_high <= self.design.sizing.target_p_fail,
            worst_ratio=float(np.max(ratio)),
            p99_ratio=float(np.percentile(finite, 99)) if finite.size else math.nan,
            static_worst_ratio=float(np.max(static_ratio)),
            dynamic_worst_ratio=float(np.max(dynamic_ratio)),
            worst_voltage=worst_voltage, estimate=estimate, worst_trial=int(np.argmax(ratio)),
            stage_voltages=voltages)

    def _ratio(self, fault: _Fault, sums: PositionSums | None, check: int) -> np.ndarray:
        """Per-trial worst ratio of the faulted branch in one check (the unfaulted branch's where
        the fault leaves the check as it is)."""
        if sums is not None:
            return np.concatenate(sums.worst_ratios)
        if check == 1 and not self.setup.run_dynamic:
            return np.full(self.trials, -np.inf)
        return self.unfaulted[check][:, fault.branch]

    def _voltages(self, fault, static, dynamic, static_ratio, dynamic_ratio) -> tuple[float, ...]:
        """The faulted branch's stage voltages in the worst trial of the check that set the worst
        stress, 0 at a shorted stage."""
        use_dynamic = dynamic is not None and np.max(dynamic_ratio) > np.max(static_ratio)
        sums = dynamic if use_dynamic else static
        if sums is None or sums.worst_string is None:
            return ()
        values = list(np.asarray(sums.worst_string, dtype=float).reshape(-1))
        for index in sorted(fault.shorted):
            values.insert(index, 0.0)
        return tuple(float(value) for value in values)



def _baseline(evaluation: _Evaluation, outcomes: list[FaultOutcome]) -> FaultOutcome:
    """The unfaulted string: its worst branch's figures, with the P(fail) of the whole string
    (a string fails when any branch does)."""
    worst = max(outcomes, key=_severity)
    failures = int(np.count_nonzero(~within_limit(evaluation.branch_ratios.max(axis=1))))
    estimate = failure_estimate(failures, evaluation.trials,
                                confidence=evaluation.design.monte_carlo.confidence)
    return replace(worst, branch=0, index=0, positions=(), estimate=estimate,
                   passed=estimate.ci_high <= evaluation.design.sizing.target_p_fail)


def _branch(drawn: DrawnStrings, fault: _Fault, kept: tuple[int, ...]) -> DrawnStrings:
    """The drawn devices of the fault's branch, shorted positions left out, with its opened
    resistor or capacitor."""
    rows, columns = slice(fault.branch, fault.branch + 1), list(kept)

    def cut(array):
        return None if array is None else array[:, rows][:, :, columns]

    resistance = cut(drawn.resistance)
    if fault.resistor_open is not None and resistance is not None:
        resistance = resistance.copy()
        resistance[:, 0, kept.index(fault.resistor_open)] = np.inf
    capacitance = cut(drawn.capacitance)
    if fault.capacitor_open is not None and capacitance is not None:
        capacitance = capacitance.copy()
        capacitance[:, 0, kept.index(fault.capacitor_open)] = 0.0
    return DrawnStrings(first_trial=drawn.first_trial,
                        parameters={name: cut(value) for name, value in drawn.parameters.items()},
                        latent={}, resistance=resistance, capacitance=capacitance)


def _branch_setup(setup: SeriesSetup, branch: int, kept: tuple[int, ...], *,
                  leakage_at_temperature: bool = False) -> SeriesSetup:
    """The series constants of one branch without its shorted positions; the recovery charge is
    carried (and taken to temperature) before the cut (``rescaling`` None here), and so is the
    leakage of parts given in rows (``leakage_at_temperature``: referred to its own position's
    temperature, so that the doubling law leaves it as it is)."""
    rows, columns = slice(branch, branch + 1), list(kept)
    arrays = {name: np.asarray(getattr(setup, name))[rows][:, columns]
              for name in ("limits", "temperature", "reference_voltage", "reference_temperature",
                           "doubling_temperature", "voltage_exponent", "junction_capacitance")}
    if leakage_at_temperature:
        arrays["reference_temperature"] = arrays["temperature"]
    return replace(setup, rescaling=None, **arrays)


def _redundancy(evaluation: _Evaluation, shorts: list[FaultOutcome]) -> Redundancy:
    """Short the worst-ranked positions of the worst branch together, one more at a time, until
    the string fails (or one device is left)."""
    design = evaluation.design
    worst = max(shorts, key=_severity)
    branch = worst.branch - 1
    ranked = sorted((item for item in shorts if item.branch == worst.branch), key=_severity,
                    reverse=True)
    order = [item.index - 1 for item in ranked]
    steps: list[FaultOutcome] = []
    shorted = 0
    for count in range(1, design.string.series):
        fault = _Fault("device_short", branch, shorted=tuple(sorted(order[:count])))
        step = evaluation.run([fault])[0] if count > 1 else worst
        steps.append(step)
        if not step.passed:
            break
        shorted = count
    return Redundancy(shorted=shorted, branch=branch + 1,
                      positions=tuple(sorted(i + 1 for i in order[:shorted])), steps=tuple(steps))
