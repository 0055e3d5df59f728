"""Small failure probabilities by importance sampling in the latent standard-normal space.

Every built string is a deterministic function of independent standard-normal latent values
(``sampling.Latent``: one per device parameter and position, per part lot, per grading component,
and under a mix one per device for its substitution);
screening (truncation) and the copula act inside that map, so the latent space stays exactly
standard normal and the method needs no special case for them. A check's failure is
g(u) = worst stress ratio > 1.

1. Most likely failure point (the "design point" of structural reliability): u* minimising |u|^2
   subject to g(u) >= 1 in each failure region, found by ray searches (2.) and refined by
   SLSQP (scipy.optimize.minimize) with batched finite-difference gradients. beta = |u*|, and the
   first-order estimate Phi(-beta) (R. Rackwitz, B. Fiessler, "Structural reliability under combined
   random load sequences", Computers & Structures 9, 1978) is reported for reference only.
   When the gradient at the origin is useless (g = max over exchangeable devices has a kink there
   and its finite-difference gradient points along the direction that keeps them balanced), the
   rays along the pilot samples with the highest g, and along the gradient of g at those samples,
   still find the failure region: they break the tie between the devices.
2. Failure regions that are not images of one another: one scattered device among fixed ones
   fails by leaking little (it takes more than its share) and by leaking much (it pushes its
   share onto the others), two regions on opposite sides of one latent coordinate; a turn-off
   fails by a device recovering early or late. The search starts rays from every seed that may
   lead to one (``_seed_directions``): both signs of the gradient at the origin, of the
   ``SearchEffort.axes`` coordinates g is most sensitive to, and the pilot sample with the
   highest g on each side of those; the distinct failing pilot samples; then, from each region
   found, the point mirrored and the other side of each of its largest coordinates. First
   failures of one region are merged before any refinement (``_same_rows``: the mean of their
   directions fails too; two sides of a coordinate, or two images of a point, do not), and each
   remaining one is refined and becomes a region with its orbit (below), up to
   :data:`MAX_REGIONS`. The sample checks the search: a failure outside the tangent half-space of
   every shift is searched along its own ray, and a region found so is added and the sample
   drawn again (up to ``_ADAPT_ROUNDS`` times). Where the search stopped at its cap, the last
   sample still revealed a region, or the estimate rests on a few samples' worth of its weight
   (``_LEAST_EFFECTIVE``), the estimator
   cannot rule out a region it did not search, says so (``coverage_assured``), and does not
   decide the check.
3. Exchangeable positions (same part, same temperature rise, no measured device placed by serial)
   and identical parallel branches each have their own, equally likely failure point: the images
   u_1 = u*, ..., u_M of u* are its orbit, every distinct rearrangement of its per-position
   coordinates within branches and of whole branches (``montecarlo.symmetry_images``). Shifting to
   u* alone, or to part of the orbit, would almost never sample the rest and estimate a fraction
   of P(fail) with a small standard error. The samples come from the defensive mixture
   q(u) = a phi(u) + (1 - a) sum_i s_i phi(u - u_i), a = 1/2 (T. Hesterberg, "Weighted average
   importance sampling and defensive mixture distributions", Technometrics 37, 1995; a mixture over
   several design points as in S. K. Au and J. L. Beck, "A new adaptive importance sampling scheme
   for reliability calculations", Structural Safety 21, 1999, from memory), over the shifts u_i of
   every region found and their images, weighted by
   phi(u) / q(u) = 1 / (a + (1 - a) sum_i s_i exp(u.u_i - |u_i|^2 / 2)). Region r (M_r images,
   beta_r) has the share M_r Phi(-beta_r) of the shifted half, at least ``_FLOOR_SHARE`` of the
   largest, split evenly among its images (one region: s_i = 1 / M).
   The estimate is unbiased for any set of shifts (the defensive part keeps the weight <= 1 / a);
   the regions and images only make it efficient, and a region left out makes it low with a
   small standard error. The estimate is the mean of w 1[g(u) > 1], its standard
   error the sample standard deviation over sqrt(N), and the interval the normal one at the
   design's confidence (clipped at 0).
4. No failure point found: the samples are plain Monte Carlo. With the check's own plain run
   given (``plain``), both are pooled into one exact (Clopper-Pearson) interval; the pilot samples
   are left out, since finding no failure point depended on them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Callable

import numpy as np
from scipy import optimize, special, stats

from stringcheck.design.model import SPREAD_PARAMETERS, Design
from stringcheck.errors import DesignError, Setting
from stringcheck.findings import Finding, Value
from stringcheck.limits import exceeds_limit, within_limit
from stringcheck.montecarlo.sampling import (
    DrawnStrings,
    Latent,
    latent_parameters,
    strings_from_latent,
)
from stringcheck.montecarlo.estimates import FailureEstimate, failure_estimate
from stringcheck.montecarlo.symmetry_images import MAX_IMAGES, failure_point_orbit

DEFAULT_SAMPLES = 20_000
_MIXTURE_WEIGHT = 0.5
_STREAM = 7002  # our own stream, apart from every stream of montecarlo/sampling.py and the transient sample
_STEP = 1e-4  # finite-difference step in latent units
_RAY_LIMIT = 12.0  # |u| beyond which failure is not looked for (Phi(-12) ~ 2e-33)
_BATCH = 4096
_PILOT = 10_000  # plain samples whose failures (if any) and extremes seed the search
_SEEDS = 2  # pilot samples with the highest g whose direction and gradient also seed rays
# The automatic importance sampler runs on a check whose plain run saw fewer failures than this
# (and could not decide the check): about the count below which the plain run's relative error
# exceeds 30 % (common practice).
AUTO_RARE_FAILURES = 10
_NEAR_RADIUS = 1.0  # latent units: an image this close to failure is a shift of the mixture
_RECENTRE = 3  # times the failure point may move to a closer image of itself
_DISTINCT_COSINE = 0.9  # two seed directions closer than this (cosine) are one seed
MAX_REGIONS = 12  # distinct failure regions searched and shifted to, at most
_SAME_RADIUS = 1.02  # the probe of one region: the two points' mean direction at this x the farther
_FLOOR_SHARE = 0.02  # each region's least share of the shifted half, of the most likely region's
_EXPLAIN_SLACK = 1.0  # latent units: a failure this far inside a region's tangent plane is its
_ADAPT_ROUNDS = 2  # times the sample may reveal a region the search did not find (then resampled)
# An estimate resting on fewer samples' worth of its weight than this (the effective sample size
# (sum c)^2 / sum c^2 of the contributions c = w 1[fail]; A. B. Owen, Monte Carlo theory, methods
# and examples, 2013, ch. 9, from memory) is a region sampled by chance, not searched.
_LEAST_EFFECTIVE = 10.0


@dataclass(frozen=True)
class SearchEffort:
    """How hard the failure-point search works: ``pilot`` plain samples, finite-difference
    ``step`` in latent units, ``ray_points`` strings along each ray, then ``rounds`` of
    ``round_points`` strings each closing in on the first failure (one point a round is
    bisection), and at most ``refine_iterations`` of SLSQP (0: none; the closest first failure
    on a ray is the failure point). The defaults suit failure functions that cost microseconds a
    string and are exact to rounding; an expensive or noisy one (the time-domain turn-off,
    milliseconds a string whatever the batch, integrated to a relative tolerance) takes fewer,
    batched evaluations and a coarser step (:data:`COARSE_SEARCH`). ``axes`` is the number of
    latent coordinates, those the failure function is most sensitive to, searched along both
    signs; ``failures`` the number of failing samples (of distinct directions) of the pilot, and
    of the sample where it shows a failure outside every region found, whose rays are searched.
    The estimate is unbiased whatever the search finds; a poorer failure point only widens its
    interval, a failure region not found is what makes it low."""

    pilot: int = _PILOT
    step: float = _STEP
    ray_points: int = 241
    rounds: int = 40
    round_points: int = 1
    refine_iterations: int = 60
    axes: int = 4
    failures: int = 16


# For the transient check: integration noise of ~1e-4 relative needs a step of 1e-2 for useful
# gradients; single strings cost as much as batches of dozens, so the rays close in 15 points a
# round (4 rounds: to 4e-6 of |u|), SLSQP, one string a call, is left out, and fewer seeds are
# searched (one axis both ways, four failing samples).
COARSE_SEARCH = SearchEffort(pilot=1000, step=1e-2, ray_points=49, rounds=4, round_points=15,
                             refine_iterations=0, axes=1, failures=4)



@dataclass(frozen=True)
class RareEstimate:
    """P(fail) of one check by importance sampling.

    ``failure_points`` is the number of shifts of the mixture (the most likely failure point of
    each failure region found and their images under the exchangeable positions; 0 when none was
    found), ``regions_found`` the number of those regions that are not images of one another.
    ``coverage_assured`` is False when the estimator cannot rule out a failure region it did not
    find (the search stopped at :data:`MAX_REGIONS`, its sample kept revealing regions the search
    had missed, or the estimate rests on a few samples): the estimate then does not decide.
    ``pooled_trials`` is the number of plain trials behind the interval when no failure point
    was found (the sampler's plain samples plus the check's own run; 0 otherwise). ``decides``
    is False when the check's verdict comes from its plain Monte Carlo run instead (set by the
    check, or by the estimator itself), and ``note`` says why. ``estimator`` says how the
    estimate was made; both are findings (``report.wording`` words them).
    ``automatic`` is True when the estimator ran without being asked, because the check's plain
    run saw too few failures to decide it (set by the check). ``orbit_complete`` is False when the
    failure point had more images than the sampler takes: the estimate then does not decide.
    """

    check: str
    estimator: tuple[Finding, ...]
    p_fail: float
    std_error: float
    ci_low: float
    ci_high: float
    confidence: float
    beta: float
    first_order: float
    samples: int
    failures: int
    found_failure_point: bool
    importance: tuple["FailurePointShare", ...] = ()
    failure_points: int = 0
    pooled_trials: int = 0
    decides: bool = True
    note: Finding | None = None
    automatic: bool = False
    orbit_complete: bool = True
    regions_found: int = 0
    coverage_assured: bool = True


@dataclass(frozen=True)
class FailurePointShare:
    """How much of the most likely failure point one input makes up.

    ``share`` is the input's part of beta^2 = |u*|^2, the sum of its latent coordinates squared over
    beta^2 (the squared direction cosines of first-order reliability, summed per input; O. Ditlevsen
    and H. O. Madsen, Structural Reliability Methods, Wiley 1996, ch. 5: the "importance factors").
    ``branch`` and ``index`` (1-based) are the position whose coordinate is largest, for inputs
    drawn per position (None for a lot). ``sign`` is that coordinate's sign: +1 when failure comes
    from that input high, -1 when low.
    """

    input: str
    share: float
    branch: int | None
    index: int | None
    sign: int


class _Space:
    """The layout of the latent vector u: device parameters, lots, resistors, capacitors and, with
    a mix, each device's substitution (the mix's part where Phi(u) < fraction: a step in u, which
    the ray search crosses and the importance weights need no special case for)."""

    def __init__(self, design: Design, parameters: tuple[str, ...]):
        layout = design.string
        self.shape = (layout.parallel, layout.series)
        size = layout.parallel * layout.series
        self.blocks: list[tuple[str, str, int]] = []
        for parameter in latent_parameters(design, parameters):
            self.blocks.append(("device", parameter, size))
        if design.monte_carlo.lot_share > 0:
            for name in design.parts_used():
                self.blocks.append(("lot", name, len(SPREAD_PARAMETERS)))
        if design.grading.resistor is not None:
            self.blocks.append(("resistor", "", size))
        if design.grading.capacitor is not None:
            self.blocks.append(("capacitor", "", size))
        mix = design.string.mix
        if mix is not None and 0.0 < mix.fraction < 1.0:
            self.blocks.append(("mix", "", size))
        self.dimension = sum(size for _, _, size in self.blocks)

    def importance(self, point: np.ndarray) -> tuple[FailurePointShare, ...]:
        """The failure point's beta^2 shared out among the inputs, largest first."""
        total = float(point @ point)
        out = []
        start = 0
        for kind, name, size in self.blocks:
            piece = point[start:start + size]
            start += size
            share = float(piece @ piece) / total if total > 0 else 0.0
            top = int(np.argmax(np.abs(piece)))
            label = name if kind == "device" else (f"lot:{name}" if kind == "lot" else kind)
            branch, index = (None, None) if kind == "lot" else \
                (top // self.shape[1] + 1, top % self.shape[1] + 1)
            out.append(FailurePointShare(input=label, share=share, branch=branch, index=index,
                                         sign=1 if piece[top] >= 0 else -1))
        out.sort(key=lambda item: item.share, reverse=True)
        return tuple(out)

    def position_vectors(self, point: np.ndarray) -> np.ndarray:
        """Each position's coordinates over the per-position blocks, (parallel, series, blocks)."""
        pieces = []
        start = 0
        for kind, _, size in self.blocks:
            if kind != "lot":
                pieces.append(point[start:start + size].reshape(self.shape))
            start += size
        if not pieces:
            return np.zeros(self.shape + (0,))
        return np.stack(pieces, axis=-1)

    def rearranged(self, point: np.ndarray, source: np.ndarray) -> np.ndarray:
        """``point`` with flat position p of every per-position block taking the coordinates of
        flat position ``source[p]`` (lots stay: they are per part)."""
        out = point.copy()
        start = 0
        for kind, _, size in self.blocks:
            if kind != "lot":
                out[start:start + size] = point[start:start + size][source]
            start += size
        return out

    def latent(self, u: np.ndarray) -> Latent:
        k = u.shape[0]
        device, lot, resistor, capacitor, mix = {}, {}, None, None, None
        start = 0
        for kind, name, size in self.blocks:
            piece = u[:, start:start + size]
            start += size
            if kind == "device":
                device[name] = piece.reshape((k,) + self.shape)
            elif kind == "lot":
                lot[name] = piece
            elif kind == "resistor":
                resistor = piece.reshape((k,) + self.shape)
            elif kind == "capacitor":
                capacitor = piece.reshape((k,) + self.shape)
            else:
                mix = piece.reshape((k,) + self.shape)
        return Latent(device=device, lot=lot, resistor=resistor, capacitor=capacitor, mix=mix)


def rare_design(design: Design) -> tuple[Design, tuple[str, ...]]:
    """The design the importance sampler draws from, and the parts whose lots it refitted.

    The sampler moves latent normal values, and a resampled lot has none to move (its devices are
    discrete rows): such a lot enters through its fit instead (:meth:`MeasuredLot.as_fitted`).
    A lot too small to fit is a :class:`DesignError` naming ``parts.NAME.measured``.
    """
    parts = dict(design.parts)
    refitted = []
    for name in design.parts_used():
        lot = parts[name].measured
        if lot is not None and lot.resampled:
            try:
                parts[name] = replace(parts[name], measured=lot.as_fitted())
            except DesignError as error:
                raise DesignError("is resampled, and ", Setting("rare", True), " needs a fit to "
                                  f"it: {error.detail}, or run without ", Setting("rare", True),
                                  source=design.source,
                                  key=f"parts.{name}.measured") from None
            refitted.append(name)
    return (replace(design, parts=parts) if refitted else design), tuple(refitted)


def needs_rare(check, target: float) -> bool:
    """Whether the automatic mode runs the importance sampler on ``check``: its plain run saw
    fewer than :data:`AUTO_RARE_FAILURES` failures and its exact interval holds the target (the
    plain run fails the check only for want of trials: a longer run could pass it)."""
    estimate = check.estimate
    if getattr(check, "worst_failures", 0):
        return False  # the transient check fails on a failing worst string whatever P(fail) is
    return (estimate is not None and estimate.failures < AUTO_RARE_FAILURES
            and estimate.ci_low <= target < estimate.ci_high)


def rare_event_estimate(design: Design, check: str, parameters: tuple[str, ...],
                        evaluate: Callable[[DrawnStrings], np.ndarray], *, seed: int,
                        confidence: float, samples: int = DEFAULT_SAMPLES,
                        plain: FailureEstimate | None = None,
                        effort: SearchEffort = SearchEffort()) -> RareEstimate:
    """Importance-sampling estimate of P(worst stress ratio > 1) for one check.

    ``evaluate`` maps built strings to each string's worst stress ratio (unsolved strings: inf).
    ``plain`` is the check's own plain Monte Carlo estimate: pooled with the sampler's samples into
    one exact interval when no failure point is found (see the module notes).
    """
    space = _Space(design, parameters)

    def g(u: np.ndarray) -> np.ndarray:
        out = np.empty(u.shape[0])
        for start in range(0, u.shape[0], _BATCH):
            rows = u[start:start + _BATCH]
            out[start:start + _BATCH] = evaluate(strings_from_latent(design, parameters,
                                                                     space.latent(rows)))
        return out

    rng = np.random.default_rng(np.random.SeedSequence(seed, spawn_key=(_STREAM,)))
    pilot = rng.standard_normal((effort.pilot, space.dimension))
    search = _RegionSearch(g, design, space, effort)
    search.search(_seed_directions(g, pilot, g(pilot), effort))
    if search.regions:
        # Both signs of every important direction of each region found: the other side of its
        # largest coordinates (one device leaking little or much) and the point mirrored.
        search.search(_mirrored_directions(search.points(), effort))
    found = bool(search.regions)
    revealed = 0
    for round_number in range(_ADAPT_ROUNDS + 1):
        shifts, shares = search.mixture()
        used = list(search.regions)  # the regions this sample is drawn around
        u = mixture_sample(rng, samples, shifts, _MIXTURE_WEIGHT, shares)
        failed = ~within_limit(g(u))
        if not found:
            break
        # A failure outside the tangent half-space of every shift is searched along its own ray:
        # a region the search missed, which the next sample then includes.
        unexplained = u[failed & ~_explained(u, shifts)]
        if unexplained.shape[0] == 0:
            revealed = 0
            break
        before = len(search.regions)
        search.search(_distinct(unexplained, effort.failures))
        revealed = len(search.regions) - before
        if revealed == 0 or round_number == _ADAPT_ROUNDS:
            break
    weight = mixture_weight(u, shifts, _MIXTURE_WEIGHT, shares)
    contribution = np.where(failed, weight, 0.0)
    p_fail = float(contribution.mean())
    std_error = float(contribution.std(ddof=1) / math.sqrt(samples))
    z = float(stats.norm.ppf(0.5 + confidence / 2))
    if not found:
        # Not shown impossible, only not found: the samples are plain Monte Carlo, as is the
        # check's own run (other streams), so one exact interval of the pooled count is the honest
        # statement. The pilot is left out: finding nothing was decided on it.
        failures = int(np.count_nonzero(failed))
        extra_failures, extra_trials = (0, 0) if plain is None else (plain.failures, plain.trials)
        pooled = failure_estimate(failures + extra_failures, samples + extra_trials,
                                  confidence=confidence)
        search = {"radius": Value(_RAY_LIMIT), "pilot": Value(effort.pilot)}
        text = Finding("estimator.no_failure_point_pooled",
                       {**search, "samples": Value(samples), "trials": Value(extra_trials)}) \
            if extra_trials else Finding("estimator.no_failure_point_plain", search)
        pooled_error = math.sqrt(pooled.p_fail * (1 - pooled.p_fail) / pooled.trials)
        return RareEstimate(
            check=check, estimator=(text,), p_fail=pooled.p_fail, std_error=pooled_error,
            ci_low=pooled.ci_low, ci_high=pooled.ci_high, confidence=confidence, beta=math.inf,
            first_order=0.0, samples=samples, failures=failures, found_failure_point=False,
            pooled_trials=pooled.trials if extra_trials else 0)
    point = used[0].point
    beta = float(np.linalg.norm(point))
    count = shifts.shape[0]
    regions = len(used)
    complete = all(region.complete for region in used)
    # (The sentence names the regions when there are several, and the images when there are any.)
    text = Finding("estimator.importance_sampling",
                   {"regions": Value(regions), "images": Value(count - regions)})
    total = float(contribution.sum())
    # Kish's effective sample size of the failing samples' weights (L. Kish, Survey Sampling, 1965):
    # no failing sample at all is no evidence, not infinite evidence, so coverage is not assured and
    # the plain run decides.
    effective = total ** 2 / float(contribution @ contribution) if total > 0 else 0.0
    reasons = []
    if search.capped:
        reasons.append(Finding("rare.search_capped", {"regions": Value(MAX_REGIONS)}))
    if revealed:
        reasons.append(Finding("rare.regions_revealed", {"regions": Value(revealed),
                                                         "rounds": Value(_ADAPT_ROUNDS)}))
    if total == 0:
        reasons.append(Finding("rare.no_failing_sample"))
    elif effective < _LEAST_EFFECTIVE:
        reasons.append(Finding("rare.few_effective_samples", {"effective": Value(effective)},
                               Value(_LEAST_EFFECTIVE)))
    assured = not reasons
    notes = []
    if not complete:
        notes.append(Finding("rare.orbit_incomplete", {"images": Value(MAX_IMAGES)}))
    if not assured:
        notes.append(Finding("rare.coverage_not_assured", causes=tuple(reasons)))
    return RareEstimate(
        check=check, estimator=(text,), p_fail=p_fail, std_error=std_error,
        ci_low=max(0.0, p_fail - z * std_error), ci_high=p_fail + z * std_error,
        confidence=confidence, beta=beta, first_order=float(stats.norm.sf(beta)),
        samples=samples, failures=int(np.count_nonzero(failed)), found_failure_point=True,
        importance=space.importance(point), failure_points=count, orbit_complete=complete,
        decides=complete and assured, regions_found=regions, coverage_assured=assured,
        note=None if complete and assured else Finding("rare.plain_decides", causes=tuple(notes)))


@dataclass(frozen=True)
class _Region:
    """One failure region found: its most likely failure point and that point's images."""

    point: np.ndarray
    shifts: np.ndarray
    complete: bool


class _RegionSearch:
    """The failure regions found so far, each with its orbit; new seeds are searched along rays,
    and a first failure that lies in a region already held (or in one of its images) is dropped
    before any refinement (:func:`_same_region`)."""

    def __init__(self, g, design: Design, space: "_Space", effort: SearchEffort):
        self.g, self.design, self.space, self.effort = g, design, space, effort
        self.regions: list[_Region] = []
        self.capped = False

    def points(self) -> np.ndarray:
        return np.array([region.point for region in self.regions])

    def _shifts(self) -> np.ndarray:
        return np.concatenate([region.shifts for region in self.regions]) if self.regions else \
            np.zeros((0, self.space.dimension))

    def _covered(self, candidate: np.ndarray) -> bool:
        shifts = self._shifts()
        if shifts.shape[0] == 0:
            return False
        distances = np.linalg.norm(shifts - candidate, axis=1)
        nearest = shifts[np.argsort(distances, kind="stable")[:_NEAREST_SHIFTS]]
        return bool(np.any(_same_region(self.g, candidate, nearest)))

    def search(self, directions: np.ndarray) -> None:
        """Rays along ``directions`` (rows, any length); each first failure outside the regions
        held is refined and, with its orbit, becomes a region, closest first."""
        g, effort = self.g, self.effort
        if not self.regions and exceeds_limit(g(np.zeros((1, self.space.dimension)))[0]):
            origin = np.zeros(self.space.dimension)
            self.regions.append(_Region(origin, origin[None, :], True))
        if self.regions and float(np.linalg.norm(self.regions[0].point)) == 0.0:
            return  # the origin fails: one region, every direction in it
        norms = np.linalg.norm(directions, axis=1)
        keep = (norms > 0) & np.isfinite(norms)
        if not np.any(keep):
            return
        starts = _on_rays(g, directions[keep] / norms[keep, None], effort)
        starts = starts[np.isfinite(starts[:, 0])]
        starts = starts[np.argsort(np.linalg.norm(starts, axis=1), kind="stable")]
        # First failures of one region (rays through it from several seeds) are one seed: all
        # pairs probed in one batch, each start kept only if no closer kept one shares its region.
        alike = _same_pairs(g, starts)
        kept: list[int] = []
        for index in range(starts.shape[0]):
            if not any(alike[index, other] for other in kept):
                kept.append(index)
        for start in starts[kept]:
            if self._covered(start):
                continue
            if len(self.regions) == MAX_REGIONS:
                self.capped = True
                break
            point = _refined(g, start, effort)
            if point is not start:
                if not _same_region(g, start, point[None, :])[0]:
                    point = start  # SLSQP stepped over into another region: it has its seeds
                elif self._covered(point):
                    continue
            self.regions.append(self._orbit(point))
        self.regions.sort(key=lambda region: float(np.linalg.norm(region.point)))

    def _orbit(self, point: np.ndarray) -> _Region:
        g, effort, design, space = self.g, self.effort, self.design, self.space

        def near(image: np.ndarray) -> np.ndarray | None:
            # A near image settles on its own failure: the first failure along its direction,
            # kept within one latent unit of beta (farther ones weigh e^-beta less, or more).
            norm = float(np.linalg.norm(image))
            settled = _on_ray(g, image / norm, effort) if norm > 0 else None
            if settled is None or np.linalg.norm(settled) > np.linalg.norm(point) + _NEAR_RADIUS:
                return None
            return settled

        # An image of another position may lie closer than the point found (a local optimum, as
        # in a temperature gradient, where each position has its own failure point): re-centre
        # on the closest, refined, a few times.
        for _ in range(_RECENTRE):
            shifts, complete = failure_point_orbit(design, space, point, near)
            norms = np.linalg.norm(shifts, axis=1)
            closest = int(np.argmin(norms))
            if norms[closest] >= norms[0] - 1e-6:
                break
            point = _refined(g, shifts[closest], effort)
        else:
            shifts, complete = failure_point_orbit(design, space, point, near)
        return _Region(point, shifts, complete)

    def mixture(self) -> tuple[np.ndarray, np.ndarray | None]:
        """The shifts of every region and each shift's share of the shifted half: a region's
        share follows its first-order probability M_r Phi(-beta_r) (at least
        :data:`_FLOOR_SHARE` of the largest), split evenly among its M_r images."""
        if not self.regions:
            return np.zeros((0, self.space.dimension)), None
        sizes = np.array([region.shifts.shape[0] for region in self.regions], dtype=float)
        betas = np.array([float(np.linalg.norm(region.point)) for region in self.regions])
        # In the log domain: Phi(-12) ~ 2e-33 and the ratios between regions are what count.
        log_mass = np.log(sizes) + stats.norm.logsf(betas)
        mass = np.maximum(np.exp(log_mass - log_mass.max()), _FLOOR_SHARE)
        shares = np.repeat(mass / mass.sum() / sizes, sizes.astype(np.int64))
        return self._shifts(), shares


_NEAREST_SHIFTS = 4  # shifts nearest a candidate that are probed for one region with it
_OPPOSITE = 0.2  # two directions whose sum is this short (of 2) are nearly opposite (> 168 deg)


def _same_region(g, point: np.ndarray, others: np.ndarray) -> np.ndarray:
    """Whether ``point`` lies in one failure region with each row of ``others``
    (:func:`_same_rows`)."""
    return _same_rows(g, np.broadcast_to(point, others.shape), others)


def _same_pairs(g, points: np.ndarray) -> np.ndarray:
    """:func:`_same_rows` of every pair of ``points``, (K, K) symmetric, in one batch."""
    count = points.shape[0]
    out = np.zeros((count, count), dtype=bool)
    first, second = np.triu_indices(count, k=1)
    if first.size:
        out[first, second] = out[second, first] = _same_rows(g, points[first], points[second])
    return out


def _same_rows(g, a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Whether the failure points a_k and b_k lie in one failure region, row by row: where they
    coincide, or where the mean of their two directions, taken out to :data:`_SAME_RADIUS` times
    the farther of the two, fails too (two points of one half-plane pass; two images of a point
    at different positions, or the two sides of one coordinate, do not). The directions, not
    the points: the longer point would dominate the mean, and a point and the other side of its
    coordinate would probe the longer's side and pass."""
    norms_a, norms_b = np.linalg.norm(a, axis=1), np.linalg.norm(b, axis=1)
    out = np.linalg.norm(a - b, axis=1) <= 1e-6 * (1.0 + norms_a)
    middle = a / np.where(norms_a > 0, norms_a, 1.0)[:, None] \
        + b / np.where(norms_b > 0, norms_b, 1.0)[:, None]
    lengths = np.linalg.norm(middle, axis=1)
    radius = _SAME_RADIUS * np.maximum(norms_a, norms_b)
    # Nearly opposite points have no mean direction (its rounding would point anywhere): apart.
    probe = ~out & (lengths > _OPPOSITE) & (norms_a > 0) & (norms_b > 0)
    if np.any(probe):
        out[probe] = exceeds_limit(g(middle[probe] / lengths[probe, None] * radius[probe, None]))
    return out


def _explained(u: np.ndarray, shifts: np.ndarray) -> np.ndarray:
    """Whether each sample lies within :data:`_EXPLAIN_SLACK` of the far side of the tangent
    plane of some shift (u . u_i / |u_i| >= |u_i| - slack): a failure there belongs to a region
    found."""
    out = np.zeros(u.shape[0], dtype=bool)
    norms = np.linalg.norm(shifts, axis=1)
    if np.any(norms == 0):
        return ~out
    for start in range(0, u.shape[0], _BATCH):
        along = u[start:start + _BATCH] @ (shifts / norms[:, None]).T
        out[start:start + _BATCH] = np.any(along >= norms[None, :] - _EXPLAIN_SLACK, axis=1)
    return out


def _distinct(points: np.ndarray, limit: int) -> np.ndarray:
    """At most ``limit`` of ``points``, nearest the origin first, none within
    :data:`_DISTINCT_COSINE` (cosine) of the direction of one kept."""
    order = np.argsort(np.linalg.norm(points, axis=1), kind="stable")
    kept: list[np.ndarray] = []
    for row in order:
        norm = float(np.linalg.norm(points[row]))
        if norm == 0:
            continue
        direction = points[row] / norm
        if all(float(direction @ other) < _DISTINCT_COSINE for other in kept):
            kept.append(direction)
            if len(kept) == limit:
                break
    return np.array(kept).reshape(-1, points.shape[1])


def _seed_directions(g, pilot: np.ndarray, pilot_values: np.ndarray,
                     effort: SearchEffort) -> np.ndarray:
    """The rays of the first search: both signs of the steepest ascent of g at the origin; the
    distinct failing pilot samples; the ``_SEEDS`` pilot samples with the highest g (failing or
    not: at the symmetric origin the gradient of a max() over exchangeable devices keeps them
    balanced, a pilot sample does not) and the gradient of g there; and, for each of the
    ``effort.axes`` coordinates g is most sensitive to (over those gradients), both signs of the
    axis and the pilot sample with the highest g on each side of it (the extremes of the pilot:
    one device leaking little and one leaking much fail in regions on opposite sides)."""
    dimension = pilot.shape[1]
    gradient = _gradient(g, np.zeros(dimension), effort.step)[1]
    directions = [gradient, -gradient]
    gradients = [gradient]
    failing = ~within_limit(pilot_values)
    if np.any(failing):
        directions.extend(_distinct(pilot[failing], effort.failures))
    finite = np.where(np.isfinite(pilot_values), pilot_values, -np.inf)
    for row in np.argsort(-finite, kind="stable")[:_SEEDS]:
        directions.append(pilot[row])
        gradients.append(_gradient(g, pilot[row], effort.step)[1])
        directions.append(gradients[-1])
    sensitivity = np.zeros(dimension)
    for item in gradients:
        norm = float(np.linalg.norm(item))
        if norm > 0 and np.isfinite(norm):
            sensitivity = np.maximum(sensitivity, np.abs(item) / norm)
    axes = [int(axis) for axis in np.argsort(-sensitivity, kind="stable")[:effort.axes]
            if sensitivity[axis] > 0]
    for axis in axes:
        unit = np.zeros(dimension)
        unit[axis] = 1.0
        directions.extend((unit, -unit))
        for side in (pilot[:, axis] > 0, pilot[:, axis] < 0):
            if np.any(side):
                directions.append(pilot[side][int(np.argmax(finite[side]))])
    return np.array(directions)


def _mirrored_directions(points: np.ndarray, effort: SearchEffort) -> np.ndarray:
    """For each failure point, the point mirrored through the origin and the point with each of
    its ``effort.axes`` largest coordinates' sign turned (the other side of that coordinate)."""
    out = [-points]
    for point in points:
        for axis in np.argsort(-np.abs(point), kind="stable")[:effort.axes]:
            if point[axis] != 0:
                flipped = point.copy()
                flipped[axis] = -flipped[axis]
                out.append(flipped[None, :])
    return np.concatenate(out)


def mixture_sample(rng: np.random.Generator, count: int, shifts: np.ndarray,
                   defensive: float, shares: np.ndarray | None = None) -> np.ndarray:
    """``count`` draws of q = a N(0, I) + (1 - a) sum_i s_i N(u_i, I), a = ``defensive``, s_i =
    ``shares`` (summing to 1; None: 1 / M each); with no shift (M = 0), of N(0, I)."""
    dimension = shifts.shape[1]
    u = rng.standard_normal((count, dimension))
    pick = rng.random(count)
    if shifts.shape[0]:
        shifted = pick >= defensive
        fraction = (pick[shifted] - defensive) / (1.0 - defensive)
        if shares is None:
            which = (fraction * shifts.shape[0]).astype(np.int64)
        else:
            which = np.searchsorted(np.cumsum(shares), fraction, side="right")
        u[shifted] += shifts[np.minimum(which, shifts.shape[0] - 1)]
    return u


def mixture_weight(u: np.ndarray, shifts: np.ndarray, defensive: float,
                   shares: np.ndarray | None = None) -> np.ndarray:
    """phi(u) / q(u) of :func:`mixture_sample`'s mixture; 1 with no shift.

    phi(u - u_i) / phi(u) = exp(u.u_i - |u_i|^2 / 2), summed with the shares in the log domain
    (logsumexp), so that samples far out along a shift neither overflow nor lose the defensive
    floor 1 / a.
    """
    if shifts.shape[0] == 0:
        return np.ones(u.shape[0])
    offsets = -0.5 * np.einsum("ij,ij->i", shifts, shifts)
    offsets += -math.log(shifts.shape[0]) if shares is None else np.log(shares)
    log_shifted = np.empty(u.shape[0])
    for start in range(0, u.shape[0], _BATCH):  # (rows x shifts) at a time: flat memory
        exponents = u[start:start + _BATCH] @ shifts.T + offsets[None, :]
        log_shifted[start:start + _BATCH] = special.logsumexp(exponents, axis=1)
    return np.exp(-np.logaddexp(math.log(defensive), math.log(1.0 - defensive) + log_shifted))


def _gradient(g, u: np.ndarray, step: float = _STEP) -> tuple[float, np.ndarray]:
    """g(u) and its forward-difference gradient, all in one batch of D + 1 strings."""
    dimension = u.size
    rows = np.repeat(u[None, :], dimension + 1, axis=0)
    rows[1:] += step * np.eye(dimension)
    values = g(rows)
    return float(values[0]), (values[1:] - values[0]) / step


def _on_ray(g, direction: np.ndarray, effort: SearchEffort = SearchEffort()) -> np.ndarray | None:
    """The first point of the ray t d (0 < t <= 12) with g > 1, or None (:func:`_on_rays`)."""
    point = _on_rays(g, direction[None, :], effort)[0]
    return point if np.isfinite(point[0]) else None


def _on_rays(g, directions: np.ndarray, effort: SearchEffort = SearchEffort()) -> np.ndarray:
    """The first point of each ray t d (unit rows d, 0 < t <= 12) with g > 1, a row of NaN where
    there is none: located among ``ray_points`` radii, then narrowed ``rounds`` times by
    ``round_points`` equally spaced radii inside the bracket (bisection for one; 1e-12 by
    default). All rays in one batch a round."""
    count, dimension = directions.shape
    radii = np.linspace(0.0, _RAY_LIMIT, effort.ray_points)
    along = g((radii[None, :, None] * directions[:, None, :]).reshape(-1, dimension))
    beyond = exceeds_limit(along.reshape(count, radii.size))
    out = np.full((count, dimension), np.nan)
    rows = np.flatnonzero(np.any(beyond, axis=1))
    if rows.size == 0:
        return out
    first = np.argmax(beyond[rows], axis=1)
    high = radii[first]
    low = radii[np.maximum(first - 1, 0)]
    inside = np.arange(1, effort.round_points + 1) / (effort.round_points + 1)
    which = np.arange(rows.size)
    for _ in range(effort.rounds):
        trial = low[:, None] + (high - low)[:, None] * inside[None, :]
        points = trial[:, :, None] * directions[rows][:, None, :]
        failing = exceeds_limit(g(points.reshape(-1, dimension)).reshape(trial.shape))
        hit = np.any(failing, axis=1)
        index = np.argmax(failing, axis=1)
        new_high = np.where(hit, trial[which, index], high)
        new_low = np.where(hit, np.where(index > 0, trial[which, np.maximum(index - 1, 0)], low),
                           trial[:, -1])
        high, low = new_high, new_low
    out[rows] = high[:, None] * directions[rows]
    return out


def _refined(g, start: np.ndarray, effort: SearchEffort) -> np.ndarray:
    """SLSQP from a failing ``start``: the closest failure it reaches, or ``start`` itself."""
    if effort.refine_iterations == 0:
        return start

    def constraint(u):
        return float(g(u[None, :])[0]) - 1.0

    def constraint_jacobian(u):
        return _gradient(g, u, effort.step)[1]

    result = optimize.minimize(lambda u: 0.5 * float(u @ u), start, jac=lambda u: u,
                               method="SLSQP",
                               constraints=[{"type": "ineq", "fun": constraint,
                                             "jac": constraint_jacobian}],
                               options={"maxiter": effort.refine_iterations, "ftol": 1e-10})
    candidate = result.x if result.success and g(result.x[None, :])[0] >= 1.0 - 1e-6 else start
    return candidate if np.linalg.norm(candidate) <= np.linalg.norm(start) else start
