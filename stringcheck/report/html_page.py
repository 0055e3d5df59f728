"""The HTML report: one self-contained page for a design review (``--report PATH.html``).

The page is rendered from a jinja2 template (``report/templates/report.html.j2``) with its style
sheet inlined and every figure inline SVG (``report.figures``): it fetches nothing, opens offline
and prints to A4 from a browser (print rules in the style sheet). Its numbers are those of the JSON
result of the same run (``report.export``): the page is filled from that dictionary, and its
figures from the result objects; nothing here recomputes physics.

jinja2 and matplotlib are imported here, and this module is imported only when a report is asked
for.
"""

from __future__ import annotations

import datetime as _datetime
from importlib import resources
from typing import Any, Callable, Sequence

import jinja2
from markupsafe import Markup

from stringcheck.errors import Setting
from stringcheck.report import figures
from stringcheck.report.export import result_to_dict, sizing_to_dict
from stringcheck.report.wording import CHECK_WORDS, sentence
from stringcheck.units import format_quantity

__all__ = ["check_page", "review_page", "sizing_page"]

# What each check is called in a heading, and the unit of its "worst" figure.
CHECK_TITLES = {"static": "Static blocking (leakage and grading resistors)",
                "dynamic": "Turn-off by charge balance",
                "transient": "Simulated turn-off",
                "parallel": "Current sharing of the parallel branches",
                "thermal": "Junction temperatures and thermal runaway"}


def _environment() -> jinja2.Environment:
    templates = resources.files("stringcheck.report") / "templates"
    environment = jinja2.Environment(
        loader=jinja2.FunctionLoader(lambda name: (templates / name).read_text(encoding="utf-8")),
        autoescape=jinja2.select_autoescape(default=True, default_for_string=True),
        undefined=jinja2.StrictUndefined, trim_blocks=True, lstrip_blocks=True)
    environment.filters["q"] = _quantity
    environment.filters["ratio"] = lambda value: "-" if value is None else f"{value:.3f}"
    environment.filters["prob"] = _probability
    # The figures are our own SVG (report.figures), placed as they are.
    environment.filters["svg"] = Markup
    return environment


def _quantity(value, unit: str = "", digits: int = 3) -> str:
    if value is None:
        return "-"
    if isinstance(value, str):
        return value
    return format_quantity(float(value), unit, digits=digits)


def _probability(value) -> str:
    if value is None:
        return "-"
    return "0" if value == 0 else f"{value:.3g}"


def _worst_text(name: str, check: dict[str, Any]) -> str:
    if "worst_voltage" in check:
        return _quantity(check["worst_voltage"], "V")
    if "worst_share" in check:
        return f"{check['worst_share']:.3f} x mean"
    if "worst_tj" in check:
        return _quantity(check["worst_tj"], "degC")
    return "-"


def _estimator(check: dict[str, Any]) -> str:
    rare = check.get("rare")
    if rare is not None and rare.get("decides"):
        return "importance sampling (" + f"{rare['samples']:,} strings)"
    return "plain Monte Carlo, exact (Clopper-Pearson) interval"


def _checks_rows(data: dict[str, Any]) -> list[dict[str, Any]]:
    rows = []
    for name, check in data["checks"].items():
        rare = check.get("rare")
        deciding = rare if rare is not None and rare.get("decides") else check
        rows.append({"name": name, "title": CHECK_TITLES.get(name, name),
                     "passed": check["passed"], "worst": _worst_text(name, check),
                     "worst_ratio": check.get("worst_ratio"), "p99_ratio": check.get("p99_ratio"),
                     "p_fail": deciding["p_fail"], "ci": deciding["p_fail_ci"],
                     "failures": check.get("failures"), "estimator": _estimator(check)})
    return rows


