"""Recovery charge at the application's conditions, through the fitted charge-control model.

A datasheet gives Q_rr at its own test forward current and di/dt. Each part's charge-control
parameters (tau, T_M; ``physics.charge_control``) are fitted to its typical Q_rr and I_RM (or t_rr)
there; a device's drawn Q_rr then maps onto its own tau at the fixed T_M, and the model, driven by
the duty's forward current up to the current zero (``physics.charge_control_history``: a dc current,
a square pulse held for half a period, a half-sine pulse falling along its sine), gives its Q_rr
at the application's turn-off (:func:`turn_off_current`) and commutation slope
(:func:`commutation_slope`: ``duty.di_dt``, else V_s / ``duty.stray_inductance``, else the
waveform's natural slope omega I_pk). The map is
monotone, so it is evaluated exactly on a grid of drawn values per part and interpolated in log-log
coordinates (relative error below 1e-6; tests/checks/test_recovery_conditions.py).
:func:`carried_charges` gives every check that needs the recovery charge of a drawn device (the
dynamic check's charge balance, the thermal check's recovery loss) the same value.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace

import numpy as np

from stringcheck.findings import Finding, Value
from stringcheck.design.model import Design
from stringcheck.montecarlo.sampling import DrawnStrings
from stringcheck.montecarlo.quantile_maps import spread_quantile
from stringcheck.physics.charge_control_fit import (
    fit_charge_control,
    peak_current_from_recovery_time,
)
from stringcheck.physics.charge_control_history import (
    carry_recovery_charge,
    equivalent_steady_current,
    zero_crossing_charge,
)
from stringcheck.physics.waveforms import (
    SINE_PULSES,
    forward_peak_factor,
    natural_commutation_slope,
)
from stringcheck.montecarlo.mixed_stock import device_part_grid

_GRID_POINTS = 513
_LATENT_SPAN = 9.0


@dataclass(frozen=True)
class PartFit:
    """T_M [s] fitted to a part's typical recovery, and its test I_F [A] and di/dt [A/s];
    ``lifetime`` is the typical device's tau [s]."""

    transit_time: float
    test_current: float
    test_rate: float
    lifetime: float = math.nan


class InconsistentRecoveryData(ValueError):
    """A part's typical Q_rr, I_RM / t_rr and test di/dt admit no recovery waveform."""


def part_fits(design: Design) -> dict[str, PartFit]:
    """Fit every part used; raises InconsistentRecoveryData (with the part name) when one cannot."""
    fits = {}
    for name in design.parts_used():
        part = design.parts[name]
        test_rate = part.q_rr.at_di_dt
        # No test I_F on the datasheet row: the charge is taken as given at the current each
        # branch turns off from (no rescaling in current; the report says so). The group's total
        # forward current would scale it down by the number of branches on no datasheet basis.
        test_current = part.q_rr.at_forward_current or _duty_turn_off(design).current
        if part.i_rm is not None:
            peak = part.i_rm.typ
        else:
            peak = float(peak_current_from_recovery_time(part.q_rr.typ, part.t_rr.typ, test_rate))
        fit = fit_charge_control(part.q_rr.typ, peak, test_current, test_rate)
        transit = float(fit.transit_time)
        if not math.isfinite(transit):
            raise InconsistentRecoveryData(name)
        fits[name] = PartFit(transit_time=transit, test_current=test_current, test_rate=test_rate,
                             lifetime=float(fit.lifetime))
    return fits


def missing_recovery_finding(design: Design) -> Finding | None:
    """What the model needs and a part does not give (None when every part gives it), as a
    finding (``recovery_data.*``) naming the part: the transient check's reason not to run.
    The recovery-rescaling note names it as its cause."""
    for name in design.parts_used():
        part = design.parts[name]
        code = None
        if part.q_rr is None:
            code = "recovery_data.no_charge"
        elif part.i_rm is None and part.t_rr is None:
            code = "recovery_data.no_peak_or_time"
        elif part.q_rr.at_di_dt is None:
            code = "recovery_data.no_test_di_dt"
        elif part.i_rm is None and part.t_rr.at_di_dt not in (None, part.q_rr.at_di_dt):
            code = "recovery_data.test_di_dt_differ"
        elif part.q_rr.at_forward_current is None and design.duty.forward_current is None:
            code = "recovery_data.no_test_current"
        if code is not None:
            return Finding(code, {"part": Value(name)})
    return None


