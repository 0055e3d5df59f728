"""Reading a design file: TOML text -> the validated dataclasses of :mod:`stringcheck.design`.

Every error names the file, the dotted key and what would be valid; unknown keys are errors with
the nearest valid key suggested; defaults taken on the user's behalf go into ``Design.assumptions``.
The key lists and the value reader are in design/schema.py, the parts in design/parts.py.
"""

from __future__ import annotations

import difflib
import hashlib
import math
import re
import tomllib
from dataclasses import replace
from pathlib import Path
from typing import Any, Mapping

import numpy as np

from stringcheck.constants import DATASHEET_TEMPERATURE, HEATSINKS, RESISTOR_TCR_REFERENCE, WAVEFORMS
from stringcheck.design.model import (
    DEFAULT_AMBIENT,
    DEFAULT_CONFIDENCE,
    DEFAULT_DERATING,
    DEFAULT_SEED,
    DEFAULT_SIGMA_AT_LIMIT,
    DEFAULT_TARGET_P_FAIL,
    DEFAULT_TRIALS,
    MAX_DEVICES,
    MAX_FILE_BYTES,
    MAX_LEAKAGE_DOUBLINGS,
    REVIEW_STRESS_TOLERANCE,
    REVIEW_TOLERANCE,
    SIGMA_AT_LIMIT_RANGE,
    SPREAD_PARAMETERS,
    TOPOLOGIES,
    Circuit,
    Design,
    FAULT_KINDS,
    EndOfLife,
    RELIABILITY_CONTACTS,
    RELIABILITY_DEVICE_TYPES,
    RELIABILITY_ENVIRONMENTS,
    RELIABILITY_QUALITIES,
    Reliability,
    Duty,
    Faults,
    Grading,
    MonteCarlo,
    Part,
    PositionOverride,
    Review,
    Sizing,
    StringLayout,
    Thermal,
    correlation_matrix,
    row_screened,
)
from stringcheck.eseries import SERIES_NAMES
from stringcheck.errors import DesignError
from stringcheck.units import (
    AMPERE,
    AMPERE_PER_SECOND,
    CELSIUS,
    DIMENSIONLESS,
    FARAD,
    HENRY,
    HERTZ,
    KELVIN_DIFFERENCE,
    KELVIN_PER_WATT,
    OHM,
    PER_KELVIN,
    SECOND,
    PER_VOLT,
    VOLT,
    WATT,
)

from stringcheck.findings import Finding, Value
from stringcheck.design.schema import SCHEMA_KEYS, TOP_LEVEL, Reader, join_key
from stringcheck.design.parts import check_serials, read_parts


def load_design(path: str | Path) -> Design:
    """Read and validate the design file at ``path``.

    Raises
    ------
    DesignError
        For a missing, unreadable, empty, binary or oversized file, a folder, a pipe or a device, text
        that is not UTF-8, a TOML syntax error (with its line), and every key or value that is not
        valid (naming the key and the fix).
    """
    path = Path(path)
    source = str(path)
    try:
        if not path.exists():
            raise DesignError("no such file; check the path", source=source)
        if path.is_dir():
            raise DesignError("is a folder, not a design file", source=source)
        if not path.is_file():
            # A pipe or a device would block or never end; a design file is a regular file.
            raise DesignError("is not a regular file (a pipe or a device?); give a design file",
                              source=source)
        size = path.stat().st_size
        if size > MAX_FILE_BYTES:
            raise DesignError(f"is {size:,} bytes, too large for a design file (at most "
                              f"{MAX_FILE_BYTES:,}); check the path", source=source)
        with path.open("rb") as stream:
            data = stream.read(MAX_FILE_BYTES + 1)
        if len(data) > MAX_FILE_BYTES:  # a file under /proc says 0 bytes whatever it holds
            raise DesignError(f"holds more than {MAX_FILE_BYTES:,} bytes, too large for a design "
                              "file; check the path", source=source)
    except OSError as error:
        reason = error.strerror or type(error).__name__
        raise DesignError(f"cannot be read ({reason})", source=source) from None
    if not data.strip():
        raise DesignError("the file is empty; start from `stringcheck new FILE`", source=source)
    if b"\x00" in data:
        raise DesignError("is a binary file, not a TOML design file", source=source)
    try:
        # utf-8-sig: some editors start a UTF-8 file with a byte-order mark, which TOML does not allow.
        text = data.decode("utf-8-sig")
    except UnicodeDecodeError as error:
        line = data[:error.start].count(b"\n") + 1
        raise DesignError(f"is not UTF-8 text (line {line}); save it as UTF-8",
                          source=source) from None
    return replace(parse_design_text(text, source=source), sha256=hashlib.sha256(data).hexdigest())


