"""The [circuit] table (issue 23): what it reads, and its one-line errors naming the key."""

from __future__ import annotations

import math
from pathlib import Path

import pytest

from stringcheck.design.reading import parse_design_text
from stringcheck.errors import DesignError

EXAMPLE = (Path(__file__).resolve().parents[2] / "examples" /
           "multiplier-6stage-circuit.toml").read_text(encoding="utf-8")


def _edited(old: str, new: str) -> str:
    assert EXAMPLE.count(old) == 1, old
    return EXAMPLE.replace(old, new)


def test_circuit_is_read_in_si_and_the_duty_left_to_the_study():
    design = parse_design_text(EXAMPLE)
    assert design.duty is None
    assert design.circuit.topology == "multiplier" and design.circuit.stages == 6
    assert design.circuit.secondary_peak == pytest.approx(5e3)
    assert design.circuit.stage_capacitor == pytest.approx(2.2e-9)
    assert design.ambient == 30.0


def test_rms_secondary_is_taken_to_its_peak():
    design = parse_design_text(_edited('secondary_peak = "5 kV"', 'secondary_voltage = "5 kV"'))
    assert design.circuit.secondary_peak == pytest.approx(5e3 * math.sqrt(2))


def test_load_resistance_gives_the_no_load_output_current():
    # 60 kV no-load output (2 n V_pk) over 60 MOhm: 1 mA, an assumption the report lists.
    design = parse_design_text(_edited('load_current = "1 mA"', 'load_resistance = "60 MOhm"'))
    assert design.circuit.load_current == pytest.approx(1e-3)
    assert any(f.code == "assumed.circuit_load_from_resistance" for f in design.assumptions)


@pytest.mark.parametrize("old,new,key,fragment", [
    ("[circuit]", '[duty]\nreverse_voltage = "1 kV"\n\n[circuit]', "circuit", "[duty] or [circuit]"),
    ('topology = "multiplier"', 'topology = "tripler"', "circuit.topology", "must be one of"),
    ("stages = 6\n", "", "circuit.stages", "stage count"),
    ('secondary_peak = "5 kV"', "", "circuit.secondary_voltage", "exactly one"),
    ('load_current = "1 mA"', "", "circuit.load_current", "exactly one"),
    ('stage_capacitor = "2.2 nF"', 'filter_capacitor = "2.2 nF"', "circuit.filter_capacitor",
     "takes stage_capacitor"),
    ('topology = "multiplier"', 'topology = "multiplier"\nphases = 3', "circuit.phases", "3 for a bridge"),
    ("stages = 6", "stages = 6\nstage = 3", "circuit.stage", "did you mean"),
])
def test_bad_circuit_is_one_line_naming_the_key(old, new, key, fragment):
    with pytest.raises(DesignError) as raised:
        parse_design_text(_edited(old, new))
    assert raised.value.key == key
    assert fragment in str(raised.value) and "\n" not in str(raised.value)
