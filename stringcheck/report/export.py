"""Machine-readable output: JSON (stable keys, docs/json.md) and per-position CSV text.

Writing the texts to files is the command line's job (``stringcheck.cli.output_files``).
"""

from __future__ import annotations

import json
from typing import TYPE_CHECKING, Any

from stringcheck.studies.check import CheckResult, SeriesCheck
from stringcheck.checks.forward import ParallelCheck, ThermalCheck
from stringcheck.report.cautions import safety_cautions
from stringcheck.checks.transient import TransientCheck
from stringcheck.report.lots import lots_to_list
from stringcheck.report.check_sections import (
    drivers_to_list,
    json_number,
    parallel_to_dict,
    rare_to_dict,
    thermal_to_dict,
    transient_to_dict,
    turn_off_to_dict,
)

if TYPE_CHECKING:
    from stringcheck.studies.size import SizingResult

SCHEMA_VERSION = 1


def check_to_dict(check: SeriesCheck) -> dict[str, Any]:
    """The JSON object of one check that ran."""
    estimate = check.estimate
    return {
        "passed": check.passed,
        "worst_voltage": json_number(check.worst_voltage),
        "worst_ratio": json_number(check.worst_ratio),
        "p50_ratio": json_number(check.p50_ratio),
        "p99_ratio": json_number(check.p99_ratio),
        "failures": estimate.failures,
        "unsolved": check.unsolved,
        "p_fail": estimate.p_fail,
        "p_fail_ci": [estimate.ci_low, estimate.ci_high],
        "worst_trial": check.worst_trial,
        "rare": rare_to_dict(check.rare),
        # The dynamic check: the current each branch commutates from (null: Q_rr not carried).
        **({"turn_off_current": turn_off_to_dict(check.turn_off_current)}
           if check.name == "dynamic" else {}),
        "positions": [
            {
                "branch": p.branch, "index": p.index, "part": p.part, "limit": p.limit,
                "mean_voltage": json_number(p.mean_voltage), "std_voltage": json_number(p.std_voltage),
                "max_voltage": json_number(p.max_voltage), "failures": p.failures,
            }
            for p in check.positions
        ],
    }


def _any_check_to_dict(check) -> dict[str, Any]:
    if isinstance(check, ParallelCheck):
        return parallel_to_dict(check)
    if isinstance(check, ThermalCheck):
        return thermal_to_dict(check)
    if isinstance(check, TransientCheck):
        return transient_to_dict(check)
    return check_to_dict(check)


def result_to_dict(result: CheckResult) -> dict[str, Any]:
    """The whole result of ``check`` as a JSON-ready dictionary (SI units, temperatures in degC)."""
    design = result.design
    grading = result.grading
    checks = {name: _any_check_to_dict(check) for name, check in result.checks.items()
              if check.ran}
    skipped = {name: check.reason for name, check in result.checks.items() if not check.ran}
    return {
        "schema": SCHEMA_VERSION,
        "design": {"title": design.title, "file": design.source},
        "trials": result.trials,
        "seed": result.seed,
        "confidence": design.monte_carlo.confidence,
        "target_p_fail": result.target_p_fail,
        "trials_needed": result.trials_needed,
        "verdict": result.verdict,
        "impossible": result.impossible,
        "checks": checks,
        "skipped": skipped,
        "network": {
            "resistor": grading.resistor,
            "capacitor": grading.capacitor,
            "damping_resistor": grading.damping_resistor,
            "worst_stage_voltage": json_number(grading.worst_resistor_voltage),
            "worst_stage_voltage_check": grading.worst_voltage_check or None,
            "resistor_power_continuous": json_number(grading.resistor_power_continuous),
            "resistor_power_duty": json_number(grading.resistor_power_duty),
            "resistor_rated_power": grading.resistor_rated_power,
            "resistor_rated_voltage": grading.resistor_rated_voltage,
            "capacitor_rated_voltage": grading.capacitor_rated_voltage,
            "total_grading_loss": json_number(grading.total_grading_loss),
            "stage_energy": json_number(grading.stage_energy),
            "total_energy": json_number(grading.total_energy),
            "discharge_time": json_number(grading.discharge_time),
            "grading_current": json_number(grading.grading_current),
            "hottest_max_leakage": json_number(grading.hottest_max_leakage),
            "rating_problems": list(grading.rating_problems),
            "advisories": list(grading.advisories),
        },
        "drivers": drivers_to_list(result.drivers),
        "lots": lots_to_list(design),
        "assumptions": list(result.assumptions),
        "no_scatter": list(result.no_scatter),
        "warnings": warnings_to_list(result.warnings),
        "cautions": safety_cautions(string_voltage=design.duty.reverse_voltage,
                                    stage_energy=grading.stage_energy,
                                    total_energy=grading.total_energy,
                                    discharge_time=grading.discharge_time),
    }


