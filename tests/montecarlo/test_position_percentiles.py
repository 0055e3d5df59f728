"""Each position's 99th-percentile voltage, from the largest voltages kept over the chunks
(``PositionSums.position_percentile``; the review's per-position change, issue 19 item 3): the
same as ``numpy.percentile`` over every trial at once, whatever the chunks and workers."""

from __future__ import annotations

import json

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from stringcheck.design.reading import parse_design_text
from stringcheck.montecarlo.accumulators import PositionSums, top_count
from stringcheck.report.export import result_to_dict
from stringcheck.studies.check import run_check
from tests.designs import design_text

SCATTER = design_text("scatter")


def _accumulated(voltages: np.ndarray, cuts: list[int], solved: np.ndarray) -> PositionSums:
    """``voltages`` (trials, parallel, series) added chunk by chunk at ``cuts``, then merged."""
    shape = voltages.shape[1:]
    total = PositionSums(shape, np.full(shape, 1e9), top_count=top_count(voltages.shape[0]))
    edges = [0, *sorted(set(cuts)), voltages.shape[0]]
    for start, stop in zip(edges, edges[1:]):
        chunk = PositionSums(shape, np.full(shape, 1e9), top_count=total.top_count)
        chunk.add(voltages[start:stop], solved[start:stop], start)
        total.merge(chunk)
    return total


@settings(max_examples=40, deadline=None)
@given(trials=st.integers(1, 900), cuts=st.lists(st.integers(0, 900), max_size=4),
       seed=st.integers(0, 2**31 - 1), unsolved=st.floats(0.0, 0.3))
def test_the_percentile_is_numpys_over_all_trials(trials, cuts, seed, unsolved):
    # Outside reference: numpy.percentile (linear interpolation between order statistics) over
    # the solved trials at once; an unsolved trial is left out, as from the mean.
    rng = np.random.default_rng(seed)
    voltages = rng.lognormal(7.0, 0.1, size=(trials, 2, 3))
    solved = rng.random(trials) >= unsolved
    kept = _accumulated(voltages, [c for c in cuts if 0 < c < trials], solved)
    got = kept.position_percentile(99.0)
    if not solved.any():
        assert got is None
        return
    expected = np.percentile(voltages[solved], 99.0, axis=0)
    np.testing.assert_allclose(got, expected, rtol=1e-12)


def test_without_kept_voltages_there_is_no_percentile():
    sums = PositionSums((1, 2), np.ones((1, 2)))
    sums.add(np.ones((10, 1, 2)), np.ones(10, dtype=bool), 0)
    assert sums.top is None and sums.position_percentile(99.0) is None


@pytest.mark.parametrize("chunk_trials", [None, 512])
def test_a_run_gives_each_position_its_p99_and_leaves_the_json_alone(chunk_trials):
    design = parse_design_text(SCATTER)
    plain = run_check(design, trials=3000)
    kept = run_check(design, trials=3000, position_percentiles=True, chunk_trials=chunk_trials)
    # The check's own figures and its JSON are those of the run without them.
    assert json.dumps(result_to_dict(plain), sort_keys=True) == \
        json.dumps(result_to_dict(kept), sort_keys=True)
    for name in ("static", "dynamic"):
        for before, after in zip(plain.checks[name].positions, kept.checks[name].positions):
            assert before.p99_voltage is None
            assert before.mean_voltage <= after.p99_voltage <= before.max_voltage
    # One chunk or several: the same figures, bit for bit.
    again = run_check(design, trials=3000, position_percentiles=True, chunk_trials=1024)
    assert [p.p99_voltage for p in again.checks["dynamic"].positions] == \
        [p.p99_voltage for p in kept.checks["dynamic"].positions]
