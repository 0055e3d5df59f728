"""The review's findings in words (report.wording): every code the review can make has a sentence,
and the sentences say what the figures say."""

from __future__ import annotations

import ast
import re
import string
from pathlib import Path

import pytest

from stringcheck.checks.findings import Finding, Value
from stringcheck.report.wording import TEMPLATES, sentence
from stringcheck.studies.review import INPUT_SIGNS

REVIEW = Path(__file__).resolve().parents[2] / "stringcheck" / "studies" / "review.py"


def _literal_codes() -> set[str]:
    """The codes studies/review.py writes out whole."""
    tree = ast.parse(REVIEW.read_text(encoding="utf-8"))
    return {node.value for node in ast.walk(tree) if isinstance(node, ast.Constant)
            and isinstance(node.value, str) and re.fullmatch(r"review\.[a-z_.]+", node.value)}


def _pattern_codes() -> set[str]:
    """The codes it makes by pattern: review.[thermal.]INPUT.own|others.rose|fell, for each input
    of each check whose own or others' sign is not 0."""
    out = set()
    for check, inputs in INPUT_SIGNS.items():
        topic = "thermal." if check == "thermal" else ""
        for name, signs in inputs.items():
            for side, sign in zip(("own", "others"), signs):
                if sign:
                    out.update(f"review.{topic}{name}.{side}.{word}" for word in ("rose", "fell"))
    return out


def test_every_review_code_has_a_sentence_and_no_sentence_is_left_over():
    made = _literal_codes() | _pattern_codes() | {"review.scatter.wider",
                                                  "review.position_rose"}
    worded = {code for code in TEMPLATES if code.startswith("review.")}
    assert made == worded, made ^ worded


def _filled(code: str) -> Finding:
    """A finding of ``code`` with a value for every field its template names."""
    values = {}
    for _, field, spec, _ in string.Formatter().parse(TEMPLATES[code]):
        if field and field != "limit":
            values[field] = Value("dynamic") if spec == "check" else \
                Value("p99") if spec == "statistic" else Value("q_rr") if spec == "input" \
                else Value("") if spec in ("arrow", "class") else Value(1.5) if spec else \
                Value("A")
    return Finding(code, values, limit=Value(0.02))


@pytest.mark.parametrize("code", sorted(c for c in TEMPLATES if c.startswith("review.")))
def test_each_review_sentence_formats(code):
    text = sentence(_filled(code))
    assert text and "{" not in text


def test_the_sentences_say_the_figures():
    margin = Finding("review.margin_eroded", {
        "check": Value("dynamic"), "statistic": Value("worst"), "baseline": Value(0.938),
        "candidate": Value(0.965), "rise": Value(0.027)}, limit=Value(0.02))
    assert sentence(margin) == (
        "charge-balance turn-off: the worst stress rose from 0.938 to 0.965 of the limit, by "
        "0.027, more than the stress tolerance of 0.02")
    small = Finding("review.p_fail_rise_small", {
        "check": Value("static"), "baseline": Value(1.5e-17), "candidate": Value(1.3e-8),
        "rise": Value(1.3e-8), "target": Value(1e-3), "tolerance": Value(0.1)},
        limit=Value(1e-4))
    assert sentence(small) == (
        "static blocking: the P(fail) upper bound rose from 1.5e-17 to 1.3e-08, within the "
        "tolerance (0.1 of the target 0.001): reported, not decisive")
    position = {"check": Value("dynamic"), "branch": Value(1), "index": Value(7),
                "baseline_part": Value("A"), "candidate_part": Value("B"),
                "new_part": Value("B"), "baseline": Value(0.921), "candidate": Value(0.953),
                "baseline_worst": Value(1179.0, "V"), "candidate_worst": Value(1220.0, "V")}
    assert sentence(Finding("review.position_rose", position)) == (
        "charge-balance turn-off: the worst stress at branch 1 #7 (A -> B) rose from 0.921 to "
        "0.953 of the limit (1.18 kV -> 1.22 kV)")
    kept = {**position, "candidate_part": Value("A"), "new_part": Value("")}
    assert "(A, unchanged)" in sentence(Finding("review.position_rose", kept))
    first = Finding("review.q_rr.own.rose", {
        "check": Value("dynamic"), "input": Value("q_rr"), "old": Value("A"), "new": Value("B"),
        "baseline": Value(1e-6, "C"), "candidate": Value(6e-7, "C")})
    assert sentence(first) == (
        "B stores less recovery charge than A (typ 600 nC vs 1 uC): it recovers first, blocks "
        "before the others and takes more of the turn-off voltage")


def test_a_fall_is_never_worded_as_taking_more():
    # Every sentence the review gives to a position whose stress fell: where it says "takes
    # more" at all, it is the substitute elsewhere that takes it, off the others.
    for code, template in TEMPLATES.items():
        if code.startswith("review.") and (code.endswith(".fell") or code.endswith("narrower")):
            assert "recovers first, blocks" not in template, code
            for clause in template.split(":")[1:]:
                if "takes more" in clause:
                    assert "off the others" in clause, code