def warnings_to_list(warnings) -> list[dict[str, str]]:
    """The plausibility warnings as JSON objects {key, message}."""
    return [{"key": warning.key, "message": warning.message} for warning in warnings]


def positions_csv(result: CheckResult) -> str:
    """Per-position voltage statistics of every series check that ran, one row per check and
    position (the forward checks' per-branch and per-device figures are in the JSON)."""
    header = "check,branch,index,part,limit_V,mean_V,std_V,max_V,failures"
    rows = [header]
    for name, check in result.checks.items():
        if not isinstance(check, SeriesCheck):
            continue
        for p in check.positions:
            rows.append(f"{name},{p.branch},{p.index},{_csv_text(p.part)},{p.limit:.6g},"
                        f"{p.mean_voltage:.6g},{p.std_voltage:.6g},{p.max_voltage:.6g},{p.failures}")
    return "\n".join(rows) + "\n"


def _csv_text(text: str) -> str:
    return '"' + text.replace('"', '""') + '"' if any(c in text for c in ',"\n') else text


def json_text(data: dict[str, Any]) -> str:
    """Serialise ``data`` as indented JSON with a final newline."""
    return json.dumps(data, indent=2, allow_nan=False) + "\n"


def sizing_to_dict(result: "SizingResult") -> dict[str, Any]:
    """The result of ``size``: the check of the sized design plus ``grading`` (SI units)."""
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
                "textbook_bound": json_number(ladder.textbook_bound)}

    data["grading"] = {
        "resistor": result.resistor.chosen.value,
        "capacitor": result.design.grading.capacitor if result.capacitor else None,
        "damping_resistor": result.damping_resistor,
        "damping_rule": result.damping_rule,
        "damping_candidates": [
            {"value": c.value, "worst_ratio": json_number(c.worst_ratio), "energy": json_number(c.energy),
             "within_limit": c.within_limit} for c in result.damping_candidates],
        "series_used": {"resistor": result.resistor.series,
                        "capacitor": result.capacitor.series if result.capacitor else None},
        "series_count": result.series_count,
        "target_p_fail": result.target_p_fail,
        "search": {"resistor": choice(result.resistor), "capacitor": choice(result.capacitor)},
        "ratings": {
            "derating": ratings.derating,
            "worst_stage_voltage": json_number(ratings.worst_stage_voltage),
            "worst_stage_voltage_check": ratings.worst_voltage_check or None,
            "resistor_voltage_required": json_number(ratings.resistor_voltage_required),
            "resistor_power_continuous": json_number(ratings.resistor_power_continuous),
            "resistor_power_duty": json_number(ratings.resistor_power_duty),
            "resistor_power_required": json_number(ratings.resistor_power_required),
            "grading_loss_total": json_number(ratings.grading_loss_total),
            "capacitor_voltage_required": json_number(ratings.capacitor_voltage_required),
            "damping_loss_per_stage": json_number(ratings.damping_loss_per_stage),
            "damping_loss_total": json_number(ratings.damping_loss_total),
            "stage_energy": json_number(ratings.stage_energy),
            "total_energy": json_number(ratings.total_energy),
            "discharge_time": json_number(ratings.discharge_time),
        },
        "advisories": list(result.advisories),
    }
    return data
