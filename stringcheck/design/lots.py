"""Measured lots: one part's devices as measured, read from CSV, checked and fitted.

A lot file has one row per device. Its columns are named after the part's spread parameters with the
unit in square brackets (``i_r [uA]``, ``q_rr [nC]``, ``v_t0 [V]``, ``r_t [mOhm]``, ``i_rm [A]``,
``t_rr [ns]``), and optionally ``serial`` (the device's serial number, text, unique). The Monte Carlo
then takes each device of that part from the lot, either

* ``fit = "resample"`` (default): whole rows drawn without replacement within one built string, so
  the measured correlations between a device's parameters are kept exactly, and no device stands in
  two positions of one string; or
* ``fit = "lognormal"``, ``"normal"`` or ``"auto"`` (lognormal for leakage and recovery parameters,
  normal for V_T0 and r_T, as docs/methods/monte-carlo.md): each column fitted by maximum likelihood
  (scipy.stats), joined by a Gaussian copula whose correlation is that of the lot's fitted normal
  scores, so correlations are kept there too.

This module reads the file (pandas), checks every cell, and fits; the draws are made by
:mod:`stringcheck.montecarlo.sampling`.
"""

from __future__ import annotations

import difflib
import math
import re
from dataclasses import dataclass, replace
from pathlib import Path

import numpy as np
from scipy import special, stats

from stringcheck.design.model import LOGNORMAL_PARAMETERS, SPREAD_PARAMETERS, SPREAD_UNITS, Spread
from stringcheck.errors import DesignError, QuantityError, excerpt
from stringcheck.findings import Finding, Value
from stringcheck.units import parse_quantity

FITS = ("resample", "lognormal", "normal", "auto")
# A fit from fewer devices than this says more about the fit than about the lot.
MIN_FIT_DEVICES = 10
# A lot file is a table of devices; anything larger is surely not one (and is not read).
MAX_LOT_BYTES = 64 * 1024 * 1024
SERIAL_COLUMN = "serial"
# A normal fit of a quantity that cannot be negative may put at most this fraction below zero.
_NEGATIVE_TOLERANCE = 1e-6
_HEADER = re.compile(r"^\s*([^\[\]]*?)\s*(?:\[\s*([^\[\]]*?)\s*\])?\s*$")


@dataclass(frozen=True)
class ColumnFit:
    """One measured parameter: its lot statistics and its fitted distribution.

    ``family`` is "lognormal" (``location`` = mean of ln x, ``scale`` = standard deviation of ln x,
    x in SI) or "normal" (mean and standard deviation [SI]); ``ks_p_value`` is the Kolmogorov-Smirnov
    p-value of the lot against the fit (approximate: the parameters were fitted to the same data).
    ``below`` and ``above`` count the devices outside the datasheet limits (0 where the datasheet
    gives none).
    """

    parameter: str
    family: str
    location: float
    scale: float
    ks_p_value: float
    median: float
    low: float
    high: float
    below: int
    above: int

    def quantile(self, latent: np.ndarray) -> np.ndarray:
        """The fitted distribution's value at standard-normal ``latent`` [SI]."""
        if self.family == "lognormal":
            return np.exp(self.location + self.scale * latent)
        return self.location + self.scale * latent


