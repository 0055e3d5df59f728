"""Static voltage sharing of a series diode string in the blocking state.

Each stage of the string is a diode with its grading resistor in parallel. In steady blocking the
same string current I flows through every stage, split between the resistor (G_k V_k) and the
reverse leakage of the diode (c_k V_k^m_k). The stage voltages must add up to the string voltage.
A device with low leakage takes more than its share of the voltage; the grading resistors
limit that imbalance.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

__all__ = ["StaticSharing", "solve_static_sharing", "stage_voltage"]

_STALL_RTOL = 1e-9
_EPSILON = np.finfo(float).eps
_INNER_MAX_ITERATIONS = 100


@dataclass(frozen=True)
class StaticSharing:
    """Stage voltages of a series string in steady blocking.

    Attributes
    ----------
    voltages
        Reverse voltage of each stage V_k [V], shape ``(..., n)``, summing to the string voltage
        along the last axis.
    string_current
        Current I through every stage (resistor plus leakage) [A], shape ``...``.
    converged
        Whether the solution of each row met the tolerance, shape ``...`` (bool). For the closed
        form (all exponents 0) true wherever the voltages are finite.
    iterations
        Number of outer iterations used for the slowest row (0 for the closed form).
    """

    voltages: NDArray[np.float64]
    string_current: NDArray[np.float64]
    converged: NDArray[np.bool_]
    iterations: int


def stage_voltage(
    string_current: ArrayLike,
    conductance: ArrayLike,
    leakage_current: ArrayLike,
    *,
    reference_voltage: ArrayLike,
    voltage_exponent: ArrayLike,
) -> NDArray[np.float64]:
    """Voltage across one stage (diode with its grading resistor) that carries a given current.

    Inverts I = G V + c V^m with c = I_R / V_ref^m.

    Parameters
    ----------
    string_current
        Current through the stage I [A], >= 0.
    conductance
        Conductance of the grading resistor G = 1 / R [S], >= 0 (0: no resistor); must be > 0
        where the exponent is 0.
    leakage_current
        Leakage current I_R of the diode at ``reference_voltage`` (and at the operating junction
        temperature) [A], >= 0.
    reference_voltage
        Reverse voltage at which ``leakage_current`` is given V_ref [V], > 0.
    voltage_exponent
        Exponent m of the leakage voltage law [-], in [0, 1].

    Returns
    -------
    numpy.ndarray
        Stage voltage V [V], broadcast shape of the inputs. Where m = 0 this is (I - c) / G, which
        is negative when the leakage exceeds the current.

    Notes
    -----
    m = 0 and m = 1 are linear and solved in closed form. For 0 < m < 1 the equation is solved
    by Newton's method in u = ln V on g(u) = G e^u + c e^{m u} - I, a convex increasing function
    of u. Newton's method started to the right of the root of a convex increasing function
    converges monotonically, and V_0 = min(I / G, (I / c)^{1/m}) is such a start because either
    term alone reaches I there.

    References
    ----------
    .. [1] W. H. Press, S. A. Teukolsky, W. T. Vetterling and B. P. Flannery, *Numerical Recipes:
       The Art of Scientific Computing*, 3rd ed., Cambridge University Press, 2007, section 9.4
       (Newton-Raphson method using derivative).
    .. [2] S. M. Sze and K. K. Ng, *Physics of Semiconductor Devices*, 3rd ed., Wiley, 2007,
       chapter 2 (p-n junctions): generation current ~ depletion width ~ V^(1/2).
    """
    current = np.asarray(string_current, dtype=float)
    conductance = np.asarray(conductance, dtype=float)
    exponent = np.asarray(voltage_exponent, dtype=float)
    coefficient = np.asarray(leakage_current, dtype=float) / np.power(
        np.asarray(reference_voltage, dtype=float), exponent
    )
    shape = np.broadcast_shapes(current.shape, conductance.shape, coefficient.shape, exponent.shape)
    return _stage_voltage(
        np.broadcast_to(current, shape),
        np.broadcast_to(conductance, shape),
        np.broadcast_to(coefficient, shape),
        np.broadcast_to(exponent, shape),
    )


def solve_static_sharing(
    string_voltage: ArrayLike,
    conductance: ArrayLike,
    leakage_current: ArrayLike,
    *,
    reference_voltage: ArrayLike,
    voltage_exponent: ArrayLike,
    rtol: float = 1e-12,
    max_iter: int = 200,
) -> StaticSharing:
    """Share the string voltage among series stages with grading resistors and leaky diodes.

    Parameters
    ----------
    string_voltage
        Reverse voltage across the whole string V_s [V], > 0; a scalar or shape ``...``.
    conductance
        Conductance of each stage's grading resistor G_k = 1 / R_k [S], shape ``(..., n)`` or
        broadcastable to the other per-stage inputs, >= 0 (0: no resistor). Must be > 0 on every
        stage whose exponent is 0.
    leakage_current
        Leakage current of each diode I_R,k at ``reference_voltage`` and at the operating
        junction temperature (already scaled for temperature) [A], >= 0, shape ``(..., n)``.
    reference_voltage
        Reverse voltage at which ``leakage_current`` is given V_ref,k [V], > 0, broadcastable to
        ``(..., n)``.
    voltage_exponent
        Exponent m_k of the leakage voltage law [-], in [0, 1], broadcastable to ``(..., n)``;
        stages of different parts may differ.
    rtol
        Tolerance on the string equation: a row is solved when |sum_k V_k - V_s| <= rtol V_s.
    max_iter
        Largest number of outer iterations.

    Returns
    -------
    StaticSharing
        Stage voltages ``(..., n)`` [V], string current ``...`` [A], convergence flags ``...``
        and the number of iterations.

    Notes
    -----
    Each stage k carries the common string current I:

    .. math::

        G_k V_k + c_k V_k^{m_k} = I, \\qquad c_k = I_{R,k} / V_{\\mathrm{ref},k}^{m_k},
        \\qquad \\sum_k V_k = V_s

    *All exponents 0* (constant leakage) is linear and solved in closed form:

    .. math:: I = \\frac{V_s + \\sum_k c_k / G_k}{\\sum_k 1 / G_k}, \\qquad V_k = (I - c_k) / G_k

    The constant-current model can give V_k < 0 when one stage's leakage exceeds the string
    current; a real diode cannot sustain its leakage without reverse voltage, so such a result
    means the grading resistors are too large to set the sharing and the constant-leakage model
    no longer applies (use m > 0).

    *Otherwise* each stage inverse V_k(I) (:func:`stage_voltage`) is increasing (and convex in
    I), so the string equation has one root per row. It is bracketed by
    I_hi = sum_k I_k(V_s), where every stage would take at least V_s, and
    I_lo = 1 / sum_k (1 / I_k(V_s)), with I_k(V) = G_k V + c_k V^{m_k}: each I_k is concave in V,
    so on [0, V_s] it lies above its chord from the origin, and at I_lo the stages take at most
    V_s together. Newton's method starts where the tangents of the stage laws at V_s / n take V_s
    together (a linear equation in I, exact for m = 0 and m = 1); a concave law lies below its
    tangent, so that start is at or above the root, and close to it where the resistors carry most
    of the current (two Newton steps then reach 1e-12 on the benchmark stack). Newton runs in
    logarithmic coordinates, on ln(sum_k V_k) - ln V_s as a function of ln I: a pure power law
    V ~ I^{1/m} becomes a straight line there (solved in one step however far the start), and its
    slope is at least 1 (at most 1 / min m where every stage has m > 0); Newton in I itself would
    creep in from the right at a rate 1 - m. A step that would leave the bracket, or cannot be
    evaluated, is replaced by bisection of the bracket in ln I; the bracket shrinks with every
    evaluation. All rows iterate together under a mask of the unconverged ones. A row is also
    taken as converged when the Newton step falls below the floating-point resolution of I (the
    best answer a double can represent). Stages without a resistor and with a tiny exponent
    (V ~ I^{1/m} beyond the range of a double) cannot be solved and return ``converged = False``.
    Where every exponent is 1/2 (the default) the stage law is a quadratic in V^{1/2}, and each
    evaluation of the stage voltages and of their slope dV_k/dI costs one square root per stage.

    For n equal resistors R, one device at the minimum leakage and n - 1 at a leakage larger by
    dI_R (m = 0), the low-leakage device takes V_DM when

    .. math:: R = (n V_{DM} - V_s) / ((n - 1) \\, \\Delta I_R)

    the textbook worst-case rule for static equalisation [1]_.

    References
    ----------
    .. [1] M. H. Rashid, *Power Electronics: Circuits, Devices and Applications*, 3rd ed.,
       Pearson Prentice Hall, 2004, chapter 2 (power semiconductor diodes), series-connected
       diodes: steady-state voltage sharing with shunt resistors.
    .. [2] W. H. Press, S. A. Teukolsky, W. T. Vetterling and B. P. Flannery, *Numerical Recipes:
       The Art of Scientific Computing*, 3rd ed., Cambridge University Press, 2007, section 9.4
       (Newton-Raphson method using derivative; safeguarded with bisection).
    """
    voltage = np.asarray(string_voltage, dtype=float)
    conductance = np.asarray(conductance, dtype=float)
    leakage = np.asarray(leakage_current, dtype=float)
    reference = np.asarray(reference_voltage, dtype=float)
    exponent = np.asarray(voltage_exponent, dtype=float)

    stage_shape = np.broadcast_shapes(
        conductance.shape, leakage.shape, reference.shape, exponent.shape
    )
    count = stage_shape[-1]
    leading = np.broadcast_shapes(stage_shape[:-1], voltage.shape)
    rows = int(np.prod(leading, dtype=int))

    def per_stage(array: NDArray[np.float64]) -> NDArray[np.float64]:
        return np.broadcast_to(array, leading + (count,)).reshape(rows, count)

    conductance = per_stage(conductance)
    # V_ref^m before broadcasting: usually one value per position, not per trial.
    coefficient = per_stage(leakage / np.power(reference, exponent))
    constant = bool(np.all(exponent == 0.0))
    square_root = bool(np.all(exponent == 0.5))
    exponent = per_stage(exponent)
    voltage = np.broadcast_to(voltage, leading).reshape(rows)

    if constant:
        voltages, current = _constant_leakage(voltage, conductance, coefficient)
        converged = np.isfinite(voltages).all(axis=-1)
        iterations = 0
    else:
        voltages, current, converged, iterations = _iterate(
            voltage, conductance, coefficient, exponent, square_root=square_root, rtol=rtol,
            max_iter=max_iter,
        )
    return StaticSharing(
        voltages=voltages.reshape(leading + (count,)),
        string_current=current.reshape(leading),
        converged=converged.reshape(leading),
        iterations=iterations,
    )


def _constant_leakage(
    voltage: NDArray[np.float64],
    conductance: NDArray[np.float64],
    coefficient: NDArray[np.float64],
) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Closed form for m = 0 on every stage; rows on axis 0, stages on axis 1."""
    with np.errstate(divide="ignore"):
        resistance = 1.0 / conductance
    current = (voltage + np.sum(coefficient * resistance, axis=-1)) / np.sum(resistance, axis=-1)
    return resistance * (current[:, None] - coefficient), current


