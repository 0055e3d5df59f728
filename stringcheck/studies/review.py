"""Substitution review: may a candidate string (other parts in some positions) replace a baseline?

Both designs are checked on common random numbers: the same seed and trial count, so every
grading component, every lot and every device parameter of a position is drawn from the same
latent standard-normal value in both (montecarlo/sampling.py keys its streams by block, parameter and part),
and only the mapping of that latent value through the part's spread differs where the part
changed. Differences between the two results are therefore the parts' doing, not sampling noise.

A mixed-stock candidate (``mix="FRACTION:PART"``, :func:`mixed`) keeps the baseline's parts but
makes every device of every built string the given part with probability FRACTION, drawn from a
stream of its own (``sampling.substituted_devices``), so it too shares every other draw with the
baseline.

Verdict "accept" when the candidate passes, no check's p99 or worst stress ratio (stress / limit)
rises by more than ``[review] stress_tolerance`` and no check's P(fail) upper bound rises by more
than ``[review] tolerance`` x ``target_p_fail`` (the baseline design's settings); otherwise
"reject". The stress ratios come from the plain run whichever estimator gives P(fail), and a rise
of P(fail) within the tolerance is reported, not decisive: the plain and the importance-sampling
run of one case give one verdict unless an estimate itself crosses a limit (:func:`compare`).

What the review found is returned as findings (``checks.findings.Finding``: codes and values),
worded by ``report.wording``: what decided each check, the reasons drawn from the computed change
of stress per position, and the flags of the substitute parts.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, replace

import numpy as np

from stringcheck.checks.findings import Finding, Value
from stringcheck.checks.grading_ratings import STAGE_VOLTAGE_CHECKS
from stringcheck.design.model import (
    MAX_LEAKAGE_DOUBLINGS,
    Design,
    Mix,
    PositionOverride,
    Review,
)
from stringcheck.errors import Setting, StringcheckError, excerpt
from stringcheck.design.parts import check_lot_sizes
from stringcheck.studies.check import CheckResult, run_check
from stringcheck.montecarlo.executor import worker_pool


@dataclass(frozen=True)
class CheckChange:
    """One check in both designs, and how the candidate's is judged against the baseline's.

    The P(fail) upper bounds compare the two by one estimator: the importance sampler's where it
    decided on both sides (``*_by`` "importance sampling"), else the plain runs' exact intervals
    ("plain"); see :func:`_compared_bounds`. The stress ratios (stress / limit [1]) are the plain
    run's in either case, so they do not depend on the estimator.

    ``decisive`` holds the findings that make the check unacceptable (empty when it is
    acceptable): ``review.check_fails``, ``review.check_not_run``, ``review.margin_eroded``,
    ``review.p_fail_rose``. ``noted`` holds what is reported but decides nothing
    (``review.p_fail_rise_small``: a rise within ``allowed_rise``).
    """

    name: str
    baseline_ran: bool
    candidate_ran: bool
    baseline_worst_ratio: float | None
    candidate_worst_ratio: float | None
    baseline_p_fail_upper: float | None
    candidate_p_fail_upper: float | None
    rise: float | None
    acceptable: bool
    baseline_by: str = "plain"
    candidate_by: str = "plain"
    baseline_p99_ratio: float | None = None
    candidate_p99_ratio: float | None = None
    # The rise of the P(fail) upper bound the candidate may show [1]: tolerance x target_p_fail.
    allowed_rise: float = 0.0
    decisive: tuple[Finding, ...] = ()
    noted: tuple[Finding, ...] = ()

    @property
    def worst_ratio_rise(self) -> float | None:
        """Candidate's worst stress ratio less the baseline's [1] (None where either did not run)."""
        return _difference(self.candidate_worst_ratio, self.baseline_worst_ratio)

    @property
    def p99_ratio_rise(self) -> float | None:
        """Candidate's p99 stress ratio less the baseline's [1] (None where either did not run)."""
        return _difference(self.candidate_p99_ratio, self.baseline_p99_ratio)


@dataclass(frozen=True)
class PositionChange:
    """A position whose worst stress rose (series checks: worst voltage [V])."""

    check: str
    branch: int
    index: int
    baseline_part: str
    candidate_part: str
    baseline_max: float
    candidate_max: float
    limit: float


@dataclass(frozen=True)
class PositionDelta:
    """One position (a branch, for the parallel check) of one check in both designs: the stress
    in ``unit`` ("V" for the stage-voltage checks, "A" per branch for the parallel check, "degC"
    for the thermal check), its mean, 99th percentile and worst over the trials, and each side's
    limit.
    ``index`` is 0 for a branch of the parallel check."""

    check: str
    branch: int
    index: int
    baseline_part: str
    candidate_part: str
    unit: str
    baseline_limit: float
    candidate_limit: float
    baseline_mean: float
    candidate_mean: float
    baseline_worst: float
    candidate_worst: float
    # The 99th percentile over the trials (NaN where the check keeps none: the static and dynamic
    # checks keep it).
    baseline_p99: float = math.nan
    candidate_p99: float = math.nan

    @property
    def worst_ratio_change(self) -> float:
        """Candidate's worst stress / its limit less the baseline's [1]."""
        return self.candidate_worst / self.candidate_limit - \
            self.baseline_worst / self.baseline_limit

    @property
    def mean_ratio_change(self) -> float:
        """Candidate's mean stress / its limit less the baseline's [1]."""
        return self.candidate_mean / self.candidate_limit - self.baseline_mean / self.baseline_limit


@dataclass(frozen=True)
class ReviewResult:
    """The review: both check results, each check's change, the per-position change, the
    reasons (findings from the computed change) and the flags (findings from the parts
    themselves, whatever the Monte Carlo says: a lower ``v_rrm``, another device class).
    ``tolerance`` and ``stress_tolerance`` are the baseline's ``[review]`` settings [1]."""

    baseline: CheckResult
    candidate: CheckResult
    changes: tuple[CheckChange, ...]
    worse_positions: tuple[PositionChange, ...]
    reasons: tuple[Finding, ...]
    tolerance: float
    verdict: str
    stress_tolerance: float = 0.0
    positions: tuple[PositionDelta, ...] = ()
    flags: tuple[Finding, ...] = ()
    # What rejects the candidate besides its checks' changes (``review.candidate_fails``: its
    # own check result fails where no compared check says why).
    decided_by: tuple[Finding, ...] = ()


