"""The high-voltage cautions: the residual-voltage criterion with its edition, never a reassurance."""

from __future__ import annotations

import math

import pytest

from stringcheck.report.cautions import safety_cautions


def _discharge_line(time: float) -> str:
    lines = safety_cautions(string_voltage=30e3, stage_energy=1e-3, total_energy=2e-2,
                            discharge_time=time)
    [line] = [line for line in lines if "60 V" in line]
    return line


@pytest.mark.parametrize("time", [0.8, 12.0, math.inf])
def test_discharge_caution_cites_the_criterion_with_its_edition_and_the_filter_capacitor(time):
    # IEC 60204-1:2016 clause 6.2.4 (from memory): residual voltage of machinery below 60 V within
    # 5 s: the criterion. IEC 61010-1's hazardous-live levels change with the edition (from memory:
    # 60 V dc in the 2001 edition, 70 V dc in normal condition in the 2010 edition), so they are
    # cited only with theirs, never as "the" level.
    line = _discharge_line(time)
    assert "IEC 60204-1:2016 clause 6.2.4" in line
    assert "IEC 61010-1:2001" in line and "IEC 61010-1:2010" in line
    assert "70 V dc" in line
    assert "IEC 61010-1 hazardous-live level" not in line
    # The time counts only the stack's own capacitance: a filter capacitor is named, and the line
    # always ends in the instruction to discharge and earth, so it never reads as reassurance.
    assert "only the stack's own capacitance" in line and "filter" in line
    assert "earth" in line


def test_a_fast_discharge_is_said_to_be_within_but_for_the_stack_alone():
    line = _discharge_line(0.8)
    assert "within 5 s" in line and "alone" in line
    assert "LONGER" in _discharge_line(12.0)
