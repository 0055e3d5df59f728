"""``stringcheck review`` judges margin, not only P(fail), and gives one verdict whichever
estimator runs (issue 19): the decision rule, the reasons from the computed change, the
per-position change, the flags of the substitute parts and the bad [review] settings."""

from __future__ import annotations

import csv
import io
import json
from dataclasses import replace

import pytest
from typer.testing import CliRunner

from stringcheck.cli.app import app
from stringcheck.design.model import Review
from stringcheck.design.reading import load_design, parse_design_text
from stringcheck.report.review import review_positions_csv, review_to_dict
from stringcheck.report.wording import TEMPLATES, sentence
from stringcheck.studies.review import compare, review, substituted
from tests.designs import FOLDER
from tests.studies.test_review import BASE

runner = CliRunner()
STACK = FOLDER / "second_source_11kv.toml"


def _codes(findings) -> list[str]:
    return [finding.code for finding in findings]


# -- the decision rule: closed form first ---------------------------------------------------------

def test_the_stress_tolerance_decides_on_the_charge_balance_corner():
    # Fixed values (no scatter), so every built string is the closed-form corner of charge
    # balance with one fast device (Q_f) among n - 1 slow ones (Q_s), equal C (the textbook
    # series-diode argument, docs/methods/dynamic.md): V_fast = V_s / n + (n - 1)(Q_s - Q_f) /
    # (n C) = 1000 + 5 x 0.3 uC / (6 x 3.3 nF) = 1075.8 V against a limit of 0.9 x 1.6 kV.
    # Nothing fails on either side, so both P(fail) bounds are equal: only the margin can
    # decide, and it rose by (1075.8 - 1000) / 1440 = 0.0526 of the limit.
    base = parse_design_text(BASE)
    result = review(base, substituted(base, swap="4:FAST"))
    limit = 0.9 * 1600.0
    rise = 5 * 0.3e-6 / (6 * 3.3e-9) / limit
    dynamic = next(c for c in result.changes if c.name == "dynamic")
    assert dynamic.rise == 0.0
    assert dynamic.worst_ratio_rise == pytest.approx(rise, rel=1e-9)
    assert dynamic.p99_ratio_rise == pytest.approx(rise, rel=1e-9)
    assert result.stress_tolerance == 0.02 and result.verdict == "reject"
    assert _codes(dynamic.decisive) == ["review.margin_eroded", "review.margin_eroded"]
    # Just above the rise the candidate is accepted, just below rejected (the same runs).
    wider = compare(result.baseline, result.candidate, Review(stress_tolerance=rise * 1.001))
    narrower = compare(result.baseline, result.candidate, Review(stress_tolerance=rise * 0.999))
    assert (wider.verdict, narrower.verdict) == ("accept", "reject")


def test_a_rise_of_p_fail_counts_in_units_of_the_target():
    # The rule is a rise of the bound over tolerance x target_p_fail: the same runs judged at
    # tolerances either side of (candidate bound - baseline bound) / target.
    base = parse_design_text(BASE)
    result = review(base, substituted(base, swap="2:WEAK"), trials=400)
    static = next(c for c in result.changes if c.name == "static")
    # Every built string fails with WEAK (900 V < 1000 V): the bound of 400 of 400 is 1.
    assert static.candidate_p_fail_upper == 1.0
    assert static.allowed_rise == pytest.approx(0.1 * result.baseline.target_p_fail)
    assert "review.check_fails" in _codes(static.decisive)
    assert "review.p_fail_rose" in _codes(static.decisive)


# -- the case: a 10-device 11 kV stack, margin erosion with no failure -------------------

@pytest.fixture(scope="module")
def stack():
    return load_design(STACK)


@pytest.fixture(scope="module")
def plain(stack):
    return review(stack, substituted(stack, swap="7:B"), rare=False)


