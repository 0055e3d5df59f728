"""Plausibility warnings: values a design file accepts that are almost certainly a slip.

A design can be valid and still say something no engineer meant: a string voltage written as 50
(volts) where 50 kV was meant, a turn-off slope of 50 A/s where 50 A/us was meant, a leakage maximum a
thousand times its typical value (uA against mA), a target that lets one stack in five fail. None of
these is an error (an unusual design may mean it), and each runs without complaint; so each gives a
warning, a design-file key and a finding (``checks.findings``: a code, the values, the limit) that
the check carries into its result; the report words it (``report.wording``) near the verdict and
the JSON lists it under ``warnings``. Thresholds sit orders of magnitude from ordinary
designs (common practice for the values named; no standard sets them), so that a warning is rare
and worth reading.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from stringcheck.checks.findings import Finding, Value
from stringcheck.checks.recovery_conditions import commutation_slope
from stringcheck.design.model import SPREAD_PARAMETERS, SPREAD_UNITS, Design

# The nominal share V_s / n below this fraction of a device's V_RRM: two orders of magnitude below
# the rating, where real stacks run at some 30 to 80 % of it (common practice).
MIN_SHARE_OF_RATING = 0.01
# A turn-off slope below this [A/s] (1 mA/us) commutates an ampere in a millisecond or more: slower
# than any rectifier's commutation (common practice: 1 to 1000 A/us). Below a tenth of the 50/60 Hz
# sine's own slope at its zero the natural turn-off of a half-sine is slower still, so the threshold
# is the smaller of the two.
SLOW_DI_DT = 1.0e3
# A typed duty.di_dt this many times faster or slower than the half-sine pulse's own slope at its
# zero (omega I_pk), with no stray inductance to force it: two orders of magnitude, where a
# rectifier's commutation overlap or a snubber changes the slope by a few times at most (common
# practice).
NATURAL_SLOPE_RATIO = 100.0
# A datasheet limit this many times its typical value (or the typical this many times the min):
# leakage limits sit about a decade above typ, charge and time limits within a factor of 2 or 3,
# forward figures within tens of percent (common practice; the defaults of design.TYP_FRACTION_OF_MAX).
SPREAD_RATIO = {"i_r": 1.0e3, "q_rr": 1.0e2, "i_rm": 1.0e2, "t_rr": 1.0e2, "v_t0": 10.0,
                "r_t": 10.0}
# A target P(fail) above this lets more than one built stack in ten fail.
MAX_TARGET_P_FAIL = 0.1
# A confidence below this makes the "upper" bound lie below the best estimate more often than not.
MIN_CONFIDENCE = 0.5
# Grading loss of the whole stack at the nominal share [W] above which, with no power rating
# given, a unit slip in the resistor is likelier than the design (grading losses run from watts to
# kilowatts; common practice).
LARGE_GRADING_LOSS = 1.0e6
# Ambient below this [degC]: colder than power devices and grading components are commonly rated
# for (-40 to -55 degC; common practice).
COLDEST_AMBIENT = -60.0


@dataclass(frozen=True)
class PlausibilityWarning:
    """One value that is valid but probably not what was meant: the design-file key and what was
    found (``report.wording`` says it in words)."""

    key: str
    finding: Finding


def plausibility_warnings(design: Design, *,
                          grading_loss: float | None = None) -> tuple[PlausibilityWarning, ...]:
    """The plausibility warnings of ``design``, in the order of the design file's tables.

    Parameters
    ----------
    design
        A validated design.
    grading_loss
        Loss of all grading resistors at the nominal share [W] (``GradingSummary``), None where
        there are no resistors or it was not computed.
    """
    found: list[PlausibilityWarning] = []
    found += _string_voltage(design)
    found += _turn_off_slopes(design)
    if design.duty.ambient < COLDEST_AMBIENT:
        found.append(PlausibilityWarning("duty.ambient", Finding(
            "plausibility.ambient_cold", {"ambient": Value(design.duty.ambient, "degC")},
            Value(COLDEST_AMBIENT, "degC"))))
    found += _spreads(design)
    if (grading_loss is not None and math.isfinite(grading_loss)
            and grading_loss >= LARGE_GRADING_LOSS and design.grading.resistor_rated_power is None):
        found.append(PlausibilityWarning("grading.resistor", Finding(
            "plausibility.grading_loss_large", {"resistor": Value(design.grading.resistor, "ohm"),
                                                "loss": Value(grading_loss, "W")},
            Value(LARGE_GRADING_LOSS, "W"))))
    confidence = design.monte_carlo.confidence
    if confidence < MIN_CONFIDENCE:
        found.append(PlausibilityWarning("monte_carlo.confidence", Finding(
            "plausibility.confidence_low", {"confidence": Value(confidence)},
            Value(MIN_CONFIDENCE))))
    target = design.sizing.target_p_fail
    if target > MAX_TARGET_P_FAIL:
        found.append(PlausibilityWarning("sizing.target_p_fail", Finding(
            "plausibility.target_high",
            {"target": Value(target), "as_percent": Value(target / 100)},
            Value(MAX_TARGET_P_FAIL))))
    return tuple(found)


def _string_voltage(design: Design) -> list[PlausibilityWarning]:
    layout = design.string
    share = design.duty.reverse_voltage / layout.series
    ratings = {name: design.parts[name].v_rrm for name in design.parts_used()}
    weakest = min(ratings, key=ratings.get)
    if share >= MIN_SHARE_OF_RATING * ratings[weakest]:
        return []
    voltage = design.duty.reverse_voltage
    return [PlausibilityWarning("duty.reverse_voltage", Finding(
        "plausibility.string_voltage_low",
        {"voltage": Value(voltage, "V"), "series": Value(layout.series),
         "share": Value(share, "V"), "percent": Value(100 * share / ratings[weakest]),
         "part": Value(weakest), "rating": Value(ratings[weakest], "V")},
        Value(MIN_SHARE_OF_RATING * ratings[weakest], "V")))]


def _turn_off_slopes(design: Design) -> list[PlausibilityWarning]:
    duty = design.duty
    threshold = SLOW_DI_DT
    if (duty.waveform in ("half-sine", "offset-sine") and duty.frequency is not None
            and duty.forward_current is not None):
        # A branch's half-sine of average I carries I_pk = pi I; its slope at the zero is
        # omega I_pk (the slowest natural turn-off).
        peak = math.pi * duty.forward_current / design.string.parallel
        threshold = min(threshold, 0.1 * 2.0 * math.pi * duty.frequency * peak)
    found = []
    natural = commutation_slope(design).natural
    # A duty derived from a [circuit] has its slope from the circuit's own formula, not typed.
    if (duty.di_dt is not None and duty.stray_inductance is None and math.isfinite(natural)
            and natural > 0 and duty.di_dt > 0 and design.circuit is None):
        ratio = duty.di_dt / natural
        if ratio >= NATURAL_SLOPE_RATIO or ratio <= 1.0 / NATURAL_SLOPE_RATIO:
            found.append(PlausibilityWarning("duty.di_dt", Finding(
                "plausibility.di_dt_far_from_natural",
                {"slope": Value(duty.di_dt, "A/s"), "slope_per_us": Value(duty.di_dt * 1e-6, "A/us"),
                 "natural": Value(natural, "A/s"), "natural_per_us": Value(natural * 1e-6, "A/us"),
                 "factor": Value(max(ratio, 1.0 / ratio)),
                 "direction": Value("faster" if ratio > 1 else "slower"),
                 "waveform": Value(duty.waveform), "frequency": Value(duty.frequency, "Hz")},
                Value(NATURAL_SLOPE_RATIO))))
    if duty.di_dt is not None and duty.di_dt < threshold:
        found.append(PlausibilityWarning("duty.di_dt", _slope("plausibility.slow_turn_off_slope",
                                                              duty.di_dt, threshold)))
    for name in design.parts_used():
        part = design.parts[name]
        for parameter in ("q_rr", "i_rm", "t_rr"):
            spread = part.spread(parameter)
            if spread is not None and spread.at_di_dt is not None and spread.at_di_dt < SLOW_DI_DT:
                found.append(PlausibilityWarning(
                    f"parts.{name}.{parameter}.at_di_dt",
                    _slope("plausibility.slow_test_di_dt", spread.at_di_dt, SLOW_DI_DT)))
    return found


def _slope(code: str, value: float, threshold: float) -> Finding:
    return Finding(code, {"slope": Value(value, "A/s"),
                          "slope_per_us": Value(value * 1e-6, "A/us")}, Value(threshold, "A/s"))


def _spreads(design: Design) -> list[PlausibilityWarning]:
    found = []
    for name in design.parts_used():
        part = design.parts[name]
        for parameter in SPREAD_PARAMETERS:
            spread = part.spread(parameter)
            if spread is None or spread.typ <= 0:
                continue
            ratio = SPREAD_RATIO[parameter]
            unit = SPREAD_UNITS[parameter].label
            if spread.high is not None and spread.high >= ratio * spread.typ:
                found.append(PlausibilityWarning(f"parts.{name}.{parameter}", Finding(
                    "plausibility.max_far_above_typ",
                    {"parameter": Value(parameter), "high": Value(spread.high, unit),
                     "typ": Value(spread.typ, unit), "ratio": Value(spread.high / spread.typ),
                     "typ_assumed": Value(int(spread.typ_assumed))},
                    Value(ratio))))
            if spread.low is not None and 0 < spread.low and spread.typ >= ratio * spread.low:
                found.append(PlausibilityWarning(f"parts.{name}.{parameter}", Finding(
                    "plausibility.typ_far_above_min",
                    {"parameter": Value(parameter), "typ": Value(spread.typ, unit),
                     "low": Value(spread.low, unit), "ratio": Value(spread.typ / spread.low)},
                    Value(ratio))))
    return found