@dataclass(frozen=True)
class MeasuredLot:
    """A validated lot of one part.

    Attributes
    ----------
    path
        The lot file as the design names it, resolved against the design file's folder.
    fit
        One of :data:`FITS`.
    parameters
        The measured parameters, in the order of SPREAD_PARAMETERS.
    values
        Measured values [SI], shape (devices, len(parameters)).
    serials
        Serial number of each device, or None when the file has no serial column.
    columns
        Per parameter, the lot statistics and its fit (fitted even when resampling, for the report).
    scores
        Standard-normal score of each value: its fitted latent value under a fit, its rank score
        Phi^-1((rank - 1/2) / devices) when resampling; shape of ``values``.
    correlation
        Correlation matrix of the scores (the copula of a fit), (len(parameters),) * 2.
    notes
        What was derived from or left out of the file, for the report.
    """

    path: str
    fit: str
    parameters: tuple[str, ...]
    values: np.ndarray
    serials: tuple[str, ...] | None
    columns: tuple[ColumnFit, ...]
    scores: np.ndarray
    correlation: np.ndarray
    notes: tuple[Finding, ...] = ()

    @property
    def devices(self) -> int:
        """Number of devices in the lot."""
        return self.values.shape[0]

    @property
    def resampled(self) -> bool:
        """True when devices are drawn from the lot itself, False when from the fit."""
        return self.fit == "resample"

    def column(self, parameter: str) -> np.ndarray:
        """The measured values of ``parameter`` [SI], one per device."""
        return self.values[:, self.parameters.index(parameter)]

    def as_fitted(self) -> "MeasuredLot":
        """The lot drawn from its fit instead of resampled: each column's family fit (``columns``,
        fitted when the lot was read) joined by the Gaussian copula of the fitted scores, as
        ``fit = "auto"`` reads it. For estimators that need a continuous distribution (the
        importance sampler); a lot too small to fit raises :class:`DesignError`."""
        if not self.resampled:
            return self
        if self.devices < MIN_FIT_DEVICES:
            raise DesignError(f"{self.devices} device(s) are too few to fit a distribution to; "
                              f"measure at least {MIN_FIT_DEVICES}", source=self.path)
        latent = np.zeros_like(self.values)
        for i, column in enumerate(self.columns):
            if column.scale > 0:
                values = self.values[:, i]
                transformed = np.log(values) if column.family == "lognormal" else values
                latent[:, i] = (transformed - column.location) / column.scale
        return replace(self, fit="auto", scores=latent, correlation=score_correlation(latent))

    def row_of(self, serial: str) -> int | None:
        """The row of the device with ``serial``, or None."""
        if self.serials is None or serial not in self.serials:
            return None
        return self.serials.index(serial)

    def outside_limits(self, part: str) -> tuple[Finding, ...]:
        """One finding per parameter and side whose measured devices lie outside the datasheet
        limits (code ``lot.below_datasheet_min`` or ``lot.above_datasheet_max``)."""
        notes = []
        for column in self.columns:
            for count, side in ((column.below, "below_datasheet_min"),
                                (column.above, "above_datasheet_max")):
                if count:
                    notes.append(Finding(f"lot.{side}", {
                        "key": Value(f"parts.{part}"), "count": Value(count),
                        "devices": Value(self.devices), "file": Value(Path(self.path).name),
                        "parameter": Value(column.parameter)}))
        return tuple(notes)


def fit_column(values: np.ndarray, family: str) -> tuple[float, float]:
    """Maximum-likelihood fit of one measured column.

    Parameters
    ----------
    values
        Measured values [SI], at least 2, all > 0 for "lognormal".
    family
        "lognormal" or "normal".

    Returns
    -------
    (location, scale)
        Lognormal: mean and standard deviation of ln x (scipy.stats.lognorm with loc fixed at 0:
        shape s = scale, scale parameter exp(location)). Normal: mean and standard deviation
        (scipy.stats.norm.fit, the maximum-likelihood estimates, divisor n).

    References
    ----------
    Johnson, Kotz and Balakrishnan, Continuous Univariate Distributions, vol. 1, 2nd ed. (1994),
    ch. 13 (normal) and ch. 14 (lognormal): the maximum-likelihood estimates are the mean and the
    divisor-n standard deviation of x or of ln x.
    """
    values = np.asarray(values, dtype=float)
    if family == "lognormal":
        shape, _, scale = stats.lognorm.fit(values, floc=0.0)
        return float(np.log(scale)), float(shape)
    location, scale = stats.norm.fit(values)
    return float(location), float(scale)


def rank_scores(values: np.ndarray) -> np.ndarray:
    """Standard-normal rank scores Phi^-1((rank - 1/2) / n) of each column (ties share a rank).

    The normal-scores transform of rank statistics (Blom-type plotting positions with a = 1/2;
    e.g. Hajek, Sidak and Sen, Theory of Rank Tests, 2nd ed., 1999, section 4.3).
    """
    values = np.atleast_2d(np.asarray(values, dtype=float))
    ranks = stats.rankdata(values, axis=0)
    return special.ndtri((ranks - 0.5) / values.shape[0])


def score_correlation(scores: np.ndarray) -> np.ndarray:
    """The correlation matrix of the score columns, made positive definite if rounding left it not.

    A column with no variation is uncorrelated with the others.
    """
    width = scores.shape[1]
    if width == 1 or scores.shape[0] < 3:
        return np.eye(width)
    spread = scores.std(axis=0)
    matrix = np.eye(width)
    varied = spread > 0
    if np.count_nonzero(varied) > 1:
        matrix[np.ix_(varied, varied)] = np.corrcoef(scores[:, varied], rowvar=False)
    # Eigenvalues clipped to a small floor and the diagonal restored: the nearest usable copula
    # when the lot's columns are (almost) collinear.
    eigenvalues, vectors = np.linalg.eigh(matrix)
    if eigenvalues.min() < 1e-6:
        matrix = vectors @ np.diag(np.maximum(eigenvalues, 1e-6)) @ vectors.T
        scale = np.sqrt(np.diag(matrix))
        matrix = matrix / np.outer(scale, scale)
    return matrix


