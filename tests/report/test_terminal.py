"""The terminal report's one-line summary (--quiet) and the turn-off current it states."""

from __future__ import annotations

import io

import pytest
from rich.console import Console

from stringcheck.design.reading import parse_design_text
from stringcheck.report.terminal import render_check, render_check_summary
from stringcheck.studies.check import run_check

# Two stages turning off a square current of 10 A average (20 A peak); invented values.
_DESIGN = """
[duty]
reverse_voltage = "1 kV"
forward_current = "10 A"
waveform = "square"
frequency = "20 kHz"
di_dt = "100 A/us"
ambient = "40 degC"
[string]
series = 2
derating = 0.9
part = "A"
[parts.A]
v_rrm = "1.2 kV"
i_r = { typ = "1 nA", max = "10 nA", at_temperature = "25 degC", at_voltage = "1 kV" }
q_rr = { typ = "1 uC", max = "1.5 uC", at_forward_current = "5 A", at_di_dt = "50 A/us" }
t_rr = { typ = "0.3 us", at_di_dt = "50 A/us" }
c_j = "0 pF"
[grading]
resistor = "10 MOhm"
capacitor = "10 nF"
damping_resistor = "10 Ohm"
[monte_carlo]
trials = 1000
seed = 3
"""


def _text(render, result) -> str:
    buffer = io.StringIO()
    render(result, Console(file=buffer, width=2000, color_system=None))
    return buffer.getvalue()


@pytest.fixture(scope="module")
def result():
    return run_check(parse_design_text(_DESIGN), transient=True, transient_sample=20,
                     transient_worst=3, rare=False)


def test_quiet_line_counts_the_transient_strings_it_simulated(result):
    # Issue 14 item 9: the transient check simulates a random sample and the worst
    # charge-balance strings, not the run's 1,000 trials; the line must say how many.
    check = result.checks["transient"]
    assert check.ran and check.estimate.trials == 20
    assert 20 <= check.simulated <= 23
    line = _text(render_check_summary, result)
    transient = line[line.index("transient"):]
    assert f"({check.estimate.failures}/20 sampled failed" in transient, line
    assert f"{check.worst_failures}/3 worst charge-balance strings failed" in transient
    assert f"{check.simulated} of the 1,000 strings simulated" in transient
    assert "/1,000" not in transient, line
    # The run's own checks still count every trial.
    assert "static pass (0/1,000 failed" in line or "static FAIL" in line, line


def test_report_states_the_turn_off_current_of_each_check(result):
    # Issue 14 item 4: a square wave turns off from I_pk = 2 I_F(AV) = 20 A.
    text = _text(render_check, result)
    phrase = "I_F = 20 A per branch at turn-off (a square wave commutates from its peak"
    assert text.count(phrase) == 2, text  # the dynamic and the transient check


def test_report_states_the_slope_and_each_parts_carried_charge(result):
    # Issue 17 item 1: the di/dt, which setting decided it, and per part the datasheet's Q_rr
    # beside the carried one (the dynamic and the thermal sections where both ran).
    from stringcheck.units import format_quantity

    text = " ".join(_text(render_check, result).split())
    assert "di/dt = 100 A/us from duty.di_dt" in text, text
    carried = result.checks["dynamic"].turn_off_current.parts[0]
    assert carried.part == "A" and carried.datasheet_typ == 1e-6
    line = (f"part A: Q_rr typ 1 uC, max 1.5 uC at the datasheet's 5 A, 50 A/us -> carried typ "
            f"{format_quantity(carried.carried_typ, 'C')}, max "
            f"{format_quantity(carried.carried_limit, 'C')}")
    assert line in text, text
    # Carried to 20 A at 100 A/us from 5 A at 50 A/us: more charge than the datasheet's.
    assert carried.carried_typ > carried.datasheet_typ


def test_convergence_note_and_json_carry_the_estimates_own_figures(result):
    # Issue 16 item 3: the relative error of P(fail) and the trials for 10 % are the estimate's
    # figures, printed by the report and written to the JSON alike. Closed forms: relative standard
    # error sqrt((1 - p) / (n p)) of a binomial proportion, n = (1 - p) / (p e^2) (Feller, vol. 1,
    # ch. VI, from memory): p = 0.003, n = 1000 gives 57.6 % and 33,234 trials for 10 %.
    import dataclasses

    from stringcheck.montecarlo.estimates import failure_estimate

    static = dataclasses.replace(result.checks["static"], estimate=failure_estimate(3, 1000),
                                 rare=None)
    changed = dataclasses.replace(result, checks={**result.checks, "static": static})
    from functools import partial

    from stringcheck.cli.options import option_wording

    text = _text(partial(render_check, spell=option_wording), changed)  # as the command line shows it
    assert ("static: 3 failures in 1,000 trials know P(fail) to +-58% (standard error); about "
            "33,234 trials would give +-10%, or use --rare") in text, text
    keys = static.to_dict()
    assert keys["p_fail_relative_error"] == pytest.approx((0.997 / 3) ** 0.5, rel=1e-12)
    assert keys["trials_for_relative_error"] == 33234
    # No failure seen: no relative error (null), no note, and the zero-failure bound stands.
    quiet = result.checks["static"]
    assert quiet.estimate.failures == 0
    assert quiet.to_dict()["p_fail_relative_error"] is None
    assert quiet.to_dict()["trials_for_relative_error"] is None
    assert "static: 0 failures" not in _text(render_check, result)



def test_the_report_spells_the_settings_it_suggests_as_told():
    # Only the command line knows option names (docs/architecture.md): the report names a setting
    # through the spelling it is given, the Python keyword by default, the option from the CLI.
    # 100 trials cannot show 1e-3 (Clopper-Pearson: 3,688 needed with no failure seen).
    from pathlib import Path

    from stringcheck.cli.options import option_wording
    from stringcheck.design.reading import load_design

    example = Path(__file__).resolve().parents[2] / "examples" / "precipitator-30kv.toml"
    short = run_check(load_design(example), trials=100, rare=False)
    for spell, expected in ((str, "(trials)"), (option_wording, "(--trials)")):
        out = io.StringIO()
        render_check(short, Console(file=out, width=200), spell=spell)
        assert f"run at least {short.trials_needed:,} {expected}" in out.getvalue()
