"""The single-fault study in words and tables (``check --faults``): terminal and JSON.

The study (``studies.faults.FaultStudy``) holds the figures; this module writes them for people:
one row per fault kind with its worst fault, its worst stress and P(fail), and whether the string
survives every fault of the kind at the target; then the redundancy count.
"""

from __future__ import annotations

import math
from typing import Any

from rich.console import Console
from rich.table import Table
from rich.text import Text

from stringcheck.studies.faults import FaultKind, FaultOutcome, FaultStudy

__all__ = ["KIND_LABELS", "faults_to_dict", "render_faults", "render_faults_summary"]

# What each fault kind is, for people.
KIND_LABELS = {"device_short": "device shorted", "resistor_open": "resistor open",
               "capacitor_open": "capacitor open", "capacitor_short": "capacitor shorted",
               "damping_open": "damping R open"}


def faults_to_dict(study: FaultStudy) -> dict[str, Any]:
    """The JSON ``faults`` object: the study's own ``to_dict()`` with each kind's label, and the
    sentence of its reason not to run (``reason``, "" when it ran) beside the code
    (``reason_code``)."""
    data = study.to_dict()
    reasons = {kind.kind: kind.reason for kind in study.kinds}
    for kind, entry in data["kinds"].items():
        entry["label"] = KIND_LABELS[kind]
        entry["reason_code"] = entry.get("reason")
        entry["reason"] = _reason(reasons.get(kind)) if reasons.get(kind) is not None else ""
    return data


def _ratio(value: float) -> str:
    return "unsolved" if not math.isfinite(value) else f"{value:.3f}"


def _probability(outcome: FaultOutcome) -> str:
    estimate = outcome.estimate
    return f"{estimate.p_fail:.3g} [{estimate.ci_low:.2g}, {estimate.ci_high:.2g}]"


def _where(outcome: FaultOutcome, parallel: int) -> str:
    branch = f"b{outcome.branch} " if parallel > 1 else ""
    return f"{branch}pos {outcome.index}"


def render_faults(study: FaultStudy, console: Console, *, parallel: int = 1,
                  derating: float = 1.0) -> None:
    """Print the fault table and the redundancy count."""
    console.print()
    table = Table(title=f"Single faults (each rerun on the same {study.trials:,} built strings, "
                        f"seed {study.seed}; judged on the {' and '.join(study.checks)} checks)",
                  title_justify="left")
    for column in ("fault", "n", "worst at", "stress", "p99",
                   f"P(fail) [{study.confidence:.0%}]", "ok"):
        table.add_column(column, justify="left" if column in ("fault", "worst at") else "right",
                         no_wrap=column != f"P(fail) [{study.confidence:.0%}]")
    base = study.baseline
    table.add_row("none (as built)", "", "", _ratio(base.worst_ratio), _ratio(base.p99_ratio),
                  _probability(base), _verdict(base.passed))
    for kind in study.kinds:
        table.add_row(*_kind_row(kind, parallel))
    console.print(table)
    notes = [f"{KIND_LABELS[kind.kind]}: {_reason(kind.reason)}" for kind in study.kinds
             if not kind.ran]
    same = sorted({f"{KIND_LABELS[kind.kind]} gives the stage voltages of "
                   f"{KIND_LABELS[kind.same_as]}" for kind in study.kinds if kind.same_as})
    if same:
        console.print("Same faulted string: " + "; ".join(same) + " (a shorted capacitor puts its "
                      "damping resistor across the stage; an open damping resistor disconnects "
                      "the capacitor).")
    if notes:
        console.print("Not evaluated: " + "; ".join(notes) + ".")
    console.print(f"n = faults of the kind evaluated (one per position); stress = the worst "
                  f"device's voltage over its limit (derating x V_RRM), p99 its 99th percentile "
                  f"over the built strings; ok = every fault of the kind keeps P(fail) <= "
                  f"{study.target_p_fail:g} (upper bound).")
    over = [kind for kind in study.kinds if kind.ran and kind.worst.worst_ratio > 1.0 / derating]
    if over:
        console.print("A stress above 1 / derating puts a device above its V_RRM: it would be "
                      "driven into avalanche, and the figure extends the leakage law beyond it.")
    redundancy = study.redundancy
    if redundancy is not None:
        where = f" of branch {redundancy.branch}" if parallel > 1 else ""
        shorted = ", ".join(str(index) for index in redundancy.positions) or "none"
        console.print(f"Redundancy: the string still passes with {redundancy.shorted} shorted "
                      f"device(s) (positions {shorted}{where}, the worst-ranked single shorts, "
                      "shorted together).")
        last = redundancy.steps[-1] if redundancy.steps else None
        if last is not None and not last.passed:
            console.print(f"  with {len(last.positions)} shorted: worst stress "
                          f"{_ratio(last.worst_ratio)}, P(fail) {_probability(last)}.")
    verdict = "survives every single fault evaluated" if study.survives else \
        "does NOT survive every single fault evaluated"
    console.print(Text(f"The stack {verdict} at the target.",
                       style="bold green" if study.survives else "bold red"))


def _kind_row(kind: FaultKind, parallel: int) -> tuple[str, ...]:
    label = KIND_LABELS[kind.kind]
    if not kind.ran:
        return (label, "0", "not evaluated", "", "", "", "")
    worst = kind.worst
    return (label, str(kind.faults_evaluated), _where(worst, parallel), _ratio(worst.worst_ratio),
            _ratio(worst.p99_ratio), _probability(worst), _verdict(kind.survives))


def _verdict(passed: bool) -> Text:
    return Text("yes", style="green") if passed else Text("NO", style="bold red")


def render_faults_summary(study: FaultStudy, console: Console) -> None:
    """One line: whether the stack survives every single fault, and the redundancy."""
    failing = [KIND_LABELS[kind.kind] for kind in study.kinds if kind.ran and not kind.survives]
    line = "faults: survives all" if study.survives else f"faults: FAIL ({', '.join(failing)})"
    if study.redundancy is not None:
        line += f"; tolerates {study.redundancy.shorted} shorted device(s)"
    console.print(line)


def _reason(reason) -> str:
    """A fault kind's reason not to run: a finding in words, or the text as given."""
    from stringcheck.findings import Finding
    from stringcheck.report.wording import sentence

    return sentence(reason) if isinstance(reason, Finding) else str(reason)