def parse_design_text(text: str, *, source: str = "<design>") -> Design:
    """Validate design-file text (TOML) into a :class:`Design`."""
    try:
        raw = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise DesignError(f"TOML syntax error: {error}{_quoted_line(text, str(error))}",
                          source=source) from None
    except ValueError:
        # tomllib lets Python's own limit on integer digits through as a plain ValueError.
        line = _line_of_long_number(text)
        raise DesignError(f"TOML syntax error: a number too long to read (line {line}); "
                          "write it in exponent form, e.g. 1e3", source=source) from None
    except RecursionError:
        # tomllib reads nested arrays and inline tables by recursion; a design needs a few levels.
        raise DesignError(_TOO_DEEP, source=source) from None
    try:
        design = parse_design(raw, source=source)
    except RecursionError:
        raise DesignError(_TOO_DEEP, source=source) from None
    return replace(design, sha256=hashlib.sha256(text.encode("utf-8")).hexdigest())


_TOO_DEEP = ("TOML nesting too deep (arrays or inline tables nested hundreds of levels); a design "
             "file nests a few levels at most: check the brackets")


def _quoted_line(text: str, message: str) -> str:
    """``; line N reads: ...`` for a TOML error message that names its line, else ""."""
    found = re.search(r"at line (\d+)", message)
    if not found:
        return ""
    lines = text.split("\n")  # TOML counts lines by "\n" alone
    number = int(found.group(1))
    if not 1 <= number <= len(lines) or not lines[number - 1].strip():
        return ""
    line = "".join(c if c.isprintable() else "?" for c in " ".join(lines[number - 1].split()))
    if len(line) > 60:
        line = line[:57] + "..."
    return f"; line {number} reads: {line}"


def _line_of_long_number(text: str) -> int:
    found = re.search(r"\d[\d_]{4000,}", text)
    return text.count("\n", 0, found.start()) + 1 if found else 1


def parse_design(raw: Mapping[str, Any], *, source: str = "<design>") -> Design:
    """Validate an already-parsed design table into a :class:`Design`."""
    reader = Reader(source)
    reader.check_keys(raw, TOP_LEVEL, "")

    design_table = reader.table(raw, "design")
    reader.check_keys(design_table, SCHEMA_KEYS["design"], "design")
    title = reader.text(design_table, "title", "design", default=Path(source).stem) or ""
    notes = reader.text(design_table, "notes", "design", default="") or ""

    parts = read_parts(reader, raw)
    circuit = None
    if "circuit" in raw:
        if "duty" in raw:
            raise reader.error("circuit", "a design gives either [duty] or [circuit], not both; "
                                          "remove one of the two tables")
        circuit = _read_circuit(reader, raw)
        duty = None
    else:
        duty = _read_duty(reader, raw)
    string = _read_string(reader, raw, parts)
    grading = _read_grading(reader, raw)
    monte_carlo = _read_monte_carlo(reader, raw)
    sizing = _read_sizing(reader, raw)
    thermal = _read_thermal(reader, raw)
    review_table = reader.table(raw, "review")
    reader.check_keys(review_table, SCHEMA_KEYS["review"], "review")
    review = Review(
        tolerance=reader.fraction(review_table, "tolerance", "review", default=REVIEW_TOLERANCE,
                                  low=0.0, high=1.0, high_open=False),
        stress_tolerance=reader.fraction(review_table, "stress_tolerance", "review",
                                         default=REVIEW_STRESS_TOLERANCE, low=0.0, high=1.0,
                                         high_open=False))

    design = Design(title=title, notes=notes, source=source, duty=duty, string=string,
                    parts=parts, grading=grading, monte_carlo=monte_carlo, sizing=sizing,
                    thermal=thermal, review=review, assumptions=tuple(reader.assumptions),
                    faults=_read_faults(reader, raw), reliability=_read_reliability(reader, raw),
                    end_of_life=_read_end_of_life(reader, raw, grading),
                    circuit=circuit)
    _cross_check(reader, design)
    notes = _row_notes(design)
    return replace(design, assumptions=design.assumptions + notes) if notes else design