def _difference(candidate: float | None, baseline: float | None) -> float | None:
    if candidate is None or baseline is None:
        return None
    return float(candidate) - float(baseline)


_SWAP = re.compile(r"^\s*([0-9,\-\s]+)\s*:\s*([^:\s]+)\s*$")


def parse_swap(text: str, design: Design) -> tuple[tuple[int, ...], str]:
    """``"1-4:B"`` or ``"7,9:B"`` -> (positions, part), checked against ``design``.

    Every number is checked against the string's series count before a range is built, so a slip
    (``1-100000000:B``) is one short message, not a list of a hundred million positions.
    """
    option = Setting("swap", text)
    match = _SWAP.match(text)
    if not match:
        raise StringcheckError(option, ": write POSITIONS:PART, e.g. 1-4:B or 7,9:B")
    series = design.string.series

    def position(digits: str, piece: str) -> int:
        digits = digits.strip()
        if not digits.isdigit():
            raise StringcheckError(option, f": {excerpt(piece)} is not a position number or a "
                                   "range like 1-4")
        # More digits than any series count has: out of range without reading the number.
        number = int(digits) if len(digits) <= 9 else series + 1
        if not 1 <= number <= series:
            shown = digits if len(digits) <= 12 else digits[:9] + "..."
            raise StringcheckError(option, f": position {shown} lies outside 1..{series} (the "
                                   "string's series count)")
        return number

    positions: set[int] = set()
    for piece in match.group(1).split(","):
        piece = piece.strip()
        if not piece:
            continue
        if "-" in piece:
            first, _, last = piece.partition("-")
            if not (first.strip().isdigit() and last.strip().isdigit()):
                raise StringcheckError(option, f": {excerpt(piece)} is not a range like 1-4")
            low, high = position(first, piece), position(last, piece)
            if low > high:
                raise StringcheckError(option, f": the range {excerpt(piece)} runs backwards")
            positions.update(range(low, high + 1))
        else:
            positions.add(position(piece, piece))
    if not positions:
        raise StringcheckError(option, ": no position given; write e.g. 1-4:B or 7,9:B")
    part = match.group(2)
    if part not in design.parts:
        known = ", ".join(sorted(design.parts))
        raise StringcheckError(option, f": no part {excerpt(part)} in {design.source}; define "
                               f"[parts.{excerpt(part)[1:-1]}] there (known: {known})")
    ordered = tuple(sorted(positions))
    _check_substitute(design, part, option,
                      design.string.temperature_rise_grid()[:, [p - 1 for p in ordered]])
    return ordered, part


