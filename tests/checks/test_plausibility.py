"""Plausibility warnings: valid values that are probably unit slips warn, ordinary designs do not."""

from __future__ import annotations

import json
import math
from importlib import resources
from pathlib import Path

import pytest

from stringcheck.design.reading import load_design, parse_design_text
from stringcheck.checks.plausibility import plausibility_warnings
from stringcheck.report.export import json_text, result_to_dict
from stringcheck.studies.check import run_check

from tests.designs import design_text

# The shared stack types 20 A/us on a 50 Hz half-sine, 40,000 x its natural slope: a stray
# inductance that forces that slope (3 kV / 150 uH = 20 A/us) keeps it an ordinary design here.
BASE = design_text("one_kv_stack").replace(
    'ambient = "25 degC"', 'ambient = "25 degC"\nstray_inductance = "150 uH"') + """[grading]
resistor = "10 MOhm"
capacitor = "1 nF"
[monte_carlo]
trials = 400
confidence = 0.95
[sizing]
target_p_fail = 0.02
"""


def keys(text: str, **options) -> list[str]:
    return [w.key for w in plausibility_warnings(parse_design_text(text), **options)]


def test_an_ordinary_design_has_no_warning():
    assert keys(BASE) == []


# Each slip is a valid value that runs silently without the warning; thresholds sit orders of
# magnitude from ordinary values (common practice: stacks run each device at some 30-80 % of V_RRM,
# commutate at 1-1000 A/us, leakage max about a decade above typ).
SLIPS = [
    # "3" meant as kV: 0.75 V per 1 kV device, 7.5e-4 of its rating.
    ('reverse_voltage = "3 kV"', "reverse_voltage = 3", "duty.reverse_voltage"),
    # "20" meant as A/us: 20 A/s.
    ('\ndi_dt = "20 A/us"', "\ndi_dt = 20", "duty.di_dt"),
    ('at_di_dt = "20 A/us", at_forward', "at_di_dt = 20, at_forward", "parts.F.q_rr.at_di_dt"),
    # max in mA where uA was meant: 6000 x typ.
    ('max = "3 uA"', 'max = "3 mA"', "parts.F.i_r"),
    ('typ = "60 nC", max = "100 nC"', 'typ = "60 nC", max = "100 uC"', "parts.F.q_rr"),
    ("target_p_fail = 0.02", "target_p_fail = 0.5", "sizing.target_p_fail"),
    ("confidence = 0.95", "confidence = 0.4", "monte_carlo.confidence"),
    ('ambient = "25 degC"', 'ambient = "-70 degC"', "duty.ambient"),
]


@pytest.mark.parametrize("text,slip,key", SLIPS)
def test_each_slip_warns_under_its_key(text, slip, key):
    assert text in BASE
    found = keys(BASE.replace(text, slip))
    assert found == [key], found


@pytest.mark.parametrize("text,edge", [
    ("target_p_fail = 0.02", "target_p_fail = 0.1"),      # at the threshold: no warning
    ("confidence = 0.95", "confidence = 0.5"),
    ('ambient = "25 degC"', 'ambient = "-60 degC"'),
    ('max = "3 uA"', 'max = "0.49 mA"'),                  # 980 x typ
    ('reverse_voltage = "3 kV"', 'reverse_voltage = "40 V"'),  # 10 V a device, 1 % of V_RRM
])
def test_values_at_the_thresholds_do_not_warn(text, edge):
    assert keys(BASE.replace(text, edge)) == []


def test_slow_slope_threshold_follows_the_half_sine_zero_crossing():
    # A half-sine of average I has I_pk = pi I and slope omega I_pk at its zero (closed form of
    # d/dt I_pk sin(omega t) at t = 0): a natural turn-off as slow as that is no slip. At 50 Hz and
    # 1 A that is 987 A/s; the warning starts below a tenth of it (98.7 A/s), under 1 kA/s.
    natural = 2 * math.pi * 50 * math.pi * 1.0
    slow = BASE.replace('\ndi_dt = "20 A/us"', f"\ndi_dt = {0.2 * natural}")
    assert keys(slow) == []
    slower = BASE.replace('\ndi_dt = "20 A/us"', f"\ndi_dt = {0.09 * natural}")
    assert keys(slower) == ["duty.di_dt"]
    # Without the half-sine's figures the plain 1 kA/s threshold applies.
    dc = slow.replace('waveform = "half-sine"', 'waveform = "dc"')
    assert keys(dc) == ["duty.di_dt"]


def test_megawatt_grading_loss_warns_only_without_a_power_rating():
    # A resistance written without its prefix: 40 stages of 750 V on 0.1 ohm, half-sine reverse
    # voltage with mean square V^2 / 2 over half the period, so P = V^2 / (4 R) a stage:
    # 40 x 750^2 / 0.4 = 56 MW.
    text = BASE.replace('resistor = "10 MOhm"', "resistor = 0.1").replace(
        'reverse_voltage = "3 kV"', 'reverse_voltage = "30 kV"').replace("series = 4", "series = 40")
    loss = 40 * 750.0 ** 2 / (4 * 0.1)
    assert keys(text, grading_loss=loss) == ["grading.resistor"]
    assert keys(text, grading_loss=0.9e6) == []
    rated = text.replace('capacitor = "1 nF"', 'capacitor = "1 nF"\nresistor_rated_power = "2 W"')
    assert keys(rated, grading_loss=loss) == []
    # The check computes the loss itself and carries the warning into its result and JSON.
    result = run_check(parse_design_text(text), trials=50, only=("static",))
    assert result.grading.total_grading_loss == pytest.approx(loss, rel=1e-12)
    assert [w.key for w in result.warnings] == ["grading.resistor"]
    data = json.loads(json_text(result_to_dict(result)))
    assert [w["key"] for w in data["warnings"]] == ["grading.resistor"]
    assert "MW" in data["warnings"][0]["message"]


