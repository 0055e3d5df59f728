"""Design texts that several test modules share, one TOML file each (invented scenarios, no real
part). ``name.toml`` is a design as it stands; ``name.template.toml`` holds ``$placeholders`` that a
function below fills in (``string.Template``), so that a test can set the values it is about.

- ``scatter.toml``: 16 x 2 fast-recovery devices with scatter; the static and dynamic checks.
- ``parallel_pair.toml``: two branches, dc; the parallel check's P(fail) is 2 Phi(-beta)
  (tests/conftest.py, ``parallel_pair_design``).
- ``robustness_base.toml``: a small valid stack that each bad input of the CLI tests edits in one
  place.
- ``half_plane.template.toml``: two stages whose static P(fail) is Phi(-beta)
  (:func:`half_plane_design_text`).
- ``corner.template.toml``: a no-scatter corner of two parts (:func:`corner_design`).
- ``one_kv_stack.toml``: four 1 kV devices at 3 kV without a grading network; the grading-ratings,
  plausibility and sizing tests add their own tables.
"""

from __future__ import annotations

import math
from pathlib import Path
from string import Template

FOLDER = Path(__file__).resolve().parent


def design_text(name: str) -> str:
    """The text of ``tests/designs/<name>.toml``."""
    return (FOLDER / f"{name}.toml").read_text(encoding="utf-8")


def design_template(name: str, **values: object) -> str:
    """The text of ``tests/designs/<name>.template.toml`` with every ``$placeholder`` filled in
    (``str`` of each value; a placeholder left without a value raises KeyError)."""
    text = (FOLDER / f"{name}.template.toml").read_text(encoding="utf-8")
    return Template(text).substitute(values)


# The half-plane stack (derivation in tests/conftest.py): stage 2's leakage is lognormal with
# median 1 uA and sigma = ln(10) / 3.
HALF_PLANE_SIGMA = math.log(10.0) / 3.0


def half_plane_design_text(beta: float, *, screened: bool = False, trials: int = 20000) -> str:
    """Design text whose static P(fail) is Phi(-beta) exactly (see tests/conftest.py)."""
    leakage = 1e-6 * math.exp(HALF_PLANE_SIGMA * beta)
    v_rrm = float(1000.0 + 100e6 * (leakage - 1e-6) / 2.0)
    return design_template("half_plane", v_rrm=repr(v_rrm), trials=trials,
                           screened="true" if screened else "false")


def corner_design(*, series=8, string_voltage=9000.0, v_rrm=1400.0, derating=0.9,
                  leak_low=2e-6, leak_high=12e-6, charge_low=0.4e-6, charge_high=1.0e-6,
                  resistor=None, capacitor=None, exponent=0.0, trials=10, extra="") -> str:
    """A fixed (no-scatter) corner: position 1 holds the low-leakage, fast part; the rest the
    other."""
    return design_template(
        "corner", series=series, string_voltage=string_voltage, v_rrm=v_rrm, derating=derating,
        leak_low=leak_low, leak_high=leak_high, charge_low=charge_low, charge_high=charge_high,
        exponent=exponent, trials=trials, extra=extra,
        resistor_line=f"resistor = {resistor!r}" if resistor is not None else "",
        capacitor_line=f"capacitor = {capacitor!r}" if capacitor is not None else "")
