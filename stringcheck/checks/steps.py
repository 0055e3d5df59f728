"""The steps every chunked check module gives the check workflow (``studies.check.run_check``).

A check module that evaluates the drawn strings chunk by chunk exposes one :class:`CheckSteps`:
why each of its checks cannot run, the setup from the design, the evaluation of one chunk of
drawn strings, the accumulator that merges the chunks in trial order, and the finish that turns
the merged chunks into each check's outcome; besides, what the drivers ranking, the memory
estimate and the importance sampler read of it. ``studies.check.CHECK_STEPS`` lists them, so a
check is added by writing its module's steps and adding them to that registry.

Every function here is called with plain values (the design, the setup this module built, the
drawn strings), so the setups and chunks travel to worker processes as they are.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Any, Callable, Mapping

import numpy as np

from stringcheck.checks.findings import Finding
from stringcheck.checks.outcome import CheckOutcome
from stringcheck.checks.recovery_conditions import RecoveryRescaling
from stringcheck.design.model import Design
from stringcheck.montecarlo.sampling import DrawnStrings

Reasons = Mapping[str, Finding | None]


@dataclass(frozen=True)
class RunFigures:
    """What every check's finish needs of the run: its trials, the confidence of the interval
    and the target P(fail) a check passes within."""

    trials: int
    confidence: float
    target: float


@dataclass(frozen=True)
class CheckSteps:
    """The steps of one check module (its checks evaluated on the same chunks).

    Attributes
    ----------
    names
        The checks it gives, in the order the result lists them.
    reasons
        ``reasons(design, names)``: why each of ``names`` (the checks asked for) cannot run,
        None for one that can.
    setup
        ``setup(design, reasons, rescaling, seed)``: the constants of its checks that run
        (picklable; ``seed`` the run's, for a draw of its own such as the C_j factors),
        or None when none of them runs; ``rescaling`` is the recovery charge carried to the
        application's turn-off (``recovery_conditions.recovery_rescaling``), or None.
    parameters
        ``parameters(design, reasons)``: the device parameters its chunks need drawn.
    evaluate
        ``evaluate(design, setup, drawn)``: one chunk of drawn strings evaluated; its figures,
        to be merged in trial order.
    accumulator
        ``accumulator(setup)``: an empty accumulator whose ``merge(chunk)`` takes the chunks in
        trial order.
    finish
        ``finish(design, setup, reasons, accumulator, run)``: each of its checks' outcome (a
        check with a reason: :meth:`CheckOutcome.not_run`), name -> outcome in ``names`` order.
    chunk_ratios
        ``chunk_ratios(chunk, count)``: each running check's worst ratio of the chunk's first
        ``count`` trials (what the drivers ranking reads).
    chunk_bytes
        ``chunk_bytes(chunk, count)``: bytes a chunk of ``count`` trials keeps until the finish.
    trial_ratios
        ``trial_ratios(accumulator, name)``: the per-trial worst ratios of check ``name`` after
        the finish, or None (the transient check selects its worst strings from the dynamic
        check's).
    ratios
        ``ratios(design, setup, drawn, name)``: each drawn string's worst ratio in ``name``, inf
        unsolved: the failure function of the importance sampler.
    rare_parameters
        ``rare_parameters(design, name)``: the device parameters the importance sampler moves
        for ``name``.
    handoff
        ``handoff(chunk)``: figures of a chunk that the modules evaluated after it on the same
        drawn strings take (the forward checks' junction temperatures), taken out of the chunk
        so that they are not merged; None: nothing to hand on. A module with a hand-off is
        evaluated before the others.
    takes_handoff
        Whether ``evaluate`` takes the figures handed on, as ``evaluate(design, setup, drawn,
        handed=...)``.
    """

    names: tuple[str, ...]
    reasons: Callable[[Design, tuple[str, ...]], dict[str, Finding | None]]
    setup: Callable[[Design, Reasons, RecoveryRescaling | None, int], Any]
    parameters: Callable[[Design, Reasons], tuple[str, ...]]
    evaluate: Callable[[Design, Any, DrawnStrings], Any]
    accumulator: Callable[[Any], Any]
    finish: Callable[[Design, Any, Reasons, Any, RunFigures], dict[str, CheckOutcome]]
    chunk_ratios: Callable[[Any, int], dict[str, np.ndarray]]
    chunk_bytes: Callable[[Any, int], int]
    trial_ratios: Callable[[Any, str], np.ndarray | None]
    ratios: Callable[[Design, Any, DrawnStrings, str], np.ndarray]
    rare_parameters: Callable[[Design, str], tuple[str, ...]]
    handoff: Callable[[Any], dict[str, Any]] | None = None
    takes_handoff: bool = False
