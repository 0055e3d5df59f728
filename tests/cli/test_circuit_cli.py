"""`check` of a [circuit] design and `new --circuit` through the command line (issue 23).

Sources of the expectations: docs/commands.md (exit codes 0 pass, 1 fail, 2 bad input) and
docs/json.md (the circuit JSON)."""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from typer.testing import CliRunner

from stringcheck.cli.app import app

runner = CliRunner()
EXAMPLES = Path(__file__).resolve().parents[2] / "examples"


def _invoke(*args):
    return runner.invoke(app, [str(arg) for arg in args])


def test_check_of_a_multiplier_passes_with_its_json(tmp_path):
    out = tmp_path / "result.json"
    result = _invoke("check", EXAMPLES / "multiplier-6stage-circuit.toml", "--trials", "4000",
                     "--json", out)
    assert result.exit_code == 0, result.output
    assert "ripple I n (n + 1) / (2 f C) = 239 V" in result.output
    assert "12 stacks (S1a" in result.output and "circuit verdict: pass" in result.output
    data = json.loads(out.read_text())
    assert data["verdict"] == "pass"
    assert data["circuit"]["drop"] == pytest.approx(1e-3 / (40e3 * 2.2e-9) * 966 / 6)
    assert len(data["checked_stacks"]) == 1
    assert data["checked_stacks"][0]["result"]["verdict"] == "pass"


def test_a_stack_voltage_no_string_holds_fails_with_exit_1_and_the_arithmetic(tmp_path):
    text = (EXAMPLES / "multiplier-6stage-circuit.toml").read_text().replace("series = 8",
                                                                            "series = 4")
    path = tmp_path / "short.toml"
    path.write_text(text)
    result = _invoke("check", path, "--trials", "500")
    assert result.exit_code == 1, result.output
    assert "10 kV = 2 V_pk (V_pk = 5 kV)" in result.output
    assert "cannot hold 10000 V" in result.output
    assert "is 6400 V (derating 0.8)" in result.output  # 4 x 0.8 x 2 kV


def test_quiet_csv_of_a_bridge(tmp_path):
    out = tmp_path / "positions.csv"
    result = _invoke("check", EXAMPLES / "precipitator-bridge-circuit.toml", "--trials", "4000",
                     "--quiet", "--csv", out)
    assert result.exit_code == 0, result.output
    assert result.output.startswith("pass: bridge")
    lines = out.read_text().splitlines()
    assert lines[0].startswith("stacks,check,branch")
    assert lines[1].startswith("D1 D2 D3 D4,static,")


@pytest.mark.parametrize("topology", ["half-wave", "center-tap", "bridge", "doubler",
                                      "multiplier"])
def test_new_circuit_writes_a_valid_starter(tmp_path, topology):
    path = tmp_path / f"{topology}.toml"
    result = _invoke("new", path, "--circuit", topology)
    assert result.exit_code == 0, result.output
    text = path.read_text()
    assert "\n[circuit]" in text and "\n[duty]" not in text
    from stringcheck.design.reading import load_design

    assert load_design(path).circuit.topology == topology


def test_new_circuit_with_an_unknown_topology_is_exit_2():
    result = _invoke("new", "-", "--circuit", "tripler")
    assert result.exit_code == 2
    assert "unknown circuit topology 'tripler'" in result.output


def test_other_commands_refuse_a_circuit_design_in_one_line():
    result = _invoke("size", EXAMPLES / "multiplier-6stage-circuit.toml")
    assert result.exit_code == 2, result.output
    assert "takes a design with a [duty] table" in result.output
    assert "Traceback" not in result.output