def _iterate(
    voltage: NDArray[np.float64],
    conductance: NDArray[np.float64],
    coefficient: NDArray[np.float64],
    exponent: NDArray[np.float64],
    *,
    square_root: bool,
    rtol: float,
    max_iter: int,
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.bool_], int]:
    """Safeguarded Newton on ln sum_k V_k(I) = ln V_s in ln I, all rows at once; rows on axis 0."""
    count = conductance.shape[-1]
    total_rows = conductance.shape[0]
    if square_root:
        stages: _SquareRootStages | _PowerLawStages = _SquareRootStages(conductance, coefficient)
    else:
        stages = _PowerLawStages(conductance, coefficient, exponent)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        upper, lower, start = stages.bracket_and_start(voltage, count)
    current = np.where((start >= lower) & (start <= upper), start, upper)
    voltages, slope = stages.evaluate(current, slice(None))
    residual = _row_sum(voltages) - voltage
    converged = np.abs(residual) <= rtol * voltage
    active = ~converged & np.isfinite(residual) & (lower > 0.0)
    iterations = 0

    for iteration in range(1, max_iter + 1):
        rows = np.flatnonzero(active)
        if rows.size == 0:
            break
        iterations = iteration
        # While every row iterates, work on the arrays themselves instead of gathered copies.
        index: NDArray[np.intp] | slice = slice(None) if rows.size == total_rows else rows
        row_current = current[index]
        row_sum = voltage[index] + residual[index]
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            # Newton step in s = ln I on ln(sum V) - ln V_s, whose slope I S' / sum V lies in
            # [1, 1 / min m] for stages with a resistor or a power law: power laws become lines.
            log_step = np.log1p(residual[index] / voltage[index]) / (
                row_current * slope[index] / row_sum
            )
            candidate = row_current * np.exp(-log_step)
        stalled = np.abs(log_step) <= 4.0 * _EPSILON
        inside = (candidate >= lower[index]) & (candidate <= upper[index])
        candidate = np.where(inside, candidate, np.sqrt(lower[index] * upper[index]))
        candidate = np.where(stalled, row_current, candidate)

        new_voltages, new_slope = stages.evaluate(candidate, index)
        new_residual = _row_sum(new_voltages) - voltage[index]
        current[index] = candidate
        if isinstance(index, slice):
            voltages = new_voltages
        else:
            voltages[index] = new_voltages
        slope[index] = new_slope
        residual[index] = new_residual
        upper[index] = np.where(new_residual >= 0.0, candidate, upper[index])
        lower[index] = np.where(new_residual <= 0.0, candidate, lower[index])
        within = np.abs(new_residual) <= rtol * voltage[index]
        # A stalled step ends the iteration, but it is a solution only if Kirchhoff holds to the
        # 1e-9 the check promises (V ~ I^(1/m) can leave the range of a double first).
        settled = stalled & (np.abs(new_residual) <= max(rtol, _STALL_RTOL) * voltage[index])
        done = stalled | within
        converged[index] = within | settled
        active[index] = ~done & ~np.isnan(new_residual)
    return voltages, current, converged, iterations


