"""Small failure probabilities by importance sampling in the latent standard-normal space.

Every built string is a deterministic function of independent standard-normal latent values
(``sampling.Latent``: one per device parameter and position, per part lot, per grading component,
and under a mix one per device for its substitution);
screening (truncation) and the copula act inside that map, so the latent space stays exactly
standard normal and the method needs no special case for them. A check's failure is
g(u) = worst stress ratio > 1.

1. Most likely failure point (the "design point" of structural reliability): u* minimising |u|^2
   subject to g(u) >= 1, found by a ray search along the gradient of g at the origin and refined by
   SLSQP (scipy.optimize.minimize) with batched finite-difference gradients. beta = |u*|, and the
   first-order estimate Phi(-beta) (R. Rackwitz, B. Fiessler, "Structural reliability under combined
   random load sequences", Computers & Structures 9, 1978) is reported for reference only.
   When the gradient at the origin is useless (g = max over exchangeable devices has a kink there
   and its finite-difference gradient points along the direction that keeps them balanced), the
   rays along the pilot samples with the highest g, and along the gradient of g at those samples,
   still find the failure region: they break the tie between the devices.
2. Exchangeable positions (same part, same temperature rise, no measured device placed by serial)
   and identical parallel branches each have their own, equally likely failure point: the images
   u_1 = u*, ..., u_M of u* are its orbit, every distinct rearrangement of its per-position
   coordinates within branches and of whole branches (``studies.failure_orbits``). Shifting to
   u* alone, or to part of the orbit, would almost never sample the rest and estimate a fraction
   of P(fail) with a small standard error. The samples come from the defensive mixture
   q(u) = a phi(u) + (1 - a) / M sum_i phi(u - u_i), a = 1/2 (T. Hesterberg, "Weighted average
   importance sampling and defensive mixture distributions", Technometrics 37, 1995; a mixture over
   several design points as in S. K. Au and J. L. Beck, "A new adaptive importance sampling scheme
   for reliability calculations", Structural Safety 21, 1999, from memory), weighted by
   phi(u) / q(u) = 1 / (a + (1 - a) / M sum_i exp(u.u_i - beta^2 / 2)) (|u_i| = beta for every i).
   The estimate is unbiased for any set of shifts (the defensive part keeps the weight <= 1 / a);
   the images only make it efficient. The estimate is the mean of w 1[g(u) > 1], its standard
   error the sample standard deviation over sqrt(N), and the interval the normal one at the
   design's confidence (clipped at 0).
3. No failure point found: the samples are plain Monte Carlo. With the check's own plain run
   given (``plain``), both are pooled into one exact (Clopper-Pearson) interval; the pilot samples
   are left out, since finding no failure point depended on them.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Callable

import numpy as np
from scipy import optimize, special, stats

from ..design import SPREAD_PARAMETERS, Design
from ..errors import DesignError
from ..sampling import DrawnStrings, Latent, latent_parameters, strings_from_latent
from ..stats import FailureEstimate, failure_estimate
from .failure_orbits import MAX_IMAGES, failure_point_orbit

DEFAULT_SAMPLES = 20_000
_MIXTURE_WEIGHT = 0.5
_STREAM = 7002  # our own stream, apart from every stream of sampling.py and the transient sample
_STEP = 1e-4  # finite-difference step in latent units
_RAY_LIMIT = 12.0  # |u| beyond which failure is not looked for (Phi(-12) ~ 2e-33)
_BATCH = 4096
_PILOT = 10_000  # plain samples whose nearest failure (if any) seeds the search
_SEEDS = 2  # pilot samples with the highest g whose direction and gradient also seed rays
# The automatic importance sampler runs on a check whose plain run saw fewer failures than this
# (and could not decide the check): about the count below which the plain run's relative error
# exceeds 30 % (common practice).
AUTO_RARE_FAILURES = 10
_NEAR_RADIUS = 1.0  # latent units: an image this close to failure is a shift of the mixture
_RECENTRE = 3  # times the failure point may move to a closer image of itself


@dataclass(frozen=True)
class SearchEffort:
    """How hard the failure-point search works: ``pilot`` plain samples, finite-difference
    ``step`` in latent units, ``ray_points`` strings along each ray, then ``rounds`` of
    ``round_points`` strings each closing in on the first failure (one point a round is
    bisection), and at most ``refine_iterations`` of SLSQP (0: none; the closest first failure
    on a ray is the failure point). The defaults suit failure functions that cost microseconds a
    string and are exact to rounding; an expensive or noisy one (the time-domain turn-off,
    milliseconds a string whatever the batch, integrated to a relative tolerance) takes fewer,
    batched evaluations and a coarser step (:data:`COARSE_SEARCH`). The estimate is unbiased
    whatever the search finds; a poorer failure point only widens its interval."""

    pilot: int = _PILOT
    step: float = _STEP
    ray_points: int = 241
    rounds: int = 40
    round_points: int = 1
    refine_iterations: int = 60


# For the transient check: integration noise of ~1e-4 relative needs a step of 1e-2 for useful
# gradients; single strings cost as much as batches of dozens, so the rays close in 15 points a
# round (4 rounds: to 4e-6 of |u|) and SLSQP, one string a call, is left out.
COARSE_SEARCH = SearchEffort(pilot=1000, step=1e-2, ray_points=49, rounds=4, round_points=15,
                             refine_iterations=0)


@dataclass(frozen=True)
class RareEstimate:
    """P(fail) of one check by importance sampling.

    ``failure_points`` is the number of shifts of the mixture (the most likely failure point and
    its images under the exchangeable positions; 0 when none was found). ``pooled_trials`` is the
    number of plain trials behind the interval when no failure point was found (the sampler's plain
    samples plus the check's own run; 0 otherwise). ``decides`` is False when the check's verdict
    comes from its plain Monte Carlo run instead (set by the check), and ``note`` says why.
    ``automatic`` is True when the estimator ran without being asked, because the check's plain
    run saw too few failures to decide it (set by the check). ``orbit_complete`` is False when the
    failure point had more images than the sampler takes: the estimate then does not decide.
    """

    check: str
    estimator: str
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
    note: str = ""
    automatic: bool = False
    orbit_complete: bool = True



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
                raise DesignError(f"is resampled, and --rare needs a fit to it: {error.detail}, "
                                  "or run without --rare", source=design.source,
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
    point = _failure_point(g, space.dimension, pilot, g(pilot), effort)
    found = point is not None
    if found:
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
    else:
        shifts = np.zeros((0, space.dimension))
    beta = float(np.linalg.norm(point)) if found else math.inf
    u = mixture_sample(rng, samples, shifts, _MIXTURE_WEIGHT)
    failed = ~(g(u) <= 1.0)
    weight = mixture_weight(u, shifts, _MIXTURE_WEIGHT)
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
        text = (f"no failure point found within |u| <= {_RAY_LIMIT:g} (steepest ascent, "
                f"{effort.pilot:,} plain pilot samples and rays from the highest of them): ")
        text += (f"the sampler's {samples:,} plain samples pooled with the check's "
                 f"{extra_trials:,} Monte Carlo trials, exact interval" if extra_trials
                 else "plain sampling with the exact interval")
        pooled_error = math.sqrt(pooled.p_fail * (1 - pooled.p_fail) / pooled.trials)
        return RareEstimate(
            check=check, estimator=text, p_fail=pooled.p_fail, std_error=pooled_error,
            ci_low=pooled.ci_low, ci_high=pooled.ci_high, confidence=confidence, beta=math.inf,
            first_order=0.0, samples=samples, failures=failures, found_failure_point=False,
            pooled_trials=pooled.trials if extra_trials else 0)
    count = shifts.shape[0]
    text = "importance sampling, defensive mixture shifted to the most likely failure point"
    if count > 1:
        text += f" and its {count - 1} image(s) under the exchangeable positions"
    return RareEstimate(
        check=check, estimator=text, p_fail=p_fail, std_error=std_error,
        ci_low=max(0.0, p_fail - z * std_error), ci_high=p_fail + z * std_error,
        confidence=confidence, beta=beta, first_order=float(stats.norm.sf(beta)),
        samples=samples, failures=int(np.count_nonzero(failed)), found_failure_point=True,
        importance=space.importance(point), failure_points=count, orbit_complete=complete,
        decides=complete,
        note="" if complete else (
            f"the failure point found has more than {MAX_IMAGES:,} rearrangements under the "
            "string's symmetries (its other devices are not alike): the sampler used "
            f"{MAX_IMAGES:,} of them and may miss part of P(fail), so the plain interval "
            "decides"))


def mixture_sample(rng: np.random.Generator, count: int, shifts: np.ndarray,
                   defensive: float) -> np.ndarray:
    """``count`` draws of q = a N(0, I) + (1 - a) / M sum_i N(u_i, I), a = ``defensive``; with no
    shift (M = 0), of N(0, I)."""
    dimension = shifts.shape[1]
    u = rng.standard_normal((count, dimension))
    pick = rng.random(count)
    if shifts.shape[0]:
        shifted = pick >= defensive
        which = np.minimum(((pick[shifted] - defensive) / (1.0 - defensive)
                            * shifts.shape[0]).astype(np.int64), shifts.shape[0] - 1)
        u[shifted] += shifts[which]
    return u


def mixture_weight(u: np.ndarray, shifts: np.ndarray, defensive: float) -> np.ndarray:
    """phi(u) / q(u) of :func:`mixture_sample`'s mixture; 1 with no shift.

    phi(u - u_i) / phi(u) = exp(u.u_i - |u_i|^2 / 2), summed in the log domain (logsumexp), so
    that samples far out along a shift neither overflow nor lose the defensive floor 1 / a.
    """
    if shifts.shape[0] == 0:
        return np.ones(u.shape[0])
    half_squares = 0.5 * np.einsum("ij,ij->i", shifts, shifts)
    log_shifted = np.empty(u.shape[0])
    for start in range(0, u.shape[0], _BATCH):  # (rows x shifts) at a time: flat memory
        exponents = u[start:start + _BATCH] @ shifts.T - half_squares[None, :]
        log_shifted[start:start + _BATCH] = special.logsumexp(exponents, axis=1)
    log_shifted -= math.log(shifts.shape[0])
    return np.exp(-np.logaddexp(math.log(defensive), math.log(1.0 - defensive) + log_shifted))


def _gradient(g, u: np.ndarray, step: float = _STEP) -> tuple[float, np.ndarray]:
    """g(u) and its forward-difference gradient, all in one batch of D + 1 strings."""
    dimension = u.size
    rows = np.repeat(u[None, :], dimension + 1, axis=0)
    rows[1:] += step * np.eye(dimension)
    values = g(rows)
    return float(values[0]), (values[1:] - values[0]) / step


def _on_ray(g, direction: np.ndarray, effort: SearchEffort = SearchEffort()) -> np.ndarray | None:
    """The first point of the ray t d (0 < t <= 12) with g > 1, or None: located among
    ``ray_points`` radii, then narrowed ``rounds`` times by ``round_points`` equally spaced
    radii inside the bracket (bisection for one; 1e-12 by default)."""
    radii = np.linspace(0.0, _RAY_LIMIT, effort.ray_points)
    along = g(radii[:, None] * direction[None, :])
    beyond = np.flatnonzero(along > 1.0)
    if beyond.size == 0:
        return None
    high = radii[beyond[0]]
    low = radii[beyond[0] - 1]
    inside = np.arange(1, effort.round_points + 1) / (effort.round_points + 1)
    for _ in range(effort.rounds):
        trial = low + (high - low) * inside
        failing = np.flatnonzero(g(trial[:, None] * direction[None, :]) > 1.0)
        if failing.size:
            high = trial[failing[0]]
            low = trial[failing[0] - 1] if failing[0] > 0 else low
        else:
            low = trial[-1]
    return high * direction


def _failure_point(g, dimension: int, pilot: np.ndarray, pilot_values: np.ndarray,
                   effort: SearchEffort = SearchEffort()) -> np.ndarray | None:
    """u* = argmin |u| subject to g(u) >= 1, or None when no failure is found.

    Rays from the origin: along the steepest ascent of g at the origin, along the nearest failing
    pilot sample, and along each of the ``_SEEDS`` pilot samples with the highest g and the
    gradient of g there (failing or not: at the symmetric origin the gradient of a max() over
    exchangeable devices keeps them balanced, a pilot sample does not). The closest first failure
    on any ray starts SLSQP."""
    origin = np.zeros(dimension)
    value, gradient = _gradient(g, origin, effort.step)
    if value > 1.0:
        return origin
    directions = [gradient]
    failing = ~(pilot_values <= 1.0)
    if np.any(failing):
        candidates = pilot[failing]
        directions.append(candidates[np.argmin(np.einsum("ij,ij->i", candidates, candidates))])
    finite = np.where(np.isfinite(pilot_values), pilot_values, -np.inf)
    for row in np.argsort(-finite, kind="stable")[:_SEEDS]:
        directions.append(pilot[row])
        directions.append(_gradient(g, pilot[row], effort.step)[1])
    starts = []
    for direction in directions:
        norm = np.linalg.norm(direction)
        if norm > 0 and np.isfinite(norm):
            starts.append(_on_ray(g, direction / norm, effort))
    starts = [point for point in starts if point is not None]
    if not starts:
        return None
    return _refined(g, min(starts, key=np.linalg.norm), effort)


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
