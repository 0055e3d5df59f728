"""The shape every check's result shares, and its JSON generated from the fields.

Every check (static, dynamic, transient, parallel, thermal) returns a dataclass that extends
:class:`CheckOutcome`: the name, whether it ran (and why not), the verdict, the worst / median / 99th
percentile stress ratio, the plain Monte Carlo estimate, the unsolved trials, the worst trial and the
importance-sampling estimate. A check that cannot run is made by one constructor,
:meth:`CheckOutcome.not_run`.

Each field declares, once and beside itself (:func:`figure`), its JSON name (``None``: not
exported), its unit, how it is written to JSON, and its value in a check that did not run. The JSON
object of a result (:meth:`Exported.to_dict`) is generated from those declarations, so a field
cannot be forgotten or renamed in the export: a field without a declaration is an error.
``json_order`` only fixes the order of the keys (a key it does not name comes last, never lost).
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import MISSING, dataclass
from typing import Any, Callable, ClassVar

from stringcheck.checks.findings import Finding, codes
from stringcheck.checks.recovery_conditions import TurnOffCurrent
from stringcheck.montecarlo.estimates import FailureEstimate
from stringcheck.montecarlo.importance import RareEstimate

# A repr longer than this many characters is cut (the per-position figures are in to_frame()).
REPR_LIMIT = 400


def json_number(value: float | None) -> float | None:
    """JSON has no inf or NaN: write them as null (the report text says why)."""
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def plain(value: Any) -> Any:
    """A value JSON takes as it is (an int, a bool, a string, a finite float)."""
    return value


def text_or_null(value: str) -> str | None:
    """A name, or null for an empty one."""
    return value or None


def listed(values) -> list:
    """A tuple of plain values as a JSON list."""
    return list(values)


def records(items) -> list[dict[str, Any]]:
    """A tuple of exported dataclasses (per-position figures) as a list of JSON objects."""
    return [item.to_dict() for item in items]


def record_or_null(item) -> dict[str, Any] | None:
    """One exported dataclass as a JSON object, or null."""
    return None if item is None else item.to_dict()


def numbers_by_key(values: dict[str, float]) -> dict[str, float | None]:
    """A mapping of names to numbers, non-finite ones as null."""
    return {key: json_number(value) for key, value in values.items()}


def estimate_keys(estimate: FailureEstimate) -> dict[str, Any]:
    """The plain estimate's keys: failures, p_fail and its exact interval p_fail_ci [low, high],
    and its convergence figures: p_fail_relative_error (the relative standard error [1], null
    with no failure seen) and trials_for_relative_error (trials for a relative error of
    ``WANTED_RELATIVE_ERROR``, null with no failure seen)."""
    return {"failures": estimate.failures, "p_fail": estimate.p_fail,
            "p_fail_ci": [estimate.ci_low, estimate.ci_high],
            "p_fail_relative_error": json_number(estimate.relative_error),
            "trials_for_relative_error": estimate.trials_for_wanted_error}


def runaway_keys(estimate: FailureEstimate) -> dict[str, Any]:
    """The thermal check's runaway estimate: p_runaway, p_runaway_ci, runaway_trials."""
    return {"p_runaway": estimate.p_fail, "p_runaway_ci": [estimate.ci_low, estimate.ci_high],
            "runaway_trials": estimate.failures}


def turn_off_to_dict(turn_off: TurnOffCurrent | None) -> dict[str, Any] | None:
    """JSON of the current a branch commutates from (null where no check used one)."""
    if turn_off is None:
        return None
    return {"value": json_number(turn_off.current), "unit": "A", "per": "branch",
            "basis": turn_off.basis,
            "di_dt": json_number(turn_off.di_dt), "di_dt_unit": "A/s",
            "di_dt_source": turn_off.di_dt_source or None,
            "natural_di_dt": json_number(turn_off.natural_di_dt),
            "steady_equivalent": json_number(turn_off.steady_equivalent),
            "parts": [{"part": item.part, "unit": "C",
                       "q_rr_datasheet_typ": json_number(item.datasheet_typ),
                       "q_rr_datasheet_max": json_number(item.datasheet_limit),
                       "test_forward_current": json_number(item.test_current),
                       "test_di_dt": json_number(item.test_di_dt),
                       "q_rr_carried_typ": json_number(item.carried_typ),
                       "q_rr_carried_max": json_number(item.carried_limit)}
                      for item in turn_off.parts]}