def swapped(design: Design, positions: tuple[int, ...], part: str) -> Design:
    """The design with ``part`` in ``positions`` of every branch (other overrides kept)."""
    kept = []
    for override in design.string.positions:
        if override.index in positions and (override.part is not None or
                                            override.serial is not None):
            # The position now holds a new device of ``part``: its own part and any measured
            # device placed there by serial number go; its temperature rise stays.
            if override.temperature_rise is not None:
                kept.append(replace(override, part=None, serial=None))
            continue
        kept.append(override)
    added = [PositionOverride(index=index, branch=None, part=part, temperature_rise=None)
             for index in positions]
    layout = replace(design.string, positions=tuple(kept + added))
    title = f"{design.title} with {part} in position(s) {_ranges(positions)}"
    return _lots_checked(replace(design, string=layout, title=title))


def _lots_checked(candidate: Design) -> Design:
    """The candidate, once its measured lots are known to hold the devices it draws."""
    check_lot_sizes(candidate)
    return candidate


_MIX = re.compile(r"^\s*([^:%\s]+)\s*(%?)\s*:\s*([^:\s]+)\s*$")


def parse_mix(text: str, design: Design) -> tuple[float, str]:
    """``"0.25:B"`` or ``"25%:B"`` -> (fraction [1] in [0, 1], part), checked against ``design``."""
    option = Setting("mix", text)
    match = _MIX.match(text)
    if not match:
        raise StringcheckError(option, ": write FRACTION:PART, e.g. 0.25:B or 25%:B")
    try:
        fraction = float(match.group(1))
    except ValueError:
        raise StringcheckError(option, f": {excerpt(match.group(1))} is not a number; write "
                               "FRACTION:PART, e.g. 0.25:B or 25%:B") from None
    if match.group(2):
        fraction /= 100.0
    if not (math.isfinite(fraction) and 0.0 <= fraction <= 1.0):
        raise StringcheckError(option, ": the fraction must lie in 0..1 (or 0%..100%)")
    part = match.group(3)
    if part not in design.parts:
        known = ", ".join(sorted(design.parts))
        raise StringcheckError(option, f": no part {excerpt(part)} in {design.source}; define "
                               f"[parts.{excerpt(part)[1:-1]}] there (known: {known})")
    _check_substitute(design, part, option, design.string.temperature_rise_grid())
    return fraction, part


def _check_substitute(design: Design, name: str, option: Setting, rise) -> None:
    """What the design reader checks of a part in use, for a part the setting ``option`` (``swap``
    or ``mix``) brings in; ``rise`` holds the temperature rises [K] of the positions it may take."""
    part = design.parts[name]
    if part.i_r is None:
        raise StringcheckError(option, f": part {name!r} gives no i_r; the static check needs its "
                               f"reverse leakage: add parts.{name}.i_r to {design.source}")
    hottest = design.duty.ambient + float(np.max(rise))
    if part.t_j_max is not None and hottest >= part.t_j_max:
        raise StringcheckError(option, f": ambient plus temperature rise ({hottest:g} degC) is not "
                               f"below t_j_max of part {name!r} ({part.t_j_max:g} degC); choose "
                               "another part or lower duty.ambient")
    temperatures = design.duty.ambient + np.asarray(rise, dtype=float)
    doublings = float(np.max(np.abs(temperatures - part.i_r.at_temperature))) / \
        part.doubling_temperature
    if doublings > MAX_LEAKAGE_DOUBLINGS:
        raise StringcheckError(option, f": referring part {name!r}'s leakage from its "
                               f"i_r.at_temperature takes {doublings:.3g} doublings, more than "
                               f"{MAX_LEAKAGE_DOUBLINGS}; check parts.{name}.leakage_doubling")


def mixed(design: Design, fraction: float, part: str) -> Design:
    """The design with mixed stock: each device of every built string is ``part`` with probability
    ``fraction`` [1], else the part its position holds."""
    layout = replace(design.string, mix=Mix(fraction=fraction, part=part))
    title = f"{design.title} with {part} mixed in at {100 * fraction:.4g} % of the devices"
    return _lots_checked(replace(design, string=layout, title=title))


