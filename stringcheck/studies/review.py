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

Verdict "accept" when the candidate passes and no check's P(fail) upper bound rises above the
baseline's by more than ``[review] tolerance`` (of the baseline design); otherwise "reject".
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, replace

import numpy as np

from stringcheck.checks.grading_ratings import STAGE_VOLTAGE_CHECKS
from stringcheck.design.model import MAX_LEAKAGE_DOUBLINGS, Design, Mix, PositionOverride
from stringcheck.errors import Setting, StringcheckError, excerpt
from stringcheck.design.parts import check_lot_sizes
from stringcheck.studies.check import CheckResult, run_check
from stringcheck.montecarlo.executor import worker_pool


@dataclass(frozen=True)
class CheckChange:
    """One check in both designs. The P(fail) upper bounds compare the two by one estimator: the
    importance sampler's where it decided on both sides (``*_by`` "importance sampling"), else
    the plain runs' exact intervals ("plain"); see :func:`_compared_bounds`."""

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
class ReviewResult:
    baseline: CheckResult
    candidate: CheckResult
    changes: tuple[CheckChange, ...]
    worse_positions: tuple[PositionChange, ...]
    reasons: tuple[str, ...]
    tolerance: float
    verdict: str


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
    ``rare`` and ``drivers`` are :func:`run_check`'s, for both designs."""
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
                       drivers=drivers)
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
    tolerance = baseline.review.tolerance
    changes = []
    for name, base_check in base.checks.items():
        cand_check = cand.checks.get(name)
        base_upper, base_by, cand_upper, cand_by = _compared_bounds(base_check, cand_check)
        rise = None if base_upper is None or cand_upper is None else cand_upper - base_upper
        acceptable = (cand_check is not None and cand_check.ran and cand_check.passed
                      and (rise is None or rise <= tolerance)) or \
            (not base_check.ran and (cand_check is None or not cand_check.ran))
        changes.append(CheckChange(
            name=name, baseline_ran=base_check.ran,
            candidate_ran=cand_check is not None and cand_check.ran,
            baseline_worst_ratio=base_check.worst_ratio if base_check.ran else None,
            candidate_worst_ratio=cand_check.worst_ratio if cand_check is not None and
            cand_check.ran else None,
            baseline_p_fail_upper=base_upper, candidate_p_fail_upper=cand_upper, rise=rise,
            acceptable=acceptable, baseline_by=base_by, candidate_by=cand_by))
    worse = _worse_positions(base, cand)
    verdict = "accept" if cand.verdict == "pass" and all(c.acceptable for c in changes) \
        else "reject"
    return ReviewResult(baseline=base, candidate=cand, changes=tuple(changes),
                        worse_positions=worse, reasons=_reasons(baseline, candidate, worse),
                        tolerance=tolerance, verdict=verdict)


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


def _reasons(baseline: Design, candidate: Design, worse) -> tuple[str, ...]:
    """Plain-words physics of each substitution (typical values compared)."""
    grid_base = baseline.string.part_grid()
    # With a mix, each part that can stand at a position against the baseline's there.
    pairs = sorted({(str(a), str(b)) for grid_cand in candidate.string.part_grids()
                    for a, b in zip(grid_base.ravel(), grid_cand.ravel()) if a != b})
    reasons = []
    for old, new in pairs:
        a, b = baseline.parts[old], candidate.parts[new]
        if a.q_rr is not None and b.q_rr is not None and b.q_rr.typ < 0.9 * a.q_rr.typ:
            reasons.append(f"{new} stores less recovery charge than {old} (typ "
                           f"{b.q_rr.typ:.3g} C vs {a.q_rr.typ:.3g} C): it recovers first, blocks "
                           "before the others and takes the voltage at turn-off (dynamic check)")
        if a.q_rr is not None and b.q_rr is not None and b.q_rr.typ > 1.1 * a.q_rr.typ:
            reasons.append(f"{new} stores more recovery charge than {old}: it recovers last and "
                           "pushes the turn-off voltage onto the others")
        if a.i_r is not None and b.i_r is not None and b.i_r.typ > 1.5 * a.i_r.typ:
            reasons.append(f"{new} leaks more than {old} (typ {b.i_r.typ:.3g} A vs "
                           f"{a.i_r.typ:.3g} A): it takes less of the blocking voltage and pushes "
                           "it onto the others (static check)")
        if a.i_r is not None and b.i_r is not None and b.i_r.typ < a.i_r.typ / 1.5:
            reasons.append(f"{new} leaks less than {old}: it takes more of the blocking voltage "
                           "(static check)")
        if a.v_t0 is not None and b.v_t0 is not None and b.v_t0.typ < a.v_t0.typ - 0.02:
            reasons.append(f"{new} has a lower threshold voltage than {old} (typ "
                           f"{b.v_t0.typ:.3g} V vs {a.v_t0.typ:.3g} V): in a parallel group its "
                           "branch takes more current (parallel and thermal checks)")
        if b.v_rrm < a.v_rrm:
            reasons.append(f"{new} is rated for less reverse voltage than {old} ("
                           f"{b.v_rrm:.4g} V vs {a.v_rrm:.4g} V): its limit is lower")
    if not pairs and not worse:
        reasons.append("no position changed part: the candidate is the baseline")
    return tuple(reasons)
