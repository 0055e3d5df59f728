"""The design file schema: validated, frozen dataclasses (read from TOML by design/reading.py).

The schema is docs/design-file.md. Every error names the file, the dotted key and what would be valid;
unknown keys are errors with the nearest valid key suggested. Values are converted to SI floats
(temperatures in [degC], temperature differences in [K]) by :mod:`stringcheck.units`.

Defaults that the file may leave out are recorded in :attr:`Design.assumptions`, so that the report can
list every assumption that was made on the user's behalf.
"""

from __future__ import annotations

from dataclasses import dataclass, field, replace
from typing import Mapping

import numpy as np

from stringcheck.findings import Finding

from stringcheck.units import AMPERE, COULOMB, OHM, SECOND, VOLT, Unit

DEFAULT_DERATING = 0.8
DEFAULT_AMBIENT = 25.0
DEFAULT_TRIALS = 20_000
DEFAULT_SEED = 20261202
DEFAULT_CONFIDENCE = 0.95
DEFAULT_SIGMA_AT_LIMIT = 3.0
DEFAULT_TARGET_P_FAIL = 1e-3
# Devices in one string (series x parallel). The engine holds one block of 4096 trials of every device
# in memory at once (about 33 kB per device and array), so a larger string would exhaust the memory
# of an ordinary machine; the largest stacks the tool is meant for have a few hundred devices.
MAX_DEVICES = 10_000
# A datasheet limit at fewer than 1 standard deviation from typ would leave a third of the parts
# outside it; at more than 10 it says the parameter has no scatter (give {typ} alone for that).
SIGMA_AT_LIMIT_RANGE = (1.0, 10.0)
# A design file is a page of text; anything larger is surely not one (and is not read into memory).
MAX_FILE_BYTES = 4 * 1024 * 1024
# Leakage referred over more doublings than this (a factor 2^200 ~ 1e60) is a slip in a temperature
# or in leakage_doubling, and would overflow the leakage arithmetic of the static check.
MAX_LEAKAGE_DOUBLINGS = 200
LOGNORMAL_PARAMETERS = ("i_r", "q_rr", "i_rm", "t_rr")
NORMAL_PARAMETERS = ("v_t0", "r_t")
SPREAD_PARAMETERS = LOGNORMAL_PARAMETERS + NORMAL_PARAMETERS
# The SI unit of each spread parameter: of its design-file row, its lot-file column and its report.
SPREAD_UNITS: dict[str, Unit] = {"i_r": AMPERE, "q_rr": COULOMB, "i_rm": AMPERE, "t_rr": SECOND,
                                 "v_t0": VOLT, "r_t": OHM}

# When a datasheet gives only a maximum, the median ("typ") is taken as this fraction of it. These are
# our documented assumptions, listed in every report that uses them: leakage limits commonly sit about
# a decade above the typical lot (common practice); charge, current and time limits and forward
# figures sit closer to typical.
TYP_FRACTION_OF_MAX = {"i_r": 0.1, "q_rr": 0.6, "i_rm": 0.7, "t_rr": 0.7, "v_t0": 0.9, "r_t": 0.8}

@dataclass(frozen=True)
class Spread:
    """A datasheet spread of one parameter, in SI units.

    ``typ`` is the median of the population; ``low`` and ``high`` are the datasheet limits (None where
    the datasheet gives none). With neither limit the value is fixed (no scatter).
    """

    typ: float
    low: float | None = None
    high: float | None = None
    at_temperature: float | None = None
    at_voltage: float | None = None
    at_di_dt: float | None = None
    at_forward_current: float | None = None
    typ_assumed: bool = False
    # Whether the row's limits were tested on every device (``screened`` in the row); None: not
    # said, decided by :func:`row_screened`.
    screened: bool | None = None

    @property
    def fixed(self) -> bool:
        """True when the parameter has no scatter."""
        return self.low is None and self.high is None

    def scaled(self, factor: float) -> "Spread":
        """The same spread with typ and limits multiplied by ``factor`` (> 0)."""
        return Spread(
            typ=self.typ * factor,
            low=None if self.low is None else self.low * factor,
            high=None if self.high is None else self.high * factor,
            at_temperature=self.at_temperature, at_voltage=self.at_voltage,
            at_di_dt=self.at_di_dt, at_forward_current=self.at_forward_current,
            typ_assumed=self.typ_assumed, screened=self.screened,
        )