def _row_notes(design: Design) -> tuple[Finding, ...]:
    """What the rows of the parts used say on the user's behalf: which rows are taken as screened
    (``model.row_screened``), and which rows a position's temperature lies outside of."""
    screened, unscreened, notes = [], [], []
    temperatures = design.ambient + design.string.temperature_rise_grid()
    grid = design.string.part_grid()
    for name in design.parts_used():
        part = design.parts[name]
        held = temperatures[grid == name] if np.any(grid == name) else temperatures
        for parameter in SPREAD_PARAMETERS:
            rows = part.rows(parameter)
            for row in rows:
                if row.fixed:
                    continue
                at = "" if row.at_temperature is None else f" at {row.at_temperature:g} degC"
                label = f"parts.{name}.{parameter}{at}"
                (screened if row_screened(row, design.monte_carlo) else unscreened).append(label)
            if len(rows) >= 2:
                cool, hot = rows[0].at_temperature, rows[-1].at_temperature
                outside = held[(held < cool) | (held > hot)]
                if outside.size:
                    notes.append(Finding("rows.extrapolated", {
                        "key": Value(f"parts.{name}.{parameter}"),
                        "cool": Value(cool, "degC"), "hot": Value(hot, "degC"),
                        "temperature": Value(float(outside[np.argmax(np.abs(outside - 0.5 * (
                            cool + hot)))]), "degC")}))
    if screened or unscreened:
        basis = "row" if not design.monte_carlo.screened_given else "design"
        notes.insert(0, Finding(f"assumed.screening_{basis}", {
            "screened": Value(", ".join(screened) or "none"),
            "unscreened": Value(", ".join(unscreened) or "none")}))
    return tuple(notes)


def _read_faults(reader: Reader, raw: Mapping[str, Any]) -> Faults:
    """``[faults]``: the kinds of single fault ``check --faults`` evaluates (default all)."""
    table = reader.table(raw, "faults")
    reader.check_keys(table, SCHEMA_KEYS["faults"], "faults")
    kinds = table.get("kinds", FAULT_KINDS)
    if isinstance(kinds, str):
        kinds = [kinds]
    if not isinstance(kinds, (list, tuple)) or not kinds:
        raise reader.error("faults.kinds", "must be a non-empty list of fault kinds, e.g. "
                                           f"[\"device_short\"]; valid kinds: {', '.join(FAULT_KINDS)}")
    for kind in kinds:
        if kind not in FAULT_KINDS:
            raise reader.error("faults.kinds", f"unknown fault kind {kind!r}; valid kinds: "
                                               f"{', '.join(FAULT_KINDS)}")
    return Faults(kinds=tuple(dict.fromkeys(kinds)))


def _read_reliability(reader: Reader, raw: Mapping[str, Any]) -> Reliability:
    """``[reliability]``: the factors of the failure-rate estimate (``check --failure-rate``)."""
    table = reader.table(raw, "reliability")
    prefix = "reliability"
    reader.check_keys(table, SCHEMA_KEYS[prefix], prefix)
    defaults = Reliability()
    values = {key: reader.text(table, key, prefix, default=getattr(defaults, key), choices=choices)
              for key, choices in (("device_type", RELIABILITY_DEVICE_TYPES),
                                   ("quality", RELIABILITY_QUALITIES),
                                   ("environment", RELIABILITY_ENVIRONMENTS),
                                   ("contact", RELIABILITY_CONTACTS))}
    base_rate = None
    if "base_rate" in table:
        value = table["base_rate"]
        if isinstance(value, bool) or not isinstance(value, (int, float)) or \
                not math.isfinite(value) or not value > 0:
            raise reader.error("reliability.base_rate", "must be a number > 0 in failures per "
                                                        f"10^6 hours (e.g. 0.003), got {value!r}")
        base_rate = float(value)
    return Reliability(base_rate=base_rate, **values)


def _read_end_of_life(reader: Reader, raw: Mapping[str, Any], grading: Grading) -> EndOfLife:
    """``[end_of_life]``: the grading network's changes over life (``check --end-of-life``)."""
    table = reader.table(raw, "end_of_life")
    prefix = "end_of_life"
    reader.check_keys(table, SCHEMA_KEYS[prefix], prefix)
    enabled = table.get("enabled", False)
    if not isinstance(enabled, bool):
        raise reader.error("end_of_life.enabled", f"must be true or false, got {enabled!r}")
    drift = reader.quantity(table, "resistor_drift", DIMENSIONLESS, prefix, default=0.0)
    if not -0.5 < drift < 0.5:
        raise reader.error("end_of_life.resistor_drift", "must be a change within +-50 % (e.g. "
                                                         f"\"2 %\"), got {table['resistor_drift']!r}")
    mode = reader.text(table, "resistor_drift_mode", prefix, default="band",
                       choices=("band", "shift"))
    gamma = reader.quantity(table, "resistor_voltage_coefficient", PER_VOLT, prefix, default=0.0)
    if not abs(gamma) < 1e-3:
        raise reader.error("end_of_life.resistor_voltage_coefficient",
                           "must be within +-1000 ppm/V (a few hundred ppm/V is typical of "
                           f"high-value thick film), got {table['resistor_voltage_coefficient']!r}")
    curve: tuple[tuple[float, float], ...] = ()
    if isinstance(table.get("capacitor_dc_bias"), list):
        curve = _dc_bias_curve(reader, table["capacitor_dc_bias"])
        bias = float(np.interp(1.0, [0.0] + [x for x, _ in curve], [0.0] + [y for _, y in curve]))
    else:
        bias = reader.quantity(table, "capacitor_dc_bias", DIMENSIONLESS, prefix, default=0.0)
    if not 0.0 <= bias < 1.0:
        raise reader.error("end_of_life.capacitor_dc_bias", "must be a fraction of C lost at the "
                                                            "rated voltage in [0, 1) (e.g. "
                                                            f"\"20 %\"), got {table['capacitor_dc_bias']!r}")
    surface = reader.quantity(table, "surface_resistance", OHM, prefix, positive=True)
    fraction = reader.fraction(table, "surface_fraction", prefix, default=1.0, low=0.0, high=1.0,
                               high_open=False)
    if bias and grading.capacitor is not None and grading.capacitor_rated_voltage is None:
        raise reader.error("grading.capacitor_rated_voltage", "missing; end_of_life."
                                                              "capacitor_dc_bias is the loss at "
                                                              "the capacitor's rated voltage")
    if "surface_fraction" in table and surface is None:
        raise reader.error("end_of_life.surface_fraction", "needs end_of_life.surface_resistance "
                                                           "(the shunt it places)")
    return EndOfLife(enabled=enabled, resistor_drift=drift, resistor_drift_mode=mode,
                     resistor_voltage_coefficient=gamma, capacitor_dc_bias=bias,
                     capacitor_dc_bias_curve=curve, surface_resistance=surface,
                     surface_fraction=fraction)