def rare_to_dict(rare: RareEstimate | None) -> dict[str, Any] | None:
    """JSON of a check's importance-sampling estimate (``--rare``), or None: its ``estimator`` a
    list of finding codes and its ``note`` a code or None (``report.export`` writes them in
    words)."""
    if rare is None:
        return None
    return {"estimator": codes(rare.estimator), "p_fail": rare.p_fail, "std_error": rare.std_error,
            "p_fail_ci": [rare.ci_low, rare.ci_high], "beta": json_number(rare.beta),
            "first_order": rare.first_order, "samples": rare.samples,
            "found_failure_point": rare.found_failure_point,
            "failure_points": rare.failure_points, "pooled_trials": rare.pooled_trials,
            "decides": rare.decides, "note": None if rare.note is None else rare.note.code,
            "automatic": rare.automatic,
            "orbit_complete": rare.orbit_complete, "regions_found": rare.regions_found,
            "coverage_assured": rare.coverage_assured,
            "importance": [{"input": item.input, "share": item.share, "branch": item.branch,
                            "index": item.index, "sign": item.sign}
                           for item in rare.importance],
            "failures": rare.failures}


def drivers_to_list(drivers) -> list[dict[str, Any]]:
    """JSON of the drivers ranking (``check --drivers``; ``montecarlo.sensitivity.Driver``)."""
    return [{"check": d.check, "input": d.input, "label": d.label,
             "rank_correlation": json_number(d.rank_correlation),
             "tightened_p99_ratio": json_number(d.tightened_p99_ratio),
             "tightened_p_fail_upper": json_number(d.tightened_p_fail_upper),
             "failure_point_share": json_number(d.failure_point_share)} for d in drivers]


_UNSET = object()


def figure(json: str | None | object = _UNSET, *, unit: str = "", encode: Callable = plain,
           spread: bool = False, idle: Any = _UNSET, idle_factory: Callable | None = None,
           default: Any = MISSING) -> Any:
    """A result field with its declarations: the JSON key (default: the field's own name; None:
    not exported), the unit ("" for a ratio, a count or a name; temperatures in degC), the encoder
    to JSON (``spread``: the encoder returns several keys), and the value it takes in a check that
    did not run (``idle``, or ``idle_factory()``; :meth:`CheckOutcome.not_run`)."""
    metadata: dict[str, Any] = {"unit": unit, "encode": encode, "spread": spread}
    if json is not _UNSET:
        metadata["json"] = json
    if idle is not _UNSET:
        metadata["idle"] = lambda: idle
    elif idle_factory is not None:
        metadata["idle"] = idle_factory
    return dataclasses.field(default=default, metadata=metadata)


class Exported:
    """A dataclass whose JSON object is generated from its field declarations (:func:`figure`)."""

    json_order: ClassVar[tuple[str, ...]] = ()

    @classmethod
    def json_fields(cls) -> dict[str, tuple[str | None, str]]:
        """Each field's (JSON key or None, unit), in field order; raises TypeError for a field
        declared without a JSON key."""
        out = {}
        for item in dataclasses.fields(cls):
            key = _json_key(cls, item)
            out[item.name] = (key, item.metadata.get("unit", ""))
        return out

    def to_dict(self) -> dict[str, Any]:
        """The JSON object of this result: the same dict the JSON export writes for it."""
        keys = type(self).json_fields()  # every field declared, before anything is encoded
        entries: dict[str, Any] = {}
        for item in dataclasses.fields(self):
            key = keys[item.name][0]
            if key is None:
                continue
            value = item.metadata["encode"](getattr(self, item.name))
            if item.metadata.get("spread"):
                entries.update(value)
            else:
                entries[key] = value
        ordered = {key: entries.pop(key) for key in self.json_order if key in entries}
        ordered.update(entries)
        return ordered

    def __repr__(self) -> str:
        shown = []
        for item in dataclasses.fields(self):
            value = getattr(self, item.name)
            if isinstance(value, (bool, int, float, str)) or value is None:
                text = f"{value:.4g}" if isinstance(value, float) else repr(value)
            elif isinstance(value, (tuple, list, dict)):
                text = f"<{len(value)} items>"
            elif hasattr(value, "shape"):
                text = f"<array {tuple(value.shape)}>"
            else:
                text = f"<{type(value).__name__}>"
            shown.append(f"{item.name}={text}")
        return _cut(f"{type(self).__name__}({', '.join(shown)})")