# Where the turn-off current comes from (TurnOffCurrent.basis).
TURN_OFF_DC = "dc"
TURN_OFF_SQUARE_PEAK = "square_peak"
TURN_OFF_HALF_SINE_HISTORY = "half_sine_history"
TURN_OFF_HALF_SINE_CREST = "half_sine_crest"
TURN_OFF_TEST_CURRENT = "test_current"

# Which setting decided the commutation slope (CommutationSlope.source).
SLOPE_DI_DT = "di_dt"
SLOPE_STRAY_INDUCTANCE = "stray_inductance"
SLOPE_NATURAL = "natural"


@dataclass(frozen=True)
class CommutationSlope:
    """The rate |di/dt| [A/s] at which a branch's current falls through zero at turn-off.

    Attributes
    ----------
    di_dt
        The slope [A/s]; NaN where none is known (a dc or square duty with neither
        ``duty.di_dt`` nor ``duty.stray_inductance``).
    source
        ``"di_dt"`` (``duty.di_dt``), ``"stray_inductance"`` (V_s / ``duty.stray_inductance``),
        ``"natural"`` (the half-sine pulse's own slope at its zero, omega I_pk) or ``""``.
    natural
        The waveform's natural slope omega I_pk per branch [A/s]
        (``physics.waveforms.natural_commutation_slope``); NaN for dc and square or without
        ``duty.frequency`` and ``duty.forward_current``.
    """

    di_dt: float
    source: str
    natural: float


def commutation_slope(design: Design) -> CommutationSlope:
    """The commutation slope of the duty: ``duty.di_dt`` where given, else V_s /
    ``duty.stray_inductance``, else the waveform's natural slope; and which decided."""
    duty = design.duty
    natural = math.nan
    if duty.frequency is not None and duty.forward_current is not None:
        natural = float(natural_commutation_slope(duty.forward_current / design.string.parallel,
                                                  duty.frequency, duty.waveform))
    if duty.di_dt is not None:
        return CommutationSlope(float(duty.di_dt), SLOPE_DI_DT, natural)
    if duty.stray_inductance:
        return CommutationSlope(duty.reverse_voltage / duty.stray_inductance,
                                SLOPE_STRAY_INDUCTANCE, natural)
    if math.isfinite(natural) and natural > 0:
        return CommutationSlope(natural, SLOPE_NATURAL, natural)
    return CommutationSlope(math.nan, "", natural)


@dataclass(frozen=True)
class CarriedRecovery:
    """One part's recovery charge at the datasheet's test and at the application's turn-off.

    Attributes
    ----------
    part
        The part's name.
    datasheet_typ, datasheet_limit
        Q_rr typ and max as given (limit None where the datasheet gives none) [C], at
        ``test_current`` [A] and ``test_di_dt`` [A/s].
    carried_typ, carried_limit
        The same devices' Q_rr at the application's turn-off [C], through the charge-control
        model driven by the duty's current (the values the dynamic and thermal checks take).
    """

    part: str
    datasheet_typ: float
    datasheet_limit: float | None
    test_current: float
    test_di_dt: float
    carried_typ: float
    carried_limit: float | None


@dataclass(frozen=True)
class TurnOffCurrent:
    """The forward current a branch commutates from at turn-off.

    Attributes
    ----------
    current
        I_F per branch at the start of the turn-off [A]: the steady current (dc), the pulse
        height (square) or the crest of the half-sine pulse whose fall along the sine the model
        follows (half-sine, offset-sine).
    basis
        Where it comes from: ``"dc"`` (the constant I_F(AV) / parallel), ``"square_peak"`` (a
        square wave turns off from its peak, I_pk = 2 I_F(AV) / parallel, held for half a
        period), ``"half_sine_history"`` (a half-sine pulse of crest I_pk = pi I_F(AV) /
        parallel, the stored charge followed along the sine to its zero), ``"half_sine_crest"``
        (the same crest taken as steady before the fall, an upper bound, where no
        ``duty.frequency`` gives the sine's duration) or ``"test_current"``
        (no duty.forward_current: the parts' highest test I_F, steady).
    di_dt, di_dt_source, natural_di_dt
        The commutation slope [A/s], which setting decided it and the waveform's natural slope
        [A/s] (:class:`CommutationSlope`; NaN / "" where unknown).
    steady_equivalent
        The steady current [A] whose fall at ``di_dt`` leaves the typical device the same stored
        charge at the zero as the waveform does (the largest over the parts): the start of the
        simulated turn-off (``checks.transient``), which begins in a steady state.
    parts
        Per part, Q_rr at the test and carried (:class:`CarriedRecovery`; empty where Q_rr is
        not carried).
    """

    current: float
    basis: str
    di_dt: float = math.nan
    di_dt_source: str = ""
    natural_di_dt: float = math.nan
    steady_equivalent: float = math.nan
    parts: tuple[CarriedRecovery, ...] = ()