@dataclass(frozen=True)
class Part:
    """One device type, all values SI (temperatures [degC], differences [K])."""

    name: str
    v_rrm: float
    i_fav: float | None
    i_r: Spread | None
    q_rr: Spread | None
    i_rm: Spread | None
    t_rr: Spread | None
    v_t0: Spread | None
    r_t: Spread | None
    c_j: float
    r_th_jc: float | None
    r_th_cs: float | None
    t_j_max: float | None
    doubling_temperature: float  # design-file key leakage_doubling
    voltage_exponent: float  # design-file key leakage_voltage_exponent
    tempco_v_t0: float
    tempco_r_t: float
    device_class: str | None = None
    # A stringcheck.design.lots.MeasuredLot (named, not imported: the lot reader builds on this model).
    measured: "MeasuredLot | None" = None
    # Parameters given as a list of rows at several temperatures: (parameter, rows sorted by
    # at_temperature). The parameter's own field holds the hottest row (the one a single-row
    # consumer takes; the leakage doubling and the forward tempcos are fitted from the rows).
    temperature_rows: tuple[tuple[str, tuple[Spread, ...]], ...] = ()
    # The temperature law of a recovery parameter given in one row only: (parameter, rate [1/K])
    # with value(T) = value(T_row) exp(rate (T - T_row)) (the device class's law).
    recovery_rates: tuple[tuple[str, float], ...] = ()
    # C_j as datasheet rows (stringcheck.design.junction.JunctionRows; None: the constant c_j),
    # and whether the recovery charge is the junction's capacitive charge (SiC Schottky).
    junction_rows: "JunctionRows | None" = None
    capacitive: bool = False

    def spread(self, parameter: str) -> Spread | None:
        """The spread of ``parameter`` (one of SPREAD_PARAMETERS), or None if not given."""
        return getattr(self, parameter)

    def rows(self, parameter: str) -> tuple[Spread, ...]:
        """Every datasheet row of ``parameter``, coolest first (one row, or none if not given)."""
        for name, rows in self.temperature_rows:
            if name == parameter:
                return rows
        spread = self.spread(parameter)
        return () if spread is None else (spread,)

    def recovery_rate(self, parameter: str) -> float:
        """The one-row temperature law's rate of ``parameter`` [1/K] (0: flat or not given)."""
        return dict(self.recovery_rates).get(parameter, 0.0)


@dataclass(frozen=True)
class Duty:
    """The operating duty of the string."""

    reverse_voltage: float
    forward_current: float | None
    waveform: str
    frequency: float | None
    di_dt: float | None
    ambient: float
    stray_inductance: float | None
    # Capacitance across the whole string (smoothing capacitor, cable, load) [F]: it discharges
    # through the grading resistors after power-off (``[sizing] discharge_time``).
    load_capacitance: float = 0.0


# Topologies of the design file's ``[circuit]`` table (issue 23).
TOPOLOGIES = ("half-wave", "center-tap", "bridge", "doubler", "multiplier")


@dataclass(frozen=True)
class Circuit:
    """The ``[circuit]`` table: the rectifier or multiplier whose stacks the design's string is.

    Voltages [V] (``secondary_peak`` the peak of the secondary: of each half of a center-tapped
    one, line-to-line for a three-phase bridge), frequency [Hz], load current [A] (from
    ``load_resistance`` as V_pk / R where the file gives a resistance), inductance [H],
    capacitances [F], ambient [degC].
    """

    topology: str
    secondary_peak: float
    frequency: float
    load_current: float
    ambient: float
    stages: int | None = None
    phases: int = 1
    load_resistance: float | None = None
    commutation_inductance: float | None = None
    filter_capacitor: float | None = None
    stage_capacitor: float | None = None


@dataclass(frozen=True)
class PositionOverride:
    """A ``[[string.position]]`` entry: 1-based ``index``; ``branch`` None means every branch.

    ``serial`` names one measured device of the position's part (its lot's serial column): that
    device stands in the position in every trial.
    """

    index: int
    branch: int | None
    part: str | None
    temperature_rise: float | None
    serial: str | None = None


@dataclass(frozen=True)
class Mix:
    """Mixed stock: in every built string each device independently is ``part`` with probability
    ``fraction`` [1], in [0, 1], and otherwise the part its position holds (``review --mix``; not a
    design-file key)."""

    fraction: float
    part: str