def substituted(baseline: Design, *, swap: str | None = None, mix: str | None = None) -> Design:
    """The candidate that ``swap`` (``"1-4:B"``, :func:`parse_swap`) or ``mix`` (``"0.25:B"``,
    :func:`parse_mix`) makes of ``baseline``; exactly one of the two is given (``mix`` wins)."""
    if mix is not None:
        return mixed(baseline, *parse_mix(mix, baseline))
    positions, part = parse_swap(swap, baseline)
    return swapped(baseline, positions, part)


def _ranges(positions: tuple[int, ...]) -> str:
    out, start = [], positions[0]
    for previous, current in zip(positions, positions[1:] + (None,)):
        if current != previous + 1:
            out.append(str(start) if start == previous else f"{start}-{previous}")
            start = current
    return ",".join(out)


def review(baseline: Design, candidate: Design, *, trials: int | None = None,
           seed: int | None = None, workers: int = 1, transient: bool = False,
           rare: bool | None = False, drivers: bool = False, progress=None) -> ReviewResult:
    """Check both designs on common random numbers and compare them (``progress`` is called with
    (trials done, trials in all) over both checks: one bar from 0 to twice the trials).
    ``rare`` and ``drivers`` are :func:`run_check`'s, for both designs; the judgement is
    :func:`compare`'s under the baseline's ``[review]`` settings."""
    if (baseline.string.series, baseline.string.parallel) != \
            (candidate.string.series, candidate.string.parallel):
        raise StringcheckError(
            f"{candidate.source}: the candidate is {candidate.string.parallel} x "
            f"{candidate.string.series}, the baseline {baseline.string.parallel} x "
            f"{baseline.string.series}; a review compares the same string arrangement")
    trials = baseline.monte_carlo.trials if trials is None else trials
    seed = baseline.monte_carlo.seed if seed is None else seed
    with worker_pool(workers) as pool:
        options = dict(trials=trials, seed=seed, pool=pool, transient=transient, rare=rare,
                       drivers=drivers, position_percentiles=True)
        base = run_check(baseline, progress=_stage(progress, 0), **options)
        cand = run_check(candidate, progress=_stage(progress, 1), **options)
        if rare is None:
            # The automatic sampler ran where each design's own plain run could not decide: a
            # check it ran on for one design runs it for the other too, so that the two are
            # compared by one estimator.
            union = tuple(sorted(_sampled(base) | _sampled(cand)))
            if _sampled(base) != set(union):
                base = run_check(baseline, **{**options, "rare": union})
            if _sampled(cand) != set(union):
                cand = run_check(candidate, **{**options, "rare": union})
    return compare(base, cand)


def compare(base: CheckResult, cand: CheckResult, settings: Review | None = None) -> ReviewResult:
    """Judge a candidate's check result against the baseline's (both run on common random
    numbers, as :func:`review` runs them) under ``settings`` (default: the baseline design's
    ``[review]``): the verdict, each check's change, the per-position change, the reasons and
    the flags. Judging again under other tolerances needs no new run."""
    settings = base.design.review if settings is None else settings
    changes = tuple(_check_change(name, base_check, cand.checks.get(name), settings,
                                  base.target_p_fail)
                    for name, base_check in base.checks.items())
    positions = position_deltas(base, cand)
    verdict = "accept" if cand.verdict == "pass" and all(c.acceptable for c in changes) \
        else "reject"
    # A failing candidate whose compared checks all pass fails on something else: a rating of
    # its grading network, a requested check that could not run, an impossible design.
    decided_by = (Finding("review.candidate_fails"),) if cand.verdict != "pass" and not any(
        f.code == "review.check_fails" for c in changes for f in c.decisive) else ()
    return ReviewResult(baseline=base, candidate=cand, changes=changes, decided_by=decided_by,
                        worse_positions=_worse_positions(base, cand),
                        reasons=_reasons(base, cand, positions),
                        tolerance=settings.tolerance, verdict=verdict,
                        stress_tolerance=settings.stress_tolerance, positions=positions,
                        flags=part_flags(base.design, cand.design))