def family_of(parameter: str, fit: str) -> str:
    """The distribution family a ``fit`` setting gives ``parameter``."""
    if fit in ("lognormal", "normal"):
        return fit
    return "lognormal" if parameter in LOGNORMAL_PARAMETERS else "normal"


def read_lot(path: Path, *, key: str, design_source: str, fit: str,
             datasheet: dict[str, Spread | None]) -> MeasuredLot:
    """Read and validate the lot file at ``path`` (the design's ``key``, e.g. parts.B.measured).

    ``datasheet`` holds the part's datasheet spreads, to count devices outside their limits.
    Every problem is a :class:`DesignError` naming the lot file, the row and the column.
    """
    source = str(path)
    where = f"(from {design_source}: {key})"
    table, lines = _read_table(path, source, where, design_source=design_source, key=key)
    parameters, units, serial_column = _header(table.columns, source, where)
    if table.shape[0] == 0:
        raise DesignError(f"the lot is empty: a header and no devices {where}; add one row per "
                          "measured device", source=source)
    order = sorted(range(len(parameters)), key=lambda i: SPREAD_PARAMETERS.index(parameters[i]))
    values = np.empty((table.shape[0], len(parameters)))
    for out, i in enumerate(order):
        header = table.columns[_column_position(table.columns, parameters[i], serial_column)]
        values[:, out] = _numbers(table[header].to_numpy(), lines, header, parameters[i],
                                  units[i], source, where)
    parameters = tuple(parameters[i] for i in order)
    parameters, values, notes = _recovery_columns(parameters, values, source, where)
    serials = None
    if serial_column is not None:
        serials = tuple(str(s).strip() for s in table[serial_column].to_numpy())
        _check_serials(serials, lines, serial_column, source, where)
    devices = values.shape[0]
    if fit != "resample" and devices < MIN_FIT_DEVICES:
        raise DesignError(f"{devices} device(s) are too few to fit a distribution to {where}; "
                          f"measure at least {MIN_FIT_DEVICES}, or use fit = \"resample\"",
                          source=source)
    columns = []
    latent = np.empty_like(values)
    for i, parameter in enumerate(parameters):
        family = family_of(parameter, fit)
        column = values[:, i]
        if devices >= 2 and np.ptp(column) > 0:
            location, scale = fit_column(column, family)
            law = stats.lognorm(scale, scale=math.exp(location)) if family == "lognormal" else \
                stats.norm(location, scale)
            p_value = float(stats.kstest(column, law.cdf).pvalue)
        else:
            # One device, or all alike: the lot states a fixed value.
            location = math.log(column[0]) if family == "lognormal" else float(column[0])
            scale, p_value = 0.0, float("nan")
        if family == "normal" and scale > 0:
            below_zero = float(stats.norm.cdf(0.0, location, scale))
            if below_zero > _NEGATIVE_TOLERANCE:
                raise DesignError(
                    f"fit = \"{fit}\" puts {below_zero:.2g} of the {parameter} draws below zero "
                    f"(the lot's mean is {location / scale:.2g} standard deviations above 0) "
                    f"{where}; use fit = \"lognormal\" or \"auto\", or \"resample\"",
                    source=source)
        transformed = np.log(column) if family == "lognormal" else column
        latent[:, i] = (transformed - location) / scale if scale > 0 else 0.0
        spread = datasheet.get(parameter)
        below = int(np.count_nonzero(column < spread.low)) if spread and spread.low else 0
        above = int(np.count_nonzero(column > spread.high)) if spread and spread.high else 0
        columns.append(ColumnFit(parameter=parameter, family=family, location=location,
                                 scale=scale, ks_p_value=p_value, median=float(np.median(column)),
                                 low=float(column.min()), high=float(column.max()),
                                 below=below, above=above))
    scores = rank_scores(values) if fit == "resample" else latent
    return MeasuredLot(path=source, fit=fit, parameters=parameters, values=values, serials=serials,
                       columns=tuple(columns), scores=scores,
                       correlation=score_correlation(scores), notes=notes)