def _row_sum(values: NDArray[np.float64]) -> NDArray[np.float64]:
    """Sum over the stages (last axis); einsum's loop is several times faster than ``sum`` on
    short rows, single-threaded, and differs from it only in the order of the additions."""
    return np.einsum("ij->i", values)


def _bracket_and_start(
    at_string: NDArray[np.float64],
    offset: NDArray[np.float64],
    inverse_slope: NDArray[np.float64],
    voltage: NDArray[np.float64],
) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
    """Bracket and start of the string current from the stage currents at V_s and the tangents
    I = a_k + b_k V of the stage laws at V_s / n (given as a_k and 1 / b_k); arrays are reused.

    At sum_k I_k(V_s) every stage takes at least V_s. Each I_k(V) is concave, so on [0, V_s] it
    lies above its chord from the origin, and at 1 / sum_k (1 / I_k(V_s)) the stages take at most
    V_s together; and it lies below its tangent, so where the tangents take V_s together,
    I = (V_s + sum_k a_k / b_k) / sum_k (1 / b_k), the stages take at least V_s.
    """
    upper = _row_sum(at_string)
    lower = 1.0 / _row_sum(np.divide(1.0, at_string, out=at_string))
    start = (voltage + _row_sum(np.multiply(offset, inverse_slope, out=offset))) / _row_sum(
        inverse_slope
    )
    return upper, lower, start


