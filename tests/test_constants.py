"""Each shared constant has one home (stringcheck/constants.py), in the base layer."""

from __future__ import annotations

import ast
import math
from pathlib import Path

import numpy as np

import stringcheck
from stringcheck import constants, eseries
from stringcheck.design.model import SPREAD_PARAMETERS, SPREAD_UNITS
from stringcheck.physics.grading import discharge_time

_PACKAGE = Path(stringcheck.__file__).parent


def _module_assignments(path: Path) -> dict[str, ast.expr]:
    """Module-level ``NAME = value`` (and annotated) assignments of one file."""
    found = {}
    for node in ast.parse(path.read_text(encoding="utf-8")).body:
        if isinstance(node, ast.Assign):
            for target in node.targets:
                if isinstance(target, ast.Name):
                    found[target.id] = node.value
        elif isinstance(node, ast.AnnAssign) and isinstance(node.target, ast.Name) and node.value:
            found[node.target.id] = node.value
    return found


def test_constants_import_nothing_from_the_package():
    tree = ast.parse((_PACKAGE / "constants.py").read_text(encoding="utf-8"))
    imported = [node.module for node in ast.walk(tree) if isinstance(node, ast.ImportFrom)]
    imported += [alias.name for node in ast.walk(tree) if isinstance(node, ast.Import)
                 for alias in node.names]
    assert not [name for name in imported if name and name.startswith("stringcheck")]


def test_each_shared_constant_and_name_list_is_defined_once():
    # No other module assigns a constant of the same name, nor a module-level tuple with the
    # same names (the waveform, heatsink and preferred-series lists were copied across layers).
    shared = {name: getattr(constants, name) for name in constants.__all__}
    shared["SERIES_NAMES"] = eseries.SERIES_NAMES
    homes = {"SERIES_NAMES": _PACKAGE / "eseries.py"}
    tuples = {value for value in shared.values() if isinstance(value, tuple)}
    for path in sorted(_PACKAGE.rglob("*.py")):
        for name, node in _module_assignments(path).items():
            home = homes.get(name, _PACKAGE / "constants.py")
            if name in shared:
                assert path == home, f"{path.relative_to(_PACKAGE)} defines {name} again"
            elif isinstance(node, ast.Tuple) and path not in homes.values() \
                    and path != _PACKAGE / "constants.py":
                try:
                    value = ast.literal_eval(node)
                except ValueError:
                    continue
                assert value not in tuples, f"{path.relative_to(_PACKAGE)}: {name} copies {value}"


def test_the_discharge_threshold_defaults_to_the_safe_voltage():
    # One stage, R C = 1 s, from 600 V: V(t) = V0 exp(-t / RC) reaches 60 V at t = RC ln(V0 / 60 V)
    # (closed-form RC discharge; Nilsson and Riedel, Electric Circuits, 9th ed., chapter 7, from
    # memory).
    time = discharge_time(np.array([600.0]), np.array([1.0e6]), np.array([1.0e-6]))
    assert constants.SAFE_VOLTAGE == 60.0 and constants.SAFE_DISCHARGE_TIME == 5.0
    assert math.isclose(float(time), math.log(600.0 / constants.SAFE_VOLTAGE), rel_tol=1e-9)


def test_every_spread_parameter_has_one_unit():
    assert tuple(SPREAD_UNITS) == SPREAD_PARAMETERS
    assert [SPREAD_UNITS[name].label for name in SPREAD_PARAMETERS] == ["A", "C", "A", "s", "V", "ohm"]
