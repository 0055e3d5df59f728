"""Every check's result has one shape (``checks.outcome.CheckOutcome``), its JSON generated from the
field declarations; results have a short repr, ``to_dict()`` and ``to_frame()``."""

from __future__ import annotations

import dataclasses
import math
from pathlib import Path

import numpy as np
import pytest

from stringcheck.checks.findings import Finding
from stringcheck.checks.forward import ParallelCheck, ThermalCheck
from stringcheck.checks.outcome import REPR_LIMIT, CheckOutcome, Exported, figure
from stringcheck.checks.series import DynamicCheck, StaticCheck
from stringcheck.checks.transient import TransientCheck
from stringcheck.design.reading import load_design
from stringcheck.report.export import result_to_dict
from stringcheck.studies.check import CheckResult, run_check

EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "furnace-rectifier-3x2-parallel.toml"
NAMES = ("static", "dynamic", "transient", "parallel", "thermal")
CHECK_TYPES = (StaticCheck, DynamicCheck, TransientCheck, ParallelCheck, ThermalCheck)
BASE_FIELDS = {"name", "ran", "reason", "passed", "worst_ratio", "p50_ratio", "p99_ratio",
               "estimate", "unsolved", "worst_trial", "rare"}
# The keys every check's JSON object holds (docs/commands.md and docs/json.md), and its worst figure: a voltage
# [V] or a share, or (the thermal check) a junction temperature [degC].
DESIGN_KEYS = {"passed", "worst_ratio", "p99_ratio", "p_fail", "p_fail_ci"}
WORST_KEYS = {"worst_voltage", "worst_share", "worst_tj"}


@pytest.fixture(scope="module")
def result() -> CheckResult:
    # Three branches of two: the series, parallel and thermal checks all run; the transient check
    # on a small selection (it costs milliseconds a string).
    design = load_design(EXAMPLE)
    return run_check(design, trials=300, seed=3, transient=True, transient_worst=3,
                     transient_sample=12)


def test_every_check_runs_in_the_fixture(result):
    assert [name for name, check in result.checks.items() if check.ran] == list(NAMES)


@pytest.mark.parametrize("name", NAMES)
def test_every_check_extends_the_outcome_base(result, name):
    check = result.checks[name]
    assert isinstance(check, CheckOutcome)
    assert BASE_FIELDS <= {item.name for item in dataclasses.fields(check)}
    assert check.name == name


@pytest.mark.parametrize("name", NAMES)
def test_to_dict_has_the_design_keys_and_is_what_the_export_writes(result, name):
    check = result.checks[name]
    data = check.to_dict()
    assert DESIGN_KEYS <= set(data)
    assert len(WORST_KEYS & set(data)) == 1
    per_position = data.get("positions", data.get("branches"))
    assert len(per_position) == len(check.per_position()) > 0
    # The plain estimate's maximum-likelihood value is the failure fraction k / n (binomial
    # proportion), and its exact interval holds it.
    estimate = check.estimate
    assert data["p_fail"] == estimate.failures / estimate.trials
    assert data["p_fail_ci"][0] <= data["p_fail"] <= data["p_fail_ci"][1]
    exported = result_to_dict(result)["checks"][name]
    if name == "transient":
        # The export writes the transient check's notes in words, their codes beside them.
        assert exported.pop("note_codes") == data["notes"]
        data = {**data, "notes": exported["notes"]}
    assert exported == data


@pytest.mark.parametrize("kind", CHECK_TYPES)
def test_every_field_is_declared_and_every_key_ordered(result, kind):
    declared = kind.json_fields()  # raises TypeError on a field without a declaration
    assert set(declared) == {item.name for item in dataclasses.fields(kind)}
    check = next((c for c in result.checks.values() if type(c) is kind), None)
    assert check is not None
    assert set(check.to_dict()) == set(kind.json_order)


def test_a_field_without_a_declaration_is_refused():
    @dataclasses.dataclass(frozen=True, eq=False, kw_only=True, repr=False)
    class Careless(CheckOutcome):
        forgotten: float = 0.0

    with pytest.raises(TypeError, match="forgotten"):
        Careless.not_run("careless", Finding("not_run.not_requested")).to_dict()


