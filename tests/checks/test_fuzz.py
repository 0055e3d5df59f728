"""Fuzzed design files (issue 8): whatever a file holds, the loader returns a valid Design or
raises the package's own one-line error, and a design that loads runs every check to a finite
result and a verdict.

Sources of the expectations: docs/design-file.md (schema, ranges) and section 6 (machine output);
STYLE.md "Errors" (the package's exceptions subclass ValueError, one line naming the key); TOML 1.0
(the writer below: basic strings, inline tables, arrays of tables).
"""

from __future__ import annotations

import copy
import datetime
import json
import math
import pathlib
import re
import tempfile
from typing import Any

import pytest
from hypothesis import HealthCheck, Phase, find, given, settings
from hypothesis import strategies as st

import stringcheck.report.export as export
import stringcheck.studies.check as check_study
from stringcheck.checks.findings import Finding
from stringcheck.checks.forward import forward_reasons
from stringcheck.checks.transient import transient_reason
from stringcheck.design.device_classes import PRESET_NAMES
from stringcheck.design.model import Design
from stringcheck.design.reading import load_design, parse_design_text
from stringcheck.errors import DesignError, StringcheckError
from stringcheck.report.wording import sentence


# --- design files for the fuzzing: writing TOML -------------------------------------------------

_BARE_KEY = re.compile(r"^[A-Za-z0-9_-]+$")


def _key(name: str) -> str:
    return name if _BARE_KEY.match(name) else _string(name)


def _string(text: str) -> str:
    """A TOML basic string: backslash, quote and every control character (DEL too) escaped."""
    out = []
    for char in text:
        if char in '"\\':
            out.append("\\" + char)
        elif ord(char) < 0x20 or ord(char) == 0x7F:
            out.append(f"\\u{ord(char):04x}")
        else:
            out.append(char)
    return '"' + "".join(out) + '"'


def _value(value: Any) -> str:
    """One TOML value, inline (tables as inline tables, lists as arrays)."""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if math.isnan(value):
            return "nan"
        if math.isinf(value):
            return "inf" if value > 0 else "-inf"
        return repr(value)
    if isinstance(value, str):
        return _string(value)
    if isinstance(value, (datetime.date, datetime.datetime, datetime.time)):
        return value.isoformat()
    if isinstance(value, dict):
        return "{ " + ", ".join(f"{_key(k)} = {_value(v)}" for k, v in value.items()) + " }"
    if isinstance(value, list):
        return "[" + ", ".join(_value(v) for v in value) + "]"
    raise TypeError(type(value))


def to_toml(design: dict[str, Any]) -> str:
    """Our design dictionaries as TOML text: top-level tables, [parts.NAME], [monte_carlo.correlation]
    and [[string.position]] as tables, every other nested table inline."""
    lines: list[str] = []

    def table(header: str, body: dict[str, Any], sub_tables: tuple[str, ...] = ()) -> None:
        lines.append(f"[{header}]")
        later = []
        for key, value in body.items():
            if key in sub_tables and isinstance(value, dict):
                later.append((f"{header}.{_key(key)}", value))
            elif key == "position" and isinstance(value, list) and value and \
                    all(isinstance(v, dict) for v in value):
                later.append((f"[{header}.position]", value))
            else:
                lines.append(f"{_key(key)} = {_value(value)}")
        for sub_header, sub_body in later:
            if isinstance(sub_body, list):
                for entry in sub_body:
                    lines.append(f"[{sub_header}]")
                    lines.extend(f"{_key(k)} = {_value(v)}" for k, v in entry.items())
            else:
                table(sub_header, sub_body)

    for name, body in design.items():
        if not isinstance(body, dict):
            lines.insert(0, f"{_key(name)} = {_value(body)}")
        elif name == "parts":
            if not body or not all(isinstance(v, dict) for v in body.values()):
                table("parts", body)
            for part, part_body in body.items():
                if isinstance(part_body, dict):
                    table(f"parts.{_key(part)}", part_body)
        else:
            table(_key(name), body, sub_tables=("correlation",))
    return "\n".join(lines) + "\n"


# --- valid designs ---------------------------------------------------------------------------------