def _dc_bias_curve(reader: Reader, raw: list) -> tuple[tuple[float, float], ...]:
    """``capacitor_dc_bias`` as a maker's curve: [[V / V_rated, fraction of C lost], ...]."""
    key = "end_of_life.capacitor_dc_bias"
    hint = ("give [[V / V_rated, loss], ...] pairs of the maker's dc-bias curve, e.g. "
            "[[0.5, 0.1], [1.0, 0.3]]")
    points = []
    for item in raw:
        if not (isinstance(item, list) and len(item) == 2 and all(
                isinstance(v, (int, float)) and not isinstance(v, bool) for v in item)):
            raise reader.error(key, f"{hint}; got {item!r}")
        points.append((float(item[0]), float(item[1])))
    if not points:
        raise reader.error(key, f"is an empty list; {hint}")
    fractions = [x for x, _ in points]
    losses = [y for _, y in points]
    if any(not 0.0 < x <= 2.0 for x in fractions) or any(b <= a for a, b in zip(fractions,
                                                                               fractions[1:])):
        raise reader.error(key, "voltages must rise, each V / V_rated in (0, 2]; " + hint)
    if any(not 0.0 <= y < 1.0 for y in losses) or any(b < a for a, b in zip(losses, losses[1:])):
        raise reader.error(key, "losses must be fractions in [0, 1) that do not fall with the "
                                "voltage (a capacitor loses more at a higher bias); " + hint)
    return tuple(points)


def _read_duty(reader: Reader, raw: Mapping[str, Any]) -> Duty:
    table = reader.table(raw, "duty")
    reader.check_keys(table, SCHEMA_KEYS["duty"], "duty")
    if "duty" not in raw:
        raise reader.error("duty", "missing; add a [duty] table with at least reverse_voltage (or a [circuit] "
                                   "table: see docs/design-file.md)")
    waveform = reader.text(table, "waveform", "duty", default=None, choices=WAVEFORMS)
    if waveform is None:
        waveform = "dc"
        reader.assumptions.append(Finding("assumed.waveform_dc", {"key": Value("duty.waveform")}))
    return Duty(
        reverse_voltage=reader.quantity(table, "reverse_voltage", VOLT, "duty", required=True,
                                        positive=True),
        forward_current=reader.quantity(table, "forward_current", AMPERE, "duty", positive=True),
        waveform=waveform,
        frequency=reader.quantity(table, "frequency", HERTZ, "duty", positive=True),
        di_dt=reader.quantity(table, "di_dt", AMPERE_PER_SECOND, "duty", positive=True),
        ambient=reader.quantity(table, "ambient", CELSIUS, "duty", default=DEFAULT_AMBIENT,
                                note=Finding("assumed.ambient",
                                             {"ambient": Value(DEFAULT_AMBIENT, "degC")})) or 0.0,
        stray_inductance=reader.quantity(table, "stray_inductance", HENRY, "duty", positive=True),
        load_capacitance=reader.quantity(table, "load_capacitance", FARAD, "duty", default=0.0,
                                         non_negative=True) or 0.0,
    )