def test_a_key_left_out_of_the_order_is_still_written():
    @dataclasses.dataclass(frozen=True, kw_only=True, repr=False)
    class Row(Exported):
        json_order = ("b_key",)
        a: int = figure()
        b: int = figure("b_key")

    assert list(Row(a=1, b=2).to_dict().items()) == [("b_key", 2), ("a", 1)]


@pytest.mark.parametrize("kind", CHECK_TYPES)
def test_one_way_to_say_not_run(kind):
    reason = Finding("not_run.no_forward_current")
    check = kind.not_run("some check", reason)
    assert (check.name, check.ran, check.reason, check.passed) == \
        ("some check", False, reason, False)
    assert math.isnan(check.worst_ratio) and math.isnan(check.p99_ratio)
    assert check.estimate is None and check.rare is None and check.per_position() == ()
    assert "not run: not_run.no_forward_current" in repr(check)


def test_repr_is_short(result):
    for check in result.checks.values():
        text = repr(check)
        assert len(text) <= REPR_LIMIT and "\n" not in text
        assert check.name in text
    text = repr(result)
    assert len(text) <= REPR_LIMIT and result.verdict in text
    # The generated dataclass repr would print every position and the design.
    assert len(repr(result.checks["thermal"].positions)) > 0


@pytest.mark.parametrize("name", NAMES)
def test_to_frame_rows_and_columns_are_the_per_position_figures(result, name):
    check = result.checks[name]
    frame = check.to_frame()
    items = check.per_position()
    fields = [item.name for item in dataclasses.fields(items[0])]
    assert list(frame.columns) == fields
    assert len(frame) == len(items)
    for row, item in zip(frame.itertuples(index=False), items):
        for column, value in zip(fields, row):
            expected = getattr(item, column)
            assert value == expected or (isinstance(expected, float) and math.isnan(expected)
                                         and math.isnan(value))
    assert set(frame.attrs["units"]) == set(fields)


def test_result_to_frame_stacks_every_check(result):
    frame = result.to_frame()
    assert list(frame["check"].unique()) == list(NAMES)
    assert len(frame) == sum(len(check.per_position()) for check in result.checks.values())
    assert frame.columns[0] == "check"


def test_result_to_dict_is_the_export_without_the_worded_sections(result):
    exported = result_to_dict(result)
    own = result.to_dict()
    # The report adds the worded sections and what identifies the result (report.export).
    assert set(exported) - set(own) == {"lots", "cautions", "impossible", "assumptions",
                                        "tool_version", "design_sha256", "inputs"}
    assert all(exported[key] == value for key, value in own.items()
               if key not in ("network", "warnings", "checks"))
    # The export adds each warning's sentence (``message``) beside its key and code.
    assert [{k: w[k] for k in ("key", "code")} for w in exported["warnings"]] == own["warnings"]
    assert exported["impossible"] is None if not own["impossible_codes"] else exported["impossible"]
    assert [key for key in exported if key in own] == list(own)
    # The network's findings are in words only in the export (report.wording), beside their codes.
    network, own_network = exported["network"], own["network"]
    assert set(network) - set(own_network) == {"rating_problems", "advisories"}
    assert all(network[key] == value for key, value in own_network.items())
    assert len(network["advisories"]) == len(own_network["advisory_codes"])
    assert len(network["rating_problems"]) == len(own_network["rating_problem_codes"])


@pytest.mark.parametrize("kind", (StaticCheck, DynamicCheck, CheckResult))
def test_results_holding_arrays_compare_by_identity(kind):
    # A generated __eq__ would compare the arrays and raise ("truth value ... is ambiguous").
    assert kind.__eq__ is object.__eq__


@pytest.mark.parametrize("name", ("transient", "parallel", "thermal"))
def test_results_of_scalars_compare_by_value(result, name):
    check = result.checks[name]
    assert not any(isinstance(getattr(check, item.name), np.ndarray)
                   for item in dataclasses.fields(check))
    assert dataclasses.replace(check) == check
    assert dataclasses.replace(check, worst_trial=check.worst_trial + 1) != check


def test_comparing_two_series_checks_does_not_raise(result):
    check = result.checks["static"]
    assert isinstance(check.worst_string, np.ndarray)
    twin = dataclasses.replace(check)
    assert check == check and twin != check
