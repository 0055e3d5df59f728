"""Machine-readable output: JSON (stable keys, docs/json.md) and per-position CSV text.

Writing the texts to files is the command line's job (``stringcheck.cli.output_files``).
"""

from __future__ import annotations

import dataclasses
import json
import math
from typing import TYPE_CHECKING, Any, Callable, Mapping

import numpy as np

from stringcheck.checks.findings import codes
from stringcheck.checks.grading_ratings import GradingSummary
from stringcheck.checks.outcome import CheckOutcome, json_number
from stringcheck.checks.series import SERIES_CHECKS
from stringcheck.studies.check import SCHEMA_VERSION, CheckResult
from stringcheck.report.cautions import safety_cautions
from stringcheck.report.lots import lots_to_list
from stringcheck.errors import Setting
from stringcheck.report.tool_version import tool_version

from stringcheck.report.wording import (
    estimator_text,
    impossibility_text,
    rare_note_text,
    reason_text,
    sentence,
    sentences,
)

if TYPE_CHECKING:
    from stringcheck.studies.size import SizingResult

__all__ = ["SCHEMA_VERSION", "check_to_dict", "json_text", "network_to_dict", "positions_csv",
           "no_proposal_to_dict", "rare_to_dict", "result_to_dict", "sizing_to_dict",
           "warnings_to_list", "write_files_atomic",
           "write_text_atomic"]


def check_to_dict(check: CheckOutcome) -> dict[str, Any]:
    """The JSON object of one check that ran: its own ``to_dict()`` (generated from its fields),
    with its importance-sampling estimate's ``estimator`` and ``note`` in words."""
    data = check.to_dict()
    if check.rare is not None:
        data["rare"] = rare_to_dict(check.rare, data["rare"])
    if "notes" in data and check.notes:
        # The transient check's notes in words, their codes beside them.
        data["note_codes"] = data["notes"]
        data["notes"] = sentences(check.notes)
    return data


def rare_to_dict(rare, data: dict[str, Any]) -> dict[str, Any]:
    """An importance-sampling estimate's JSON (``data``, its codes) with the sentences of its
    ``estimator`` (joined by "; ") and ``note`` ("" when it decides) in place of the codes."""
    return {**data, "estimator": estimator_text(rare), "note": rare_note_text(rare)}


def result_to_dict(result: CheckResult) -> dict[str, Any]:
    """The whole result of ``check`` as a JSON-ready dictionary (SI units, temperatures in degC):
    the result's own ``to_dict()`` with the sections the report writes in words, the measured lots
    and the safety cautions, and the sentences of the findings in place of their codes
    (``skipped``, ``no_scatter``, each check's ``rare.estimator`` and ``rare.note``)."""
    data = result.to_dict()
    design = result.design
    grading = result.grading
    out: dict[str, Any] = {}
    for key, value in data.items():
        if key == "trials":
            # What produced the result: the tool, the exact file, the inputs as read.
            out.update(traceability(design))
        if key == "impossible_codes":
            out["impossible"] = impossibility_text(result.impossible)
        if key == "assumption_codes":
            out["assumptions"] = sentences(result.assumptions)
        out[key] = value
        if key == "checks":
            out[key] = {name: check_to_dict(check) for name, check in result.checks.items()
                        if check.ran}
        if key == "skipped":
            out[key] = {name: reason_text(check.reason) for name, check in result.checks.items()
                        if not check.ran}
        if key == "no_scatter":
            out[key] = sentences(result.no_scatter)
        if key == "network" and value is not None:
            out[key] = network_to_dict(grading)
        if key == "warnings":
            out[key] = warnings_to_list(result.warnings)
        if key == "drivers":
            out["lots"] = lots_to_list(design)
    out.setdefault("lots", lots_to_list(design))
    out["cautions"] = safety_cautions(string_voltage=design.duty.reverse_voltage,
                                      stage_energy=grading.stage_energy,
                                      total_energy=grading.total_energy,
                                      discharge_time=grading.discharge_time)
    return out


# Design fields left out of ``inputs``: named elsewhere in the result (``design``, ``assumptions``,
# ``lots``) or not inputs.
_NOT_INPUTS = ("title", "notes", "source", "sha256", "assumptions")
# Where the model's name of a field differs from the design file's key, the key is written.
_FILE_KEYS = {"low": "min", "high": "max", "doubling_temperature": "leakage_doubling",
              "voltage_exponent": "leakage_voltage_exponent", "device_class": "class"}