def _check_change(name: str, base_check, cand_check, settings, target: float) -> CheckChange:
    """One check of both designs judged (:class:`CheckChange`): the candidate's check must pass,
    its p99 and worst stress ratios may rise by at most ``settings.stress_tolerance`` and its
    P(fail) upper bound by at most ``settings.tolerance`` x ``target``. A rise of the bound
    within that is noted, not decisive: far below the target it says nothing of the risk (and
    the plain and the importance-sampling estimate of one case differ there by decades)."""
    cand_ran = cand_check is not None and cand_check.ran
    base_upper, base_by, cand_upper, cand_by = _compared_bounds(base_check, cand_check)
    rise = None if base_upper is None or cand_upper is None else cand_upper - base_upper
    allowed = settings.tolerance * target
    ratios = {statistic: (getattr(base_check, f"{statistic}_ratio") if base_check.ran else None,
                          getattr(cand_check, f"{statistic}_ratio") if cand_ran else None)
              for statistic in ("worst", "p99")}
    decisive: list[Finding] = []
    noted: list[Finding] = []
    check = Value(name)
    if base_check.ran and not cand_ran:
        decisive.append(Finding("review.check_not_run", {"check": check}))
    elif cand_ran and not cand_check.passed:
        decisive.append(Finding("review.check_fails", {
            "check": check, "p_fail_upper": Value(cand_upper)}, limit=Value(target)))
    if base_check.ran and cand_ran:
        for statistic, (before, after) in ratios.items():
            eroded = _eroded(before, after, settings.stress_tolerance)
            if eroded is not None:
                decisive.append(Finding("review.margin_eroded", {
                    "check": check, "statistic": Value(statistic), "baseline": Value(before),
                    "candidate": Value(after), "rise": Value(eroded)},
                    limit=Value(settings.stress_tolerance)))
        if rise is not None and rise > 0.0:
            values = {"check": check, "baseline": Value(base_upper),
                      "candidate": Value(cand_upper), "rise": Value(rise),
                      "target": Value(target), "tolerance": Value(settings.tolerance)}
            if rise > allowed:
                decisive.append(Finding("review.p_fail_rose", values, limit=Value(allowed)))
            else:
                noted.append(Finding("review.p_fail_rise_small", values, limit=Value(allowed)))
    acceptable = not decisive
    return CheckChange(
        name=name, baseline_ran=base_check.ran, candidate_ran=cand_ran,
        baseline_worst_ratio=ratios["worst"][0], candidate_worst_ratio=ratios["worst"][1],
        baseline_p_fail_upper=base_upper, candidate_p_fail_upper=cand_upper, rise=rise,
        acceptable=acceptable, baseline_by=base_by, candidate_by=cand_by,
        baseline_p99_ratio=ratios["p99"][0], candidate_p99_ratio=ratios["p99"][1],
        allowed_rise=allowed, decisive=tuple(decisive), noted=tuple(noted))


def _eroded(before: float | None, after: float | None, tolerance: float) -> float | None:
    """How far a stress ratio rose [1] where it rose by more than ``tolerance``, else None; a
    ratio that became infinite or NaN (an unsolved trial) rose without bound."""
    if before is None or after is None:
        return None
    if not math.isfinite(after):
        return math.inf if math.isfinite(before) else None
    if not math.isfinite(before):
        return None
    rise = after - before
    return rise if rise > tolerance else None


def _sampled(result: CheckResult) -> set[str]:
    """The checks of a result the importance sampler ran on."""
    return {name for name, check in result.checks.items()
            if check.ran and check.rare is not None}


def _compared_bounds(base_check, cand_check) -> tuple[float | None, str, float | None, str]:
    """The P(fail) upper bounds of one check of both designs, by one estimator: the importance
    sampler's where it decided on both sides, else the plain exact intervals (never one of each:
    a tight bound against a loose one would make a better part look worse, or a worse one
    better). Each with the estimator's name."""
    def deciding(check):
        rare = check.rare if check is not None and check.ran else None
        return rare if rare is not None and rare.decides else None

    def plain(check):
        return (check.estimate.ci_high if check is not None and check.ran else None), "plain"

    base_rare, cand_rare = deciding(base_check), deciding(cand_check)
    if base_rare is not None and cand_rare is not None:
        return (base_rare.ci_high, "importance sampling", cand_rare.ci_high,
                "importance sampling")
    return plain(base_check) + plain(cand_check)


def _stage(progress, stage: int):
    """The progress callback of one of the review's two checks, mapped onto the whole review."""
    if progress is None:
        return None
    return lambda done, total: progress(stage * total + done, 2 * total)


