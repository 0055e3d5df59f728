"""End of life on the check's draws (montecarlo.sampling.aged_strings, studies.end_of_life)."""

from __future__ import annotations

import json
from dataclasses import replace

import numpy as np
import pytest
from typer.testing import CliRunner

from stringcheck.cli.app import app
from stringcheck.design.reading import parse_design_text
from stringcheck.errors import DesignError
from stringcheck.montecarlo.sampling import draw_strings
from stringcheck.studies.end_of_life import run_end_of_life
from tests.designs import design_text
from tests.studies.test_faults import _fixed


def _aged(text: str, **changes):
    design = parse_design_text(text)
    return replace(design, end_of_life=replace(design.end_of_life, enabled=True, **changes))


@pytest.mark.parametrize("mode, low, high", [("band", -0.05, 0.05), ("shift", 0.0, 0.05)])
def test_drift_stays_in_its_band_and_does_not_depend_on_the_chunks(mode, low, high):
    design = parse_design_text(design_text("scatter"))
    aged = _aged(design_text("scatter"), resistor_drift=0.05, resistor_drift_mode=mode)
    before = draw_strings(design, ("i_r",), 0, 5000, seed=3)
    after = draw_strings(aged, ("i_r",), 0, 5000, seed=3)
    change = after.resistance / before.resistance - 1
    assert change.min() >= low - 1e-12 and change.max() <= high + 1e-12
    assert change.max() - change.min() > 0.9 * (high - low)  # the whole band is drawn
    # The device draws are the initial ones (common random numbers), and a later chunk of the
    # same run draws the same drift.
    assert np.array_equal(after.parameters["i_r"], before.parameters["i_r"])
    late = draw_strings(aged, ("i_r",), 4500, 500, seed=3)
    assert np.array_equal(late.resistance, after.resistance[4500:])


def test_surface_shunt_on_a_fraction_of_stages():
    aged = _aged(design_text("scatter"), surface_resistance=1e9, surface_fraction=0.25)
    drawn = draw_strings(aged, ("i_r",), 0, 4096, seed=3)
    shunted = drawn.surface_conductance > 0
    assert shunted.mean() == pytest.approx(0.25, abs=0.01)
    assert np.all(drawn.surface_conductance[shunted] == 1e-9)


def test_end_of_life_lowers_the_margin_and_no_change_keeps_it():
    # Drift and a shunt on some stages unbalance a no-scatter string: its worst stress rises.
    text = _fixed(series=10, string_voltage="6 kV", extra=(
        '[end_of_life]\nresistor_drift = "5 %"\nsurface_resistance = "2 GOhm"\n'
        'surface_fraction = 0.3\ncapacitor_dc_bias = "30 %"'))
    text = text.replace('capacitor = "1 nF"', 'capacitor = "1 nF"\ncapacitor_rated_voltage = "2 kV"')
    study = run_end_of_life(parse_design_text(text), trials=512)
    pairs = {item.check: item for item in study.margins}
    assert pairs["static"].end_of_life_worst_ratio > pairs["static"].initial_worst_ratio
    assert pairs["static"].initial_margin == pytest.approx(1 - 600 / 800, rel=1e-9)
    assert study.to_dict()["margins"][0]["check"] == "static"
    # A shunt on no stage and no other change: the end-of-life run is the initial one.
    quiet = _fixed(series=10, string_voltage="6 kV", extra=(
        '[end_of_life]\nsurface_resistance = "2 GOhm"\nsurface_fraction = 0'))
    same = run_end_of_life(parse_design_text(quiet), trials=256)
    for item in same.margins:
        assert item.end_of_life_worst_ratio == item.initial_worst_ratio


@pytest.mark.parametrize("lines, key", [
    ('resistor_drift = "60 %"', "end_of_life.resistor_drift"),
    ('resistor_voltage_coefficient = "100 ppm/K"', "end_of_life.resistor_voltage_coefficient"),
    ('capacitor_dc_bias = "20 %"', "grading.capacitor_rated_voltage"),
    ('surface_fraction = 0.5', "end_of_life.surface_fraction"),
    ('resistor_drift_mode = "up"', "end_of_life.resistor_drift_mode"),
])
def test_bad_end_of_life_input_is_refused(lines, key):
    with pytest.raises(DesignError, match=key.replace(".", r"\.")):
        parse_design_text(_fixed(extra=f"[end_of_life]\n{lines}"))


def test_cli_end_of_life_json_and_errors(tmp_path):
    path = tmp_path / "stack.toml"
    path.write_text(_fixed(series=10, string_voltage="6 kV", trials=256, extra=(
        '[end_of_life]\nresistor_voltage_coefficient = "-100 ppm/V"')), encoding="utf-8")
    out = tmp_path / "result.json"
    run = CliRunner().invoke(app, ["check", str(path), "--end-of-life", "--json", str(out)])
    assert run.exit_code in (0, 1), run.output
    assert "End of life" in run.output and "margin" in run.output
    data = json.loads(out.read_text(encoding="utf-8"))
    assert data["end_of_life"]["settings"]["resistor_voltage_coefficient"] == pytest.approx(-1e-4)
    assert "static" in data["end_of_life"]["checks"]
    # Equal stages keep equal shares whatever R(V): the static stress is unchanged.
    static = data["end_of_life"]["margins"][0]
    assert static["end_of_life_worst_ratio"] == pytest.approx(static["initial_worst_ratio"])
    plain = tmp_path / "plain.toml"
    plain.write_text(_fixed(), encoding="utf-8")
    bad = CliRunner().invoke(app, ["check", str(plain), "--end-of-life"])
    assert bad.exit_code == 2 and "end_of_life" in bad.output, bad.output
    assert len(bad.output.strip().splitlines()) == 1
    rare = CliRunner().invoke(app, ["check", str(path), "--end-of-life", "--rare"])
    assert rare.exit_code == 2, rare.output