def traceability(design) -> dict[str, Any]:
    """``tool_version``, ``design_sha256`` and ``inputs`` (the design as read, SI units,
    temperatures in degC; a measured lot by its file, its devices being in ``lots``)."""
    return {"tool_version": tool_version(), "design_sha256": design.sha256 or None,
            "inputs": design_inputs_to_dict(design)}


def design_inputs_to_dict(design) -> dict[str, Any]:
    """Every input of ``design`` as read and resolved (defaults and class values filled in), as
    JSON: generated from the design's dataclasses field by field, so that a new key of the design
    file cannot be left out."""
    return {field.name: _input_value(getattr(design, field.name))
            for field in dataclasses.fields(design) if field.name not in _NOT_INPUTS}


def _input_value(value: Any) -> Any:
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        return float(value) if math.isfinite(value) else None
    if dataclasses.is_dataclass(value):
        if type(value).__name__ == "MeasuredLot":
            return {"file": value.path, "fit": value.fit, "devices": value.devices}
        return {_FILE_KEYS.get(field.name, field.name): _input_value(getattr(value, field.name))
                for field in dataclasses.fields(value)}
    if isinstance(value, Mapping):
        return {str(key): _input_value(item) for key, item in value.items()}
    if isinstance(value, (tuple, list)):
        return [_input_value(item) for item in value]
    if isinstance(value, np.ndarray):
        return _input_value(value.tolist())
    raise TypeError(f"no JSON form for a design input of type {type(value).__name__}")


def network_to_dict(grading: GradingSummary) -> dict[str, Any]:
    """The grading network's JSON (``network``): its own ``to_dict()`` with the sentences of its
    findings (``rating_problems``, ``advisories``, ``report.wording``) before their codes."""
    out: dict[str, Any] = {}
    for key, value in grading.to_dict().items():
        if key == "rating_problem_codes":
            out["rating_problems"] = sentences(grading.rating_problems)
        elif key == "advisory_codes":
            out["advisories"] = sentences(grading.advisories)
        out[key] = value
    return out


def warnings_to_list(warnings) -> list[dict[str, str]]:
    """The plausibility warnings' JSON: {key, message (``report.wording``), code} each."""
    return [{"key": warning.key, "message": sentence(warning.finding),
             "code": warning.finding.code} for warning in warnings]


def positions_csv(result: CheckResult) -> str:
    """Per-position voltage statistics of every series check that ran, one row per check and
    position (the forward checks' per-branch and per-device figures are in the JSON)."""
    header = "check,branch,index,part,limit_V,mean_V,std_V,max_V,failures"
    rows = [header]
    for name, check in result.checks.items():
        if name not in SERIES_CHECKS:
            continue
        for p in check.per_position():
            rows.append(f"{name},{p.branch},{p.index},{_csv_text(p.part)},{p.limit:.6g},"
                        f"{p.mean_voltage:.6g},{p.std_voltage:.6g},{p.max_voltage:.6g},{p.failures}")
    return "\n".join(rows) + "\n"


def _csv_text(text: str) -> str:
    return '"' + text.replace('"', '""') + '"' if any(c in text for c in ',"\n') else text


def json_text(data: dict[str, Any]) -> str:
    """Serialise ``data`` as indented JSON with a final newline."""
    return json.dumps(data, indent=2, allow_nan=False) + "\n"


def no_proposal_to_dict(findings, *, spell: Callable[[Setting], str] = str) -> dict[str, Any]:
    """``size`` without a proposal: ``proposal`` null, ``unmet`` (sentences: which limit or
    check cannot be met, what came closest) and ``unmet_codes``, with each finding's figures."""
    return {"schema_version": SCHEMA_VERSION, "proposal": None,
            "unmet": sentences(findings, spell=spell), "unmet_codes": codes(findings),
            "unmet_values": [{name: value.number for name, value in finding.values.items()}
                             | ({"limit": finding.limit.number} if finding.limit else {})
                             for finding in findings]}