def _worse_positions(base: CheckResult, cand: CheckResult) -> tuple[PositionChange, ...]:
    grid_base = base.design.string.part_labels()
    grid_cand = cand.design.string.part_labels()
    rows = []
    for name in STAGE_VOLTAGE_CHECKS:
        a, b = base.checks.get(name), cand.checks.get(name)
        if a is None or b is None or not (a.ran and b.ran):
            continue
        for pa, pb in zip(a.positions, b.positions):
            # A rise below 0.1 % of the limit is rounding of the same draws, not a change.
            if pb.max_voltage > pa.max_voltage + 1e-3 * pa.limit:
                rows.append(PositionChange(
                    check=name, branch=pa.branch, index=pa.index,
                    baseline_part=str(grid_base[pa.branch - 1, pa.index - 1]),
                    candidate_part=str(grid_cand[pa.branch - 1, pa.index - 1]),
                    baseline_max=pa.max_voltage, candidate_max=pb.max_voltage, limit=pb.limit))
    rows.sort(key=lambda r: (r.candidate_max - r.baseline_max) / r.limit, reverse=True)
    return tuple(rows)




# A change of a stress ratio below this [1] is rounding of the same draws, not a change.
_ROUNDING = 1e-3


def position_deltas(base: CheckResult, cand: CheckResult) -> tuple[PositionDelta, ...]:
    """Each position (each branch, for the parallel check) of each check that ran for both
    designs: mean, worst and limit on both sides (:class:`PositionDelta`)."""
    labels = {"baseline": base.design.string.part_labels(),
              "candidate": cand.design.string.part_labels()}
    rows = []
    for name, a in base.checks.items():
        b = cand.checks.get(name)
        if b is None or not (a.ran and b.ran):
            continue
        for pa, pb in zip(a.per_position(), b.per_position()):
            figures = {side: _position_figures(entry, labels[side])
                       for side, entry in (("baseline", pa), ("candidate", pb))}
            (unit, base_limit, base_mean, base_p99, base_worst, base_part), \
                (_, cand_limit, cand_mean, cand_p99, cand_worst, cand_part) = \
                figures["baseline"], figures["candidate"]
            rows.append(PositionDelta(
                check=name, branch=pa.branch, index=getattr(pa, "index", 0),
                baseline_part=base_part, candidate_part=cand_part, unit=unit,
                baseline_limit=base_limit, candidate_limit=cand_limit,
                baseline_mean=base_mean, candidate_mean=cand_mean,
                baseline_worst=base_worst, candidate_worst=cand_worst,
                baseline_p99=base_p99, candidate_p99=cand_p99))
    return tuple(rows)


def _position_figures(entry, labels: np.ndarray) -> tuple[str, float, float, float, float, str]:
    """(unit, limit, mean, p99, worst, part) of one per-position entry of any check (p99 NaN
    where the check keeps none)."""
    if hasattr(entry, "max_voltage"):
        p99 = math.nan if entry.p99_voltage is None else entry.p99_voltage
        return "V", entry.limit, entry.mean_voltage, p99, entry.max_voltage, entry.part
    if hasattr(entry, "max_current"):
        parts = "+".join(dict.fromkeys(str(label) for label in labels[entry.branch - 1]))
        return ("A", entry.limit_current, entry.mean_current, math.nan, entry.max_current,
                parts)
    return ("degC", entry.limit, entry.mean_temperature, math.nan, entry.max_temperature,
            entry.part)


# Per check, the inputs a part brings that move a position's stress, each with the sign of the
# move when the position's own device's value rises and when the substituted devices' elsewhere
# rise (0: no such move). Series charge balance and leakage sharing: a device with more recovery
# charge, more capacitance or more leakage takes less of the voltage and leaves it to the others
# (docs/methods/static.md, dynamic.md); a higher V_RRM or current rating is a higher limit; a
# branch with a higher threshold or slope resistance takes less of the group's current
# (docs/methods/parallel.md); a device with more loss or a higher thermal resistance
# runs hotter.
INPUT_SIGNS: dict[str, dict[str, tuple[int, int]]] = {
    "static": {"i_r": (-1, 1), "v_rrm": (-1, 0)},
    "dynamic": {"q_rr": (-1, 1), "c_j": (-1, 1), "v_rrm": (-1, 0)},
    "transient": {"q_rr": (-1, 1), "c_j": (-1, 1), "v_rrm": (-1, 0)},
    "parallel": {"v_t0": (-1, 1), "r_t": (-1, 1), "i_fav": (-1, 0)},
    "thermal": {"t_j_max": (-1, 0), "r_th_jc": (1, 0), "i_r": (1, 0), "q_rr": (1, 0)},
}
# The unit of each input's value in a finding.
_INPUT_UNITS = {"i_r": "A", "q_rr": "C", "c_j": "F", "v_rrm": "V", "v_t0": "V", "r_t": "ohm",
                "i_fav": "A", "t_j_max": "degC", "r_th_jc": "K/W"}