def test_a_few_percent_of_margin_lost_without_failures_is_rejected_by_default(plain):
    base, cand = plain.baseline.checks["dynamic"], plain.candidate.checks["dynamic"]
    assert base.estimate.failures == 0 and cand.estimate.failures == 0
    dynamic = next(c for c in plain.changes if c.name == "dynamic")
    assert dynamic.rise == 0.0  # equal bounds: P(fail) alone cannot see the change
    assert 0.02 < dynamic.worst_ratio_rise < 0.05  # a few percent of the limit
    assert plain.verdict == "reject"
    assert "review.margin_eroded" in _codes(dynamic.decisive)
    wider = compare(plain.baseline, plain.candidate, Review(stress_tolerance=0.05))
    assert wider.verdict == "accept"
    # Per position, its mean, its 99th percentile and its worst, in that order on each side.
    for d in plain.positions:
        assert d.baseline_mean < d.baseline_p99 < d.baseline_worst
        assert d.candidate_mean < d.candidate_p99 < d.candidate_worst


@pytest.mark.slow
def test_plain_and_rare_give_one_verdict(stack, plain):
    # The importance sampler sees a rise of the static bound decades below the target (it
    # rejected the candidate when the tolerance was an absolute rise of 0); judged against
    # the target the rise is reported, not decisive, and the stress ratios are the plain run's
    # in both.
    rare = review(stack, substituted(stack, swap="7:B"), rare=True)
    static = next(c for c in rare.changes if c.name == "static")
    assert static.baseline_by == "importance sampling"
    # (With the ac blocking-state solution the sampler's two bounds may also come out equal.)
    assert 0.0 <= static.rise < 1e-6 * rare.baseline.target_p_fail and static.acceptable
    if static.rise > 0.0:
        assert _codes(static.noted) == ["review.p_fail_rise_small"]
    for name in ("static", "dynamic"):
        one = next(c for c in plain.changes if c.name == name)
        other = next(c for c in rare.changes if c.name == name)
        assert (one.worst_ratio_rise, one.p99_ratio_rise) == \
            (other.worst_ratio_rise, other.p99_ratio_rise)
    for settings in (Review(), Review(stress_tolerance=0.05)):
        verdicts = {compare(r.baseline, r.candidate, settings).verdict for r in (plain, rare)}
        assert len(verdicts) == 1, settings
    # Unless the estimate itself crosses a limit: with no allowed rise at all, the sampler's
    # rise decides and the plain run's (none) does not.
    strict = Review(tolerance=0.0, stress_tolerance=0.05)
    assert compare(plain.baseline, plain.candidate, strict).verdict == "accept"
    assert compare(rare.baseline, rare.candidate, strict).verdict == (
        "reject" if static.rise > 0.0 else "accept")


# -- reasons from the computed change ------------------------------------------------------------

def _pairs(result):
    """(position finding, the finding that explains it) of each reason."""
    reasons = list(result.reasons)
    return [(reasons[i], reasons[i + 1]) for i in range(0, len(reasons), 2)
            if reasons[i].code.startswith("review.position_")]


@pytest.mark.parametrize("swap", ["7:B", "1-10:B", "1-5:B", "2,9:B"])
def test_a_reason_states_the_direction_computed(stack, swap):
    result = review(stack, substituted(stack, swap=swap), trials=1000)
    pairs = _pairs(result)
    assert pairs
    for position, why in pairs:
        word = "rose" if position.code == "review.position_rose" else "fell"
        assert (position.number("candidate") > position.number("baseline")) == (word == "rose")
        if why.code.startswith("review.scatter."):
            assert why.code.endswith("wider" if word == "rose" else "narrower")
        elif why.code not in ("review.input_changed", "review.no_input_changed"):
            assert why.code.endswith("." + word), (position, why)
        if word == "fell":
            text = sentence(why)
            assert "takes more" not in text and "takes the voltage" not in text, text