def _read_table(path: Path, source: str, where: str, *, design_source: str, key: str):
    """The lot's cells as text, and the file line of each row (blank lines dropped).

    At most ``MAX_LOT_BYTES`` + 1 bytes are read, whatever size the file claims (a file under
    /proc says 0 and may never end), and a binary file is refused before it is parsed.
    """
    import io

    import pandas as pd

    try:
        if not path.exists():
            raise DesignError(f"no such lot file {excerpt(source, 80)}; check the path (it is "
                              "read relative to the design file's folder)", source=design_source,
                              key=key)
        if not path.is_file():
            raise DesignError(f"{excerpt(source, 80)} is not a regular file; give a CSV file of "
                              "measured devices", source=design_source, key=key)
        too_large = path.stat().st_size > MAX_LOT_BYTES  # refused without reading it
        if not too_large:
            with path.open("rb") as stream:
                data = stream.read(MAX_LOT_BYTES + 1)
            too_large = len(data) > MAX_LOT_BYTES  # a file under /proc says 0 bytes
        if too_large:
            raise DesignError(f"is larger than {MAX_LOT_BYTES:,} bytes {where}; a lot file holds "
                              "one row per device", source=source)
        if b"\x00" in data:
            raise DesignError(f"is a binary file, not a CSV lot {where}; give the CSV file of "
                              "measured devices", source=source)
        text = data.decode("utf-8-sig")
        table = pd.read_csv(io.StringIO(text), dtype=str, keep_default_na=False,
                            skipinitialspace=True, skip_blank_lines=False)
    except DesignError:
        raise
    except pd.errors.EmptyDataError:
        raise DesignError(f"the lot file is empty {where}; it needs a header row and one row per "
                          "device", source=source) from None
    except UnicodeDecodeError:
        raise DesignError(f"is not UTF-8 text {where}; save it as UTF-8 (\"CSV UTF-8\" in a "
                          "spreadsheet)", source=source) from None
    except (pd.errors.ParserError, OSError) as error:
        # The reason as pandas or the system gives it, cut short: it may quote the file.
        reason = (str(error).splitlines() or [type(error).__name__])[0]
        raise DesignError(f"cannot be read as CSV ({excerpt(reason, 80)[1:-1]}) {where}; write "
                          "one row per device, comma-separated, with a header row",
                          source=source) from None
    if table.shape[1] == 1:
        header = str(table.columns[0])
        for separator, name in ((";", "semicolons"), ("\t", "tabs")):
            if separator in header:
                raise DesignError(f"the cells are separated by {name} {where}; save the lot as "
                                  "comma-separated CSV (decimal points, not commas)", source=source)
    # A trailing comma on every row (spreadsheet exports) leaves an unnamed, empty column.
    empty = [c for c in table.columns if str(c).startswith("Unnamed:")
             and not table[c].astype(str).str.strip().any()]
    table = table.drop(columns=empty)
    # Line numbers as an editor shows them (the header is line 1), counted before blank rows go.
    lines = np.arange(2, table.shape[0] + 2)
    blank = ~table.astype(str).apply(lambda column: column.str.strip() != "").any(axis=1).to_numpy() \
        if table.shape[1] else np.zeros(table.shape[0], dtype=bool)
    return table[~blank].reset_index(drop=True), lines[~blank]


def _recovery_columns(parameters: tuple[str, ...], values: np.ndarray, source: str, where: str):
    """A lot that measured I_RM and t_rr but not Q_rr gets Q_rr = 1/2 I_RM t_rr per device (the
    triangular recovery of :func:`stringcheck.physics.recovery.recovery_charge`); I_RM or t_rr
    alone is refused, and beside a measured Q_rr they are kept for the report only. Returns
    (parameters, values, notes)."""
    has = set(parameters)
    if not has & {"i_rm", "t_rr"}:
        return parameters, values, ()
    if "q_rr" in has:
        return parameters, values, (Finding("lot.recovery_for_reference"),)
    if not {"i_rm", "t_rr"} <= has:
        alone = "i_rm" if "i_rm" in has else "t_rr"
        raise DesignError(f"column {alone} alone is not used by any check {where}; measure q_rr, "
                          "or both i_rm and t_rr (Q_rr = 1/2 I_RM t_rr)", source=source)
    charge = 0.5 * values[:, parameters.index("i_rm")] * values[:, parameters.index("t_rr")]
    position = SPREAD_PARAMETERS.index("q_rr")
    at = sum(SPREAD_PARAMETERS.index(p) < position for p in parameters)
    return (parameters[:at] + ("q_rr",) + parameters[at:],
            np.insert(values, at, charge, axis=1),
            (Finding("lot.q_rr_derived"),))


