"""The benchmark script stays runnable: its per-trial reference loop (plain Python, the textbook
stage equations of docs/methods/static.md and docs/methods/dynamic.md solved one string at a time)
agrees with the engine on a few strings. No timing here: speed targets are benchmarks/run.py's."""

from __future__ import annotations

import importlib.util
from pathlib import Path

import pytest

from stringcheck.design.reading import parse_design_text
from stringcheck.studies.check import run_check

SCRIPT = Path(__file__).resolve().parents[1] / "benchmarks" / "run.py"


def _bench():
    spec = importlib.util.spec_from_file_location("benchmark_run", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


def test_the_reference_loop_of_the_check_row_agrees_with_the_engine():
    bench = _bench()
    design = parse_design_text(bench.BENCH_DESIGN, source="benchmark")
    _, worst = bench.reference_loop(design, 0, 40)
    engine = run_check(design, trials=40)
    engine_worst = max(engine.checks["static"].worst_voltage, engine.checks["dynamic"].worst_voltage)
    assert float(worst.max()) == pytest.approx(engine_worst, rel=1e-9)


def test_the_size_rows_build_their_stacks():
    # The size rows (issue 18) run the bundled demo and a 60-device stack of its part at the same
    # 1.25 kV per device and 10 mA; the script must still build them (no timing here).
    bench = _bench()
    demo, sixty = bench._sized_stack(24), bench._sized_stack(60)
    assert demo.string.series == 24 and demo.duty.reverse_voltage == 30e3
    assert sixty.string.series == 60 and sixty.duty.reverse_voltage == pytest.approx(75e3)
    assert sixty.duty.forward_current == pytest.approx(10e-3)