def test_a_swap_that_lowers_the_turn_off_stress_never_takes_the_voltage(stack):
    # B in every position: the string holds one part, nothing recovers before the others; B's
    # recovery charge scatters less in absolute terms (max - typ 0.18 uC against 0.3 uC), and
    # the textbook worst case C >= (n - 1) dQ_rr / (n V_DM - V_s) rests on that spread.
    result = review(stack, substituted(stack, swap="1-10:B"), trials=1000)
    dynamic = next(c for c in result.changes if c.name == "dynamic")
    assert dynamic.worst_ratio_rise < 0
    pairs = [(p, why) for p, why in _pairs(result) if p.number("check") == "dynamic"]
    assert [p.code for p, _ in pairs] == ["review.position_fell"]
    assert pairs[0][1].code == "review.scatter.narrower"
    assert pairs[0][1].number("candidate") == pytest.approx(0.18e-6)
    assert pairs[0][1].number("baseline") == pytest.approx(0.3e-6)
    for position, why in _pairs(result):
        if position.code == "review.position_fell":
            assert "recovers first" not in sentence(why) and "takes more" not in sentence(why)


def test_the_corner_reasons_follow_the_closed_form():
    # Charge balance of the corner above: the fast device rises to 1075.8 V, each slow one falls
    # to (6000 - 1075.8) / 5 = 984.8 V.
    base = parse_design_text(BASE)
    result = review(base, substituted(base, swap="4:FAST"), trials=200)
    pairs = {p.code: (p, why) for p, why in _pairs(result) if p.number("check") == "dynamic"}
    rose, why_rose = pairs["review.position_rose"]
    fell, why_fell = pairs["review.position_fell"]
    fast = 6000 / 6 + 5 * 0.3e-6 / (6 * 3.3e-9)
    assert rose.number("index") == 4 and why_rose.code == "review.q_rr.own.rose"
    assert rose.number("candidate_worst") == pytest.approx(fast, rel=1e-9)
    assert fell.number("candidate_worst") == pytest.approx((6000 - fast) / 5, rel=1e-9)
    assert why_fell.code == "review.q_rr.others.fell"
    assert "takes turn-off voltage off the others" in sentence(why_fell)


def test_every_review_code_has_a_sentence():
    # The study emits codes by pattern (review.INPUT.own.rose ...): each it can emit is worded.
    from stringcheck.studies.review import INPUT_SIGNS

    for check, inputs in INPUT_SIGNS.items():
        topic = "thermal." if check == "thermal" else ""
        for name, (own, others) in inputs.items():
            for side, sign in (("own", own), ("others", others)):
                if sign:
                    for word in ("rose", "fell"):
                        assert f"review.{topic}{name}.{side}.{word}" in TEMPLATES


# -- per-position change --------------------------------------------------------------------------

def test_the_per_position_change_is_in_the_json_and_the_csv():
    base = parse_design_text(BASE)
    result = review(base, substituted(base, swap="4:FAST"), trials=300)
    fast = 6000 / 6 + 5 * 0.3e-6 / (6 * 3.3e-9)  # closed form above
    data = review_to_dict(result)
    json.dumps(data, allow_nan=False)
    rows = [r for r in data["changes"]["positions"] if r["check"] == "dynamic"]
    assert [r["index"] for r in rows] == [1, 2, 3, 4, 5, 6]
    fourth = rows[3]
    assert (fourth["baseline_part"], fourth["candidate_part"], fourth["unit"]) == \
        ("SLOW", "FAST", "V")
    assert fourth["baseline_mean"] == pytest.approx(1000.0, rel=1e-9)
    assert fourth["candidate_worst"] == pytest.approx(fast, rel=1e-9)
    # No scatter: every built string is the corner, so its p99 is the corner too.
    assert fourth["baseline_p99"] == pytest.approx(1000.0, rel=1e-9)
    assert fourth["candidate_p99"] == pytest.approx(fast, rel=1e-9)
    assert fourth["worst_ratio_change"] == pytest.approx((fast - 1000.0) / 1440.0, rel=1e-9)
    assert data["changes"]["reason_codes"][0].startswith("review.")
    table = list(csv.DictReader(io.StringIO(review_positions_csv(result))))
    assert len(table) == len(data["changes"]["positions"]) == 12
    row = next(r for r in table if r["check"] == "dynamic" and r["index"] == "4")
    assert float(row["candidate_worst"]) == pytest.approx(fast, rel=1e-5)
    assert float(row["candidate_p99"]) == pytest.approx(fast, rel=1e-5)
    assert float(row["baseline_limit"]) == pytest.approx(1440.0)