@dataclass(frozen=True)
class StringLayout:
    """The string: ``parallel`` branches of ``series`` devices each.

    ``part`` and ``positions`` give the part each position holds; with a ``mix`` any device may
    instead be the mix's part, drawn anew in every built string (``sampling.draw_strings``).
    """

    series: int
    parallel: int
    derating: float
    part: str
    positions: tuple[PositionOverride, ...] = ()
    mix: Mix | None = None

    def _grid(self, attribute: str, fill, dtype) -> np.ndarray:
        """``attribute`` of the overrides over every device, ``fill`` where none sets it.

        Overrides of every branch go first, so that an override of one branch is never undone.
        """
        grid = np.full((self.parallel, self.series), fill, dtype=dtype)
        for override in sorted(self.positions, key=lambda entry: entry.branch is not None):
            value = getattr(override, attribute)
            if value is None:
                continue
            rows = range(self.parallel) if override.branch is None else [override.branch - 1]
            for row in rows:
                grid[row, override.index - 1] = value
        return grid

    def part_grid(self) -> np.ndarray:
        """Part name of every device, shape (parallel, series), as an object array (with a mix:
        the part a position holds when its device is not substituted)."""
        return self._grid("part", self.part, object)

    def serial_grid(self) -> np.ndarray:
        """Serial number of the measured device in every position (None where drawn from the
        part), shape (parallel, series), as an object array."""
        return self._grid("serial", None, object)

    def part_grids(self) -> tuple[np.ndarray, ...]:
        """The part grids a built string picks its devices from, device by device: the part grid
        alone; with a mix of fraction 1 the mix's part everywhere (but where a measured device is
        placed by serial number: it is never substituted); with a fraction strictly between 0 and
        1 both (a mix of fraction 0 changes nothing)."""
        grid = self.part_grid()
        if self.mix is None or self.mix.fraction == 0.0:
            return (grid,)
        everywhere = np.where(self.placed_by_serial(), grid, self.mix.part).astype(object)
        return (everywhere,) if self.mix.fraction == 1.0 else (grid, everywhere)

    def part_labels(self) -> np.ndarray:
        """The part of each position as reports name it, (parallel, series): ``"A|B"`` where a mix
        makes the part vary from string to string (A held, B mixed in), else the one part."""
        grids = self.part_grids()
        labels = grids[0].copy()
        for other in grids[1:]:
            differ = labels != other
            labels[differ] = [f"{a}|{b}" for a, b in zip(labels[differ], other[differ])]
        return labels

    def placed_by_serial(self) -> np.ndarray:
        """Mask (parallel, series) of the positions holding a measured device by serial number."""
        return ~np.equal(self.serial_grid(), None)

    def temperature_rise_grid(self) -> np.ndarray:
        """Temperature rise above ambient of every device [K], shape (parallel, series)."""
        return self._grid("temperature_rise", 0.0, float)


@dataclass(frozen=True)
class Grading:
    """The grading network of every stage (nominal values; tolerances are drawn by the sampler)."""

    resistor: float | None
    resistor_tolerance: float
    resistor_tcr: float
    resistor_rated_voltage: float | None
    resistor_rated_power: float | None
    capacitor: float | None
    capacitor_tolerance: float
    capacitor_rated_voltage: float | None
    damping_resistor: float | None
    # Shape of the tolerance band: "normal" (tolerance at sigma_at_limit, truncated there) or
    # "uniform" (anywhere in the band, as parts selected from a wider production spread).
    resistor_distribution: str = "normal"
    capacitor_distribution: str = "uniform"


@dataclass(frozen=True)
class MonteCarlo:
    """Settings of the Monte Carlo run."""

    trials: int
    seed: int
    confidence: float
    sigma_at_limit: float
    screened: bool
    lot_share: float
    correlation: tuple[tuple[str, str, float], ...] = ()
    # Whether ``screened`` was written in the file: then it decides every row that does not say
    # ``screened`` itself (the design-wide override of :func:`row_screened`).
    screened_given: bool = False


@dataclass(frozen=True)
class Sizing:
    """Targets of the sizing search (``stringcheck size``)."""

    target_p_fail: float
    target_share: float | None
    resistor_series: str
    capacitor_series: str
    # Engineering constraints of the proposal (common practice; docs/design-file.md): grading
    # current >= grading_current_multiple x the hottest maximum leakage; the stack below 60 V
    # within discharge_time [s]; C >= capacitance_multiple x (C_j + stray_capacitance) [F]; R and
    # C within what the parts can realise [ohm], [F].
    grading_current_multiple: float = 5.0
    discharge_time: float = 5.0
    capacitance_multiple: float = 10.0
    stray_capacitance: float = 0.0
    resistor_min: float = 1e3
    resistor_max: float = 1e10
    capacitor_min: float = 1e-12
    capacitor_max: float = 1e-5