_PREFIXES = {"G": 1e9, "M": 1e6, "k": 1e3, "": 1.0, "m": 1e-3, "u": 1e-6, "n": 1e-9, "p": 1e-12}


@st.composite
def quantity(draw, value: float, unit: str, *, bare_allowed: bool = True) -> Any:
    """``value`` [SI] written as a bare number or as text with a unit and a prefix."""
    if bare_allowed and draw(st.booleans()):
        return value
    if unit in ("degC", "K", "%", "ppm/K", "1/K", "K/W", "V/K"):
        return f"{value!r} {unit}"
    prefix = draw(st.sampled_from(sorted(_PREFIXES)))
    spelling = {"ohm": draw(st.sampled_from(["Ohm", "ohm", "\u03a9"]))}.get(unit, unit)
    return f"{value / _PREFIXES[prefix]!r} {prefix}{spelling}"


def _log_uniform(low: float, high: float):
    return st.floats(math.log10(low), math.log10(high)).map(lambda x: float(f"{10 ** x:.6g}"))


@st.composite
def spread(draw, typ: float, unit: str, *, ratio: float = 10.0) -> Any:
    """A datasheet spread around ``typ`` in one of the forms the schema allows."""
    form = draw(st.sampled_from(["typ-max", "max", "min-typ-max", "typ", "scalar", "min-max"]))
    high = float(f"{typ * draw(st.floats(1.0, ratio)):.6g}")
    low = float(f"{typ / draw(st.floats(1.0, ratio)):.6g}")
    if form == "scalar":
        return draw(quantity(typ, unit))
    body: dict[str, Any] = {}
    if "min" in form:
        body["min"] = draw(quantity(low, unit))
    if form in ("typ-max", "min-typ-max", "typ"):
        body["typ"] = draw(quantity(typ, unit))
    if "max" in form:
        body["max"] = draw(quantity(high, unit))
    return body


@st.composite
def forward_spread(draw, typ: float, unit: str, *, ratio: float) -> Any:
    """A forward-characteristic spread (v_t0, r_t): a typical value, a maximum or both."""
    typ = float(f"{typ:.6g}")  # as written, so that min <= typ <= max holds after rounding
    form = draw(st.sampled_from(["typ-max", "typ", "scalar", "min-typ-max"]))
    if form == "scalar":
        return draw(quantity(typ, unit))
    body: dict[str, Any] = {}
    if form == "min-typ-max":
        body["min"] = draw(quantity(float(f"{typ / draw(st.floats(1.0, ratio)):.6g}"), unit))
    body["typ"] = draw(quantity(typ, unit))
    if "max" in form:
        body["max"] = draw(quantity(float(f"{typ * draw(st.floats(1.0, ratio)):.6g}"), unit))
    if draw(st.booleans()):
        body["at_temperature"] = draw(quantity(draw(st.sampled_from([25.0, 125.0])), "degC"))
    return body


