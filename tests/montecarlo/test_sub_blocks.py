"""A run cut into sub-blocks (a memory budget below one sampling block) gives the same figures,
bit for bit, as the default run in whole blocks (issue 15 item 10)."""

from __future__ import annotations

import json
from importlib import resources
from pathlib import Path

import numpy as np
import pytest

from stringcheck.design.reading import parse_design_text
from stringcheck.report.export import result_to_dict
from stringcheck.montecarlo.sampling import BLOCK_TRIALS, SUM_TRIALS, chunk_bounds, draw_strings
from stringcheck.studies.check import run_check
from stringcheck.montecarlo.accumulators import BlockSums, unit_sums

from tests.designs import design_text

SCATTER = design_text("scatter")

EXAMPLES = Path(__file__).resolve().parents[2] / "examples"


def _same(a, b) -> None:
    left, right = result_to_dict(a), result_to_dict(b)
    assert json.dumps(left, sort_keys=True) == json.dumps(right, sort_keys=True)


@pytest.mark.parametrize("chunk_trials", [SUM_TRIALS, 3 * SUM_TRIALS])
def test_sub_blocks_give_the_default_run_bit_for_bit(chunk_trials):
    # Static and dynamic sums over a block and a part of the next (trials not a multiple of a
    # unit either), evaluated 64 or 128 (3 x 64 rounds down to a power-of-two sub-block) trials
    # at a time against the default whole-block chunk.
    design = parse_design_text(SCATTER)
    trials = BLOCK_TRIALS + 300 + 7
    default = run_check(design, trials=trials)
    cut = run_check(design, trials=trials, chunk_trials=chunk_trials)
    assert chunk_bounds(trials, chunk_trials)[0][1] < BLOCK_TRIALS
    _same(default, cut)
    for name in ("static", "dynamic"):
        assert default.checks[name].positions == cut.checks[name].positions
        assert default.checks[name].worst_trial == cut.checks[name].worst_trial


