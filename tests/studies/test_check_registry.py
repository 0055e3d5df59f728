"""The check workflow runs a registry of check modules' steps (``studies.check.CHECK_STEPS``,
``checks.steps.CheckSteps``): a check added as one registry entry runs on the same chunks as the
others, merged in trial order, and the registry's own checks give the same result in any chunking.

Outside references: the exact (Clopper-Pearson) interval from the beta distribution (scipy.stats;
Clopper & Pearson, Biometrika 26, 1934), and the drawn strings of the whole run drawn in one go
(``montecarlo.sampling.draw_strings``), independent of the chunks.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pytest
from scipy import stats

from stringcheck.checks.findings import Finding
from stringcheck.checks.outcome import CheckOutcome
from stringcheck.checks.steps import CheckSteps
from stringcheck.design.reading import parse_design_text
from stringcheck.montecarlo.estimates import failure_estimate
from stringcheck.montecarlo.sampling import draw_strings
from stringcheck.studies import check as workflow
from stringcheck.studies.check import CHECK_STEPS, run_check
from tests.designs import design_text

SCATTER = design_text("scatter")


@dataclass(frozen=True, eq=False, kw_only=True, repr=False)
class LeakageSpreadCheck(CheckOutcome):
    """A toy check: a string fails when a device leaks more than ``setup`` x the part's typical
    leakage at its datasheet temperature."""


class _Ratios:
    def __init__(self, setup):
        self.chunks = []

    def merge(self, chunk):
        self.chunks.append(chunk)


def _ratios(design, setup, drawn):
    typical = design.parts["D"].i_r.typ
    return drawn.parameters["i_r"].max(axis=(1, 2)) / (setup * typical)


def _finish(design, setup, reasons, accumulator, run):
    if reasons["spread"] is not None:
        return {"spread": LeakageSpreadCheck.not_run("spread", reasons["spread"])}
    ratios = np.concatenate(accumulator.chunks)
    estimate = failure_estimate(int(np.count_nonzero(ratios > 1.0)), run.trials,
                                confidence=run.confidence)
    p50, p99 = np.percentile(ratios, [50, 99])
    return {"spread": LeakageSpreadCheck(
        name="spread", ran=True, reason=None, passed=estimate.ci_high <= run.target,
        worst_ratio=float(ratios.max()), p50_ratio=float(p50), p99_ratio=float(p99),
        estimate=estimate, unsolved=0, worst_trial=int(np.argmax(ratios)))}


SPREAD_STEPS = CheckSteps(
    names=("spread",),
    reasons=lambda design, names: {name: None for name in names},
    setup=lambda design, reasons, rescaling, seed=None: 2.0 if reasons["spread"] is None else None,
    parameters=lambda design, reasons: ("i_r",),
    evaluate=_ratios, accumulator=_Ratios, finish=_finish,
    chunk_ratios=lambda chunk, count: {"spread": chunk[:count]},
    chunk_bytes=lambda chunk, count: chunk.nbytes,
    trial_ratios=lambda accumulator, name: np.concatenate(accumulator.chunks),
    ratios=lambda design, setup, drawn, name: _ratios(design, setup, drawn),
    rare_parameters=lambda design, name: ("i_r",))


@pytest.fixture
def with_spread_check(monkeypatch):
    monkeypatch.setattr(workflow, "CHECK_STEPS", CHECK_STEPS + (SPREAD_STEPS,))


def test_a_check_added_as_one_registry_entry_runs_on_the_same_chunks(with_spread_check):
    design = parse_design_text(SCATTER)
    trials = 3000
    result = run_check(design, trials=trials, chunk_trials=512)
    check = result.checks["spread"]
    # Listed after the registry's own checks, in the registry's order.
    assert list(result.checks) == ["static", "dynamic", "parallel", "thermal", "spread"]
    # The whole run drawn in one go: the same strings, whatever the chunks.
    drawn = draw_strings(design, ("i_r", "q_rr"), 0, trials, seed=design.monte_carlo.seed)
    expected = _ratios(design, 2.0, drawn)
    assert check.worst_ratio == expected.max() and check.worst_trial == int(np.argmax(expected))
    failures = int(np.count_nonzero(expected > 1.0))
    assert 0 < failures < trials  # the comparison can tell a wrong chunk order or count
    # Clopper-Pearson upper bound from the beta distribution (Clopper & Pearson 1934).
    alpha = 1.0 - design.monte_carlo.confidence
    assert check.estimate.failures == failures
    assert check.estimate.ci_high == pytest.approx(
        stats.beta.ppf(1 - alpha / 2, failures + 1, trials - failures), rel=1e-9)
    assert check.to_dict()["failures"] == failures
    # The registry's own checks are unchanged by the added one.
    alone = run_check(design, trials=trials, chunk_trials=512)
    for name in ("static", "dynamic"):
        assert result.checks[name].estimate == alone.checks[name].estimate
        assert result.checks[name].positions == alone.checks[name].positions


def test_a_module_none_of_whose_checks_is_asked_for_takes_no_part(with_spread_check):
    result = run_check(parse_design_text(SCATTER), trials=600, only=("static",))
    assert list(result.checks) == ["static", "dynamic"]
    assert result.checks["dynamic"].reason == Finding("not_run.not_requested")


def test_the_registry_lists_each_check_once_in_the_result_order():
    names = [name for steps in CHECK_STEPS for name in steps.names]
    assert names == ["static", "dynamic", "parallel", "thermal"]
    assert len(set(names)) == len(names)