@st.composite
def valid_designs(draw, *, transient: bool = False) -> dict[str, Any]:
    """A design dictionary that the loader must accept (our own invented stacks).

    Part of them carry a forward current with every part's forward characteristic and rated
    current, and part of those the thermal data too, so that the parallel and the thermal checks
    run (``checks.forward.forward_reasons``: duty.forward_current; v_t0, r_t of every part and
    i_fav with two branches or more; r_th_jc, t_j_max of every part and thermal.r_th_sa); part
    give the recovery data the transient check fits (q_rr at a test di/dt with t_rr). With
    ``transient``, every part gives that data itself (no class whose charge would meet a drawn
    i_rm or t_rr) and the duty a turn-off di/dt, so that the transient check runs."""
    series = draw(st.integers(1, 10))
    parallel = draw(st.integers(1, 3))
    forward = draw(st.booleans())
    thermal = forward and draw(st.integers(0, 3)) > 0
    i_fav_min = math.inf
    derating = draw(st.sampled_from([0.5, 0.6, 0.7, 0.8, 0.9, 1.0]))
    part_names = draw(st.lists(st.sampled_from(["MAIN", "ALT", "B2", "x-1", "second source"]),
                               min_size=1, max_size=2, unique=True))
    ambient = draw(st.floats(-40.0, 70.0))
    parts: dict[str, Any] = {}
    v_rrm_min = math.inf
    for name in part_names:
        v_rrm = draw(_log_uniform(200.0, 6000.0))
        v_rrm_min = min(v_rrm_min, v_rrm)
        body: dict[str, Any] = {}
        if not transient and draw(st.booleans()):
            body["class"] = draw(st.sampled_from(PRESET_NAMES))
        body["v_rrm"] = draw(quantity(v_rrm, "V"))
        leakage = draw(_log_uniform(1e-9, 1e-4))
        i_r = draw(spread(leakage, "A", ratio=30.0))
        if isinstance(i_r, dict) and draw(st.booleans()):
            i_r["at_temperature"] = draw(quantity(draw(st.sampled_from([25.0, 100.0, 125.0])),
                                                  "degC"))
        if isinstance(i_r, dict) and draw(st.booleans()):
            i_r["at_voltage"] = draw(quantity(v_rrm, "V"))
        body["i_r"] = i_r
        recovery = "q_rr-t_rr" if transient else \
            draw(st.sampled_from(["q_rr", "i_rm-t_rr", "none", "q_rr-t_rr"]))
        if recovery == "q_rr":
            body["q_rr"] = draw(spread(draw(_log_uniform(5e-9, 5e-6)), "C", ratio=3.0))
        elif recovery == "q_rr-t_rr":
            # At one test di/dt, with t_rr above the shortest the charge allows
            # (Q_rr <= di/dt t_rr^2 / 2, the triangular recovery's bound).
            charge = draw(_log_uniform(5e-9, 5e-6))
            test_di_dt = draw(_log_uniform(1e6, 2e8))
            q_rr = draw(spread(charge, "C", ratio=3.0))
            if not isinstance(q_rr, dict):
                q_rr = {"typ": q_rr}
            q_rr["at_di_dt"] = draw(quantity(test_di_dt, "A/s"))
            if not forward or draw(st.booleans()):
                q_rr["at_forward_current"] = draw(quantity(draw(_log_uniform(1.0, 100.0)), "A"))
            body["q_rr"] = q_rr
            shortest = math.sqrt(2.0 * charge / test_di_dt)
            body["t_rr"] = {"typ": draw(quantity(float(f"{shortest * draw(st.floats(1.5, 4.0)):.6g}"),
                                                 "s"))}
        elif recovery == "i_rm-t_rr":
            body["i_rm"] = draw(spread(draw(_log_uniform(0.1, 20.0)), "A", ratio=2.0))
            body["t_rr"] = draw(spread(draw(_log_uniform(2e-8, 5e-6)), "s", ratio=2.0))
        if draw(st.booleans()):
            body["c_j"] = draw(quantity(draw(_log_uniform(1e-12, 1e-9)), "F"))
        if thermal or draw(st.booleans()):
            body["t_j_max"] = draw(quantity(ambient + draw(st.floats(60.0, 120.0)), "degC"))
        if forward:
            body["v_t0"] = draw(forward_spread(draw(st.floats(0.6, 1.5)), "V", ratio=1.3))
            body["r_t"] = draw(forward_spread(draw(_log_uniform(1e-3, 5e-2)), "ohm", ratio=1.5))
            i_fav = draw(_log_uniform(1.0, 50.0))
            i_fav_min = min(i_fav_min, i_fav)
            body["i_fav"] = draw(quantity(i_fav, "A"))
            if draw(st.booleans()):
                body["tempco_v_t0"] = draw(st.sampled_from(["-2 mV/K", "-1.5 mV/K", "0 V/K"]))
            if draw(st.booleans()):
                body["tempco_r_t"] = draw(st.sampled_from(["0.003 1/K", "0.004 1/K"]))
        if thermal:
            body["r_th_jc"] = draw(quantity(draw(_log_uniform(0.05, 1.5)), "K/W"))
            if draw(st.booleans()):
                body["r_th_cs"] = draw(quantity(draw(_log_uniform(0.01, 0.3)), "K/W"))
        if draw(st.booleans()):
            body["leakage_doubling"] = draw(quantity(draw(st.floats(6.0, 15.0)), "K"))
        if draw(st.booleans()):
            body["leakage_voltage_exponent"] = draw(st.sampled_from([0.0, 0.3, 0.5, 1.0]))
        parts[name] = body

    # Positions: distinct places; the hottest rise stays 30 K below the coolest t_j_max margin.
    positions = []
    places = draw(st.lists(st.tuples(st.integers(1, series), st.none() | st.integers(1, parallel)),
                           max_size=3, unique=True))
    for index, branch in places:
        entry: dict[str, Any] = {"index": index}
        if branch is not None:
            entry["branch"] = branch
        if draw(st.booleans()):
            entry["part"] = draw(st.sampled_from(part_names))
        if draw(st.booleans()):
            entry["temperature_rise"] = draw(quantity(draw(st.floats(0.0, 30.0)), "K"))
        positions.append(entry)

    capacity = series * derating * v_rrm_min
    duty: dict[str, Any] = {
        "reverse_voltage": draw(quantity(float(f"{capacity * draw(st.floats(0.2, 1.1)):.6g}"),
                                         "V")),
        "ambient": draw(quantity(ambient, "degC")),
    }
    waveform = draw(st.sampled_from([None, "dc", "half-sine", "square"]))
    if waveform is not None:
        duty["waveform"] = waveform
    if transient or draw(st.booleans()):
        duty["di_dt"] = draw(quantity(draw(_log_uniform(1e5, 5e8)), "A/s"))
    if transient and draw(st.booleans()):
        duty["stray_inductance"] = draw(quantity(draw(_log_uniform(1e-7, 1e-5)), "H"))
    if draw(st.booleans()):
        duty["frequency"] = draw(quantity(draw(_log_uniform(10.0, 1e5)), "Hz"))
    if forward:
        # The group's average current: up to a little above every branch at its rating.
        duty["forward_current"] = draw(quantity(
            float(f"{parallel * i_fav_min * draw(st.floats(0.1, 1.2)):.6g}"), "A"))

    string: dict[str, Any] = {"series": series}
    if parallel > 1 or draw(st.booleans()):
        string["parallel"] = parallel
    if derating != 0.8 or draw(st.booleans()):
        string["derating"] = derating
    if len(part_names) > 1 or draw(st.booleans()):
        string["part"] = part_names[0]
    if positions:
        string["position"] = positions

    grading: dict[str, Any] = {}
    if draw(st.integers(0, 4)):  # mostly with resistors
        grading["resistor"] = draw(quantity(draw(_log_uniform(1e5, 1e8)), "ohm"))
        grading["resistor_tolerance"] = draw(st.sampled_from([0.0, 0.01, "1 %", "5 %"]))
        if draw(st.booleans()):
            grading["resistor_tcr"] = draw(st.sampled_from(["100 ppm/K", "-200 ppm/K", 0.0]))
    if transient or draw(st.integers(0, 4)):
        grading["capacitor"] = draw(quantity(draw(_log_uniform(1e-10, 1e-7)), "F"))
        grading["capacitor_tolerance"] = draw(st.sampled_from([0.0, 0.1, "10 %", "20 %"]))

    monte_carlo: dict[str, Any] = {"seed": draw(st.integers(0, 2**32))}
    if draw(st.booleans()):
        monte_carlo["screened"] = draw(st.booleans())
    if draw(st.booleans()):
        monte_carlo["lot_share"] = draw(st.sampled_from([0.0, 0.3, 0.9]))
    if draw(st.booleans()):
        monte_carlo["sigma_at_limit"] = draw(st.sampled_from([1.0, 2, 3.0, 6.0, 10]))
    if draw(st.booleans()):
        monte_carlo["correlation"] = {"i_r-q_rr": draw(st.sampled_from([-0.5, 0.0, 0.4]))}

    design: dict[str, Any] = {
        "design": {"title": draw(st.text(max_size=20))},
        "duty": duty,
        "string": string,
        "parts": parts,
        "grading": grading,
        "monte_carlo": monte_carlo,
    }
    if thermal:
        cooling: dict[str, Any] = {"r_th_sa": draw(quantity(draw(_log_uniform(0.02, 1.0)),
                                                            "K/W"))}
        if draw(st.booleans()):
            cooling["heatsink"] = draw(st.sampled_from(["shared", "separate"]))
        if draw(st.booleans()):
            cooling["path_resistance"] = draw(quantity(draw(_log_uniform(1e-4, 1e-2)), "ohm"))
        design["thermal"] = cooling
    if draw(st.booleans()):
        design["sizing"] = {"target_p_fail": draw(st.sampled_from([1e-3, 0.01, 0.5]))}
    return design