def _typical(part, name: str) -> float | None:
    """A part's typical value of input ``name`` (a spread's typ, or the value itself)."""
    value = getattr(part, name, None)
    if value is None:
        return None
    return float(getattr(value, "typ", value))


def _width(part, name: str) -> float | None:
    """How far a part's input ``name`` may scatter above typ [its unit]: max - typ (0 for a
    fixed value). The textbook worst cases rest on the spread in absolute terms: C >= (n - 1)
    dQ_rr / (n V_DM - V_s) and R <= (n V_DM - V_s) / ((n - 1) dI_R) (DESIGN.md section 4)."""
    value = getattr(part, name, None)
    if value is None or not hasattr(value, "typ"):
        return None
    high = value.high if value.high is not None else value.typ
    return float(high - value.typ)


def substitutions(baseline: Design, candidate: Design) -> dict[tuple[int, int], tuple[str, str]]:
    """(branch, index) (1-based) -> (baseline part, candidate part) of every position whose part
    differs (with a mix: the part mixed in)."""
    grid_base = baseline.string.part_grid()
    out: dict[tuple[int, int], tuple[str, str]] = {}
    for grid in candidate.string.part_grids():
        for (branch, index), new in np.ndenumerate(grid):
            old = grid_base[branch, index]
            if str(new) != str(old):
                out[(branch + 1, index + 1)] = (str(old), str(new))
    return out


def _reasons(base: CheckResult, cand: CheckResult,
             deltas: tuple[PositionDelta, ...]) -> tuple[Finding, ...]:
    """Per check, the position whose stress rose most and the one whose stress fell most (a
    change of at least 0.1 % of the limit), each with the input whose change explains the
    direction computed (:func:`_mechanism`)."""
    subs = substitutions(base.design, cand.design)
    if not subs:
        return (Finding("review.same_parts"),)
    drivers = tuple(base.drivers) + tuple(cand.drivers)
    reasons: list[Finding] = []
    for name in dict.fromkeys(d.check for d in deltas):
        rows = [d for d in deltas if d.check == name and math.isfinite(d.worst_ratio_change)]
        if not rows:
            continue
        rose = max(rows, key=lambda d: d.worst_ratio_change)
        fell = min(rows, key=lambda d: d.worst_ratio_change)
        for delta, direction in ((rose, 1), (fell, -1)):
            if direction * delta.worst_ratio_change <= _ROUNDING:
                continue
            code = "review.position_rose" if direction > 0 else "review.position_fell"
            reasons.append(Finding(code, {
                "check": Value(name), "branch": Value(delta.branch), "index": Value(delta.index),
                "baseline_part": Value(delta.baseline_part),
                "candidate_part": Value(delta.candidate_part),
                # The new part, "" where the position kept its part.
                "new_part": Value("" if delta.candidate_part == delta.baseline_part
                                  else delta.candidate_part),
                "baseline": Value(delta.baseline_worst / delta.baseline_limit),
                "candidate": Value(delta.candidate_worst / delta.candidate_limit),
                "baseline_worst": Value(delta.baseline_worst, delta.unit),
                "candidate_worst": Value(delta.candidate_worst, delta.unit)}))
            reasons.append(_mechanism(name, delta, direction, subs, base.design, cand.design,
                                      drivers))
    return tuple(reasons)