def _json_key(cls, item: dataclasses.Field) -> str | None:
    if "encode" not in item.metadata:
        raise TypeError(f"{cls.__name__}.{item.name} has no JSON declaration: declare it with "
                        "checks.outcome.figure (json=None to leave it out of the JSON)")
    return item.metadata.get("json", item.name)


def _cut(text: str) -> str:
    return text if len(text) <= REPR_LIMIT else text[:REPR_LIMIT - 3] + "..."


# eq=False: identity, as for a result holding arrays (the series checks' worst string); a check
# whose fields are all scalars declares eq=True and compares by value.
@dataclass(frozen=True, eq=False, kw_only=True, repr=False)
class CheckOutcome(Exported):
    """What every check's result holds. A check extends it with its own figures."""

    name: str = figure(None)
    ran: bool = figure(None, idle=False)
    # Why the check did not run (None when it ran): a finding, worded by report.wording.
    reason: Finding | None = figure(None)
    passed: bool = figure(idle=False)
    worst_ratio: float = figure(encode=json_number, idle=math.nan)
    p50_ratio: float = figure(encode=json_number, idle=math.nan)
    p99_ratio: float = figure(encode=json_number, idle=math.nan)
    # The plain Monte Carlo estimate (None in a check that did not run).
    estimate: FailureEstimate | None = figure(encode=estimate_keys, spread=True, idle=None)
    unsolved: int = figure(idle=0)
    worst_trial: int = figure(idle=-1)
    # The importance-sampling estimate (``--rare``), None when it did not run.
    rare: RareEstimate | None = figure(encode=rare_to_dict, default=None)

    @classmethod
    def not_run(cls, name: str, reason: Finding):
        """The result of a check that did not run, and why: every figure at its idle value."""
        values: dict[str, Any] = {"name": name, "reason": reason}
        for item in dataclasses.fields(cls):
            if item.name in values:
                continue
            if "idle" in item.metadata:
                values[item.name] = item.metadata["idle"]()
            elif item.default is MISSING and item.default_factory is MISSING:
                raise TypeError(f"{cls.__name__}.{item.name} declares no value for a check that "
                                "did not run (idle=)")
        return cls(**values)

    def passes(self, upper_bound: float, target: float) -> bool:
        """Whether a P(fail) upper bound lets this check pass against ``target``."""
        return upper_bound <= target

    def per_position(self) -> tuple:
        """The per-position figures (the parallel check's are per branch); a check with them
        returns them here, the base has none."""
        return ()

    def to_frame(self):
        """The per-position figures as a pandas DataFrame, one row per position (branch for the
        parallel check), one column per figure (units in ``frame.attrs["units"]``)."""
        return positions_frame(self.per_position())

    def __repr__(self) -> str:
        if not self.ran:
            return _cut(f"{type(self).__name__}({self.name!r}, not run: {self.reason.code})")
        estimate = self.estimate
        text = (f"{type(self).__name__}({self.name!r}, {'pass' if self.passed else 'FAIL'}, "
                f"worst ratio {self.worst_ratio:.4g}, p99 {self.p99_ratio:.4g}, "
                f"{estimate.failures} of {estimate.trials} failed, P(fail) <= "
                f"{estimate.ci_high:.3g}, unsolved {self.unsolved}, worst trial {self.worst_trial}"
                + ("" if self.rare is None else f", importance sampling P(fail) <= "
                   f"{self.rare.ci_high:.3g}")
                + f", {len(self.per_position())} positions)")
        return _cut(text)


def positions_frame(items, **columns):
    """A DataFrame of exported dataclasses (one row each, a column per field), with extra
    leading ``columns`` (name -> value for every row)."""
    import pandas as pd

    rows = [{**columns, **{item.name: getattr(entry, item.name)
                           for item in dataclasses.fields(entry)}} for entry in items]
    frame = pd.DataFrame(rows)
    if items:
        units = {name: unit for name, (_, unit) in type(items[0]).json_fields().items()}
        frame.attrs["units"] = units
    return frame
