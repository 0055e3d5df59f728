"""Small failure probabilities by importance sampling in the latent standard-normal space.

Every built string is a deterministic function of independent standard-normal latent values
(``sampling.Latent``: one per device parameter and position, per part lot, per grading component);
screening (truncation) and the copula act inside that map, so the latent space stays exactly
standard normal and the method needs no special case for them. A check's failure is
g(u) = worst stress ratio > 1.

1. Most likely failure point (the "design point" of structural reliability): u* minimising |u|^2
   subject to g(u) >= 1, found by a ray search along the gradient of g at the origin and refined by
   SLSQP (scipy.optimize.minimize) with batched finite-difference gradients. beta = |u*|, and the
   first-order estimate Phi(-beta) (R. Rackwitz, B. Fiessler, "Structural reliability under combined
   random load sequences", Computers & Structures 9, 1978) is reported for reference only.
2. Samples from the defensive mixture q(u) = a phi(u) + (1 - a) phi(u - u*) with a = 1/2
   (T. Hesterberg, "Weighted average importance sampling and defensive mixture distributions",
   Technometrics 37, 1995), weighted by phi(u) / q(u) = 1 / (a + (1 - a) exp(u.u* - beta^2 / 2)).
   The estimate is the mean of w 1[g(u) > 1], its standard error the sample standard deviation over
   sqrt(N), and the interval the normal one at the design's confidence (clipped at 0).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Callable

import numpy as np
from scipy import optimize, stats

from ..design import SPREAD_PARAMETERS, Design
from ..sampling import DrawnStrings, Latent, latent_parameters, strings_from_latent
from ..stats import failure_estimate

DEFAULT_SAMPLES = 20_000
_MIXTURE_WEIGHT = 0.5
_STREAM = 7002  # our own stream, apart from every stream of sampling.py and the transient sample
_STEP = 1e-4  # finite-difference step in latent units
_RAY_LIMIT = 12.0  # |u| beyond which failure is not looked for (Phi(-12) ~ 2e-33)
_BATCH = 4096
_PILOT = 10_000  # plain samples whose nearest failure (if any) seeds the search


@dataclass(frozen=True)
class RareEstimate:
    """P(fail) of one check by importance sampling."""

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
    """The layout of the latent vector u: device parameters, lots, resistors, capacitors."""

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

    def latent(self, u: np.ndarray) -> Latent:
        k = u.shape[0]
        device, lot, resistor, capacitor = {}, {}, None, None
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
            else:
                capacitor = piece.reshape((k,) + self.shape)
        return Latent(device=device, lot=lot, resistor=resistor, capacitor=capacitor)


def rare_event_estimate(design: Design, check: str, parameters: tuple[str, ...],
                        evaluate: Callable[[DrawnStrings], np.ndarray], *, seed: int,
                        confidence: float, samples: int = DEFAULT_SAMPLES) -> RareEstimate:
    """Importance-sampling estimate of P(worst stress ratio > 1) for one check.

    ``evaluate`` maps built strings to each string's worst stress ratio (unsolved strings: inf).
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
    pilot = rng.standard_normal((_PILOT, space.dimension))
    pilot_failed = ~(g(pilot) <= 1.0)
    nearest = None
    if np.any(pilot_failed):
        candidates = pilot[pilot_failed]
        nearest = candidates[np.argmin(np.einsum("ij,ij->i", candidates, candidates))]
    point = _failure_point(g, space.dimension, nearest)
    found = point is not None
    shift = point if found else np.zeros(space.dimension)
    beta = float(np.linalg.norm(shift)) if found else math.inf
    u = rng.standard_normal((samples, space.dimension))
    shifted = rng.random(samples) >= _MIXTURE_WEIGHT
    u[shifted] += shift
    failed = ~(g(u) <= 1.0)
    with np.errstate(over="ignore"):
        weight = 1.0 / (_MIXTURE_WEIGHT + (1.0 - _MIXTURE_WEIGHT)
                        * np.exp(u @ shift - 0.5 * beta ** 2 if found else 0.0))
    contribution = np.where(failed, weight, 0.0)
    p_fail = float(contribution.mean())
    std_error = float(contribution.std(ddof=1) / math.sqrt(samples))
    z = float(stats.norm.ppf(0.5 + confidence / 2))
    if not found:
        # Not shown impossible, only not found: the samples are plain Monte Carlo, so the exact
        # (Clopper-Pearson) interval of their failure count is the honest statement.
        plain = failure_estimate(int(np.count_nonzero(failed)), samples, confidence=confidence)
        return RareEstimate(
            check=check, estimator="no failure point found within |u| <= 12 (steepest ascent and "
            "10,000 plain pilot samples): plain sampling with the exact interval", p_fail=plain.p_fail,
            std_error=std_error, ci_low=plain.ci_low, ci_high=plain.ci_high,
            confidence=confidence, beta=math.inf, first_order=0.0, samples=samples,
            failures=plain.failures, found_failure_point=False)
    return RareEstimate(
        check=check,
        estimator="importance sampling, defensive mixture shifted to the most likely failure point",
        p_fail=p_fail, std_error=std_error, ci_low=max(0.0, p_fail - z * std_error),
        ci_high=p_fail + z * std_error, confidence=confidence, beta=beta,
        first_order=float(stats.norm.sf(beta)) if found else 0.0, samples=samples,
        failures=int(np.count_nonzero(failed)), found_failure_point=found,
        importance=space.importance(shift))


