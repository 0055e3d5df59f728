"""Generic device classes: facts of the trade about each kind of diode, and that each loads.

The class comparisons below are facts of the trade (common practice, from memory of many datasheets
of each kind; no single datasheet is the source). Values are compared after the design loader has
converted them to SI, so the unit spellings of the presets are checked as well.
"""

from __future__ import annotations

import pytest

from stringcheck.design.reading import parse_design_text
from stringcheck.design.device_classes import PRESET_NAMES, describe, preset

PN_SILICON = ("si-rectifier", "si-fast-recovery")


def load_class(name: str, **extra: str):
    """The part of a design whose only part is ``class = name`` (plus ``extra`` keys)."""
    lines = "\n".join(f"{key} = {value}" for key, value in extra.items())
    text = f"""
[duty]
reverse_voltage = 100
[string]
series = 10
[parts.P]
class = "{name}"
{lines}
"""
    return parse_design_text(text).parts["P"]


@pytest.fixture(scope="module")
def parts():
    return {name: load_class(name) for name in PRESET_NAMES}


def test_the_four_documented_classes_exist():
    # docs/design-file.md / starter file: si-rectifier | si-fast-recovery | si-schottky | sic-schottky.
    assert set(PRESET_NAMES) == {"si-rectifier", "si-fast-recovery", "si-schottky", "sic-schottky"}


@pytest.mark.parametrize("name", PRESET_NAMES)
def test_every_class_alone_loads_as_a_valid_part(name):
    part = load_class(name)
    assert part.device_class == name
    assert part.v_rrm > 0 and part.i_fav > 0
    assert part.i_r is not None and part.q_rr is not None
    assert part.t_j_max is not None and part.t_j_max > 25.0
    assert 0.0 <= part.voltage_exponent <= 1.0
    # Every spread of a class has scatter (a limit beyond typ) and typ <= max.
    for parameter in ("i_r", "q_rr", "i_rm", "t_rr", "v_t0", "r_t"):
        spread = part.spread(parameter)
        if spread is not None:
            assert not spread.fixed, parameter
            assert spread.high >= spread.typ > 0, parameter
    assert describe(name)


@pytest.mark.parametrize("name", PRESET_NAMES)
def test_preset_mapping_is_read_only_and_without_description(name):
    values = preset(name)
    assert "description" not in values
    with pytest.raises(TypeError):
        values["v_rrm"] = "1 V"  # type: ignore[index]
    # preset() hands out a copy: the next caller still sees the class's own values.
    assert preset(name)["v_rrm"] == values["v_rrm"]


def test_unknown_class_is_a_key_error():
    with pytest.raises(KeyError):
        preset("ge-rectifier")


def test_si_rectifier_has_the_highest_ratings(parts):
    # Common practice (from memory): line-frequency press-pack / stud rectifiers reach several kV
    # and kA, beyond any fast, Schottky or SiC Schottky device.
    rectifier = parts["si-rectifier"]
    assert 2e3 <= rectifier.v_rrm <= 10e3  # several kV
    assert 0.5e3 <= rectifier.i_fav <= 10e3  # kA class
    for name, part in parts.items():
        if name != "si-rectifier":
            assert rectifier.v_rrm > part.v_rrm, name
            assert rectifier.i_fav > part.i_fav, name


def test_si_rectifier_recovers_slowest(parts):
    # Common practice (from memory): no lifetime control, so the largest stored charge (tens of uC
    # to mC for kA devices) and recovery times of many microseconds.
    rectifier = parts["si-rectifier"]
    for name, part in parts.items():
        if name == "si-rectifier":
            continue
        assert rectifier.q_rr.typ > part.q_rr.typ, name
        assert rectifier.q_rr.high > part.q_rr.high, name
        if part.t_rr is not None:
            assert rectifier.t_rr.typ > part.t_rr.typ, name
    assert rectifier.t_rr.typ >= 5e-6


