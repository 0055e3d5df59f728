"""Generic device classes to start a part from (``class = "..."`` in a ``[parts.NAME]`` table).

Each class holds values typical of its kind of device, written the way a design file writes them. A part
that names a class inherits every key it does not set itself; a key the part sets replaces the class's
key whole (a spread table is not merged field by field). No brand, no part number: these are classes.

The figures are typical of the class as the trade knows it (common practice, from memory of many
datasheets of each kind, not from any one of them). They are a starting point for a design, never a
substitute for the datasheet of the device that will be built in.
"""

from __future__ import annotations

import math
from types import MappingProxyType
from typing import Any, Mapping

_SILICON_LEAKAGE = {"leakage_doubling": "10 K", "leakage_voltage_exponent": 0.5}

_PRESETS: dict[str, dict[str, Any]] = {
    # Press-pack or stud rectifier for mains frequency: the highest ratings of any diode class and
    # slow recovery (stored charge in the mC range).
    "si-rectifier": {
        "description": "general-purpose silicon rectifier (line frequency, several kV, kA class, "
                       "slow recovery)",
        "v_rrm": "4.5 kV",
        "i_fav": "2 kA",
        "i_r": {"max": "100 mA", "at_temperature": "150 degC", "at_voltage": "4.5 kV"},
        "q_rr": {"typ": "3 mC", "max": "5 mC", "at_di_dt": "10 A/us",
                 "at_forward_current": "2 kA", "at_temperature": "150 degC"},
        "t_rr": {"typ": "20 us", "max": "30 us", "at_di_dt": "10 A/us"},
        "v_t0": {"typ": "0.80 V", "max": "0.85 V", "at_temperature": "150 degC"},
        "r_t": {"typ": "0.15 mOhm", "max": "0.20 mOhm", "at_temperature": "150 degC"},
        "c_j": "2 nF",
        "r_th_jc": "0.012 K/W",
        "r_th_cs": "0.003 K/W",
        "t_j_max": "150 degC",
        "tempco_v_t0": "-2 mV/K",
        "tempco_r_t": "0.003 1/K",
        **_SILICON_LEAKAGE,
    },
    # Lifetime-controlled PIN diode for converters: recovery in the 0.1 to 5 us range.
    "si-fast-recovery": {
        "description": "fast-recovery silicon diode (t_rr about 0.1 to 5 us, kHz to tens of kHz)",
        "v_rrm": "1.2 kV",
        "i_fav": "30 A",
        "i_r": {"max": "0.5 mA", "at_temperature": "125 degC", "at_voltage": "1.2 kV"},
        "q_rr": {"typ": "1.5 uC", "max": "3 uC", "at_di_dt": "100 A/us",
                 "at_forward_current": "30 A", "at_temperature": "125 degC"},
        "t_rr": {"typ": "0.2 us", "max": "0.35 us", "at_di_dt": "100 A/us"},
        "v_t0": {"typ": "1.1 V", "max": "1.3 V", "at_temperature": "125 degC"},
        "r_t": {"typ": "15 mOhm", "max": "20 mOhm", "at_temperature": "125 degC"},
        "c_j": "60 pF",
        "r_th_jc": "0.8 K/W",
        "r_th_cs": "0.2 K/W",
        "t_j_max": "150 degC",
        "tempco_v_t0": "-2 mV/K",
        "tempco_r_t": "0.003 1/K",
        **_SILICON_LEAKAGE,
    },
    # Majority-carrier device: low V_F, almost no stored charge, high and hot leakage.
    "si-schottky": {
        "description": "silicon Schottky diode (low V_F, very small recovery charge, high leakage)",
        "v_rrm": "100 V",
        "i_fav": "20 A",
        "i_r": {"max": "20 mA", "at_temperature": "125 degC", "at_voltage": "100 V"},
        "q_rr": {"typ": "15 nC", "max": "25 nC", "at_di_dt": "100 A/us",
                 "at_temperature": "125 degC"},
        "v_t0": {"typ": "0.35 V", "max": "0.45 V", "at_temperature": "125 degC"},
        "r_t": {"typ": "12 mOhm", "max": "16 mOhm", "at_temperature": "125 degC"},
        "c_j": "500 pF",
        "r_th_jc": "1.5 K/W",
        "r_th_cs": "0.3 K/W",
        "t_j_max": "175 degC",
        "tempco_v_t0": "-1.5 mV/K",
        "tempco_r_t": "0.004 1/K",
        **_SILICON_LEAKAGE,
    },
    # Silicon-carbide Schottky: the recovery charge is the junction's capacitive charge, about 20 nC in
    # the 600 V, 6-10 A class, nearly independent of current, di/dt and temperature.
    "sic-schottky": {
        "description": "silicon-carbide Schottky diode (capacitive recovery charge about 20 nC, "
                       "negligible reverse-recovery current)",
        "v_rrm": "650 V",
        "i_fav": "8 A",
        "i_r": {"typ": "2 uA", "max": "50 uA", "at_temperature": "25 degC", "at_voltage": "650 V"},
        "q_rr": {"typ": "20 nC", "max": "24 nC", "at_di_dt": "200 A/us",
                 "at_temperature": "25 degC"},
        "i_rm": {"typ": "0.3 A", "max": "0.5 A", "at_di_dt": "200 A/us"},
        "v_t0": {"typ": "0.95 V", "max": "1.05 V", "at_temperature": "25 degC"},
        "r_t": {"typ": "70 mOhm", "max": "90 mOhm", "at_temperature": "25 degC"},
        # C_j rows consistent with the class's capacitive charge: Q_c(400 V) = integral of C_j dV
        # is about 20 nC through the junction law fitted to them (tests/design).
        "c_j": [{"typ": "400 pF", "at_voltage": "1 V"},
                {"typ": "26 pF", "max": "31 pF", "at_voltage": "400 V"}],
        "r_th_jc": "2.0 K/W",
        "r_th_cs": "0.3 K/W",
        "t_j_max": "175 degC",
        "tempco_v_t0": "-1.2 mV/K",
        "tempco_r_t": "0.006 1/K",
        "leakage_doubling": "25 K",
        "leakage_voltage_exponent": 0.5,
    },
}