def _gradient(g, u: np.ndarray) -> tuple[float, np.ndarray]:
    """g(u) and its forward-difference gradient, all in one batch of D + 1 strings."""
    dimension = u.size
    rows = np.repeat(u[None, :], dimension + 1, axis=0)
    rows[1:] += _STEP * np.eye(dimension)
    values = g(rows)
    return float(values[0]), (values[1:] - values[0]) / _STEP


def _on_ray(g, direction: np.ndarray) -> np.ndarray | None:
    """The first point of the ray t d (0 < t <= 12) with g > 1, to 1e-12, or None."""
    radii = np.linspace(0.0, _RAY_LIMIT, 241)
    along = g(radii[:, None] * direction[None, :])
    beyond = np.flatnonzero(along > 1.0)
    if beyond.size == 0:
        return None
    high = radii[beyond[0]]
    low = radii[beyond[0] - 1]
    for _ in range(40):
        middle = 0.5 * (low + high)
        if g(middle * direction[None, :])[0] > 1.0:
            high = middle
        else:
            low = middle
    return high * direction


def _failure_point(g, dimension: int, nearest: np.ndarray | None) -> np.ndarray | None:
    """u* = argmin |u| subject to g(u) >= 1, or None when no failure is found.

    Starts from the first failure along the steepest ascent of g from the origin, or along the
    direction of the nearest failing pilot sample, whichever is closer, then SLSQP."""
    origin = np.zeros(dimension)
    value, gradient = _gradient(g, origin)
    if value > 1.0:
        return origin
    starts = []
    norm = np.linalg.norm(gradient)
    if norm > 0:
        starts.append(_on_ray(g, gradient / norm))
    if nearest is not None:
        starts.append(_on_ray(g, nearest / np.linalg.norm(nearest)))
    starts = [point for point in starts if point is not None]
    if not starts:
        return None
    start = min(starts, key=np.linalg.norm)

    def constraint(u):
        return float(g(u[None, :])[0]) - 1.0

    def constraint_jacobian(u):
        return _gradient(g, u)[1]

    result = optimize.minimize(lambda u: 0.5 * float(u @ u), start, jac=lambda u: u,
                               method="SLSQP",
                               constraints=[{"type": "ineq", "fun": constraint,
                                             "jac": constraint_jacobian}],
                               options={"maxiter": 60, "ftol": 1e-10})
    candidate = result.x if result.success and g(result.x[None, :])[0] >= 1.0 - 1e-6 else start
    return candidate if np.linalg.norm(candidate) <= np.linalg.norm(start) else start