def _read_circuit(reader: Reader, raw: Mapping[str, Any]) -> Circuit:
    """The [circuit] table (issue 23): the rectifier or multiplier the string is a stack of."""
    table = reader.table(raw, "circuit")
    prefix = "circuit"
    reader.check_keys(table, SCHEMA_KEYS[prefix], prefix)
    if "topology" not in table:
        raise reader.error("circuit.topology", "missing; one of " + ", ".join(TOPOLOGIES))
    topology = reader.text(table, "topology", prefix, choices=TOPOLOGIES)
    stages = None
    if topology == "multiplier":
        if "stages" not in table:
            raise reader.error("circuit.stages", "missing; a multiplier needs its stage count, "
                                                 "e.g. stages = 6")
        stages = reader.integer(table, "stages", prefix, maximum=1000)
    elif "stages" in table:
        raise reader.error("circuit.stages", f"only a multiplier has stages, not a {topology}; "
                                             "remove it (a doubler is one stage)")
    phases = reader.integer(table, "phases", prefix, default=1)
    if phases not in (1, 3) or (phases == 3 and topology != "bridge"):
        raise reader.error("circuit.phases", f"must be 1, or 3 for a bridge, got {phases} for a "
                                             f"{topology}")
    given = [key for key in ("secondary_voltage", "secondary_peak") if key in table]
    if len(given) != 1:
        raise reader.error("circuit.secondary_voltage", "give exactly one of secondary_voltage (rms) "
                                                        "and secondary_peak, e.g. "
                                                        "secondary_voltage = \"10 kV\"")
    value = reader.quantity(table, given[0], VOLT, prefix, required=True, positive=True)
    peak = value * math.sqrt(2.0) if given[0] == "secondary_voltage" else value
    loads = [key for key in ("load_current", "load_resistance") if key in table]
    if len(loads) != 1:
        raise reader.error("circuit.load_current", "give exactly one of load_current and "
                                                   "load_resistance, e.g. load_current = \"20 mA\"")
    resistance = reader.quantity(table, "load_resistance", OHM, prefix, positive=True)
    current = reader.quantity(table, "load_current", AMPERE, prefix, positive=True)
    capacitor_key = "stage_capacitor" if topology in ("doubler", "multiplier") else \
        "filter_capacitor"
    other = "filter_capacitor" if capacitor_key == "stage_capacitor" else "stage_capacitor"
    if other in table:
        raise reader.error(f"circuit.{other}", f"a {topology} takes {capacitor_key}, not {other}")
    capacitor = reader.quantity(table, capacitor_key, FARAD, prefix,
                                required=capacitor_key == "stage_capacitor", positive=True)
    # Dc output at no load: what a load resistance draws at most.
    output = peak * (2 * (stages or 1) if topology in ("doubler", "multiplier") else 1)
    if resistance is not None:
        current = output / resistance
        reader.assumptions.append(Finding("assumed.circuit_load_from_resistance", {
            "resistance": Value(resistance, "ohm"), "voltage": Value(output, "V"),
            "current": Value(current, "A")}))
    inductance = reader.quantity(table, "commutation_inductance", HENRY, prefix, positive=True)
    if phases == 3 and (inductance is None or capacitor is not None):
        raise reader.error("circuit.commutation_inductance", "a three-phase bridge is taken as "
                                                             "line-commutated: give "
                                                             "commutation_inductance and no "
                                                             "filter_capacitor")
    return Circuit(
        topology=topology, secondary_peak=peak,
        frequency=reader.quantity(table, "frequency", HERTZ, prefix, required=True, positive=True),
        load_current=current,
        ambient=reader.quantity(table, "ambient", CELSIUS, prefix, default=DEFAULT_AMBIENT,
                                note=Finding("assumed.ambient",
                                             {"ambient": Value(DEFAULT_AMBIENT, "degC")})) or 0.0,
        stages=stages, phases=phases, load_resistance=resistance,
        commutation_inductance=inductance,
        filter_capacitor=capacitor if capacitor_key == "filter_capacitor" else None,
        stage_capacitor=capacitor if capacitor_key == "stage_capacitor" else None,
    )