def test_sub_blocks_give_the_forward_checks_bit_for_bit():
    # Parallel and thermal checks too: junction-temperature sums, the runaway-ambient sample (the
    # first rows of each block: the second sub-block of a block has none), the ballast.
    text = (EXAMPLES / "furnace-rectifier-3x2-parallel.toml").read_text(encoding="utf-8")
    design = parse_design_text(text.replace("trials = 5000", "trials = 4200"))
    default = run_check(design)
    cut = run_check(design, chunk_trials=BLOCK_TRIALS // 2)
    _same(default, cut)
    assert default.checks["thermal"].positions == cut.checks["thermal"].positions


def test_sub_block_draws_are_the_block_rows():
    # PCG64.advance skips the rows before a sub-block: its draws are those rows of the block.
    design = parse_design_text(SCATTER)
    whole = draw_strings(design, ("i_r", "q_rr"), 0, BLOCK_TRIALS)
    first, count = 5 * SUM_TRIALS, SUM_TRIALS
    piece = draw_strings(design, ("i_r", "q_rr"), first, count)
    for name in ("i_r", "q_rr"):
        assert np.array_equal(piece.parameters[name], whole.parameters[name][first:first + count])
    assert np.array_equal(piece.resistance, whole.resistance[first:first + count])
    assert np.array_equal(piece.capacitance, whole.capacitance[first:first + count])


def test_block_sums_do_not_depend_on_how_the_units_arrive():
    # A block sum is its units added one after another: the same whether they come in one piece
    # or scattered over many (the order of floating-point additions is fixed), and equal to
    # math.fsum within the rounding of 64 additions.
    import math

    rng = np.random.default_rng(4)
    values = rng.standard_normal((2 * BLOCK_TRIALS + 300, 3)) * 10.0 ** rng.integers(-6, 6, (1, 3))
    units = unit_sums(values)
    one = BlockSums()
    one.add(units, 0)
    scattered = BlockSums()
    cuts = [0, 1, 7, 64, 65, 130, units.shape[0]]
    for a, b in zip(cuts[:-1], cuts[1:]):
        scattered.add(units[a:b], a)
    assert len(one.blocks()) == 3
    for x, y in zip(one.blocks(), scattered.blocks()):
        assert np.array_equal(x, y)
    exact = math.fsum(values[:BLOCK_TRIALS, 0])
    assert one.blocks()[0][0] == pytest.approx(exact, rel=1e-12, abs=1e-12 * np.abs(values).max())


def test_a_trial_count_the_memory_cannot_hold_is_refused_with_the_arithmetic(monkeypatch):
    # SCATTER runs the static and dynamic checks: each trial keeps its worst ratio in each, 2 x 8
    # bytes (float64). 20,000 trials keep 320,000 B (312.5 KiB), 3 times that while summarised
    # (938 KiB), against 64 KiB "available": at most 65536 / 48 = 1365 trials, 1,000 rounded down.
    from stringcheck.errors import DesignError
    from stringcheck.studies import check

    monkeypatch.setattr(check, "available_memory", lambda: 64 * 1024)
    design = parse_design_text(SCATTER)
    with pytest.raises(DesignError) as raised:
        run_check(design, trials=20_000, chunk_trials=BLOCK_TRIALS)
    message = str(raised.value)
    assert "monte_carlo.trials" in message and "\n" not in message
    assert "20,000 trials keep 16 bytes" in message, message
    assert "312 KiB" in message and "938 KiB" in message and "64 KiB" in message, message
    assert "at most 1,000 trials" in message, message
    # With the memory there, the same run goes through.
    monkeypatch.setattr(check, "available_memory", lambda: 2 ** 30)
    assert run_check(design, trials=5000, chunk_trials=BLOCK_TRIALS).trials == 5000


def test_the_transient_check_redraws_sub_blocks_bit_for_bit(monkeypatch):
    # The turn-off redraws the strings it simulates; under a budget below a block it redraws only
    # the sub-blocks that hold them, whose draws are those rows of the block: the same check.
    from stringcheck.checks import transient as transient_check

    demo = (resources.files("stringcheck") / "data" / "demo.toml").read_text(encoding="utf-8")
    design = parse_design_text(demo)
    options = dict(trials=BLOCK_TRIALS + 500, transient=True, transient_worst=3, transient_sample=40)
    default = run_check(design, **options).checks["transient"]
    devices = design.string.series * design.string.parallel
    monkeypatch.setattr(transient_check, "CHUNK_ELEMENTS", SUM_TRIALS * devices)
    cut = run_check(design, **options).checks["transient"]
    assert default.ran and cut.ran
    assert default == cut


@pytest.mark.parametrize("width", [1, 3, 20, 257])
def test_a_unit_sum_depends_only_on_the_unit(width):
    # The property the bit-for-bit sub-blocks rest on: a unit's sum is the same whether it is
    # reduced among many units or alone, wherever it sits in memory (an 8-byte shift of a copy
    # changes its alignment); a short last unit padded with zeros equals its plain sum closely.
    rng = np.random.default_rng(width)
    values = rng.standard_normal((10 * SUM_TRIALS + 5, width)) * 10.0 ** rng.integers(-9, 9, width)
    together = unit_sums(values)
    for unit in (0, 3, 9):
        rows = values[unit * SUM_TRIALS:(unit + 1) * SUM_TRIALS]
        buffer = np.empty(rows.size + 1)
        shifted = buffer[1:].reshape(rows.shape)
        shifted[...] = rows
        assert np.array_equal(unit_sums(shifted)[0], together[unit])
    assert np.array_equal(unit_sums(values[10 * SUM_TRIALS:].copy())[0], together[10])
    assert together[10] == pytest.approx(values[10 * SUM_TRIALS:].sum(axis=0), rel=1e-12,
                                         abs=1e-12 * np.abs(values).max())