def _history(design: Design, basis: str) -> tuple[str, float]:
    """The waveform and frequency [Hz] the stored charge is followed over."""
    frequency = design.duty.frequency if design.duty.frequency is not None else math.inf
    if basis == TURN_OFF_HALF_SINE_HISTORY:
        return "half-sine", frequency
    if basis == TURN_OFF_SQUARE_PEAK:
        return "square", frequency
    return "dc", math.inf


def turn_off_current(design: Design, fits: dict[str, PartFit]) -> TurnOffCurrent:
    """The current each branch commutates from, the same for every check that carries Q_rr
    (dynamic, thermal) or simulates the turn-off (transient); ``fits`` from :func:`part_fits`."""
    if design.duty.forward_current is None:
        base = TurnOffCurrent(current=max(fit.test_current for fit in fits.values()),
                              basis=TURN_OFF_TEST_CURRENT)
    else:
        base = _duty_turn_off(design)
    slope = commutation_slope(design)
    steady = math.nan
    if math.isfinite(slope.di_dt) and fits:
        waveform, frequency = _history(design, base.basis)
        lifetimes = np.array([fit.lifetime for fit in fits.values()])
        stored = zero_crossing_charge(lifetimes, base.current, slope.di_dt, waveform,
                                      frequency=frequency)
        equivalent = equivalent_steady_current(stored, lifetimes, slope.di_dt)
        # No steady current falling at di_dt stores that much: start from the crest.
        equivalent = np.where(np.isfinite(equivalent), equivalent, base.current)
        steady = float(np.max(equivalent)) if base.basis in (
            TURN_OFF_HALF_SINE_HISTORY, TURN_OFF_SQUARE_PEAK) else base.current
    return TurnOffCurrent(current=base.current, basis=base.basis, di_dt=slope.di_dt,
                          di_dt_source=slope.source, natural_di_dt=slope.natural,
                          steady_equivalent=steady)


def _duty_turn_off(design: Design) -> TurnOffCurrent:
    """The turn-off current of the duty's forward current (which must be given), per branch."""
    duty = design.duty
    per_branch = duty.forward_current / design.string.parallel
    if duty.waveform == "square":
        # I_pk = 2 I_AV flows until the commutation (physics.waveforms.forward_peak_factor).
        return TurnOffCurrent(current=per_branch * forward_peak_factor("square"),
                              basis=TURN_OFF_SQUARE_PEAK)
    if duty.waveform in SINE_PULSES:
        return TurnOffCurrent(current=per_branch * forward_peak_factor(duty.waveform),
                              basis=TURN_OFF_HALF_SINE_HISTORY if duty.frequency is not None
                              else TURN_OFF_HALF_SINE_CREST)
    return TurnOffCurrent(current=per_branch, basis=TURN_OFF_DC)


@dataclass(frozen=True)
class RecoveryRescaling:
    """How to carry each part's drawn Q_rr to the application (I_F per branch [A], di/dt [A/s]).

    ``nodes`` and ``mapped`` hold, per part, the exact map on a fixed log-spaced grid spanning
    every value the sampler can draw (latent values within +-9); they depend on the design only,
    so the result is the same for any chunking of the trials. ``waveform`` and ``frequency``
    [Hz] are the history the stored charge is followed over (``physics.charge_control_history``).
    """

    fits: dict[str, PartFit]
    forward_current: float
    di_dt: float
    nodes: dict[str, np.ndarray]
    mapped: dict[str, np.ndarray]
    turn_off: TurnOffCurrent | None = None
    waveform: str = "dc"
    frequency: float = math.inf