def _mechanism(check: str, delta: PositionDelta, direction: int,
               subs: dict[tuple[int, int], tuple[str, str]], baseline: Design,
               candidate: Design, drivers) -> Finding:
    """The input whose change explains a position's computed change of stress (``direction``
    +1 rose, -1 fell), as a finding whose sentence states that direction, never the other.

    The inputs of the check that differ between the old and the new part are tried in the order
    of the drivers of both designs (largest rank correlation with the check's worst stress
    first), then by the size of their change. A typical value moved so as to move this
    position's stress the way it went (its own device's, or the substituted devices'
    elsewhere) explains it (``review.INPUT.own.rose`` ...); where the whole string holds one part
    (nothing to share against) or no typical value explains it, a wider or narrower spread that
    does (``review.scatter.wider`` / ``.narrower``); otherwise ``review.input_changed`` names
    the input without a cause, or ``review.no_input_changed``."""
    signs = INPUT_SIGNS.get(check, {})
    if delta.index:
        own_pair = subs.get((delta.branch, delta.index))
    else:  # a branch of the parallel check: a substitute anywhere in it is its own
        own_pair = next((pair for (branch, _), pair in sorted(subs.items())
                         if branch == delta.branch), None)
    own = own_pair is not None
    old, new = own_pair if own else sorted(subs.values())[0]
    a, b = baseline.parts.get(old), candidate.parts.get(new)
    if a is None or b is None:
        return Finding("review.no_input_changed", {"check": Value(check)})
    rank = {}
    for driver in drivers:
        if driver.check == check and math.isfinite(driver.rank_correlation):
            rank[driver.input] = max(rank.get(driver.input, 0.0), abs(driver.rank_correlation))
    changed = []
    for name in signs:
        before, after = _typical(a, name), _typical(b, name)
        if before is None or after is None:
            continue
        size = abs(math.log(after / before)) if before > 0 and after > 0 else abs(after - before)
        if size > 0.01 or _width(a, name) != _width(b, name):
            changed.append((name, before, after, size))
    changed.sort(key=lambda item: (-rank.get(item[0], -1.0), -item[3]))
    values = lambda name, before, after: {  # noqa: E731 - the figures every reason names
        "check": Value(check), "input": Value(name), "old": Value(old), "new": Value(new),
        "baseline": Value(before, _INPUT_UNITS[name]), "candidate": Value(after, _INPUT_UNITS[name])}
    if not changed:
        return Finding("review.no_input_changed", {"check": Value(check)})
    parts_in_string = {str(p) for grid in candidate.string.part_grids()
                       for p in grid[delta.branch - 1]}
    shared_against = len(parts_in_string) > 1 or not own
    word = "rose" if direction > 0 else "fell"
    if shared_against:
        for name, before, after, size in changed:
            sign = signs[name][0 if own else 1]
            if size > 0.01 and sign * math.copysign(1.0, after - before) == direction:
                topic = "thermal." if check == "thermal" else ""
                return Finding(f"review.{topic}{name}.{'own' if own else 'others'}.{word}",
                               values(name, before, after))
    for name, before, after, _ in changed:
        wide_a, wide_b = _width(a, name), _width(b, name)
        if wide_a is None or wide_b is None or wide_a == wide_b:
            continue
        if math.copysign(1.0, wide_b - wide_a) == direction and check in STAGE_VOLTAGE_CHECKS:
            return Finding("review.scatter.wider" if direction > 0 else "review.scatter.narrower",
                           values(name, wide_a, wide_b))
    name, before, after, _ = changed[0]
    return Finding("review.input_changed", values(name, before, after))


def part_flags(baseline: Design, candidate: Design) -> tuple[Finding, ...]:
    """What a substitute part is, named whatever the Monte Carlo says: a lower ``v_rrm`` than
    the part it replaces (``review.lower_v_rrm``), another device class
    (``review.class_changed``). An avalanche rating is not modelled yet, so it is not compared."""
    by_pair: dict[tuple[str, str], list[int]] = {}
    for (_, index), pair in sorted(substitutions(baseline, candidate).items()):
        by_pair.setdefault(pair, [])
        if index not in by_pair[pair]:
            by_pair[pair].append(index)
    flags = []
    for (old, new), indices in sorted(by_pair.items()):
        a, b = baseline.parts.get(old), candidate.parts.get(new)
        if a is None or b is None:
            continue
        where = {"old": Value(old), "new": Value(new),
                 "positions": Value(_ranges(tuple(sorted(indices))))}
        if b.v_rrm < a.v_rrm:
            flags.append(Finding("review.lower_v_rrm", {
                **where, "baseline": Value(a.v_rrm, "V"), "candidate": Value(b.v_rrm, "V")},
                limit=Value(a.v_rrm, "V")))
        if (a.device_class or "") != (b.device_class or ""):
            flags.append(Finding("review.class_changed", {
                **where, "baseline": Value(a.device_class or ""),
                "candidate": Value(b.device_class or "")}))
    return tuple(flags)
