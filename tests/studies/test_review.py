"""``stringcheck review``: common random numbers, the substitution corner, the verdict and the CLI."""

from __future__ import annotations

import json

import pytest
from typer.testing import CliRunner

from stringcheck.cli.app import app
from stringcheck.design.reading import parse_design_text
from stringcheck.studies.review import parse_swap, review, swapped
from stringcheck.errors import StringcheckError
from stringcheck.report.wording import sentence

runner = CliRunner()

# Invented string: n = 6 slow devices, capacitors without tolerance, fixed values.
BASE = """
[duty]
reverse_voltage = "6 kV"
waveform = "half-sine"
frequency = "50 Hz"
di_dt = "10 A/us"
[string]
series = 6
derating = 0.9
part = "SLOW"
[parts.SLOW]
v_rrm = "1.6 kV"
i_r = { typ = "1 uA", at_temperature = "25 degC" }
q_rr = { typ = "1.0 uC" }
leakage_voltage_exponent = 0
[parts.FAST]
v_rrm = "1.6 kV"
i_r = { typ = "1 uA", at_temperature = "25 degC" }
q_rr = { typ = "0.7 uC" }
leakage_voltage_exponent = 0
[parts.WEAK]
v_rrm = "1.0 kV"
i_r = { typ = "1 uA", at_temperature = "25 degC" }
q_rr = { typ = "1.0 uC" }
leakage_voltage_exponent = 0
[grading]
resistor = "10 MOhm"
capacitor = "3.3 nF"
[monte_carlo]
trials = 4000
seed = 9
"""


def test_a_swap_that_changes_nothing_accepts_with_zero_change():
    base = parse_design_text(BASE)
    same = swapped(base, (1, 2, 3), "SLOW")
    result = review(base, same)
    assert result.verdict == "accept"
    assert all(c.rise in (None, 0.0) for c in result.changes)
    assert result.worse_positions == ()
    for name in ("static", "dynamic"):
        assert result.baseline.checks[name].positions == result.candidate.checks[name].positions


def test_a_faster_substitute_takes_the_charge_balance_corner_voltage():
    # Charge balance with one fast device (Q_f) among n - 1 slow ones (Q_s), equal C (docs/methods/,
    # the textbook series-diode argument): sum (Q - Q_k) / C = V_s gives
    # V_fast = V_s / n + (n - 1)(Q_s - Q_f) / (n C) = 1000 + 5 x 0.3 uC / (6 x 3.3 nF) = 1075.8 V.
    base = parse_design_text(BASE)
    result = review(base, swapped(base, (4,), "FAST"))
    expected = 6000 / 6 + 5 * 0.3e-6 / (6 * 3.3e-9)
    dynamic = result.candidate.checks["dynamic"]
    assert dynamic.worst_voltage == pytest.approx(expected, rel=1e-9)
    assert dynamic.positions[3].max_voltage == pytest.approx(expected, rel=1e-9)
    assert result.worse_positions[0].index == 4
    assert any("recovers first" in sentence(f) for f in result.reasons)


def test_a_weaker_substitute_is_rejected():
    # 1.0 kV x 0.9 = 900 V < 1000 V nominal share: every built string fails.
    base = parse_design_text(BASE)
    result = review(base, swapped(base, (2,), "WEAK"))
    assert result.verdict == "reject"
    assert any(not c.acceptable for c in result.changes)


@pytest.mark.parametrize("text,fragment", [
    ("1-9:FAST", "1..6"), ("3-1:FAST", "backwards"), ("1-2:NOPE", "NOPE"), ("12FAST", "POSITIONS"),
    ("a,b:FAST", "POSITIONS:PART"), ("1-x:FAST", "POSITIONS:PART"),
])
def test_bad_swaps_name_the_problem(text, fragment):
    with pytest.raises(StringcheckError, match=fragment):
        parse_swap(text, parse_design_text(BASE))


def test_cli_review_exit_codes_and_json(tmp_path):
    path = tmp_path / "base.toml"
    path.write_text(BASE, encoding="utf-8")
    target = tmp_path / "review.json"
    accepted = runner.invoke(app, ["review", str(path), "--swap", "1-3:SLOW", "--json",
                                   str(target), "--quiet"])
    assert accepted.exit_code == 0, accepted.output
    data = json.loads(target.read_text(encoding="utf-8"))
    for key in ("baseline", "candidate", "changes", "verdict"):
        assert key in data, key
    assert data["verdict"] == "accept"
    rejected = runner.invoke(app, ["review", str(path), "--swap", "2:WEAK", "--quiet"])
    assert rejected.exit_code == 1, rejected.output
    bad = runner.invoke(app, ["review", str(path), "--swap", "2:NOPE"])
    assert bad.exit_code == 2 and "NOPE" in bad.stderr
    both = runner.invoke(app, ["review", str(path), str(path), "--swap", "2:FAST"])
    assert both.exit_code == 2 and "exactly one" in both.stderr


def test_one_progress_count_runs_over_both_checks():
    # The review reports progress as one count from 0 to twice the trials (baseline, then
    # candidate), never starting again from zero.
    baseline = parse_design_text(BASE)
    calls = []
    review(baseline, swapped(baseline, (1,), baseline.string.part), trials=9000, seed=1,
           progress=lambda done, total: calls.append((done, total)))
    assert [total for _, total in calls] == [18000] * len(calls)
    done = [d for d, _ in calls]
    assert done == sorted(done) and done[-1] == 18000
