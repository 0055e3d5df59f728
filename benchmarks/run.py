"""Speed and memory benchmarks of stringcheck (run by hand or in a nightly job, never as tests).

    python benchmarks/run.py            # full sizes
    python benchmarks/run.py --quick    # smaller sizes, a minute or less
    python benchmarks/run.py --json bench.json
    python benchmarks/run.py --quick --only turn-off

Each row: ``name``, ``ours_s`` (our engine), ``reference_s`` (the reference, on the same work),
``ratio`` (reference_s / ours_s), ``agreement`` (how closely the two answers agree), ``target`` and
``met``. Targets (DESIGN.md section 8 and the issue tracker): the static + dynamic check of 10^6
trials x 20 devices in under 2 s on one core and at least 100x a plain per-trial Python loop of the
same physics; peak memory for 10^6 trials at most 1.5x that for 10^5; peak memory for a string of
10^4 devices (the design file's maximum) at most 1.5x that for 10^3 and at most 512 MiB.

The reference loop solves the same drawn strings trial by trial in plain Python floats (bisection
on the string current for the static sharing, a sorted scan for the charge balance). It is timed on
a subset of the trials and scaled to the full count: it is linear in the trial count. On the
shared 2-core development machine the check row last measured 1.9 to 1.95 s and about 120x (met,
with little margin: the machine's load moves it by a few hundredths). Of that, drawing the
8 x 10^7 uniform scores takes about 0.25 s and mapping them through the tabulated quantile
functions about 0.55 s; the static solve about 0.45 s, the charge balance about 0.3 s and the
per-position sums about 0.2 s. (Drawing standard normals and mapping them through the truncation
instead took 1.9 s of the 2.8 s the row took before.)

The turn-off row runs 10^4 strings of 12 charge-control diodes through one turn-off with
``simulate_turn_off`` (10^3 with ``--quick``) and times scipy's ``solve_ivp`` (Radau, with the
analytic Jacobian) trial by trial on the same equations, written out here, on a subset; the
reference is scaled to the full count. Targets: at least 50x faster per trial at peak voltages
within 1 %, and 10^4 x 12 in under 60 s on one core. Agreement is measured on the subset against
Radau at rtol 1e-8. Each solver runs at the loosest tolerance of 1e-3, 1e-4, 1e-5 whose peaks
were within 1 % of that when this row was written (first three trials): rtol 1e-3 for ours (0.1 to
0.2 %; 0.03 % at its default 1e-4); 1e-5 for Radau (3e-6), which at 1e-4 took about 4 s per trial
and returned peaks 7 to 9 times too high, and at 1e-3 failed, on this stiff switching problem. The
row measures both agreements again.
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

from scipy.integrate import solve_ivp

from stringcheck.design.reading import parse_design_text
from stringcheck.physics.charge_control import (
    DEFAULT_EMISSION_COEFFICIENT,
    DEFAULT_SATURATION_CURRENT,
    forward_state,
    thermal_voltage,
)
from stringcheck.physics.leakage import leakage_current
from stringcheck.montecarlo.sampling import draw_strings
from stringcheck.solvers.transient import simulate_turn_off

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


def reference_loop(design, first: int, count: int) -> tuple[float, np.ndarray]:
    """Solve ``count`` drawn strings one by one in plain Python; (seconds, worst voltage per trial)."""
    drawn = draw_strings(design, ("i_r", "q_rr"), first, count)
    part = design.parts["B"]
    temperature = design.duty.ambient
    leak = leakage_current(drawn.parameters["i_r"], part.i_r.at_voltage, temperature,
                           reference_voltage=part.i_r.at_voltage,
                           reference_temperature=part.i_r.at_temperature,
                           doubling_temperature=part.doubling_temperature, voltage_exponent=0.5)
    coefficient = (leak / math.sqrt(part.i_r.at_voltage)).tolist()
    tcr = design.grading.resistor_tcr
    conductance = (1.0 / (drawn.resistance * (1.0 + tcr * (temperature - 25.0)))).tolist()
    capacitance = (drawn.capacitance + part.c_j).tolist()
    # Q_rr given in one row at 25 degC follows the silicon class law, 2.5x per 100 K of junction
    # temperature (docs/design-file.md, rows at several temperatures).
    charge = (drawn.parameters["q_rr"] * 2.5 ** ((temperature - 25.0) / 100.0)).tolist()
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
    from stringcheck.studies.check import run_check  # here: a row that cannot import is skipped

    design = parse_design_text(BENCH_DESIGN, source="benchmark")
    run_check(design, trials=4096)  # warm-up (imports, caches)
    start = time.perf_counter()
    result = run_check(design, trials=trials)
    ours = time.perf_counter() - start
    loop_seconds, loop_worst = reference_loop(design, 0, reference_trials)
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
    from stringcheck.studies.check import run_check

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


def _stack_of(devices: int):
    """BENCH_DESIGN with ``devices`` devices in series at the same 1.2 kV per device."""
    text = BENCH_DESIGN.replace("series = 20", f"series = {devices}").replace(
        '"24 kV"', f'"{1.2 * devices:g} kV"').replace("20 devices", f"{devices} devices")
    return parse_design_text(text, source="benchmark")


def bench_devices(devices: int, trials: int) -> dict:
    """Peak memory (tracemalloc) of the check of ``trials`` strings of ``devices`` devices against
    a tenth of the devices: the chunk budget (sub-blocks below 4096 trials) keeps it flat in the
    string's size. It was about 4.3 GB at 10^4 devices, a sampling block always 4096 trials wide."""
    start = time.perf_counter()
    small_peak = _peak_memory(_stack_of(devices // 10), trials)
    small_s = time.perf_counter() - start
    start = time.perf_counter()
    large_peak = _peak_memory(_stack_of(devices), trials)
    large_s = time.perf_counter() - start
    ratio = large_peak / small_peak
    limit = 512 * 2 ** 20
    return {"name": f"peak memory {devices:.0e} vs {devices // 10:.0e} devices x {trials} trials "
                    "(tracemalloc)",
            "ours_s": large_s, "reference_s": small_s, "ratio": ratio,
            "agreement": f"peak {large_peak / 2**20:.1f} MiB vs {small_peak / 2**20:.1f} MiB",
            "target": "ratio <= 1.5 and peak <= 512 MiB",
            "met": bool(ratio <= 1.5 and large_peak <= limit)}


# An invented 12-device string at turn-off: 12 kV through 240 uH (50 A/us) from 100 A forward;
# lifetimes scattered +-15 % (log-normal), R-C grading with 1 % and 5 % tolerances.
TURN_OFF = dict(source_voltage=12e3, inductance=240e-6, forward_current=100.0, transit_time=0.1e-6,
                junction_capacitance=20e-12, damping_resistance=47.0)
TURN_OFF_RTOL, RADAU_RTOL, RADAU_TIGHT_RTOL = 1e-3, 1e-5, 1e-8


def _turn_off_draw(trials: int, devices: int = 12, seed: int = 7) -> dict:
    rng = np.random.default_rng(seed)
    return dict(TURN_OFF,
                lifetime=0.5e-6 * np.exp(rng.normal(0.0, 0.15, (trials, devices))),
                grading_resistance=10e6 * (1.0 + 0.01 * rng.uniform(-1.0, 1.0, (trials, devices))),
                grading_capacitance=4.7e-9 * (1.0 + 0.05 * rng.uniform(-1.0, 1.0,
                                                                      (trials, devices))))


def _radau_turn_off(inputs: dict, trial: int, end: float, rtol: float) -> tuple[float, np.ndarray]:
    """One trial by solve_ivp (Radau) on the engine's equations; (seconds, peak reverse voltages).

    The state is (v, q_M, w, i) as in the module notes of stringcheck.solvers.transient; the
    exponent of q_E is capped at 300 as the engine caps it, so that a trial step into deep forward
    bias stays finite. Peaks from the dense output on 20 001 points (0.4 ns apart here).
    """
    source, inductance = inputs["source_voltage"], inputs["inductance"]
    current, transit = inputs["forward_current"], inputs["transit_time"]
    junction, damping = inputs["junction_capacitance"], inputs["damping_resistance"]
    lifetime = inputs["lifetime"][trial]
    shunt = 1.0 / inputs["grading_resistance"][trial]
    capacitor = inputs["grading_capacitance"][trial]
    count = lifetime.size
    scale = 1.0 / (DEFAULT_EMISSION_COEFFICIENT * float(thermal_voltage(300.0)))
    saturation = DEFAULT_SATURATION_CURRENT * lifetime
    index = np.arange(count)

    def rates(_, state):
        v, q, w, i = state[:count], state[count:2 * count], state[2 * count:3 * count], state[-1]
        diode = (saturation * np.expm1(np.minimum(scale * v, 300.0)) - q) / transit
        branch = (v - w) / damping
        return np.concatenate([(i - diode - shunt * v - branch) / junction, diode - q / lifetime,
                               branch / capacitor, [(-source - v.sum()) / inductance]])

    def jacobian(_, state):
        slope = saturation * scale * np.exp(np.minimum(scale * state[:count], 300.0)) / transit
        matrix = np.zeros((3 * count + 1, 3 * count + 1))
        matrix[index, index] = -(slope + shunt + 1.0 / damping) / junction
        matrix[index, count + index] = 1.0 / (transit * junction)
        matrix[index, 2 * count + index] = 1.0 / (damping * junction)
        matrix[index, -1] = 1.0 / junction
        matrix[count + index, index] = slope
        matrix[count + index, count + index] = -1.0 / transit - 1.0 / lifetime
        matrix[2 * count + index, index] = 1.0 / (damping * capacitor)
        matrix[2 * count + index, 2 * count + index] = -1.0 / (damping * capacitor)
        matrix[-1, index] = -1.0 / inductance
        return matrix

    start_time = time.perf_counter()
    start = forward_state(current, lifetime, transit, shunt_conductance=shunt)
    initial = np.concatenate([start.junction_voltage, start.stored_charge,
                              start.junction_voltage, [current]])
    floor = np.concatenate([np.full(count, source / count), lifetime * current,
                            np.full(count, source / count), [current]])
    with np.errstate(over="ignore", invalid="ignore"):
        solution = solve_ivp(rates, (0.0, end), initial, method="Radau", rtol=rtol,
                             atol=rtol * floor, jac=jacobian, dense_output=True)
    if solution.status != 0:
        return time.perf_counter() - start_time, np.full(count, np.nan)
    peaks = -solution.sol(np.linspace(0.0, end, 20_001))[:count].min(axis=1)
    return time.perf_counter() - start_time, peaks


def bench_turn_off(trials: int, reference_trials: int) -> dict:
    inputs = _turn_off_draw(trials)
    simulate_turn_off(**_turn_off_draw(16, seed=1), rtol=TURN_OFF_RTOL)  # warm-up
    start = time.perf_counter()
    result = simulate_turn_off(**inputs, rtol=TURN_OFF_RTOL)
    ours = time.perf_counter() - start
    subset = range(reference_trials)
    timed = [_radau_turn_off(inputs, k, result.end_time[k], RADAU_RTOL) for k in subset]
    tight = np.array([_radau_turn_off(inputs, k, result.end_time[k], RADAU_TIGHT_RTOL)[1]
                      for k in subset])
    reference = sum(seconds for seconds, _ in timed) * trials / reference_trials
    ours_error = float(np.max(np.abs(result.peak_voltage[:reference_trials] / tight - 1.0)))
    radau_error = float(np.max(np.abs(np.array([peaks for _, peaks in timed]) / tight - 1.0)))
    ratio = reference / ours
    return {"name": f"turn-off {trials:.0e} strings x 12 devices, TR-BDF2 batch vs Radau per "
                    f"trial, 1 core",
            "ours_s": ours, "reference_s": reference, "ratio": ratio,
            "agreement": f"peak voltages of the first {reference_trials} trials against Radau at "
                         f"rtol {RADAU_TIGHT_RTOL:g}: ours (rtol {TURN_OFF_RTOL:g}) "
                         f"{ours_error:.1e}, timed Radau (rtol {RADAU_RTOL:g}) {radau_error:.1e} "
                         f"relative; {int(result.converged.sum())}/{trials} converged",
            "target": "ratio >= 50 at peaks within 1 %, ours_s < 60 s at 1e4 trials",
            "met": bool(ratio >= 50.0 and ours_error <= 0.01 and radau_error <= 0.01
                        and ours < 60.0 * trials / 1e4 and result.converged.all())}


def _sized_stack(devices: int):
    """The bundled demo design (24 devices) or an invented stack of ``devices`` of its part at
    the demo's 1.25 kV per device and 10 mA (the issue's 60-device, 10 mA job)."""
    from importlib import resources

    text = (resources.files("stringcheck") / "data" / "demo.toml").read_text("utf-8")
    if devices != 24:
        text = text.replace('reverse_voltage = "30 kV"', f'reverse_voltage = "{1.25 * devices} kV"')
        text = text.replace('forward_current = "0.5 A"', 'forward_current = "10 mA"')
        text = text.replace("series = 24", f"series = {devices}")
    return parse_design_text(text, source=f"stack of {devices}")


def bench_size(devices: int, target_s: float) -> dict:
    """``size`` with its time-domain confirmation (the default): the wall time, the time of each
    step (the progress messages) and the cost per candidate (run_check calls)."""
    from stringcheck.studies import size as size_module
    from stringcheck.studies.size import size

    design = _sized_stack(devices)
    steps: list[tuple[str, float]] = []
    calls = {"count": 0}
    original = size_module.run_check

    def counted(*args, **kwargs):
        calls["count"] += 1
        return original(*args, **kwargs)

    size_module.run_check = counted
    try:
        start = time.perf_counter()
        result = size(design, progress=lambda message: steps.append((message, time.perf_counter())))
        total = time.perf_counter() - start
    finally:
        size_module.run_check = original
    spent: dict[str, float] = {}
    marks = [(name, at) for name, at in steps] + [("end", start + total)]
    for (name, at), (_, after) in zip(marks, marks[1:]):
        spent[name] = spent.get(name, 0.0) + after - at
    where = ", ".join(f"{name} {seconds:.1f} s" for name, seconds in
                      sorted(spent.items(), key=lambda item: -item[1])[:4])
    return {"name": f"size {devices} devices, {design.monte_carlo.trials:,} trials, time-domain "
                    f"confirmation included, 1 core",
            "ours_s": total, "reference_s": None, "ratio": None,
            "agreement": f"R {result.resistor.chosen.value:.3g} ohm, C "
                         f"{result.design.grading.capacitor:.3g} F, R_d "
                         f"{result.damping_resistor:.3g} ohm, verdict {result.check.verdict}; "
                         f"{calls['count']} checks run, {total / calls['count']:.2f} s per "
                         f"candidate on average; where it goes: {where}",
            "target": f"ours_s < {target_s:g} s",
            "met": bool(total < target_s)}


# Two stages, one with unscreened lognormal leakage: the failure region is a half-plane in latent
# space, P(fail) = Phi(-beta) exactly (tests/montecarlo/test_importance.py has the derivation).
RARE_DESIGN = """
[duty]
reverse_voltage = "2 kV"
[string]
series = 2
derating = 1.0
part = "FIX"
[[string.position]]
index = 2
part = "VAR"
[parts.FIX]
v_rrm = "VR V"
i_r = { typ = "1 uA", at_temperature = "25 degC" }
leakage_voltage_exponent = 0
[parts.VAR]
v_rrm = "VR V"
i_r = { typ = "1 uA", max = "10 uA", at_temperature = "25 degC" }
leakage_voltage_exponent = 0
[grading]
resistor = "100 MOhm"
[monte_carlo]
trials = 4096
seed = 1
screened = false
"""


def bench_rare(samples: int) -> dict:
    """Importance sampling at P = 1e-4 against the plain Monte Carlo that reaches the same
    relative standard error: n = (1 - p) / (p r^2) trials, timed on 10^5 trials and scaled."""
    from scipy import stats

    from stringcheck.studies.check import run_check

    beta = float(stats.norm.isf(1e-4))
    leakage = 1e-6 * math.exp(math.log(10.0) / 3.0 * beta)
    v_rrm = float(1000.0 + 100e6 * (leakage - 1e-6) / 2.0)
    design = parse_design_text(RARE_DESIGN.replace("VR V", f"{v_rrm!r} V"), source="benchmark")
    run_check(design, trials=4096, rare=True, rare_samples=1000)  # warm-up
    start = time.perf_counter()
    rare = run_check(design, trials=4096, rare=True, rare_samples=samples).checks["static"].rare
    ours = time.perf_counter() - start
    relative = rare.std_error / rare.p_fail
    exact = 1e-4
    plain_trials = (1 - exact) / (exact * relative ** 2)
    start = time.perf_counter()
    run_check(design, trials=100_000)
    per_trial = (time.perf_counter() - start) / 100_000
    reference = per_trial * plain_trials
    return {"name": f"rare events at P = 1e-4: importance sampling ({samples:,} samples) vs plain "
                    "Monte Carlo at the same relative error",
            "ours_s": ours, "reference_s": reference, "ratio": reference / ours,
            "agreement": f"estimate {rare.p_fail:.4g} vs exact {exact:g} (relative standard error "
                         f"{relative:.2%}); plain Monte Carlo needs {plain_trials:,.0f} trials, "
                         f"{plain_trials / samples:,.0f}x the samples",
            "target": "faster than plain Monte Carlo at the same relative error",
            "met": bool(reference > ours and abs(rare.p_fail - exact) <= 3 * rare.std_error)}


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller sizes")
    parser.add_argument("--json", metavar="PATH", help="also write the rows as JSON")
    parser.add_argument("--only", choices=("check", "memory", "devices", "turn-off", "rare",
                                           "size-demo", "size-60"),
                        action="append",
                        help="run only this row (repeatable)")
    options = parser.parse_args(argv)
    trials = 100_000 if options.quick else 1_000_000
    benches = {
        "check": lambda: bench_check(trials, 2000 if options.quick else 5000),
        "memory": lambda: bench_memory(trials // 10, trials),
        "devices": lambda: bench_devices(2000 if options.quick else 10_000, 4096),
        "turn-off": lambda: bench_turn_off(1000 if options.quick else 10_000,
                                           3 if options.quick else 10),
        "rare": lambda: bench_rare(5000 if options.quick else 20_000),
        # Issue 18: size on the demo within 20 s, a 60-device stack within 2 minutes.
        "size-demo": lambda: bench_size(24, 20.0),
        "size-60": lambda: bench_size(60, 120.0),
    }
    rows = []
    for name, bench in benches.items():
        if options.only and name not in options.only:
            continue
        try:
            row = bench()
        except ImportError as error:  # a part of the package this branch does not have yet
            print(f"{name}: not run ({error})")
            continue
        rows.append(row)
        reference = "none" if row["reference_s"] is None else f"{row['reference_s']:.2f} s, " \
            f"ratio {row['ratio']:.3g}"
        print(f"{row['name']}: ours {row['ours_s']:.2f} s, reference {reference}; "
              f"{row['agreement']}; target {row['target']}: "
              f"{'met' if row['met'] else 'NOT met'}", flush=True)
    if options.json:
        Path(options.json).write_text(json.dumps(rows, indent=2) + "\n", encoding="utf-8")
    return 0

if __name__ == "__main__":
    sys.exit(main())