def _inputs(data: dict[str, Any]) -> dict[str, Any]:
    """The inputs as read, in rows of (key, value as text) per table."""
    inputs = data["inputs"]
    units = {"reverse_voltage": "V", "forward_current": "A", "frequency": "Hz", "di_dt": "A/s",
             "ambient": "degC", "stray_inductance": "H", "resistor": "ohm", "capacitor": "F",
             "damping_resistor": "ohm", "resistor_rated_voltage": "V",
             "capacitor_rated_voltage": "V", "resistor_rated_power": "W", "v_rrm": "V",
             "i_fav": "A", "c_j": "F", "r_th_jc": "K/W", "r_th_cs": "K/W", "t_j_max": "degC",
             "leakage_doubling": "K", "tempco_v_t0": "V/K", "tempco_r_t": "1/K",
             "r_th_sa": "K/W", "path_resistance": "ohm", "at_temperature": "degC",
             "at_voltage": "V", "at_di_dt": "A/s", "at_forward_current": "A"}
    spread_units = {"i_r": "A", "q_rr": "C", "i_rm": "A", "t_rr": "s", "v_t0": "V", "r_t": "ohm"}

    def text(key: str, value: Any, unit: str | None = None) -> str:
        if value is None:
            return "-"
        if isinstance(value, bool):
            return "yes" if value else "no"
        if isinstance(value, str):
            return value
        if isinstance(value, int) and unit is None and key not in units:
            return f"{value:,}"
        if isinstance(value, (int, float)):
            unit = unit if unit is not None else units.get(key, "")
            if key.endswith("tolerance"):
                return f"{value:.3g} (fraction)"
            return _quantity(value, unit)
        return str(value)

    def table(name: str) -> list[tuple[str, str]]:
        return [(key, text(key, value)) for key, value in inputs.get(name, {}).items()
                if not isinstance(value, (dict, list))]

    parts = []
    for name, part in inputs.get("parts", {}).items():
        scalars = [(key, text(key, value)) for key, value in part.items()
                   if not isinstance(value, (dict, list)) and key != "name"]
        spreads = []
        for key, unit in spread_units.items():
            spread = part.get(key)
            if not isinstance(spread, dict):
                continue
            conditions = ", ".join(f"{condition} {text(condition, spread[condition])}"
                                   for condition in ("at_temperature", "at_voltage", "at_di_dt",
                                                     "at_forward_current")
                                   if spread.get(condition) is not None)
            spreads.append({"key": key, "min": text(key, spread.get("min"), unit),
                            "typ": text(key, spread.get("typ"), unit),
                            "max": text(key, spread.get("max"), unit),
                            "typ_assumed": spread.get("typ_assumed"), "conditions": conditions})
        lot = part.get("measured")
        parts.append({"name": name, "scalars": scalars, "spreads": spreads,
                      "lot": lot["file"] if isinstance(lot, dict) else None})
    positions = inputs.get("string", {}).get("positions", [])
    return {"duty": table("duty"), "string": table("string"), "grading": table("grading"),
            "thermal": table("thermal"), "monte_carlo": table("monte_carlo"),
            "sizing": table("sizing"), "parts": parts, "positions": positions}


def _network_rows(network: dict[str, Any] | None) -> list[tuple[str, str, str]]:
    """The grading network's bill of materials and figures: (item, value, note)."""
    if network is None:
        return []
    def q(value, unit: str) -> str:
        return "not given" if value is None else _quantity(value, unit)

    return [
        ("grading resistor R", q(network["resistor"], "ohm"),
         f"rated {q(network['resistor_rated_voltage'], 'V')}, "
         f"{q(network['resistor_rated_power'], 'W')}"),
        ("resistor power (continuous / at the duty)",
         f"{q(network['resistor_power_continuous'], 'W')} / {q(network['resistor_power_duty'], 'W')}",
         "at the worst static stage voltage"),
        ("grading capacitor C", q(network["capacitor"], "F"),
         f"rated {q(network['capacitor_rated_voltage'], 'V')}"),
        ("damping resistor R_d", q(network["damping_resistor"], "ohm"), ""),
        ("worst stage voltage", q(network["worst_stage_voltage"], "V"),
         f"from the {CHECK_WORDS.get(network['worst_stage_voltage_check'], network['worst_stage_voltage_check'])} check"),
        ("grading current", q(network["grading_current"], "A"),
         f"hottest device's maximum leakage {q(network['hottest_max_leakage'], 'A')}"),
        ("grading loss, whole stack", q(network["total_grading_loss"], "W"), "at the nominal share"),
        ("stored energy", f"{q(network['stage_energy'], 'J')} per stage, "
                          f"{q(network['total_energy'], 'J')} in all", ""),
        ("time to fall below 60 V", q(network["discharge_time"], "s"),
         "through the grading resistors, declared capacitance only"),
    ]


def _figures(result) -> dict[str, list[dict[str, str]]]:
    """Every figure of a check result, with its caption, per check."""
    out: dict[str, list[dict[str, str]]] = {}
    design = result.design
    for name, check in result.checks.items():
        if not check.ran:
            continue
        shown = []
        if name in ("static", "dynamic") and design.string.series == 1:
            out[name] = [{"svg": "", "caption": (
                "One device per branch (string.series = 1): each device blocks the whole string "
                "voltage, so there is no sharing to draw.")}]
            continue
        if name in ("static", "dynamic"):
            shown.append({"svg": figures.position_figure(check, design), "caption": (
                "Stage voltage along the stack over every built string drawn: the thick bar is "
                "the mean +- 1 standard deviation, the thin bar +- 3 standard deviations, the "
                "short mark the highest voltage drawn at that position. The dashed line is the "
                "device limit (derating x V_RRM), the dotted line V_RRM. Shaded positions run "
                "hotter (a temperature rise in the design).")})
        if name in ("static", "dynamic") and check.histogram:
            shown.append({"svg": figures.stress_distribution_figure(check), "caption": (
                "The worst device of each built string: how many strings reach each stress ratio "
                "(bars, log scale) and the fraction of strings at or below it (line, right "
                "axis). A string fails to the right of the dashed line (ratio 1).")})
        if name == "parallel":
            shown.append({"svg": figures.branch_current_figure(check), "caption": (
                "Average forward current of each branch: mean and highest drawn, against the "
                "branch's I_F(AV) rating (dashed).")})
        if name == "thermal":
            shown.append({"svg": figures.junction_figure(check), "caption": (
                "Junction temperature of each device at the electro-thermal equilibrium: mean "
                "(dots) and highest drawn (marks), against T_j,max (dashed).")})
            shown.append({"svg": figures.runaway_figure(check, design.duty.ambient),
                          "caption": (
                "Junction temperature against ambient: the p99 and worst T_j at the design's "
                "ambient, and the ambient at which sampled strings run away thermally (band: "
                "1st to 99th percentile of the sample; dashed: median).")})
        if result.drivers and any(d.check == name for d in result.drivers):
            shown.append({"svg": figures.drivers_figure(result.drivers, name), "caption": (
                "What drives the worst stress of this check: the rank correlation of each input "
                "with it, and for the top inputs the p99 stress ratio reached with that input "
                "tightened.")})
        out[name] = shown
    return out