@dataclass(frozen=True)
class Thermal:
    """Heatsink arrangement (used by the parallel and thermal checks)."""

    heatsink: str
    r_th_sa: float | None
    path_resistance: float


# Defaults of [review] (a design choice of ours, docs/commands.md): a candidate may raise a
# check's P(fail) upper bound by a tenth of the target, and its p99 and worst stress by 2 % of the
# limit (a fifth of the headroom a derating of 0.9 leaves between the limit and V_RRM).
REVIEW_TOLERANCE = 0.1
REVIEW_STRESS_TOLERANCE = 0.02


@dataclass(frozen=True)
class Review:
    """Settings of the substitution review (``[review]``).

    ``tolerance`` [1]: the rise of a check's P(fail) upper bound over the baseline's that the
    candidate may show, as a fraction of ``[sizing] target_p_fail``. ``stress_tolerance`` [1]: the
    rise of a check's p99 and worst stress ratio (stress / limit) the candidate may show, as a
    fraction of the limit.
    """

    tolerance: float = REVIEW_TOLERANCE
    stress_tolerance: float = REVIEW_STRESS_TOLERANCE


# Every kind of single fault ``check --faults`` evaluates (``studies.faults``), in report order.
FAULT_KINDS = ("device_short", "resistor_open", "capacitor_open", "capacitor_short",
               "damping_open")


@dataclass(frozen=True)
class Faults:
    """Settings of the single-fault study (``[faults]``): the kinds of fault evaluated."""

    kinds: tuple[str, ...] = FAULT_KINDS


# The names ``[reliability]`` takes (the factor tables are ``physics.failure_rate``'s).
RELIABILITY_DEVICE_TYPES = ("general_purpose", "switching", "fast_recovery", "power_rectifier",
                            "high_voltage_stack")
RELIABILITY_QUALITIES = ("JANTXV", "JANTX", "JAN", "lower", "plastic")
RELIABILITY_ENVIRONMENTS = ("GB", "GF", "GM", "NS", "NU", "AIC", "AIF", "AUC", "AUF", "ARW", "SF",
                            "MF", "ML", "CL")
RELIABILITY_CONTACTS = ("metallurgical", "spring")


@dataclass(frozen=True)
class Reliability:
    """Settings of the failure-rate estimate (``[reliability]``, MIL-HDBK-217F N2 section 6.1):
    the diode type of the base rate (or ``base_rate`` [failures / 10^6 h] given), the quality
    level, the environment and the contact construction."""

    device_type: str = "power_rectifier"
    base_rate: float | None = None
    quality: str = "lower"
    environment: str = "GB"
    contact: str = "metallurgical"


@dataclass(frozen=True)
class EndOfLife:
    """End-of-life changes of the grading network (``[end_of_life]``), applied when ``enabled``
    (``check --end-of-life`` or ``enabled = true``).

    ``resistor_drift`` [1]: each grading resistor's change over life, drawn uniformly within
    +-drift (``resistor_drift_mode`` "band") or between 0 and drift ("shift", one-sided, the
    sign of drift). ``resistor_voltage_coefficient`` [1/V]: R(V) = R (1 + gamma V) at the stage
    voltage. ``capacitor_dc_bias`` [1]: fraction of C lost at ``grading.capacitor_rated_voltage``
    (linear in V), or, with ``capacitor_dc_bias_curve``, the curve's loss there: the curve is
    ((V / V_rated, loss), ...) points of the maker's dc-bias curve, the loss linear between them
    from 0 at 0 V and held beyond the last. ``surface_resistance`` [ohm]: a shunt across a stage (board surface leakage),
    on each stage independently with probability ``surface_fraction`` in every built string.
    """

    enabled: bool = False
    resistor_drift: float = 0.0
    resistor_drift_mode: str = "band"
    resistor_voltage_coefficient: float = 0.0
    capacitor_dc_bias: float = 0.0
    capacitor_dc_bias_curve: tuple[tuple[float, float], ...] = ()
    surface_resistance: float | None = None
    surface_fraction: float = 1.0

    @property
    def given(self) -> bool:
        """Whether any end-of-life change is given."""
        return bool(self.resistor_drift or self.resistor_voltage_coefficient
                    or self.capacitor_dc_bias or self.surface_resistance is not None)