def test_several_slips_each_warn_once():
    text = BASE
    for old, new, _ in SLIPS:
        text = text.replace(old, new)
    assert sorted(keys(text)) == sorted({key for _, _, key in SLIPS})


# The examples that type 10 A/us on a 50 Hz half-wave supply with no stray inductance (issue 17:
# orders of magnitude off the natural slope) warn so; nothing else in them does.
NATURAL_SLOPE_WARNED = {"furnace-rectifier-3x2-parallel", "precipitator-30kv",
                        "precipitator-30kv-measured"}


def test_examples_and_demo_raise_only_the_natural_slope_warning():
    examples = sorted(Path(__file__).resolve().parents[2].joinpath("examples").glob("*.toml"))
    assert examples
    for path in examples:
        design = load_design(path)
        if design.circuit is not None:  # each stack's derived duty (issue 23)
            from dataclasses import replace

            from stringcheck.studies.circuit import circuit_stacks

            for stack in circuit_stacks(design)[0]:
                assert plausibility_warnings(replace(design, duty=stack.duty)) == (), path
            continue
        expected = [("duty.di_dt", "plausibility.di_dt_far_from_natural")] \
            if path.stem in NATURAL_SLOPE_WARNED else []
        found = [(w.key, w.finding.code) for w in plausibility_warnings(design)]
        assert found == expected, path
    demo = (resources.files("stringcheck") / "data" / "demo.toml").read_text(encoding="utf-8")
    found = plausibility_warnings(parse_design_text(demo))
    assert [w.finding.code for w in found] == ["plausibility.di_dt_far_from_natural"]
    # By hand: 0.5 A average, I_pk = pi 0.5 A, omega I_pk = 2 pi 50 pi 0.5 = 493.5 A/s;
    # 10 A/us / 493.5 A/s = 20,264.
    assert found[0].finding.values["factor"].number == pytest.approx(1e7 / 493.48, rel=1e-4)


@pytest.mark.parametrize("di_dt, stray, warned, direction", [
    ('"20 A/us"', None, True, "faster"),           # 40,528 x the natural 493.5 A/s x 2 (1 A)
    ('"20 A/us"', '"150 uH"', False, None),        # a stray inductance forces the slope
    ("98700", None, True, "faster"),                # 100.0 x the natural 986.96 A/s
    ("98000", None, False, None),                   # 99.3 x: within two orders of magnitude
    ("1000", None, False, None),                    # about the natural slope
    ("9.8", None, True, "slower"),                  # a hundredth of it
])
def test_di_dt_far_from_the_natural_slope_warns(di_dt, stray, warned, direction):
    # Natural slope by hand: I_AV = 1 A, I_pk = pi A, omega I_pk = 2 pi 50 pi = 986.96 A/s.
    text = design_text("one_kv_stack").replace('di_dt = "20 A/us"', f"di_dt = {di_dt}")
    if stray:
        text = text.replace('ambient = "25 degC"', f'ambient = "25 degC"\nstray_inductance = {stray}')
    found = [w for w in plausibility_warnings(parse_design_text(text))
             if w.finding.code == "plausibility.di_dt_far_from_natural"]
    assert bool(found) == warned
    if warned:
        assert found[0].key == "duty.di_dt"
        assert found[0].finding.values["direction"].number == direction
        assert found[0].finding.values["natural"].number == pytest.approx(
            2 * math.pi * 50 * math.pi * 1.0, rel=1e-12)


def test_check_command_shows_the_warning_and_exports_it(tmp_path):
    # Through the command line: the full report and the --quiet line both show the warning under
    # its key, the run goes on (the verdict decides the exit code), and JSON lists it.
    from typer.testing import CliRunner

    from stringcheck.cli.app import app

    design = tmp_path / "slip.toml"
    design.write_text(BASE.replace('ambient = "25 degC"', 'ambient = "-70 degC"'),
                      encoding="utf-8")
    out = tmp_path / "out.json"
    runner = CliRunner()
    full = runner.invoke(app, ["check", str(design), "--trials", "400", "--json", str(out)])
    assert full.exit_code in (0, 1), full.output
    text = " ".join(full.stdout.split())
    assert "warning: duty.ambient: -70 degC is colder than -60 degC" in text
    data = json.loads(out.read_text(encoding="utf-8"))
    assert data["warnings"] == [{"key": "duty.ambient", "message": data["warnings"][0]["message"],
                                 "code": "plausibility.ambient_cold"}]
    assert data["warnings"][0]["message"].startswith("-70 degC is colder than -60 degC")
    quiet = runner.invoke(app, ["check", str(design), "--trials", "400", "--quiet"])
    assert quiet.exit_code == full.exit_code, quiet.output
    assert "warning: duty.ambient:" in quiet.stdout
