"""Recovery charge at the application's conditions, through the fitted charge-control model.

A datasheet gives Q_rr at its own test forward current and di/dt. Each part's charge-control
parameters (tau, T_M; ``physics.charge_control``) are fitted to its typical Q_rr and I_RM (or t_rr)
there; a device's drawn Q_rr then maps onto its own tau at the fixed T_M, and the model gives its
Q_rr at the application's turn-off current (:func:`turn_off_current`) and di/dt. The map is
monotone, so it is evaluated exactly on a grid of drawn values per part and interpolated in log-log
coordinates (relative error below 1e-6; tests/checks/test_recovery_conditions.py).
:func:`carried_charges` gives every check that needs the recovery charge of a drawn device (the
dynamic check's charge balance, the thermal check's recovery loss) the same value.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from stringcheck.findings import Finding, Value
from stringcheck.design.model import Design
from stringcheck.montecarlo.sampling import DrawnStrings
from stringcheck.montecarlo.quantile_maps import spread_quantile
from stringcheck.physics.charge_control_fit import (
    fit_charge_control,
    peak_current_from_recovery_time,
    rescale_recovery_charge,
)
from stringcheck.physics.forward import peak_factor
from stringcheck.montecarlo.mixed_stock import device_part_grid

_GRID_POINTS = 513
_LATENT_SPAN = 9.0


@dataclass(frozen=True)
class PartFit:
    """T_M [s] fitted to a part's typical recovery, and its test I_F [A] and di/dt [A/s]."""

    transit_time: float
    test_current: float
    test_rate: float


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
        transit = float(fit_charge_control(part.q_rr.typ, peak, test_current, test_rate).transit_time)
        if not math.isfinite(transit):
            raise InconsistentRecoveryData(name)
        fits[name] = PartFit(transit_time=transit, test_current=test_current, test_rate=test_rate)
    return fits


def missing_recovery_data(design: Design) -> str:
    """What the model needs and a part does not give ("" when every part gives it)."""
    for name in design.parts_used():
        part = design.parts[name]
        if part.q_rr is None:
            return f"parts.{name} gives no q_rr"
        if part.i_rm is None and part.t_rr is None:
            return f"parts.{name} gives neither i_rm nor t_rr: the recovery model needs one"
        if part.q_rr.at_di_dt is None:
            return f"parts.{name}.q_rr has no at_di_dt (the datasheet's test di/dt)"
        if part.i_rm is None and part.t_rr.at_di_dt not in (None, part.q_rr.at_di_dt):
            return (f"parts.{name}: t_rr and q_rr are given at different test di/dt (the fit "
                    "needs both at one test condition)")
        if part.q_rr.at_forward_current is None and design.duty.forward_current is None:
            return f"parts.{name}.q_rr has no at_forward_current and the duty no forward_current"
    return ""


# Where the turn-off current comes from (TurnOffCurrent.basis).
TURN_OFF_DC = "dc"
TURN_OFF_SQUARE_PEAK = "square_peak"
TURN_OFF_HALF_SINE_AVERAGE = "half_sine_average"
TURN_OFF_TEST_CURRENT = "test_current"


@dataclass(frozen=True)
class TurnOffCurrent:
    """The forward current a branch commutates from at turn-off.

    Attributes
    ----------
    current
        I_F per branch at the start of the turn-off [A].
    basis
        Where it comes from: ``"dc"`` (the constant I_F(AV) / parallel), ``"square_peak"`` (a
        square wave turns off from its peak, I_pk = 2 I_F(AV) / parallel), ``"half_sine_average"``
        (I_F(AV) / parallel: the decay of a half-sine towards its zero crossing is not modelled
        yet, issue 12) or ``"test_current"`` (no duty.forward_current: the parts' highest test
        I_F).
    """

    current: float
    basis: str