@dataclass(frozen=True)
class Design:
    """A whole, validated design."""

    title: str
    notes: str
    source: str
    # None for a design that gives a [circuit] instead (studies.circuit derives a duty per stack).
    duty: Duty | None
    string: StringLayout
    parts: Mapping[str, Part]
    grading: Grading
    monte_carlo: MonteCarlo
    sizing: Sizing
    thermal: Thermal
    review: Review
    # What was assumed on the user's behalf (defaults, derived rows), as findings: the report
    # says them in words (``report.wording``).
    # SHA-256 (hex) of the design file's bytes as read (of the text for a design given as text):
    # a result names the exact file it came from.
    sha256: str = ""
    assumptions: tuple[Finding, ...] = field(default=())
    faults: Faults = field(default_factory=Faults)
    reliability: Reliability = field(default_factory=Reliability)
    end_of_life: EndOfLife = field(default_factory=EndOfLife)
    circuit: Circuit | None = None

    @property
    def ambient(self) -> float:
        """The ambient temperature [degC], of the duty or of the circuit."""
        return self.duty.ambient if self.duty is not None else self.circuit.ambient

    def mix_variants(self) -> tuple["Design", ...]:
        """The mix-free designs a built string picks its devices from, device by device: the design
        itself without a mix; with a mix also the design with the mix's part in every position
        (temperature rises kept; a device placed by serial number is never substituted)."""
        layout = self.string
        plain = replace(self, string=replace(layout, mix=None))
        if layout.mix is None:
            return (plain,)
        grid = layout.part_grid()
        kept = []
        for override in layout.positions:
            if override.serial is not None:
                row = (override.branch or 1) - 1
                kept.append(replace(override, part=grid[row, override.index - 1]))
            elif override.temperature_rise is not None:
                kept.append(replace(override, part=None))
        everywhere = replace(self, string=replace(layout, part=layout.mix.part,
                                                  positions=tuple(kept), mix=None))
        return plain, everywhere

    def lot_positions(self, name: str) -> np.ndarray:
        """Mask (parallel, series) of the positions that may draw a device of part ``name`` from its
        lot: those that hold it (with a mix, in either of :meth:`mix_variants`), less those holding
        a device placed by serial number."""
        placed = self.string.placed_by_serial()
        return np.logical_or.reduce([(variant.string.part_grid() == name) & ~placed
                                     for variant in self.mix_variants()])

    def parts_used(self) -> tuple[str, ...]:
        """Names of the parts that stand in at least one position, in first-use order (with a mix,
        the parts that can stand there: see ``StringLayout.part_grids``)."""
        seen: dict[str, None] = {}
        for grid in self.string.part_grids():
            for name in grid.ravel():
                seen.setdefault(name, None)
        return tuple(seen)


# Makers test their devices at room temperature: a row at 25 degC +- this window is taken as
# screened (every device tested against its limits), a row elsewhere as guaranteed by design or
# characterisation, not tested (common practice).
SCREENING_TEMPERATURE = 25.0
SCREENING_WINDOW = 10.0


def row_screened(spread: Spread, monte_carlo: MonteCarlo) -> bool:
    """Whether the draw of ``spread`` is truncated at its limits: the row's own ``screened``; else
    the design-wide ``[monte_carlo] screened`` where the file gives it; else true for a row at
    25 degC +- 10 K (or at no stated temperature: the datasheet's) and false elsewhere."""
    if spread.screened is not None:
        return spread.screened
    if monte_carlo.screened_given:
        return monte_carlo.screened
    return row_at_test_temperature(spread)


def row_at_test_temperature(spread: Spread) -> bool:
    """A row at the makers' test temperature, 25 degC +- 10 K (no temperature: the datasheet's)."""
    return spread.at_temperature is None or \
        abs(spread.at_temperature - SCREENING_TEMPERATURE) <= SCREENING_WINDOW


# ----------------------------------------------------------------------------------------------------
# Reading


def correlation_matrix(pairs: tuple[tuple[str, str, float], ...],
                       parameters: tuple[str, ...]) -> np.ndarray:
    """The correlation matrix of ``parameters`` from the design's ``(a, b, rho)`` pairs.

    Pairs naming a parameter outside ``parameters`` are left out (that parameter is not drawn).
    """
    matrix = np.eye(len(parameters))
    for first, second, rho in pairs:
        if first in parameters and second in parameters:
            i, j = parameters.index(first), parameters.index(second)
            matrix[i, j] = matrix[j, i] = rho
    return matrix
