"""`size --write` (the design file with the proposal, comments kept), `--force`, `--no-transient`
and the exit 1 of a sizing without a proposal."""

from __future__ import annotations

import json
import tomllib

import pytest

from stringcheck.design.reading import parse_design_text
from stringcheck.report.design_file import sized_design_text
from stringcheck.studies.size import size

from tests.cli.invocation import assert_no_traceback, invoke
from tests.studies.test_size import corner

COMMENTED = "# my stack, hand-written\n" + corner().replace(
    "[grading]\n", "[grading]  # the network\nresistor = \"1 MOhm\"   # to be sized\n") \
    .replace("[sizing]\n", "# sizing targets below\n[sizing]\n")


def test_write_keeps_comments_and_sets_the_proposal(tmp_path):
    source = tmp_path / "stack.toml"
    source.write_text(COMMENTED, encoding="utf-8")
    target = tmp_path / "sized.toml"
    result = invoke("size", str(source), "--write", str(target), "--quiet")
    assert result.exit_code == 0, result.output
    text = target.read_text(encoding="utf-8")
    for comment in ("# my stack, hand-written", "# the network", "# to be sized",
                    "# sizing targets below"):
        assert comment in text, comment
    # The written file reads back to the proposal (within the 4 significant figures written),
    # and the original file is untouched.
    proposal = size(parse_design_text(COMMENTED))
    written = parse_design_text(text)
    assert written.grading.resistor == pytest.approx(proposal.design.grading.resistor, rel=1e-9)
    assert written.grading.capacitor == pytest.approx(proposal.design.grading.capacitor, rel=1e-9)
    assert written.grading.damping_resistor == proposal.design.grading.damping_resistor
    assert source.read_text(encoding="utf-8") == COMMENTED
    # Everything but the proposed keys is as it was: the same lines, in the same order.
    changed = [line for line in text.splitlines() if line not in COMMENTED.splitlines()]
    assert all(line.split("=")[0].strip() in ("resistor", "capacitor", "damping_resistor")
               for line in changed), changed


def test_write_refuses_an_existing_file_without_force(tmp_path):
    source = tmp_path / "stack.toml"
    source.write_text(COMMENTED, encoding="utf-8")
    target = tmp_path / "sized.toml"
    target.write_text("keep me\n", encoding="utf-8")
    result = invoke("size", str(source), "--write", str(target), "--quiet")
    assert result.exit_code == 2, result.output
    assert_no_traceback(result)
    assert "--force" in result.stderr and len(result.stderr.strip().splitlines()) == 1
    assert target.read_text(encoding="utf-8") == "keep me\n"
    # With --force the design file itself may be replaced, comments kept.
    result = invoke("size", str(source), "--write", str(source), "--force", "--quiet")
    assert result.exit_code == 0, result.output
    assert "# my stack, hand-written" in source.read_text(encoding="utf-8")
    assert tomllib.loads(source.read_text(encoding="utf-8"))["grading"]["resistor"] != "1 MOhm"


def test_the_line_editor_adds_a_missing_table_and_keys():
    # Without a [grading] table (and without tomlkit) the editor appends one; with tomlkit the
    # document editor does the same. Either way the text reads back to the proposal.
    text = corner().replace("[grading]\nresistor_tolerance = 0.0\n", "")
    assert "[grading]" not in text
    result = size(parse_design_text(text))
    edited = sized_design_text(text, result)
    read = tomllib.loads(edited)["grading"]
    assert set(read) >= {"resistor", "capacitor", "damping_resistor"}
    assert edited.startswith(text.rstrip("\n"))


def test_no_proposal_exits_1_and_says_what_came_closest(tmp_path):
    source = tmp_path / "stack.toml"
    source.write_text(corner().replace("[sizing]\n", '[sizing]\ncapacitor_max = "1 nF"\n'),
                      encoding="utf-8")
    target = tmp_path / "sized.toml"
    out = tmp_path / "out.json"
    result = invoke("size", str(source), "--write", str(target), "--json", str(out))
    assert result.exit_code == 1, result.output
    assert_no_traceback(result)
    assert "NO PROPOSAL" in result.stdout
    assert "the closest, 1 nF" in " ".join(result.stdout.split())
    assert not target.exists()
    data = json.loads(out.read_text(encoding="utf-8"))
    assert data["proposal"] is None and data["unmet_codes"] == ["size.unmet.p_fail"]


def test_no_transient_skips_the_time_domain(tmp_path):
    # The demo has the recovery data: without --no-transient the time domain would run.
    from importlib import resources

    demo = tmp_path / "demo.toml"
    demo.write_text((resources.files("stringcheck") / "data" / "demo.toml").read_text("utf-8"),
                    encoding="utf-8")
    out = tmp_path / "out.json"
    result = invoke("size", str(demo), "--trials", "4000", "--no-transient", "--quiet",
                    "--json", str(out))
    assert result.exit_code == 0, result.output
    data = json.loads(out.read_text(encoding="utf-8"))
    assert "transient" not in data["checks"]  # the transient did not run
    assert data["grading"]["damping"]["time_domain"] is False
    assert data["grading"]["search"]["curve"]["resistor"]
