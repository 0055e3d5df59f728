"""Speed and memory benchmarks of stringcheck (run by hand or in a nightly job, never as tests).

    python benchmarks/run.py            # full sizes
    python benchmarks/run.py --quick    # smaller sizes, a minute or less
    python benchmarks/run.py --json bench.json

Each row: ``name``, ``ours_s`` (our engine), ``reference_s`` (the reference, on the same work),
``ratio`` (reference_s / ours_s), ``agreement`` (how closely the two answers agree), ``target`` and
``met``. Targets (DESIGN.md section 8 and the issue tracker): the static + dynamic check of 10^6
trials x 20 devices in under 2 s on one core and at least 100x a plain per-trial Python loop of the
same physics; peak memory for 10^6 trials at most 1.5x that for 10^5.

The reference loop solves the same drawn strings trial by trial in plain Python floats (bisection
on the string current for the static sharing, a sorted scan for the charge balance). It is timed on
a subset of the trials and scaled to the full count: it is linear in the trial count.
"""

from __future__ import annotations

import argparse
import json
import math
import sys
import time
import tracemalloc
from pathlib import Path

import numpy as np

from stringcheck.design import parse_design_text
from stringcheck.physics.leakage import leakage_current
from stringcheck.sampling import draw_strings
from stringcheck.studies.check import run_check

# An invented 20-device stack with R and C grading and square-root leakage (m = 1/2).
BENCH_DESIGN = """
[design]
title = "benchmark stack, 20 devices"
[duty]
reverse_voltage = "24 kV"
waveform = "half-sine"
frequency = "50 Hz"
di_dt = "20 A/us"
ambient = "40 degC"
[string]
series = 20
derating = 0.8
part = "B"
[parts.B]
v_rrm = "1.8 kV"
i_r = { typ = "1 uA", max = "10 uA", at_temperature = "25 degC" }
q_rr = { typ = "0.4 uC", max = "0.8 uC" }
c_j = "20 pF"
leakage_voltage_exponent = 0.5
[grading]
resistor = "10 MOhm"
resistor_tolerance = "1 %"
capacitor = "4.7 nF"
capacitor_tolerance = "5 %"
damping_resistor = "47 Ohm"
[monte_carlo]
trials = 1000
seed = 11
"""


def _reference_loop(design, first: int, count: int) -> tuple[float, np.ndarray]:
    """Solve ``count`` drawn strings one by one in plain Python; (seconds, worst voltage per trial)."""
    drawn = draw_strings(design, ("i_r", "q_rr"), first, count)
    part = design.parts["B"]
    temperature = design.duty.ambient
    leak = leakage_current(drawn.parameters["i_r"], part.i_r.at_voltage, temperature,
                           reference_voltage=part.i_r.at_voltage,
                           reference_temperature=part.i_r.at_temperature,
                           doubling_temperature=part.leakage_doubling, voltage_exponent=0.5)
    coefficient = (leak / math.sqrt(part.i_r.at_voltage)).tolist()
    tcr = design.grading.resistor_tcr
    conductance = (1.0 / (drawn.resistance * (1.0 + tcr * (temperature - 25.0)))).tolist()
    capacitance = (drawn.capacitance + part.c_j).tolist()
    charge = drawn.parameters["q_rr"].tolist()
    v_s = design.duty.reverse_voltage
    worst = []
    start = time.perf_counter()
    for trial in range(count):
        g, c = conductance[trial][0], coefficient[trial][0]

        def stage_voltages(current):
            out = []
            for gk, ck in zip(g, c):
                root = 2.0 * current / (ck + math.sqrt(ck * ck + 4.0 * gk * current))
                out.append(root * root)
            return out

        low, high = 0.0, 1.0
        while sum(stage_voltages(high)) < v_s:
            high *= 2.0
        for _ in range(200):
            middle = 0.5 * (low + high)
            if sum(stage_voltages(middle)) < v_s:
                low = middle
            else:
                high = middle
            if high - low <= 1e-13 * high:
                break
        static_worst = max(stage_voltages(high))
        q, cap = charge[trial][0], capacitance[trial][0]
        order = sorted(range(len(q)), key=lambda k: q[k])
        inverse_sum = weighted = 0.0
        level = 0.0
        for position, k in enumerate(order):
            inverse_sum += 1.0 / cap[k]
            weighted += q[k] / cap[k]
            level = (v_s + weighted) / inverse_sum
            following = q[order[position + 1]] if position + 1 < len(order) else math.inf
            if level <= following:
                break
        dynamic_worst = max(max(level - qk, 0.0) / ck for qk, ck in zip(q, cap))
        worst.append(max(static_worst, dynamic_worst))
    return time.perf_counter() - start, np.array(worst)


def bench_check(trials: int, reference_trials: int) -> dict:
    design = parse_design_text(BENCH_DESIGN, source="benchmark")
    run_check(design, trials=4096)  # warm-up (imports, caches)
    start = time.perf_counter()
    result = run_check(design, trials=trials)
    ours = time.perf_counter() - start
    loop_seconds, loop_worst = _reference_loop(design, 0, reference_trials)
    reference = loop_seconds * trials / reference_trials
    engine = run_check(design, trials=reference_trials)
    engine_worst = max(engine.checks["static"].worst_voltage, engine.checks["dynamic"].worst_voltage)
    agreement = abs(engine_worst - float(loop_worst.max())) / float(loop_worst.max())
    return {"name": f"check static+dynamic {trials:.0e} trials x 20 devices, 1 core",
            "ours_s": ours, "reference_s": reference, "ratio": reference / ours,
            "agreement": f"worst voltage of the first {reference_trials} trials: relative "
                         f"difference {agreement:.1e}",
            "target": "ours_s < 2 s at 1e6 trials and ratio >= 100",
            "met": bool(ours < 2.0 * trials / 1e6 and reference / ours >= 100),
            "verdict": result.verdict}


def _peak_memory(design, trials: int) -> int:
    tracemalloc.start()
    run_check(design, trials=trials)
    _, peak = tracemalloc.get_traced_memory()
    tracemalloc.stop()
    return peak


def bench_memory(small: int, large: int) -> dict:
    design = parse_design_text(BENCH_DESIGN, source="benchmark")
    start = time.perf_counter()
    small_peak = _peak_memory(design, small)
    small_s = time.perf_counter() - start
    start = time.perf_counter()
    large_peak = _peak_memory(design, large)
    large_s = time.perf_counter() - start
    ratio = large_peak / small_peak
    return {"name": f"peak memory {large:.0e} vs {small:.0e} trials (tracemalloc)",
            "ours_s": large_s, "reference_s": small_s, "ratio": ratio,
            "agreement": f"peak {large_peak / 2**20:.1f} MiB vs {small_peak / 2**20:.1f} MiB",
            "target": "ratio <= 1.5", "met": bool(ratio <= 1.5)}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller sizes")
    parser.add_argument("--json", metavar="PATH", help="also write the rows as JSON")
    options = parser.parse_args(argv)
    trials = 100_000 if options.quick else 1_000_000
    rows = [bench_check(trials, 2000 if options.quick else 5000),
            bench_memory(trials // 10, trials)]
    for row in rows:
        print(f"{row['name']}: ours {row['ours_s']:.2f} s, reference {row['reference_s']:.2f} s, "
              f"ratio {row['ratio']:.3g}; {row['agreement']}; target {row['target']}: "
              f"{'met' if row['met'] else 'NOT met'}")
    if options.json:
        Path(options.json).write_text(json.dumps(rows, indent=2) + "\n", encoding="utf-8")
    return 0


if __name__ == "__main__":
    sys.exit(main())