class _SquareRootStages:
    """Every stage with m = 1/2: the stage law is a quadratic in x = V^(1/2) (closed form).

    G x^2 + c x = I has the positive root x = 2 I / (c + s), s = sqrt(c^2 + 4 G I), written
    without cancellation, and since 2 G x + c = s the slope is dV/dI = 2 x dx/dI = 2 x / s:
    voltage and slope cost one square root per stage.
    """

    def __init__(self, conductance: NDArray[np.float64], coefficient: NDArray[np.float64]):
        self.conductance = conductance
        self.coefficient = coefficient
        self.coefficient_squared = coefficient * coefficient

    def bracket_and_start(
        self, voltage: NDArray[np.float64], count: int
    ) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
        """Bounds of the string current and the start (:func:`_bracket_and_start`)."""
        at_string = self.coefficient * np.sqrt(voltage)[:, None]
        at_string += self.conductance * voltage[:, None]
        # The tangent of G V + c V^(1/2) at V_t: a = c V_t^(1/2) / 2, b = G + c / (2 V_t^(1/2)).
        root = np.sqrt(voltage / count)[:, None]
        inverse_slope = self.coefficient * (0.5 / root)
        inverse_slope += self.conductance
        np.divide(1.0, inverse_slope, out=inverse_slope)
        offset = self.coefficient * (0.5 * root)
        return _bracket_and_start(at_string, offset, inverse_slope, voltage)

    def evaluate(
        self, current: NDArray[np.float64], rows: NDArray[np.intp] | slice
    ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """Stage voltages of the given rows at one current per row, and dS/dI = sum_k dV_k/dI."""
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            root = self.conductance[rows] * (4.0 * current)[:, None]
            root += self.coefficient_squared[rows]
            np.sqrt(root, out=root)
            x = self.coefficient[rows] + root
            np.divide((2.0 * current)[:, None], x, out=x)
            slope = 2.0 * _row_sum(np.divide(x, root, out=root))
            np.square(x, out=x)
        return x, slope


class _PowerLawStages:
    """Stages with any exponents in [0, 1] (the general inverse, :func:`_stage_voltage`)."""

    def __init__(
        self,
        conductance: NDArray[np.float64],
        coefficient: NDArray[np.float64],
        exponent: NDArray[np.float64],
    ):
        self.conductance = conductance
        self.coefficient = coefficient
        self.exponent = exponent

    def bracket_and_start(
        self, voltage: NDArray[np.float64], count: int
    ) -> tuple[NDArray[np.float64], NDArray[np.float64], NDArray[np.float64]]:
        """Bounds of the string current and the start (:func:`_bracket_and_start`)."""
        at_string = _stage_current(voltage[:, None], self.conductance, self.coefficient,
                                   self.exponent)
        tangent_voltage = (voltage / count)[:, None]
        leak = self.coefficient * np.power(tangent_voltage, self.exponent)
        inverse_slope = 1.0 / (self.conductance + self.exponent * leak / tangent_voltage)
        return _bracket_and_start(at_string, (1.0 - self.exponent) * leak, inverse_slope, voltage)

    def evaluate(
        self, current: NDArray[np.float64], rows: NDArray[np.intp] | slice
    ) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
        """Stage voltages of the given rows at one current per row, and dS/dI = sum_k dV_k/dI."""
        conductance, coefficient = self.conductance[rows], self.coefficient[rows]
        exponent = self.exponent[rows]
        voltages = _stage_voltage(current[:, None], conductance, coefficient, exponent)
        slope = _row_sum(_stage_slope(voltages, conductance, coefficient, exponent))
        return voltages, slope


def _stage_current(
    voltages: NDArray[np.float64],
    conductance: NDArray[np.float64],
    coefficient: NDArray[np.float64],
    exponent: NDArray[np.float64],
) -> NDArray[np.float64]:
    """Current of each stage at a given voltage, G V + c V^m."""
    return conductance * voltages + coefficient * np.power(voltages, exponent)


def _stage_slope(
    voltages: NDArray[np.float64],
    conductance: NDArray[np.float64],
    coefficient: NDArray[np.float64],
    exponent: NDArray[np.float64],
) -> NDArray[np.float64]:
    """dV/dI of each stage, 1 / (G + m c V^(m-1)); 0 at V = 0 when 0 < m < 1."""
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        leakage_slope = np.where(
            exponent == 0.0, 0.0, exponent * coefficient * np.power(voltages, exponent - 1.0)
        )
        return 1.0 / (conductance + leakage_slope)


def _stage_voltage(
    current: NDArray[np.float64],
    conductance: NDArray[np.float64],
    coefficient: NDArray[np.float64],
    exponent: NDArray[np.float64],
) -> NDArray[np.float64]:
    """Inverse of I = G V + c V^m elementwise (inputs broadcast against each other)."""
    current, conductance, coefficient, exponent = np.broadcast_arrays(
        current, conductance, coefficient, exponent
    )
    with np.errstate(divide="ignore", invalid="ignore"):
        result = np.where(
            exponent == 0.0,
            (current - coefficient) / conductance,
            current / (conductance + coefficient),
        )
    # m = 1/2 (generation current, the default) is a quadratic in sqrt(V): G x^2 + c x - I = 0,
    # whose positive root, in the cancellation-free form x = 2 I / (c + sqrt(c^2 + 4 G I)), is exact.
    square_root_law = exponent == 0.5
    if np.any(square_root_law):
        i, g, c = current[square_root_law], conductance[square_root_law], coefficient[square_root_law]
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            root = 2.0 * i / (c + np.sqrt(c * c + 4.0 * g * i))
        result[square_root_law] = root * root
    power_law = ~((exponent == 0.0) | (exponent == 1.0) | square_root_law)
    if np.any(power_law):
        result[power_law] = _power_law_inverse(
            current[power_law], conductance[power_law], coefficient[power_law], exponent[power_law]
        )
    return result


def _power_law_inverse(
    current: NDArray[np.float64],
    conductance: NDArray[np.float64],
    coefficient: NDArray[np.float64],
    exponent: NDArray[np.float64],
) -> NDArray[np.float64]:
    """Newton in u = ln V on G e^u + c e^(m u) = I for 0 < m < 1 (1-D arrays)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        log_current = np.log(current)
        log_voltage = np.minimum(
            log_current - np.log(conductance), (log_current - np.log(coefficient)) / exponent
        )
    # I = 0 gives u = -inf (V = 0), exactly the root; NaN stays NaN.
    active = np.flatnonzero(np.isfinite(log_voltage))
    for _ in range(_INNER_MAX_ITERATIONS):
        if active.size == 0:
            break
        u = log_voltage[active]
        with np.errstate(over="ignore", invalid="ignore"):
            # G = 0 (no resistor) must stay 0 even where e^u overflows.
            resistor_part = np.where(
                conductance[active] == 0.0, 0.0, conductance[active] * np.exp(u)
            )
            leakage_part = coefficient[active] * np.exp(exponent[active] * u)
            step = (resistor_part + leakage_part - current[active]) / (
                resistor_part + exponent[active] * leakage_part
            )
        moving = step > 4.0 * _EPSILON * np.maximum(1.0, np.abs(u))
        # Monotone from the right: the step is positive until rounding takes over.
        log_voltage[active[moving]] = u[moving] - step[moving]
        active = active[moving]
    with np.errstate(over="ignore"):
        return np.exp(log_voltage)