# --- corrupted designs -----------------------------------------------------------------------------

# Values that are wrong somewhere: wrong units, signs, non-finite numbers, wrong types.
BAD_VALUES = [
    -1, 0, -0.0, -4.7e6, float("nan"), float("inf"), -float("inf"), 10**400, 2**63, 1e308,
    "", " ", "kV", "4 kA", "4 kV", "10 degC", "-300 degC", "4 kV kV", "nan V", "inf F", "1/0 V",
    "10**10**10 V", "2^8 V", "1e400 V", "80", "5 %", "150 %", "-5 %", "\u00b5", "None",
    True, False, [], [1, 2], {}, {"typ": "1 V"}, {"max": -1}, {"min": 3, "max": 1},
    datetime.date(2024, 5, 1), datetime.time(12, 0), "\x00", "A", "si-schotky",
]


def _paths(tree: Any, prefix: tuple = ()) -> list[tuple]:
    """Every key path in the dictionary tree (list entries by index)."""
    found = []
    if isinstance(tree, dict):
        for key, value in tree.items():
            found.append(prefix + (key,))
            found.extend(_paths(value, prefix + (key,)))
    elif isinstance(tree, list):
        for index, value in enumerate(tree):
            found.append(prefix + (index,))
            found.extend(_paths(value, prefix + (index,)))
    return found