def turn_off_current(design: Design, fits: dict[str, PartFit]) -> TurnOffCurrent:
    """The current each branch commutates from, the same for every check that carries Q_rr
    (dynamic, thermal) or simulates the turn-off (transient); ``fits`` from :func:`part_fits`."""
    if design.duty.forward_current is None:
        return TurnOffCurrent(current=max(fit.test_current for fit in fits.values()),
                              basis=TURN_OFF_TEST_CURRENT)
    return _duty_turn_off(design)


def _duty_turn_off(design: Design) -> TurnOffCurrent:
    """The turn-off current of the duty's forward current (which must be given), per branch."""
    duty = design.duty
    per_branch = duty.forward_current / design.string.parallel
    if duty.waveform == "square":
        # I_pk = 2 I_AV flows until the commutation (physics.forward.peak_factor).
        return TurnOffCurrent(current=per_branch * peak_factor("square"),
                              basis=TURN_OFF_SQUARE_PEAK)
    if duty.waveform in ("half-sine", "offset-sine"):
        return TurnOffCurrent(current=per_branch, basis=TURN_OFF_HALF_SINE_AVERAGE)
    return TurnOffCurrent(current=per_branch, basis=TURN_OFF_DC)


@dataclass(frozen=True)
class RecoveryRescaling:
    """How to carry each part's drawn Q_rr to the application (I_F per branch [A], di/dt [A/s]).

    ``nodes`` and ``mapped`` hold, per part, the exact map on a fixed log-spaced grid spanning
    every value the sampler can draw (latent values within +-9); they depend on the design only,
    so the result is the same for any chunking of the trials.
    """

    fits: dict[str, PartFit]
    forward_current: float
    di_dt: float
    nodes: dict[str, np.ndarray]
    mapped: dict[str, np.ndarray]
    turn_off: TurnOffCurrent | None = None


def recovery_rescaling(design: Design) -> tuple[RecoveryRescaling | None, Finding]:
    """The rescaling for the dynamic check and the thermal check's recovery loss, or None, with
    the assumption the report lists (a finding ``recovery.*``)."""
    duty = design.duty
    di_dt = duty.di_dt if duty.di_dt is not None else (
        duty.reverse_voltage / duty.stray_inductance if duty.stray_inductance else None)
    missing = missing_recovery_data(design) if di_dt is not None else "no di/dt"
    if missing:
        return None, Finding("recovery.not_rescaled", {"missing": Value(missing)})
    try:
        fits = part_fits(design)
    except InconsistentRecoveryData as error:
        return None, Finding("recovery.no_fit", {"part": Value(str(error))})
    turn_off = turn_off_current(design, fits)
    current = turn_off.current
    untested = [name for name in fits if design.parts[name].q_rr.at_forward_current is None]
    note = Finding(f"recovery.carried.{turn_off.basis}", {
        "current": Value(current, "A"),
        "di_dt": Value(di_dt, "A/s"),
        "untested": Value(", ".join(f"parts.{name}" for name in untested))})
    nodes, mapped = {}, {}
    for name, fit in fits.items():
        spread = design.parts[name].q_rr
        ends = spread_quantile(spread, np.array([-_LATENT_SPAN, _LATENT_SPAN]), lognormal=True,
                               sigma_at_limit=design.monte_carlo.sigma_at_limit,
                               screened=design.monte_carlo.screened)
        grid = np.geomspace(ends[0], ends[1], _GRID_POINTS) if ends[1] > ends[0] else ends[:1]
        nodes[name] = grid
        mapped[name] = rescale_recovery_charge(grid, fit.transit_time, fit.test_current,
                                               fit.test_rate, current, di_dt)
    return RecoveryRescaling(fits=fits, forward_current=current, di_dt=di_dt, nodes=nodes,
                             mapped=mapped, turn_off=turn_off), note


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
            result[outside] = rescale_recovery_charge(values[outside], fit.transit_time,
                                                      fit.test_current, fit.test_rate,
                                                      rescaling.forward_current, rescaling.di_dt)
        out[mask] = result
    return out
