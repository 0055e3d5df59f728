"""Findings: what a check or study found, as data (a code, the values, the limit), never a sentence.

The layers below ``report/`` say what they found with a :class:`Finding`: a stable ``code`` naming
the kind of finding (``"rating.resistor_power"``), the figures it rests on, each a :class:`Value`
with its unit, and the limit it was held against. Only the report turns a finding into English
(``stringcheck.report.wording``: a table of code -> sentence), so a study called from Python
returns figures a program can read, and the wording lives in one place. The JSON keeps the sentence
(written by that same table) and gives the code beside it.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Mapping

__all__ = ["Finding", "Value", "codes"]


@dataclass(frozen=True)
class Value:
    """One figure of a finding: a number in ``unit`` (SI; "" for a ratio, a count or a fraction),
    or a name (a part, a check, a design-file key) with ``unit`` ""."""

    number: float | int | str
    unit: str = ""


@dataclass(frozen=True)
class Finding:
    """A finding of a check or study.

    Attributes
    ----------
    code
        Stable name of the kind of finding, dotted by topic (``"advisory.slow_discharge"``); the
        report's wording table has one sentence per code.
    values
        The named figures the finding rests on.
    limit
        The limit the main figure was held against (None where there is none).
    causes
        The findings this one rests on, in order (a check that did not run because another did
        not: that one's reason); its sentence says them where its template has ``{causes}``.
    """

    code: str
    values: Mapping[str, Value] = field(default_factory=dict)
    limit: Value | None = None
    causes: tuple["Finding", ...] = ()

    def number(self, name: str) -> float | int | str:
        """The number (or name) of the value called ``name``."""
        return self.values[name].number


def codes(findings) -> list[str]:
    """The codes of ``findings``, in order (their JSON beside the sentences)."""
    return [finding.code for finding in findings]