def _read_string(reader: Reader, raw: Mapping[str, Any], parts: Mapping[str, Part]) -> StringLayout:
    table = reader.table(raw, "string")
    if "string" not in raw:
        raise reader.error("string", "missing; add a [string] table with at least series = N")
    reader.check_keys(table, SCHEMA_KEYS["string"], "string")
    series = reader.integer(table, "series", "string", cap=MAX_DEVICES)
    parallel = reader.integer(table, "parallel", "string", default=1, cap=MAX_DEVICES)
    if series * parallel > MAX_DEVICES:
        raise reader.error("string.parallel", f"{parallel} branches of {series} devices make "
                                              f"{series * parallel:,} devices, more than the "
                                              f"{MAX_DEVICES:,} this tool can hold in memory")
    derating = reader.fraction(table, "derating", "string", default=DEFAULT_DERATING, low=0.0,
                               high=1.0, low_open=True, high_open=False,
                               note=Finding("assumed.derating",
                                            {"derating": Value(DEFAULT_DERATING)}))
    default_part = reader.text(table, "part", "string")
    if default_part is None:
        if len(parts) != 1:
            raise reader.error("string.part", "missing; name the default part (one of "
                                              + ", ".join(parts) + ")")
        default_part = next(iter(parts))
    _check_part_name(reader, "string.part", default_part, parts)
    raw_positions = table.get("position", [])
    if not isinstance(raw_positions, list):
        raise reader.error("string.position", "must be an array of tables ([[string.position]])")
    positions = []
    seen: dict[tuple[int, int], int] = {}
    for number, entry in enumerate(raw_positions, start=1):
        prefix = f"string.position[{number}]"
        if not isinstance(entry, Mapping):
            raise reader.error(prefix, "must be a table ([[string.position]])")
        reader.check_keys(entry, SCHEMA_KEYS["position"], prefix)
        index = reader.integer(entry, "index", prefix, maximum=series)
        branch = reader.integer(entry, "branch", prefix, default=0, minimum=1, maximum=parallel)
        part = reader.text(entry, "part", prefix)
        if part is not None:
            _check_part_name(reader, join_key(prefix, "part"), part, parts)
        rise = reader.quantity(entry, "temperature_rise", KELVIN_DIFFERENCE, prefix,
                               non_negative=True)
        serial = reader.text(entry, "serial", prefix)
        if serial is not None:
            serial = serial.strip()
            if not serial:
                raise reader.error(join_key(prefix, "serial"), "is empty; give the serial number of "
                                                            "the measured device, or remove it")
            if branch == 0 and parallel > 1:
                raise reader.error(join_key(prefix, "serial"), f"names one device, but the entry "
                                                            f"covers all {parallel} branches; "
                                                            "add branch = N")
        # Two entries for the same place would leave one of them silently unused. An entry for every
        # branch (no branch key) and one for a single branch may stand together: the single branch's
        # entry wins, whatever their order (StringLayout._grid).
        if (index, branch) in seen:
            where = f"index {index}" + (f", branch {branch}" if branch else " (every branch)")
            first = seen[index, branch]
            raise reader.error(prefix, f"{where} is already set by string.position[{first}]; "
                                       "merge the two entries")
        seen[index, branch] = number
        positions.append(PositionOverride(index=index, branch=branch or None, part=part,
                                          temperature_rise=rise, serial=serial))
    return StringLayout(series=series, parallel=parallel, derating=derating, part=default_part,
                        positions=tuple(positions))


def _check_part_name(reader: Reader, key: str, name: str, parts: Mapping[str, Part]) -> None:
    if name not in parts:
        close = difflib.get_close_matches(name, list(parts), n=1)
        hint = f"did you mean '{close[0]}'?" if close else "defined parts: " + ", ".join(parts)
        raise reader.error(key, f"no part named {name!r}; {hint}")


def _read_grading(reader: Reader, raw: Mapping[str, Any]) -> Grading:
    table = reader.table(raw, "grading")
    reader.check_keys(table, SCHEMA_KEYS["grading"], "grading")
    prefix = "grading"
    return Grading(
        resistor=reader.quantity(table, "resistor", OHM, prefix, positive=True),
        resistor_tolerance=reader.fraction(table, "resistor_tolerance", prefix, default=0.0,
                                           low=0.0, high=1.0),
        resistor_tcr=reader.quantity(table, "resistor_tcr", PER_KELVIN, prefix, default=0.0) or 0.0,
        resistor_rated_voltage=reader.quantity(table, "resistor_rated_voltage", VOLT, prefix,
                                               positive=True),
        resistor_rated_power=reader.quantity(table, "resistor_rated_power", WATT, prefix,
                                             positive=True),
        capacitor=reader.quantity(table, "capacitor", FARAD, prefix, positive=True),
        capacitor_tolerance=reader.fraction(table, "capacitor_tolerance", prefix, default=0.0,
                                            low=0.0, high=1.0),
        capacitor_rated_voltage=reader.quantity(table, "capacitor_rated_voltage", VOLT, prefix,
                                                positive=True),
        damping_resistor=reader.quantity(table, "damping_resistor", OHM, prefix, positive=True),
        **{f"{component}_distribution": _tolerance_shape(reader, table, component)
           for component in ("resistor", "capacitor")},
    )


# The shape of a grading component's tolerance band when the file does not say: a resistor sits
# near its nominal value (normal, the tolerance at sigma_at_limit); a capacitor of a +-10 % class is
# often picked from a wider production spread and may sit anywhere in the band (uniform: the
# conservative choice for the dynamic sharing).
_TOLERANCE_SHAPES = ("normal", "uniform")
_DEFAULT_TOLERANCE_SHAPE = {"resistor": "normal", "capacitor": "uniform"}