def _parent(tree: Any, path: tuple) -> Any:
    for step in path[:-1]:
        tree = tree[step]
    return tree


def _typo(name: str, draw) -> str:
    if not name:
        return "x"
    position = draw(st.integers(0, len(name) - 1))
    kind = draw(st.sampled_from(["drop", "double", "swap", "upper"]))
    if kind == "drop":
        return name[:position] + name[position + 1:] or "x"
    if kind == "double":
        return name[:position] + name[position] + name[position:]
    if kind == "swap" and position + 1 < len(name):
        return name[:position] + name[position + 1] + name[position] + name[position + 2:]
    return name.upper() if name.upper() != name else name + "_"


@st.composite
def corrupted_designs(draw) -> dict[str, Any]:
    """A valid design with one to three keys deleted, renamed, or given a bad value."""
    design = copy.deepcopy(draw(valid_designs()))
    for _ in range(draw(st.integers(1, 3))):
        paths = _paths(design)
        if not paths:
            break
        path = draw(st.sampled_from(paths))
        parent = _parent(design, path)
        key = path[-1]
        action = draw(st.sampled_from(["delete", "value", "value", "rename", "unknown"]))
        if action == "delete":
            del parent[key]
        elif action == "value":
            # A copy: a shared list or table would carry one example's edits into the next.
            parent[key] = copy.deepcopy(draw(st.sampled_from(BAD_VALUES)))
        elif isinstance(parent, dict):
            new_key = _typo(str(key), draw)
            if action == "rename" and new_key not in parent:
                parent[new_key] = parent.pop(key)
            else:
                parent[new_key + "_extra"] = copy.deepcopy(parent[key])
    return design


@st.composite
def damaged_text(draw) -> str:
    """The TOML text of a valid design with its syntax damaged."""
    text = to_toml(draw(valid_designs()))
    for _ in range(draw(st.integers(1, 3))):
        position = draw(st.integers(0, max(len(text) - 1, 0)))
        action = draw(st.sampled_from(["delete", "insert", "truncate", "duplicate line",
                                       "swap lines"]))
        if action == "delete":
            text = text[:position] + text[position + 1:]
        elif action == "insert":
            text = text[:position] + draw(st.sampled_from(list('[]{}"=.,#\\\n\t\'') + ["\x07"])) \
                + text[position:]
        elif action == "truncate":
            text = text[:position]
        else:
            lines = text.split("\n")
            i = draw(st.integers(0, len(lines) - 1))
            j = draw(st.integers(0, len(lines) - 1))
            if action == "duplicate line":
                lines.insert(j, lines[i])
            else:
                lines[i], lines[j] = lines[j], lines[i]
            text = "\n".join(lines)
    return text