def sizing_to_dict(result: "SizingResult", *,
                   spell: Callable[[Setting], str] = str) -> dict[str, Any]:
    """The result of ``size``: the check of the sized design plus ``grading`` (SI units); a
    setting its advisories name is spelled by ``spell`` (``report.wording.sentence``)."""
    data = result_to_dict(result.check)
    ratings = result.ratings

    def choice(ladder) -> dict[str, Any] | None:
        if ladder is None:
            return None

        def candidate(c) -> dict[str, Any] | None:
            if c is None:
                return None
            return {"value": c.value, "passed": c.passed, "failures": c.failures,
                    "p_fail_upper": c.p_fail_upper, "worst_ratio": json_number(c.worst_ratio)}

        return {"series": ladder.series, "chosen": candidate(ladder.chosen),
                "rejected_neighbour": candidate(ladder.rejected_neighbour),
                "textbook_bound": json_number(ladder.textbook_bound),
                "bound": sentence(ladder.bound, spell=spell) if ladder.bound else None,
                "bound_code": ladder.bound.code if ladder.bound else None,
                "confirmations": [confirmation(c) for c in ladder.confirmations]}

    def confirmation(c) -> dict[str, Any]:
        return {"value": c.value, "passed": c.passed, "failures": c.failures, "trials": c.trials,
                "seed": c.seed, "p_fail_upper": json_number(c.p_fail_upper), "rare": c.rare}

    def curve(ladder) -> list[dict[str, Any]]:
        if ladder is None:
            return []
        return [{"value": c.value, "p_fail": json_number(c.p_fail),
                 "p_fail_ci": [json_number(c.p_fail_lower), json_number(c.p_fail_upper)],
                 "failures": c.failures, "passed": c.passed,
                 "worst_ratio": json_number(c.worst_ratio),
                 "p99_ratio": json_number(c.p99_ratio)} for c in ladder.curve]

    damping = result.damping

    data["grading"] = {
        "resistor": result.resistor.chosen.value,
        "capacitor": result.design.grading.capacitor if result.capacitor else None,
        "damping_resistor": result.damping_resistor,
        "damping_rule": sentence(result.damping_rule, spell=spell),
        "damping_rule_code": result.damping_rule.code,
        "damping": None if damping is None else {
            "inductance": json_number(damping.inductance),
            "critical": json_number(damping.critical),
            "peak_recovery_current": json_number(damping.peak_current),
            "stage_margin": json_number(damping.margin),
            "step_limit": json_number(damping.step_limit),
            "damping_ratio": json_number(damping.damping_ratio),
            "time_domain": damping.time_domain,
        },
        "confirmation_seed": result.confirmation_seed,
        "damping_candidates": [
            {"value": c.value, "worst_ratio": json_number(c.worst_ratio), "energy": json_number(c.energy),
             "within_limit": c.within_limit} for c in result.damping_candidates],
        "series_used": {"resistor": result.resistor.series,
                        "capacitor": result.capacitor.series if result.capacitor else None},
        "series_count": result.series_count,
        "target_p_fail": result.target_p_fail,
        "search": {
            "resistor": choice(result.resistor), "capacitor": choice(result.capacitor),
            "curve": {
                "resistor": curve(result.resistor),
                "capacitor": curve(result.capacitor),
                "damping_resistor": [
                    {"value": c.value, "worst_ratio": json_number(c.worst_ratio),
                     "energy": json_number(c.energy), "within_limit": c.within_limit}
                    for c in result.damping_candidates],
                "textbook_corner": {
                    "resistor": json_number(result.resistor.textbook_bound),
                    "capacitor": None if result.capacitor is None else
                    json_number(result.capacitor.textbook_bound)},
            },
        },
        "ratings": {
            "derating": ratings.derating,
            "worst_stage_voltage": json_number(ratings.worst_stage_voltage),
            "worst_stage_voltage_check": ratings.worst_voltage_check or None,
            "resistor_voltage_required": json_number(ratings.resistor_voltage_required),
            "resistor_power_continuous": json_number(ratings.resistor_power_continuous),
            "resistor_power_duty": json_number(ratings.resistor_power_duty),
            "resistor_power_required": json_number(ratings.resistor_power_required),
            "grading_loss_total": json_number(ratings.total_grading_loss),
            "capacitor_voltage_required": json_number(ratings.capacitor_voltage_required),
            "damping_loss_per_stage": json_number(ratings.damping_loss_per_stage),
            "damping_loss_total": json_number(ratings.damping_loss_total),
            "stage_energy": json_number(ratings.stage_energy),
            "total_energy": json_number(ratings.total_energy),
            "discharge_time": json_number(ratings.discharge_time),
            "damping_pulse_voltage": None if damping is None else
            json_number(damping.pulse_voltage),
            "damping_energy_per_turn_off": None if damping is None else
            json_number(damping.energy_per_turn_off),
            "damping_power": None if damping is None else json_number(damping.power),
        },
        "advisories": sentences(result.advisories, spell=spell),
        "advisory_codes": codes(result.advisories),
    }
    return data