def _tolerance_shape(reader: Reader, table: Mapping[str, Any], component: str) -> str:
    key = f"{component}_distribution"
    shape = reader.text(table, key, "grading", choices=_TOLERANCE_SHAPES)
    if shape is not None:
        return shape
    shape = _DEFAULT_TOLERANCE_SHAPE[component]
    if table.get(component) is not None and table.get(f"{component}_tolerance") not in (None, 0):
        reader.assumptions.append(Finding(f"assumed.{component}_distribution_{shape}",
                                          {"key": Value(f"grading.{key}")}))
    return shape


def _read_monte_carlo(reader: Reader, raw: Mapping[str, Any]) -> MonteCarlo:
    table = reader.table(raw, "monte_carlo")
    prefix = "monte_carlo"
    reader.check_keys(table, SCHEMA_KEYS[prefix], prefix)
    screened = table.get("screened", True)
    if not isinstance(screened, bool):
        raise reader.error("monte_carlo.screened", f"must be true or false, got {screened!r}")
    correlation = []
    raw_correlation = reader.table(table, "correlation", prefix)
    # One entry per pair: "r_t-v_t0" and "v_t0-r_t" name the same coefficient, and the matrix would
    # keep whichever came last.
    pairs: dict[frozenset[str], str] = {}
    for key, value in raw_correlation.items():
        dotted = f"{prefix}.correlation.{key}"
        names = key.split("-")
        if len(names) != 2 or any(name not in SPREAD_PARAMETERS for name in names) or \
                names[0] == names[1]:
            raise reader.error(dotted, "name two different parameters joined by '-', e.g. "
                                       "q_rr-v_t0 = -0.5; parameters: " + ", ".join(SPREAD_PARAMETERS))
        pair = frozenset(names)
        if pair in pairs:
            first = pairs[pair]
            raise reader.error(dotted, f"gives the pair again: {prefix}.correlation.{first} = "
                                       f"{raw_correlation[first]!r} and {key} = {value!r} name one "
                                       "coefficient; keep one of the two")
        pairs[pair] = key
        if isinstance(value, bool) or not isinstance(value, (int, float)) or \
                not -1.0 < float(value) < 1.0:
            raise reader.error(dotted, f"must be a number in (-1, 1), got {value!r}")
        correlation.append((names[0], names[1], float(value)))
    return MonteCarlo(
        trials=reader.integer(table, "trials", prefix, default=DEFAULT_TRIALS),
        seed=reader.integer(table, "seed", prefix, default=DEFAULT_SEED, minimum=0),
        confidence=reader.fraction(table, "confidence", prefix, default=DEFAULT_CONFIDENCE, low=0.0,
                                   high=1.0, low_open=True),
        sigma_at_limit=reader.fraction(table, "sigma_at_limit", prefix,
                                       default=DEFAULT_SIGMA_AT_LIMIT, low=SIGMA_AT_LIMIT_RANGE[0],
                                       high=SIGMA_AT_LIMIT_RANGE[1], high_open=False),
        screened=screened,
        screened_given="screened" in table,
        lot_share=reader.fraction(table, "lot_share", prefix, default=0.0, low=0.0, high=1.0),
        correlation=tuple(correlation),
    )


def _read_sizing(reader: Reader, raw: Mapping[str, Any]) -> Sizing:
    table = reader.table(raw, "sizing")
    prefix = "sizing"
    reader.check_keys(table, SCHEMA_KEYS[prefix], prefix)
    series = {}
    for key, default in (("resistor_series", "E96"), ("capacitor_series", "E12")):
        value = reader.text(table, key, prefix, default=default)
        assert value is not None
        if value.upper() not in SERIES_NAMES:
            raise reader.error(join_key(prefix, key), f"unknown preferred-value series {value!r}; "
                                                   "one of " + ", ".join(SERIES_NAMES))
        series[key] = value.upper()
    target_share = reader.quantity(table, "target_share", DIMENSIONLESS, prefix)
    if target_share is not None and not target_share >= 1.0:
        raise reader.error("sizing.target_share", "must be >= 1 (max branch current / mean), "
                                                  f"got {table['target_share']!r}")
    limits = _sizing_constraints(reader, table, prefix)
    return Sizing(
        **limits,
        target_p_fail=reader.fraction(table, "target_p_fail", prefix, default=DEFAULT_TARGET_P_FAIL,
                                      low=0.0, high=1.0, low_open=True),
        target_share=target_share,
        **series,
    )