@st.composite
def damaged_bytes(draw) -> bytes:
    """Random bytes, or the bytes of a valid design with some bytes overwritten."""
    if draw(st.booleans()):
        return draw(st.binary(max_size=300))
    data = bytearray(to_toml(draw(valid_designs())).encode("utf-8"))
    for _ in range(draw(st.integers(1, 4))):
        if data:
            data[draw(st.integers(0, len(data) - 1))] = draw(st.integers(0, 255))
    return bytes(data)


# --- fuzzing the loader ----------------------------------------------------------------------------
# Property (issue 8): whatever the file holds, load_design returns a valid Design or raises the
# package's own StringcheckError, never anything else; and a design that loads runs to a finite
# result and a verdict. The hypothesis profile is fixed in CI (tests/conftest.py, "ci":
# derandomized); the example counts below keep the fuzzing to a few seconds.

_FUZZ = settings(max_examples=70, deadline=None,
                 suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])
_FUZZ_TRIALS = 64  # the verdict does not matter here, only that there is one


def _load_or_own_error(text: str) -> Design | None:
    """The design, or None when the loader refused it with its own one-line error."""
    try:
        design = parse_design_text(text, source="fuzz.toml")
    except StringcheckError as error:
        assert isinstance(error, ValueError)  # STYLE.md "Errors"
        message = str(error)
        assert message.startswith("fuzz.toml: ") and "\n" not in message.strip(), message
        return None
    assert isinstance(design, Design)
    return design


def _assert_runs_to_a_finite_verdict(design: Design, *, transient: bool = False) -> None:
    """run_check gives a verdict and finite figures, or refuses with the package's own error.

    Every check is judged through the fields that each check's result has (name, ran, reason,
    passed, worst / p50 / p99 ratio, estimate, unsolved), then through its own figures."""
    try:
        result = check_study.run_check(design, trials=_FUZZ_TRIALS, seed=1, transient=transient,
                                       transient_worst=1, transient_sample=1)
    except StringcheckError as error:
        # The study's own input checks (e.g. "the dynamic check needs capacitance") name a key.
        assert isinstance(error, DesignError) and error.key, error
        return
    assert result.verdict in ("pass", "fail")
    devices = design.string.series * design.string.parallel
    for name, outcome in result.checks.items():
        assert outcome.name == name
        assert isinstance(outcome.ran, bool) and isinstance(outcome.passed, bool), name
        if not outcome.ran:
            assert isinstance(outcome.reason, Finding) and sentence(outcome.reason), name
            assert not outcome.passed, name  # a check that did not run never passes
            continue
        estimate = outcome.estimate
        assert 0.0 <= estimate.ci_low <= estimate.p_fail <= estimate.ci_high <= 1.0, name
        # A check passes on the upper bound of its failure probability (docs/methods/).
        assert not outcome.passed or estimate.ci_high <= result.target_p_fail, name
        assert not math.isnan(outcome.worst_ratio), name
        if outcome.unsolved == 0:
            assert math.isfinite(outcome.worst_ratio), name
            assert outcome.p50_ratio <= outcome.p99_ratio <= outcome.worst_ratio, name
        else:
            # README "Failure": a trial that could not be solved is a failure, never dropped.
            assert outcome.worst_ratio == math.inf, name
        if name in ("static", "dynamic"):
            # README "Failure": a trial the solver could not solve is counted, never dropped.
            assert outcome.unsolved == 0, (name, outcome.unsolved)
            assert math.isfinite(outcome.worst_ratio) and math.isfinite(outcome.worst_voltage), name
            assert len(outcome.positions) == devices
            for position in outcome.positions:
                assert all(math.isfinite(value) for value in (
                    position.mean_voltage, position.std_voltage, position.max_voltage)), position
        elif name == "parallel":
            assert estimate.failures >= outcome.unsolved, name
            assert len(outcome.branches) == design.string.parallel
            if outcome.unsolved == 0:
                assert math.isfinite(outcome.worst_share), name
                for branch in outcome.branches:
                    assert all(math.isfinite(value) for value in (
                        branch.mean_current, branch.max_current, branch.mean_share,
                        branch.max_share)), branch
        elif name == "thermal":
            # A group that runs away is an unsolved trial and a failure.
            assert estimate.failures >= outcome.unsolved, name
            assert len(outcome.positions) == devices
            if outcome.unsolved == 0:
                assert math.isfinite(outcome.worst_tj), name
                assert all(math.isfinite(p.max_temperature) for p in outcome.positions), name
        elif name == "transient":
            # Unsolved strings of the random sample count in its estimate, those of the worst set
            # among the worst set's failures.
            assert estimate.failures + outcome.worst_failures >= outcome.unsolved, name
            assert len(outcome.positions) == devices
            if outcome.unsolved == 0:
                assert math.isfinite(outcome.worst_voltage), name
                assert all(math.isfinite(p.max_voltage) for p in outcome.positions), name
        else:
            raise AssertionError(f"a check the fuzzing does not know: {name}")
    # Machine output can always be written (JSON has no NaN, export.json_text refuses them).
    json.loads(export.json_text(export.result_to_dict(result)))
    export.positions_csv(result)