def _header(columns, source: str, where: str) -> tuple[list[str], list, str | None]:
    parameters, units, serial = [], [], None
    for number, header in enumerate(columns, start=1):
        text = str(header)
        match = _HEADER.match(text)
        name = match.group(1).strip().lower() if match else text
        unit_text = match.group(2) if match else None
        if name == SERIAL_COLUMN:
            if serial is not None:
                raise DesignError(f"column {number} repeats 'serial' {where}; keep one serial "
                                  "column", source=source)
            serial = text
            continue
        if name not in SPREAD_UNITS:
            valid = (SERIAL_COLUMN,) + SPREAD_PARAMETERS
            close = difflib.get_close_matches(name, valid, n=1, cutoff=0.6)
            hint = f"did you mean '{close[0]}'?" if close else "valid columns: " + ", ".join(valid)
            shown = text if text.strip() and not text.startswith("Unnamed:") else "(blank)"
            raise DesignError(f"unknown column {number} {excerpt(shown)} {where}; {hint}",
                              source=source)
        if name in parameters:
            raise DesignError(f"column {number} {excerpt(text)} repeats {name} {where}; keep one "
                              "column per parameter", source=source)
        expected = SPREAD_UNITS[name]
        if not unit_text:
            raise DesignError(f"column {number} {excerpt(text)} has no unit {where}; write the "
                              f"unit in brackets, e.g. '{name} [{_example_unit(name)}]'",
                              source=source)
        try:
            factor = parse_quantity(f"1 {unit_text}", expected, key=f"column {excerpt(text)}")
        except QuantityError:
            raise DesignError(f"column {number} {excerpt(text)}: {excerpt(unit_text)} is not a "
                              f"unit of {expected.pint_unit} ({expected.label}) {where}; e.g. "
                              f"'{name} [{_example_unit(name)}]'", source=source) from None
        parameters.append(name)
        units.append(factor)
    if not parameters:
        raise DesignError(f"no measured parameter columns {where}; name columns after the part's "
                          "parameters with units, e.g. 'i_r [uA]', 'q_rr [nC]'", source=source)
    return parameters, units, serial


def _column_position(columns, parameter: str, serial: str | None) -> int:
    for position, header in enumerate(columns):
        match = _HEADER.match(str(header))
        if header != serial and match and match.group(1).strip().lower() == parameter:
            return position
    raise AssertionError(parameter)  # _header found it


def _example_unit(parameter: str) -> str:
    return {"i_r": "uA", "q_rr": "nC", "i_rm": "A", "t_rr": "ns", "v_t0": "V", "r_t": "mOhm"}[
        parameter]


def _numbers(cells: np.ndarray, lines: np.ndarray, header: str, parameter: str, factor: float,
             source: str, where: str) -> np.ndarray:
    out = np.empty(cells.shape[0])
    for row, cell in enumerate(cells):
        line = int(lines[row])
        text = str(cell).strip()
        column = f"line {line}, column {excerpt(header)}"
        try:
            number = float(text)
        except ValueError:
            shown = "an empty cell" if not text else excerpt(text)
            raise DesignError(f"{column}: {shown} is not a number {where}; "
                              "every measured cell must be a number in the column's unit",
                              source=source) from None
        if not math.isfinite(number):
            raise DesignError(f"{column}: {excerpt(text)} is not a finite number "
                              f"{where}; leave out a device that was not measured", source=source)
        value = number * factor
        if parameter in LOGNORMAL_PARAMETERS and value <= 0:
            raise DesignError(f"{column}: {excerpt(text)} must be greater than zero "
                              f"{where}", source=source)
        if parameter not in LOGNORMAL_PARAMETERS and value < 0:
            raise DesignError(f"{column}: {excerpt(text)} must not be negative "
                              f"{where}", source=source)
        out[row] = value
    return out


def _check_serials(serials: tuple[str, ...], lines: np.ndarray, header: str, source: str,
                   where: str) -> None:
    seen: dict[str, int] = {}
    for row, serial in enumerate(serials):
        line = int(lines[row])
        if not serial:
            raise DesignError(f"line {line}, column {excerpt(header)}: empty serial number "
                              f"{where}; give every device its serial, or drop the column",
                              source=source)
        if serial in seen:
            raise DesignError(f"line {line}, column {excerpt(header)}: serial {excerpt(serial)} "
                              f"repeats line {seen[serial]} {where}; serial numbers must be unique",
                              source=source)
        seen[serial] = line