def test_fast_recovery_time_is_in_its_class_range(parts):
    # Common practice (from memory): fast-recovery (lifetime-controlled PIN) diodes recover in about
    # 0.1 to 5 us; the class description says so too.
    t_rr = parts["si-fast-recovery"].t_rr
    assert 0.1e-6 <= t_rr.typ <= 5e-6
    assert 0.1e-6 <= t_rr.high <= 5e-6
    assert "0.1 to 5 us" in describe("si-fast-recovery")


def test_schottky_has_lower_threshold_than_pn_silicon(parts):
    # A Schottky barrier conducts at a lower forward voltage than a PN junction (Sze, Physics of
    # Semiconductor Devices, metal-semiconductor contacts; typical figures common practice).
    schottky = parts["si-schottky"].v_t0
    for name in PN_SILICON:
        assert schottky.typ < parts[name].v_t0.typ, name
        assert schottky.high < parts[name].v_t0.typ, name


def test_schottky_stores_almost_no_charge(parts):
    # Majority-carrier device: Q_rr is the junction's capacitive charge, tens of nC at most
    # (common practice, from memory).
    assert parts["si-schottky"].q_rr.high < 100e-9
    assert parts["si-schottky"].q_rr.high < parts["si-fast-recovery"].q_rr.typ


def _leakage_density_at(part, temperature: float) -> float:
    """Maximum leakage per ampere of rating, referred to ``temperature`` [degC] with the part's own
    doubling temperature: I_R(T) = I_R,ref 2^((T - T_ref) / T_d) (docs/methods/, "Leakage";
    doubling law common practice)."""
    spread = part.i_r
    referred = spread.high * 2.0 ** ((temperature - spread.at_temperature) / part.doubling_temperature)
    return referred / part.i_fav


def test_schottky_leaks_most_per_ampere(parts):
    # Common practice (from memory): silicon Schottky diodes leak far more than PN diodes of like
    # current rating (thermionic emission over a low barrier). Compared as maximum leakage per
    # ampere of I_FAV, each referred to 125 degC.
    schottky = _leakage_density_at(parts["si-schottky"], 125.0)
    assert schottky > 10 * _leakage_density_at(parts["si-fast-recovery"], 125.0)
    for name, part in parts.items():
        if name != "si-schottky":
            assert schottky > _leakage_density_at(part, 125.0), name


def test_sic_schottky_capacitive_charge_class(parts):
    # Common practice (from memory): a 600-650 V, 6-10 A SiC Schottky diode has a capacitive
    # charge Q_c of about 20 nC, and no minority-carrier recovery current worth the name.
    sic = parts["sic-schottky"]
    assert 600.0 <= sic.v_rrm <= 650.0
    assert 6.0 <= sic.i_fav <= 10.0
    assert 15e-9 <= sic.q_rr.typ <= 30e-9
    assert sic.q_rr.high <= 30e-9
    assert sic.i_rm is not None
    assert sic.i_rm.typ < 0.1 * sic.i_fav
    assert sic.i_rm.high < 0.1 * sic.i_fav
    # SiC leakage doubles more slowly with temperature than silicon's ~10 K (common practice).
    assert sic.doubling_temperature > parts["si-fast-recovery"].doubling_temperature


def test_silicon_classes_use_the_silicon_leakage_law(parts):
    # docs/methods/: doubling every ~10 K for silicon (common practice); m = 0.5 for
    # generation current (Sze).
    for name in ("si-rectifier", "si-fast-recovery", "si-schottky"):
        assert parts[name].doubling_temperature == 10.0
        assert parts[name].voltage_exponent == 0.5


def test_pn_silicon_threshold_falls_with_temperature(parts):
    # About -2 mV/K for a silicon PN junction (docs/methods/, common practice).
    for name in PN_SILICON:
        assert parts[name].tempco_v_t0 == pytest.approx(-2e-3)
    for name, part in parts.items():
        assert part.tempco_v_t0 < 0, name