def check_page(result, *, command_line: Sequence[str], created: _datetime.datetime | None = None,
               spell: Callable[[Setting], str] = str, data: dict[str, Any] | None = None,
               extra: dict[str, Any] | None = None) -> str:
    """The HTML report of a check result.

    Parameters
    ----------
    result
        A ``studies.check.CheckResult``.
    command_line
        The command that produced it (shown in the header).
    created
        When (UTC; default now). Only the page carries a date; the JSON never does.
    data
        The result's JSON dictionary, when the caller has it (default: made here); the page's
        numbers are taken from it.
    extra
        Further sections (``size``'s search) for the template.
    """
    data = result_to_dict(result) if data is None else data
    created = created or _datetime.datetime.now(_datetime.timezone.utc)
    template = _environment().get_template("report.html.j2")
    style = (resources.files("stringcheck.report") / "templates" / "report.css").read_text(
        encoding="utf-8")
    return template.render(
        style=style, data=data, command=" ".join(command_line),
        created=created.strftime("%Y-%m-%d %H:%M UTC"), checks=_checks_rows(data),
        skipped=data.get("skipped", {}), inputs=_inputs(data),
        network=_network_rows(data.get("network")), figures=_figures(result),
        titles=CHECK_TITLES, extra=extra or {})


def sizing_page(result, *, command_line: Sequence[str],
                created: _datetime.datetime | None = None,
                spell: Callable[[Setting], str] = str) -> str:
    """The HTML report of ``size``: the proposal first (each value with the limit that bound it,
    the design curves of the search), then the check of the sized design."""
    data = sizing_to_dict(result, spell=spell)
    grading = data["grading"]
    target = result.target_p_fail
    proposal = [("grading resistor R", _quantity(grading["resistor"], "ohm"),
                 sentence(result.resistor.bound, spell=spell) if result.resistor.bound else "")]
    if result.capacitor is not None:
        proposal.append(("grading capacitor C", _quantity(grading["capacitor"], "F"),
                         sentence(result.capacitor.bound, spell=spell)
                         if result.capacitor.bound else ""))
    if grading.get("damping_resistor") is not None:
        proposal.append(("damping resistor R_d", _quantity(grading["damping_resistor"], "ohm"),
                         grading["damping_rule"]))
    curves = []
    if result.resistor.curve:
        curves.append({"svg": figures.sizing_curve_figure(
            result.resistor, x_label="grading resistor R", x_unit="Ohm", target=target),
            "caption": (
                "The search over R: P(fail) of each preferred value tried (upper bound of the "
                "exact interval, and the estimate) on a log scale, and its p99 stress / limit "
                "(right axis); the dashed line is the target, the dotted line the textbook "
                "worst-case corner, the solid line the value chosen (the largest R that meets "
                "every limit).")})
    if result.capacitor is not None and result.capacitor.curve:
        curves.append({"svg": figures.sizing_curve_figure(
            result.capacitor, x_label="grading capacitor C", x_unit="F", target=target),
            "caption": (
                "The search over C: as for R; the value chosen is the smallest C that meets "
                "every limit and check.")})
    return check_page(result.check, command_line=command_line, created=created, spell=spell,
                      data=data, extra={"proposal": proposal, "curves": curves,
                                        "advisories": grading.get("advisories", [])})


def review_page(result, *, command_line: Sequence[str],
                created: _datetime.datetime | None = None) -> str:
    """The HTML report of ``review``: the decision and what decided it, each check baseline
    against candidate, the per-position change (figures), the reasons and flags, the cautions
    and the sign-off block. Its numbers are those of the review's JSON."""
    from stringcheck.report.review import review_to_dict

    data = review_to_dict(result)
    created = created or _datetime.datetime.now(_datetime.timezone.utc)
    checks_shown = []
    for change in data["changes"]["checks"]:
        name = change["check"]
        svg = ""
        if any(p.check == name for p in result.positions):
            svg = figures.review_position_figure(result.positions, name)
        checks_shown.append({**change, "title": CHECK_TITLES.get(name, name), "svg": svg})
    template = _environment().get_template("review.html.j2")
    style = (resources.files("stringcheck.report") / "templates" / "report.css").read_text(
        encoding="utf-8")
    return template.render(style=style, data=data, command=" ".join(command_line),
                           created=created.strftime("%Y-%m-%d %H:%M UTC"), checks=checks_shown)