def _sizing_constraints(reader: Reader, table: Mapping[str, Any], prefix: str) -> dict[str, float]:
    """The engineering constraints of ``[sizing]`` (defaults: ``Sizing``'s, common practice)."""
    defaults = Sizing(target_p_fail=0.0, target_share=None, resistor_series="", capacitor_series="")
    out: dict[str, float] = {}
    for key in ("grading_current_multiple", "capacitance_multiple"):
        value = reader.quantity(table, key, DIMENSIONLESS, prefix, default=getattr(defaults, key))
        if not value >= 1.0 or not math.isfinite(value):
            raise reader.error(join_key(prefix, key), f"must be a number >= 1 (a multiple), got "
                                                      f"{table[key]!r}")
        out[key] = value
    for key, unit in (("discharge_time", SECOND), ("resistor_min", OHM), ("resistor_max", OHM),
                      ("capacitor_min", FARAD), ("capacitor_max", FARAD)):
        out[key] = reader.quantity(table, key, unit, prefix, default=getattr(defaults, key),
                                   positive=True)
    out["stray_capacitance"] = reader.quantity(table, "stray_capacitance", FARAD, prefix,
                                               default=0.0, non_negative=True) or 0.0
    for low, high in (("resistor_min", "resistor_max"), ("capacitor_min", "capacitor_max")):
        if not out[low] < out[high]:
            raise reader.error(join_key(prefix, high), f"must be greater than {prefix}.{low} "
                                                       f"({out[low]:g}), got {table.get(high)!r}")
    return out


def _read_thermal(reader: Reader, raw: Mapping[str, Any]) -> Thermal:
    table = reader.table(raw, "thermal")
    prefix = "thermal"
    reader.check_keys(table, SCHEMA_KEYS[prefix], prefix)
    return Thermal(
        heatsink=reader.text(table, "heatsink", prefix, default="separate", choices=HEATSINKS) or "",
        r_th_sa=reader.quantity(table, "r_th_sa", KELVIN_PER_WATT, prefix, non_negative=True),
        path_resistance=reader.quantity(table, "path_resistance", OHM, prefix, default=0.0,
                                        non_negative=True) or 0.0,
    )


def _cross_check(reader: Reader, design: Design) -> None:
    """Checks that need more than one table: temperatures against limits, what each check needs."""
    if design.monte_carlo.correlation:
        try:
            np.linalg.cholesky(correlation_matrix(design.monte_carlo.correlation, SPREAD_PARAMETERS))
        except np.linalg.LinAlgError:
            raise reader.error("monte_carlo.correlation", "the correlations given do not form a valid "
                                                          "(positive definite) correlation matrix; "
                                                          "make them weaker") from None
    grid = design.string.part_grid()
    rise = design.string.temperature_rise_grid()
    check_serials(reader, design, grid)
    for name in design.parts_used():
        part = design.parts[name]
        if part.t_j_max is not None:
            hottest = design.ambient + float(rise[grid == name].max())
            if hottest >= part.t_j_max:
                raise reader.error("duty.ambient",
                                   f"ambient plus temperature rise ({hottest:g} degC) is not below "
                                   f"t_j_max of part '{name}' ({part.t_j_max:g} degC); lower it")
        if part.i_r is None:
            raise reader.error(f"parts.{name}.i_r", "missing; the static check needs the reverse "
                                                    "leakage, e.g. i_r = { max = \"0.5 mA\", "
                                                    "at_temperature = \"125 degC\" }")
        temperatures = design.ambient + rise[grid == name]
        reference = part.i_r.at_temperature if part.i_r.at_temperature is not None else \
            DATASHEET_TEMPERATURE
        farthest = float(temperatures[np.argmax(np.abs(temperatures - reference))])
        doublings = abs(farthest - reference) / part.doubling_temperature
        if doublings > MAX_LEAKAGE_DOUBLINGS:
            raise reader.error(f"parts.{name}.leakage_doubling",
                               f"referring the leakage from {reference:g} degC to "
                               f"{farthest:g} degC takes {doublings:.3g} "
                               f"doublings (factor 2^{doublings:.3g}), more than "
                               f"{MAX_LEAKAGE_DOUBLINGS}; check leakage_doubling (about 10 K for "
                               "silicon), i_r.at_temperature and duty.ambient")
    tcr = design.grading.resistor_tcr
    if design.grading.resistor is not None and tcr != 0.0:
        temperatures = design.ambient + rise
        extreme = float(temperatures.max() if tcr < 0 else temperatures.min())
        factor = 1.0 + tcr * (extreme - RESISTOR_TCR_REFERENCE)
        if not factor > 0.0:
            raise reader.error("grading.resistor_tcr",
                               f"at {extreme:g} degC the grading resistor would be {factor:.3g} x its "
                               f"nominal value (referred to {RESISTOR_TCR_REFERENCE:g} degC), not "
                               "positive; a TCR is usually given in ppm/K, e.g. \"100 ppm/K\"")


