"""The failure-rate study (studies.failure_rate) on a string without scatter, by hand."""

from __future__ import annotations

import json
import math

import pytest
from typer.testing import CliRunner

from stringcheck.cli.app import app
from stringcheck.design.reading import parse_design_text
from stringcheck.errors import DesignError
from stringcheck.studies.failure_rate import run_failure_rate
from tests.studies.test_faults import _fixed


def test_stack_rate_by_hand_on_a_string_without_scatter():
    # 10 identical devices of 1 kV across 6 kV: V_S = 600 / 1000 = 0.6 each; no thermal data, so
    # T_j = the ambient, 25 degC (pi_T = 1). MIL-HDBK-217F N2 section 6.1 with a given
    # lambda_b = 0.01 / 10^6 h, pi_Q = 2.4 (JAN), pi_E = 6.0 (GF), pi_C = 2.0 (spring), from
    # memory of the handbook's tables:
    #   lambda_p = 0.01 x 1 x 0.6^2.43 x 2.0 x 2.4 x 6.0 = 0.01 x 0.28918 x 28.8 = 0.083284
    #   per 10^6 h = 83.28 FIT per device, 832.8 FIT for the stack of 10.
    extra = ('[reliability]\nbase_rate = 0.01\nquality = "JAN"\nenvironment = "GF"\n'
             'contact = "spring"')
    design = parse_design_text(_fixed(series=10, string_voltage="6 kV", trials=64, extra=extra))
    study = run_failure_rate(design)
    device = 1000 * 0.01 * 0.6 ** 2.43 * 2.0 * 2.4 * 6.0
    assert device == pytest.approx(83.28, rel=1e-3)
    assert study.temperature_basis == "stage"
    assert not study.base_rate_from_memory
    for item in study.positions:
        assert item.voltage_stress_p50 == pytest.approx(0.6, rel=1e-9)
        assert item.fit_p50 == pytest.approx(device, rel=1e-9)
    assert study.stack_fit_p50 == pytest.approx(10 * device, rel=1e-9)
    assert study.stack_fit_p99 == pytest.approx(10 * device, rel=1e-9)


def test_hotter_position_has_the_higher_rate():
    extra = "[[string.position]]\nindex = 3\ntemperature_rise = \"30 K\""
    text = _fixed(series=6, string_voltage="3 kV", trials=64).replace(
        "[parts.D]", extra + "\n[parts.D]")
    study = run_failure_rate(parse_design_text(text))
    assert study.worst_position.index == 3
    assert study.worst_position.junction_temperature_p50 == pytest.approx(55.0)


@pytest.mark.parametrize("line, key", [('quality = "commercial"', "reliability.quality"),
                                       ("base_rate = -1", "reliability.base_rate"),
                                       ('environment = "space"', "reliability.environment")])
def test_bad_reliability_input_is_refused(line, key):
    with pytest.raises(DesignError, match=key.replace(".", r"\.")):
        parse_design_text(_fixed(extra=f"[reliability]\n{line}"))


def test_cli_failure_rate_json_and_bad_input(tmp_path):
    path = tmp_path / "stack.toml"
    path.write_text(_fixed(series=10, string_voltage="6 kV", trials=64), encoding="utf-8")
    out = tmp_path / "result.json"
    run = CliRunner().invoke(app, ["check", str(path), "--failure-rate", "--json", str(out)])
    assert run.exit_code in (0, 1), run.output
    assert "MIL-HDBK-217F" in run.output and "FIT" in run.output
    data = json.loads(out.read_text(encoding="utf-8"))["failure_rate"]
    assert data["base_rate"] == 0.003 and data["base_rate_from_memory"] is True
    assert math.isfinite(data["stack_fit_p50"]) and len(data["positions"]) == 10
    path.write_text(_fixed(extra='[reliability]\ncontact = "glued"'), encoding="utf-8")
    bad = CliRunner().invoke(app, ["check", str(path), "--failure-rate"])
    assert bad.exit_code == 2 and "reliability.contact" in bad.output, bad.output
    assert len(bad.output.strip().splitlines()) == 1