def recovery_rescaling(design: Design) -> tuple[RecoveryRescaling | None, Finding]:
    """The rescaling for the dynamic check and the thermal check's recovery loss, or None, with
    the assumption the report lists (a finding ``recovery.*``)."""
    slope = commutation_slope(design)
    di_dt = slope.di_dt if math.isfinite(slope.di_dt) else None
    missing = missing_recovery_finding(design) if di_dt is not None else \
        Finding("recovery_data.no_di_dt")
    if missing is not None:
        return None, Finding("recovery.not_rescaled", causes=(missing,))
    try:
        fits = part_fits(design)
    except InconsistentRecoveryData as error:
        return None, Finding("recovery.no_fit", {"part": Value(str(error))})
    turn_off = turn_off_current(design, fits)
    current = turn_off.current
    waveform, frequency = _history(design, turn_off.basis)
    untested = [name for name in fits if design.parts[name].q_rr.at_forward_current is None]
    note = Finding(f"recovery.carried.{turn_off.basis}", {
        "current": Value(current, "A"),
        "di_dt": Value(di_dt, "A/s"),
        "source": Value(slope.source),
        "untested": Value(", ".join(f"parts.{name}" for name in untested))})
    nodes, mapped, carried = {}, {}, []
    for name, fit in fits.items():
        spread = design.parts[name].q_rr
        ends = spread_quantile(spread, np.array([-_LATENT_SPAN, _LATENT_SPAN]), lognormal=True,
                               sigma_at_limit=design.monte_carlo.sigma_at_limit,
                               screened=design.monte_carlo.screened)
        grid = np.geomspace(ends[0], ends[1], _GRID_POINTS) if ends[1] > ends[0] else ends[:1]
        nodes[name] = grid
        mapped[name] = carry_recovery_charge(grid, fit.transit_time, fit.test_current,
                                             fit.test_rate, current, di_dt, waveform,
                                             frequency=frequency)
        given = np.array([spread.typ, spread.high if spread.high is not None else spread.typ])
        typ, limit = carry_recovery_charge(given, fit.transit_time, fit.test_current,
                                           fit.test_rate, current, di_dt, waveform,
                                           frequency=frequency)
        carried.append(CarriedRecovery(
            part=name, datasheet_typ=spread.typ, datasheet_limit=spread.high,
            test_current=fit.test_current, test_di_dt=fit.test_rate, carried_typ=float(typ),
            carried_limit=float(limit) if spread.high is not None else None))
    turn_off = replace(turn_off, parts=tuple(carried))
    return RecoveryRescaling(fits=fits, forward_current=current, di_dt=di_dt, nodes=nodes,
                             mapped=mapped, turn_off=turn_off, waveform=waveform,
                             frequency=frequency), note


def carried_charges(design: Design, drawn: DrawnStrings,
                    rescaling: RecoveryRescaling | None) -> np.ndarray:
    """Q_rr [C] of each drawn device at the application's turn-off, (trials, parallel, series):
    the drawn value carried by :func:`rescale_charges`, or the drawn value itself where the
    rescaling is None (the report says Q_rr stays at the test conditions). The one value the
    dynamic check's charge balance and the thermal check's recovery loss both take."""
    charge = drawn.parameters["q_rr"]
    if rescaling is None:
        return charge
    return rescale_charges(charge, device_part_grid(design, drawn), rescaling)


def rescale_charges(charge: np.ndarray, grid: np.ndarray,
                    rescaling: RecoveryRescaling) -> np.ndarray:
    """Q_rr [C] of each drawn device at the application's conditions; ``charge`` is
    (trials, parallel, series) at the test conditions, ``grid`` the part name of each position
    (parallel, series), or of each drawn device (trials, parallel, series) under a mix."""
    out = np.empty_like(charge)
    grid = np.broadcast_to(grid, charge.shape)
    for name, fit in rescaling.fits.items():
        mask = grid == name
        values = charge[mask]
        if values.size == 0:
            continue
        nodes, mapped = rescaling.nodes[name], rescaling.mapped[name]
        if nodes.size == 1:
            out[mask] = mapped[0]
            continue
        result = np.exp(np.interp(np.log(values), np.log(nodes), np.log(mapped)))
        outside = (values < nodes[0]) | (values > nodes[-1])
        if np.any(outside):  # latent beyond +-9 sigma: exact, never extrapolated
            result[outside] = carry_recovery_charge(
                values[outside], fit.transit_time, fit.test_current, fit.test_rate,
                rescaling.forward_current, rescaling.di_dt, rescaling.waveform,
                frequency=rescaling.frequency)
        out[mask] = result
    return out