PRESET_NAMES: tuple[str, ...] = tuple(_PRESETS)

# The junction law C_j0 / (1 + V/phi)^gamma of each class's junction (phi [V], gamma [1]), held
# when a part gives C_j as rows (gamma only where one row gives no slope). Typical of the kind of
# junction (common practice, from memory): a diffused rectifier's junction is graded (gamma about
# 1/3), a Schottky barrier abrupt (1/2); phi about 0.7 V for silicon p-n, 0.5 V for a silicon
# Schottky barrier and about 1.2 V for a silicon-carbide Schottky barrier.
_JUNCTION_LAWS: dict[str | None, tuple[float, float]] = {
    "si-rectifier": (0.7, 1.0 / 3.0),
    "si-fast-recovery": (0.7, 0.4),
    "si-schottky": (0.5, 0.5),
    "sic-schottky": (1.2, 0.5),
    None: (0.7, 0.5),
}


def junction_law_defaults(name: str | None) -> tuple[float, float, str]:
    """phi [V] and gamma [1] of the junction law held for a part of class ``name`` (None: no
    class, the silicon abrupt junction), and what they stand for (the class, or "silicon")."""
    phi, gamma = _JUNCTION_LAWS.get(name, _JUNCTION_LAWS[None])
    return phi, gamma, f"class '{name}'" if name in _PRESETS else "silicon p-n"


def preset(name: str) -> Mapping[str, Any]:
    """The raw keys of the device class ``name`` (read-only), without its description.

    Raises
    ------
    KeyError
        When no class has that name (the design loader turns this into a DesignError).
    """
    values = dict(_PRESETS[name])
    values.pop("description")
    return MappingProxyType(values)


def describe(name: str) -> str:
    """One line saying what kind of device the class ``name`` stands for."""
    return _PRESETS[name]["description"]


# The temperature law of a recovery parameter the datasheet gives at one junction temperature only:
# the factor by which it grows per 100 K, value(T) = value(T_row) factor^((T - T_row) / 100 K).
# Silicon PiN diodes store charge with a carrier lifetime that rises with temperature: Q_rr grows
# about 2-3x from 25 to 125 degC, I_RM and t_rr each about 1.5x (common practice, from memory of
# many datasheets of fast and line-frequency silicon diodes; B. J. Baliga, *Fundamentals of Power
# Semiconductor Devices*, Springer, 2008, chapter 5, for the lifetime). A Schottky diode stores no
# minority charge: its recovery is the junction's capacitive charge, which hardly moves with
# temperature (a fact of the trade), so both Schottky classes are flat.
_SILICON_RECOVERY_FACTORS = {"q_rr": 2.5, "i_rm": 1.6, "t_rr": 1.6}
_FLAT_RECOVERY_FACTORS = {"q_rr": 1.0, "i_rm": 1.0, "t_rr": 1.0}
_RECOVERY_FACTORS = {"si-rectifier": _SILICON_RECOVERY_FACTORS,
                     "si-fast-recovery": _SILICON_RECOVERY_FACTORS,
                     "si-schottky": _FLAT_RECOVERY_FACTORS,
                     "sic-schottky": _FLAT_RECOVERY_FACTORS}
# What a part without a class is taken as for this law (named so in the report).
DEFAULT_RECOVERY_CLASS = "silicon PiN (no class given)"


def recovery_temperature_rates(name: str | None) -> dict[str, float]:
    """The one-row temperature law of Q_rr, I_RM and t_rr for the device class ``name`` (None: a
    silicon PiN diode), as rates [1/K]: value(T) = value(T_row) exp(rate (T - T_row))."""
    factors = _SILICON_RECOVERY_FACTORS if name is None else _RECOVERY_FACTORS[name]
    return {parameter: math.log(factor) / 100.0 for parameter, factor in factors.items()}