# -- flags whatever the Monte Carlo says ---------------------------------------------------------

def test_a_lower_rating_and_another_class_are_flagged():
    base = parse_design_text(BASE)
    parts = dict(base.parts)
    parts["OTHER"] = replace(parts["FAST"], device_class="si-fast-recovery")
    base = replace(base, parts=parts)
    weak = review(base, substituted(base, swap="2:WEAK"), trials=100)
    assert _codes(weak.flags) == ["review.lower_v_rrm"]
    assert weak.flags[0].number("candidate") == 1000.0
    other = review(base, substituted(base, swap="5-6:OTHER"), trials=100)
    assert _codes(other.flags) == ["review.class_changed"]
    assert "'si-fast-recovery'" in sentence(other.flags[0])
    assert "5-6" in sentence(other.flags[0])
    same = review(base, substituted(base, swap="1:SLOW"), trials=100)
    assert same.flags == () and _codes(same.reasons) == ["review.same_parts"]


# -- the command line ------------------------------------------------------------------------------

def test_cli_review_writes_the_per_position_csv(tmp_path):
    path = tmp_path / "base.toml"
    path.write_text(BASE.replace("trials = 4000", "trials = 200"), encoding="utf-8")
    target = tmp_path / "change.csv"
    done = runner.invoke(app, ["review", str(path), "--swap", "4:FAST", "--csv", str(target),
                               "--quiet"])
    assert done.exit_code == 1, done.output
    assert "worse in dynamic" in done.output
    header = target.read_text(encoding="utf-8").splitlines()[0]
    assert header.startswith("check,branch,index,baseline_part,candidate_part,unit,")
    wider = tmp_path / "wider.toml"
    wider.write_text(path.read_text(encoding="utf-8") + "[review]\nstress_tolerance = 0.06\n",
                     encoding="utf-8")
    accepted = runner.invoke(app, ["review", str(wider), "--swap", "4:FAST", "--quiet"])
    assert accepted.exit_code == 0, accepted.output


@pytest.mark.parametrize("line,fragment", [
    ("tolerance = -0.1", "review.tolerance"),
    ("stress_tolerance = -0.01", "review.stress_tolerance"),
    ("stress_tolerance = 1.5", "review.stress_tolerance"),
    ('stress_tolerance = "two"', "review.stress_tolerance"),
    ("tolerance = true", "review.tolerance"),
    ("stress_tolerence = 0.1", "stress_tolerance"),
])
def test_bad_review_settings_are_one_line_and_exit_2(tmp_path, line, fragment):
    path = tmp_path / "base.toml"
    path.write_text(BASE + f"[review]\n{line}\n", encoding="utf-8")
    done = runner.invoke(app, ["review", str(path), "--swap", "4:FAST", "--quiet"])
    assert done.exit_code == 2, done.output
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and fragment in lines[0] and "base.toml" in lines[0], lines
    assert "Traceback" not in done.output


def test_a_candidate_failing_outside_the_compared_figures_says_so():
    # A requested transient check that cannot run (no part gives i_rm or t_rr) fails both
    # designs' own results; no compared check changed, and the review names why it rejects.
    base = parse_design_text(BASE)
    result = review(base, substituted(base, swap="1:SLOW"), transient=True)
    assert result.candidate.verdict == "fail" and result.verdict == "reject"
    assert all(c.acceptable for c in result.changes)
    assert _codes(result.decided_by) == ["review.candidate_fails"]
    assert review_to_dict(result)["changes"]["decided_by_codes"] == ["review.candidate_fails"]