@pytest.mark.slow
@_FUZZ
@given(valid_designs())
def test_fuzz_valid_designs_load_and_give_a_finite_verdict(design):
    text = to_toml(design)
    loaded = parse_design_text(text, source="fuzz.toml")  # valid: must load
    _assert_runs_to_a_finite_verdict(loaded)


# The transient check simulates each chosen string in the time domain (about a second a string):
# fewer designs, one worst and one sampled string each.
_FUZZ_TRANSIENT = settings(_FUZZ, max_examples=4)


@pytest.mark.slow
@_FUZZ_TRANSIENT
@given(valid_designs(transient=True))
def test_fuzz_designs_with_a_turn_off_give_a_finite_verdict_in_the_transient_check(design):
    loaded = parse_design_text(to_toml(design), source="fuzz.toml")  # valid: must load
    _assert_runs_to_a_finite_verdict(loaded, transient=True)


def _ready(design: dict[str, Any], reasons) -> bool:
    return reasons(parse_design_text(to_toml(design), source="fuzz.toml")) in (None, (None, None))


def test_the_fuzzed_designs_reach_every_check():
    # The fuzzing above is only as wide as its designs: some must let the parallel and the thermal
    # check run (checks.forward.forward_reasons), some the transient check (its own reasons).
    # Generation only: the first design that qualifies is the evidence, shrinking it adds nothing.
    settled = settings(max_examples=500, deadline=None, database=None, phases=[Phase.generate],
                       suppress_health_check=list(HealthCheck))
    find(valid_designs(), lambda d: _ready(d, forward_reasons), settings=settled)
    find(valid_designs(transient=True), lambda d: _ready(d, transient_reason), settings=settled)


@_FUZZ
@given(corrupted_designs())
def test_fuzz_corrupted_designs_load_or_raise_the_packages_error(design):
    # Deleted keys, renamed keys, wrong units, negative / NaN / inf values, wrong types.
    loaded = _load_or_own_error(to_toml(design))
    if loaded is not None:  # the damage left a valid design: it must run like one
        _assert_runs_to_a_finite_verdict(loaded)


@_FUZZ
@given(damaged_text())
def test_fuzz_damaged_toml_loads_or_raises_the_packages_error(text):
    loaded = _load_or_own_error(text)
    if loaded is not None:
        _assert_runs_to_a_finite_verdict(loaded)


@pytest.fixture(scope="module")
def fuzz_folder():
    with tempfile.TemporaryDirectory(prefix="stringcheck-fuzz-") as folder:
        yield pathlib.Path(folder)


@_FUZZ
@given(data=damaged_bytes())
def test_fuzz_random_bytes_load_or_raise_the_packages_error(fuzz_folder, data):
    path = fuzz_folder / "fuzz.toml"
    path.write_bytes(data)
    try:
        design = load_design(path)
    except StringcheckError as error:
        assert str(error).startswith(f"{path}: ") and "\n" not in str(error).strip(), error
        return
    assert isinstance(design, Design)
