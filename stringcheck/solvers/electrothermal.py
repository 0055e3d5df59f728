"""Electro-thermal equilibrium of a parallel group of diode branches, and its runaway limit.

A group is m branches in parallel, each of n devices in series with a path resistance. Device
arrays have shape ``(trials, m, n)`` (Monte Carlo trials first), branch arrays ``(trials, m)``,
trial arrays ``(trials,)``. The inputs are two frozen dataclasses: :class:`ParallelDevices` (what
was drawn for each device) and :class:`ParallelDuty` (the operating point of the group).

Model
    The junction temperatures are the fixed point T = F(T) of the steady thermal network
    (:func:`stringcheck.physics.thermal.junction_temperature`) fed with each device's loss
    P_k(T) = conduction + leakage + recovery (:mod:`stringcheck.physics.forward`), the junction
    temperature being steady over a period. Conduction: the branch currents over the waveform
    (:func:`stringcheck.solvers.parallel.split_current` at the nodes of
    :func:`stringcheck.solvers.parallel.phase_rule`, exact for every branch) give each device
    V_T0(T) I_AV + r_T(T) I_RMS^2 of its branch. Leakage: the device's blocking voltage share and I_R(V, T) over the
    blocking part of the period. Recovery: Q_rr V f per device while the group carries current
    and the waveform commutates (not dc); Q_rr is taken at the value given, without a
    temperature law.

Jacobian
    A = dF/dT is formed analytically. The direct terms are dV_T0/dT, dr_T/dT and the leakage
    rate ln 2 / T_double; the redistribution of branch currents couples every device of the
    group through the 2 m branch parameters (Theta_b, rho_b). On the conducting set C of a
    node, with g = 1 / rho and G = sum_C g, water-filling gives
    di_b/dTheta_c = g_b (g_c / G - delta_bc) and di_b/drho_c = g_b g_c i_c / G - delta_bc g_b i_b
    (b, c in C; 0 otherwise). These are constant or linear in the branch currents on each piece
    of the rule, which integrates them exactly, and the moving edges of the pieces add nothing
    (the branch currents are continuous there): A is the exact derivative of the model, so
    Newton's method converges quadratically.

Damped Newton scheme
    Newton on T - F(T) = 0, started at the ambient temperature (below every equilibrium, since
    every loss is >= 0), batched over trials with ``numpy.linalg.solve``; a Newton step is
    scaled so that no temperature moves more than ``max_step`` (25 K). It is taken only where
    det(I - A) > 0 and it agrees with the heat imbalance, step . (F(T) - T) > 0. Otherwise the
    iterate lies beyond a fold of the heat balance (in one dimension: past the maximum of the
    concave T - F(T); there both conditions reduce to A < 1), where a Newton step would head
    for an unstable equilibrium, and the step is a heating step along F(T) - T, the direction
    of the physical heating transient: at least the relaxation step F(T) - T, its length
    doubling while heating steps repeat, so that a trial crosses the slow region near a fold
    in a few steps and a runaway reaches the cap quickly. Temperatures are kept >= T_a. In one
    dimension with a convex loss the iterates rise monotonically to the lower (stable) root
    and run off when there is none. For A >= 0 below a stable root, (I - A)^-1 >= 0, so the
    Newton step is >= 0 and is always accepted. A trial has converged when
    max |T - F(T)| <= ``tolerance`` (1e-9 K); it has diverged when a temperature passes
    ``temperature_cap`` (1000 degC: far above any T_j,max, and far below the overflow of the
    leakage exponential for any T_double >= 1 K) or is not finite; after ``max_iter`` (100)
    iterations an unfinished trial counts as not converged. Finished trials leave the batch.

Stability and classification
    The spectral radius of A at the solution (``numpy.linalg.eigvals``): a converged trial with
    spectral radius < 1 is stable. "runaway": no equilibrium (diverged or unfinished) or
    spectral radius >= 1; "over T_j,max": stable, but some T_j above its T_j,max; otherwise
    "stable". The spectral-radius test is that of the quasi-static heating loop T <- F(T). An
    eigenvalue below -1 (only from very strong current redistribution) fails it although a
    thermal transient with equal time constants would settle, so the test is conservative
    there; ``max_real_eigenvalue`` shows such cases (stable in that sense iff < 1). For one
    device with P = P_0 exp(a (T - T_0)), A = a R_th P at the lower root, and the test is
    Semenov's criterion (:func:`stringcheck.physics.thermal.semenov_limit`).

Cost
    A is dense, N x N per trial with N = m n: O(N^3) per trial and iteration, memory
    O(trials N^2), plus O(trials m^2) for the nodes of a half-sine. Chunk the trials of large
    groups.
"""

from __future__ import annotations

from dataclasses import dataclass, fields, replace

import numpy as np
from numpy.typing import ArrayLike, NDArray

from stringcheck.constants import HEATSINKS
from stringcheck.errors import StringcheckError
from stringcheck.limits import exceeds_limit
from stringcheck.physics.forward import (
    SLOPE_RESISTANCE_FLOOR,
    leakage_loss,
    phase_samples,
    recovery_loss,
    slope_resistance,
    threshold_voltage,
)
from stringcheck.physics.thermal import junction_temperature
from stringcheck.solvers.parallel import phase_rule, split_current

__all__ = [
    "OVER_LIMIT",
    "RUNAWAY",
    "STABLE",
    "TEMPERATURE_CAP",
    "Equilibrium",
    "ParallelDevices",
    "ParallelDuty",
    "RunawayAmbient",
    "runaway_ambient",
    "solve_equilibrium",
]

STABLE = "stable"
OVER_LIMIT = "over T_j,max"
RUNAWAY = "runaway"
TEMPERATURE_CAP = 1000.0
"""Junction temperature beyond which a trial has run away [degC]."""

_LN2 = np.log(2.0)


@dataclass(frozen=True)
class ParallelDevices:
    """Drawn parameters of every device of a parallel group.

    Every field is an array broadcastable to ``(trials, m, n)``: m branches of n devices.

    Attributes
    ----------
    threshold_voltage
        V_T0 at ``forward_reference_temperature`` [V] (design key ``v_t0``), > 0.
    slope_resistance
        r_T at ``resistance_reference_temperature`` [ohm] (design key ``r_t``), > 0.
    forward_reference_temperature
        Temperature at which V_T0 is given [degC] (the ``v_t0`` row's ``at_temperature``).
    resistance_reference_temperature
        Temperature at which r_T is given [degC] (the ``r_t`` row's ``at_temperature``; a
        datasheet may give the two rows at different temperatures).
    threshold_tempco
        dV_T0/dT [V/K] (``tempco_v_t0``); about -2e-3 for silicon PN (common practice).
    resistance_tempco
        Relative temperature coefficient of r_T [1/K] (``tempco_r_t``).
    leakage_current
        Reverse leakage I_R,ref [A] at the leakage reference voltage and temperature, >= 0.
    leakage_reference_voltage
        V_ref of I_R,ref [V], > 0.
    leakage_reference_temperature
        T_ref of I_R,ref [degC].
    doubling_temperature
        Temperature rise that doubles the leakage [K], >= 1 (``leakage_doubling``).
    voltage_exponent
        Exponent m of the leakage voltage law [-], in [0, 1] (``leakage_voltage_exponent``).
    recovery_charge
        Q_rr at the application's conditions [C], >= 0.
    junction_to_sink
        R_th(j-c) + R_th(c-s) [K/W], >= 0.
    max_junction_temperature
        T_j,max [degC].
    """

    threshold_voltage: ArrayLike
    slope_resistance: ArrayLike
    forward_reference_temperature: ArrayLike
    resistance_reference_temperature: ArrayLike
    threshold_tempco: ArrayLike
    resistance_tempco: ArrayLike
    leakage_current: ArrayLike
    leakage_reference_voltage: ArrayLike
    leakage_reference_temperature: ArrayLike
    doubling_temperature: ArrayLike
    voltage_exponent: ArrayLike
    recovery_charge: ArrayLike
    junction_to_sink: ArrayLike
    max_junction_temperature: ArrayLike


@dataclass(frozen=True)
class ParallelDuty:
    """Operating point of a parallel group.

    Attributes
    ----------
    forward_current
        Average forward current of the whole group I_F(AV) [A], scalar or ``(trials,)``, >= 0.
    waveform
        ``"dc"``, ``"half-sine"`` or ``"square"`` (:mod:`stringcheck.physics.forward`).
    ambient
        Ambient temperature T_a [degC], scalar or ``(trials,)``.
    blocking_voltage
        Peak reverse voltage across each device [V], broadcastable to ``(trials, m, n)``,
        >= 0; it also serves as the voltage taken up during recovery.
    frequency
        Commutation frequency f [Hz], scalar or ``(trials,)``, >= 0 (ignored for dc).
    path_resistance
        Resistance in series with each branch [ohm], broadcastable to ``(trials, m)`` (a 1-D
        array is one value per branch), >= 0.
    sink_to_ambient
        R_th(s-a) [K/W], scalar or ``(trials,)``, >= 0; with ``"separate"`` every device has a
        sink of this resistance.
    heatsink
        ``"shared"`` (one sink for the whole group) or ``"separate"``.
    """

    forward_current: ArrayLike
    waveform: str
    ambient: ArrayLike
    blocking_voltage: ArrayLike
    frequency: ArrayLike
    path_resistance: ArrayLike
    sink_to_ambient: ArrayLike
    heatsink: str


@dataclass(frozen=True)
class Equilibrium:
    """Electro-thermal equilibrium of a parallel group, per trial.

    Attributes
    ----------
    junction_temperature
        T_j of each device [degC], ``(trials, m, n)``; the last iterate where not converged.
    conduction_loss, leakage_loss, recovery_loss, power
        Losses of each device and their sum [W], ``(trials, m, n)``, at ``junction_temperature``.
    branch_average, branch_rms, branch_peak
        I_AV, I_RMS and peak current of each branch [A], ``(trials, m)``.
    converged
        An equilibrium was found, ``(trials,)`` bool.
    stable
        Converged and spectral radius < 1, ``(trials,)`` bool.
    spectral_radius
        Spectral radius of dF/dT at the solution [-], ``(trials,)``; NaN where not converged.
    max_real_eigenvalue
        Largest real part of an eigenvalue of dF/dT [-], ``(trials,)``; NaN where not converged.
    classification
        ``"stable"``, ``"over T_j,max"`` or ``"runaway"``, ``(trials,)`` str.
    iterations
        Newton iterations of the slowest trial.
    """

    junction_temperature: NDArray[np.float64]
    conduction_loss: NDArray[np.float64]
    leakage_loss: NDArray[np.float64]
    recovery_loss: NDArray[np.float64]
    power: NDArray[np.float64]
    branch_average: NDArray[np.float64]
    branch_rms: NDArray[np.float64]
    branch_peak: NDArray[np.float64]
    converged: NDArray[np.bool_]
    stable: NDArray[np.bool_]
    spectral_radius: NDArray[np.float64]
    max_real_eigenvalue: NDArray[np.float64]
    classification: NDArray[np.str_]
    iterations: int


_DEVICE_DUTY_FIELDS = ("blocking_voltage",)
_BRANCH_DUTY_FIELDS = ("path_resistance",)
_TRIAL_DUTY_FIELDS = ("forward_current", "ambient", "frequency", "sink_to_ambient")


def _broadcast(devices: ParallelDevices, duty: ParallelDuty):
    """Both inputs with every array broadcast to its full shape (trials leading)."""
    if duty.heatsink not in HEATSINKS:
        valid = ", ".join(repr(name) for name in HEATSINKS)
        raise StringcheckError(f"heatsink: {duty.heatsink!r} is not known; use one of {valid}")
    device_arrays = {f.name: np.asarray(getattr(devices, f.name), dtype=float)
                     for f in fields(devices)}
    device_arrays.update({name: np.asarray(getattr(duty, name), dtype=float)
                          for name in _DEVICE_DUTY_FIELDS})
    trial_arrays = {name: np.asarray(getattr(duty, name), dtype=float)
                    for name in _TRIAL_DUTY_FIELDS}
    path = np.asarray(duty.path_resistance, dtype=float)
    shapes = [np.shape(a) for a in device_arrays.values()]
    shapes += [np.shape(a) + (1, 1) for a in trial_arrays.values()] + [path.shape + (1,)]
    shape = np.broadcast_shapes((1, 1, 1), *shapes)
    if len(shape) != 3:
        raise StringcheckError(f"devices: arrays must broadcast to (trials, m, n); got {shape}")
    device_arrays = {k: np.broadcast_to(a, shape) for k, a in device_arrays.items()}
    trial_arrays = {k: np.broadcast_to(a, shape[:1]) for k, a in trial_arrays.items()}
    path = np.broadcast_to(path, shape[:2])
    full_devices = ParallelDevices(**{f.name: device_arrays[f.name] for f in fields(devices)})
    full_duty = replace(duty, path_resistance=path,
                        **{k: device_arrays[k] for k in _DEVICE_DUTY_FIELDS}, **trial_arrays)
    return full_devices, full_duty


def _rows(devices: ParallelDevices, duty: ParallelDuty, index) -> tuple:
    """The trials ``index`` of fully broadcast inputs."""
    taken = ParallelDevices(**{f.name: getattr(devices, f.name)[index] for f in fields(devices)})
    arrays = _DEVICE_DUTY_FIELDS + _BRANCH_DUTY_FIELDS + _TRIAL_DUTY_FIELDS
    return taken, replace(duty, **{name: getattr(duty, name)[index] for name in arrays})


@dataclass(frozen=True)
class _State:
    """Losses, branch currents, the mapped temperatures F(T) and, optionally, A = dF/dT."""

    conduction: NDArray[np.float64]
    leakage: NDArray[np.float64]
    recovery: NDArray[np.float64]
    average: NDArray[np.float64]
    mean_square: NDArray[np.float64]
    mapped: NDArray[np.float64]
    jacobian: NDArray[np.float64] | None


def _device_lines(devices: ParallelDevices, temperature):
    """V_T0(T) and r_T(T) of every device, (t, m, n)."""
    threshold = threshold_voltage(devices.threshold_voltage, devices.threshold_tempco,
                                  temperature, devices.forward_reference_temperature)
    resistance = slope_resistance(devices.slope_resistance, devices.resistance_tempco,
                                  temperature, devices.resistance_reference_temperature)
    return threshold, resistance


def _evaluate(devices: ParallelDevices, duty: ParallelDuty, temperature,
              jacobian: bool) -> _State:
    """Losses and the thermal map at the junction temperatures ``temperature`` (t, m, n)."""
    d = devices
    threshold, resistance = _device_lines(devices, temperature)
    branch_threshold = threshold.sum(axis=-1)
    branch_resistance = resistance.sum(axis=-1) + duty.path_resistance
    rule = phase_rule(branch_threshold, branch_resistance, duty.forward_current, duty.waveform)
    split = split_current(branch_threshold[:, None, :], branch_resistance[:, None, :],
                          rule.currents)
    current = split.currents  # (t, p, m)
    weights = rule.weights  # (t, p)
    average = np.einsum("tpm,tp->tm", current, weights)
    mean_square = np.einsum("tpm,tp->tm", current * current, weights)

    conduction = threshold * average[..., None] + resistance * mean_square[..., None]
    leakage = leakage_loss(
        d.leakage_current, duty.blocking_voltage, temperature,
        reference_voltage=d.leakage_reference_voltage,
        reference_temperature=d.leakage_reference_temperature,
        doubling_temperature=d.doubling_temperature,
        voltage_exponent=d.voltage_exponent,
        waveform=duty.waveform,
        forward_current=duty.forward_current[:, None, None],
    )
    commutating = (duty.forward_current > 0.0) & (duty.waveform != "dc")
    recovery = recovery_loss(d.recovery_charge, duty.blocking_voltage,
                             np.where(commutating, duty.frequency, 0.0)[:, None, None])
    power = conduction + leakage + recovery
    mapped = junction_temperature(power, duty.ambient, d.junction_to_sink, duty.sink_to_ambient,
                                  heatsink=duty.heatsink)
    if not jacobian:
        return _State(conduction, leakage, recovery, average, mean_square, mapped, None)

    trials, count, length = temperature.shape
    # Derivatives of the device lines; the floor of r_T(T) has zero slope.
    threshold_slope = np.broadcast_to(d.threshold_tempco, temperature.shape)
    unclipped = d.slope_resistance * (1.0 + d.resistance_tempco
                                      * (temperature - d.resistance_reference_temperature))
    resistance_slope = np.where(unclipped > SLOPE_RESISTANCE_FLOOR,
                                d.slope_resistance * d.resistance_tempco, 0.0)
    # Water-filling derivatives at each node, summed over the nodes as matrix products.
    conductance = np.where(current > 0.0, 1.0 / branch_resistance[:, None, :], 0.0)
    total = conductance.sum(axis=-1)
    inverse_total = np.divide(1.0, total, out=np.zeros_like(total), where=total > 0.0)
    scaled = conductance * (weights * inverse_total)[..., None]  # w_j g_jb / G_j
    flowing = conductance * current  # g_jb i_jb
    twice = 2.0 * current
    transpose = np.swapaxes
    eye = np.eye(count)
    # d I_AV,b / d Theta_c and d <i_b^2> / d Theta_c
    avg_theta = transpose(conductance, 1, 2) @ scaled - eye * np.einsum(
        "tpm,tp->tm", conductance, weights)[..., None]
    sq_theta = transpose(twice * conductance, 1, 2) @ scaled - eye * np.einsum(
        "tpm,tp->tm", twice * conductance, weights)[..., None]
    # d I_AV,b / d rho_c and d <i_b^2> / d rho_c
    scaled_flow = flowing * (weights * inverse_total)[..., None]
    avg_rho = transpose(conductance, 1, 2) @ scaled_flow - eye * np.einsum(
        "tpm,tp->tm", flowing, weights)[..., None]
    sq_rho = transpose(twice * conductance, 1, 2) @ scaled_flow - eye * np.einsum(
        "tpm,tp->tm", twice * flowing, weights)[..., None]
    # dP_(b,k)/dTheta_c and dP_(b,k)/drho_c: (t, m, n, m)
    by_theta = (threshold[..., None] * avg_theta[:, :, None, :]
                + resistance[..., None] * sq_theta[:, :, None, :])
    by_rho = (threshold[..., None] * avg_rho[:, :, None, :]
              + resistance[..., None] * sq_rho[:, :, None, :])
    size = count * length
    coupled = (by_theta[..., None] * threshold_slope[:, None, None, :, :]
               + by_rho[..., None] * resistance_slope[:, None, None, :, :]).reshape(
        trials, size, size)
    rate = _LN2 / np.asarray(d.doubling_temperature, dtype=float)
    direct = (threshold_slope * average[..., None] + resistance_slope * mean_square[..., None]
              + leakage * rate).reshape(trials, size)
    power_slope = coupled + direct[:, :, None] * np.eye(size)
    own = np.broadcast_to(d.junction_to_sink, temperature.shape).reshape(trials, size, 1)
    sink = duty.sink_to_ambient[:, None, None]
    if duty.heatsink == "shared":
        matrix = own * power_slope + sink * power_slope.sum(axis=1, keepdims=True)
    else:
        matrix = (own + sink) * power_slope
    return _State(conduction, leakage, recovery, average, mean_square, mapped, matrix)


def solve_equilibrium(
    devices: ParallelDevices,
    duty: ParallelDuty,
    *,
    tolerance: float = 1e-9,
    max_iter: int = 100,
    max_step: float = 25.0,
    temperature_cap: float = TEMPERATURE_CAP,
    initial_temperature: ArrayLike | None = None,
) -> Equilibrium:
    """Junction temperatures, losses and branch currents of a group in thermal equilibrium.

    Parameters
    ----------
    devices
        Parameters of every device, broadcastable to ``(trials, m, n)``.
    duty
        Operating point of the group.
    tolerance
        Convergence limit on max_k |T_k - F_k(T)| [K], > 0.
    max_iter
        Iteration limit, >= 1.
    max_step
        Largest change of any junction temperature in one step [K], > 0.
    temperature_cap
        Junction temperature beyond which a trial has run away [degC].
    initial_temperature
        Starting junction temperatures [degC], broadcastable to ``(trials, m, n)``; default the
        ambient. Start below the wanted equilibrium.

    Returns
    -------
    Equilibrium
        Per-trial temperatures, losses, branch currents, flags, spectral radius and class.

    Notes
    -----
    The fixed point, the damped Newton scheme, the stability test and the cost are described
    in the module docstring (:mod:`stringcheck.solvers.electrothermal`).

    References
    ----------
    .. [1] C. T. Kelley, *Solving Nonlinear Equations with Newton's Method*, SIAM, 2003,
       chapters 1 and 2 (Newton's method, its local convergence and globalization; chapters
       from memory).
    .. [2] N. N. Semenov, "Zur Theorie des Verbrennungsprozesses", *Zeitschrift fuer Physik* 48,
       571-582, 1928 (title and pages from memory): existence of a steady state when heat
       generation grows exponentially with temperature.
    """
    devices, duty = _broadcast(devices, duty)
    shape = np.shape(devices.threshold_voltage)
    trials, size = shape[0], shape[1] * shape[2]
    if initial_temperature is None:
        temperature = np.broadcast_to(duty.ambient[:, None, None], shape).copy()
    else:
        temperature = np.broadcast_to(np.asarray(initial_temperature, dtype=float), shape).copy()
    converged = np.zeros(trials, dtype=bool)
    jacobian = np.full((trials, size, size), np.nan)
    heating_length = np.zeros(trials)
    floor = np.broadcast_to(duty.ambient[:, None, None], shape)
    active = np.arange(trials)
    iterations = 0
    with np.errstate(over="ignore", invalid="ignore", divide="ignore"):
        while active.size and iterations < max_iter:
            iterations += 1
            part_devices, part_duty = _rows(devices, duty, active)
            current = temperature[active]
            state = _evaluate(part_devices, part_duty, current, jacobian=True)
            imbalance = (state.mapped - current).reshape(-1, size)  # F(T) - T
            finite = np.isfinite(imbalance).all(axis=-1) & np.isfinite(state.jacobian).all(
                axis=(-2, -1))
            largest = np.abs(imbalance).max(axis=-1, initial=0.0)
            done = finite & (largest <= tolerance)
            converged[active[done]] = True
            jacobian[active[done]] = state.jacobian[done]
            keep = finite & ~done
            active, current, imbalance = active[keep], current[keep], imbalance[keep]
            largest = largest[keep]
            if not active.size:
                break
            system = np.eye(size) - state.jacobian[keep]
            sign, _ = np.linalg.slogdet(system)
            system[sign <= 0.0] = np.eye(size)
            step = np.linalg.solve(system, imbalance[..., None])[..., 0]
            newton = (sign > 0.0) & (np.einsum("tk,tk->t", step, imbalance) > 0.0)
            longest = np.abs(step).max(axis=-1)
            step *= np.minimum(1.0, max_step / np.where(longest > 0.0, longest, 1.0))[:, None]
            # Heating step along F(T) - T: at least the relaxation step, doubling while repeated.
            length = np.maximum(largest, 2.0 * heating_length[active])
            heating = imbalance * (length / largest)[:, None]
            step = np.where(newton[:, None], step, heating)
            heating_length[active] = np.where(newton, 0.0, length)
            updated = np.maximum(current + step.reshape(current.shape), floor[active])
            temperature[active] = updated
            running = np.isfinite(updated).all(axis=(-2, -1)) & (
                updated.max(axis=(-2, -1)) <= temperature_cap)
            active = active[running]

        state = _evaluate(devices, duty, temperature, jacobian=False)
        radius = np.full(trials, np.nan)
        real = np.full(trials, np.nan)
        if converged.any():
            eigenvalues = np.linalg.eigvals(jacobian[converged])
            radius[converged] = np.abs(eigenvalues).max(axis=-1)
            real[converged] = eigenvalues.real.max(axis=-1)
        threshold, resistance = _device_lines(devices, temperature)
        peak = split_current(threshold.sum(axis=-1),
                             resistance.sum(axis=-1) + duty.path_resistance,
                             phase_samples(duty.forward_current, duty.waveform).peak)
    stable = converged & (radius < 1.0)
    over = exceeds_limit(temperature, devices.max_junction_temperature).any(axis=(-2, -1))
    classification = np.where(stable, np.where(over, OVER_LIMIT, STABLE), RUNAWAY)
    return Equilibrium(
        junction_temperature=temperature,
        conduction_loss=state.conduction,
        leakage_loss=state.leakage,
        recovery_loss=state.recovery,
        power=state.conduction + state.leakage + state.recovery,
        branch_average=state.average,
        branch_rms=np.sqrt(state.mean_square),
        branch_peak=peak.currents,
        converged=converged,
        stable=stable,
        spectral_radius=radius,
        max_real_eigenvalue=real,
        classification=classification,
        iterations=iterations,
    )


@dataclass(frozen=True)
class RunawayAmbient:
    """Ambient temperature at which the electro-thermal equilibrium of a group is lost.

    Attributes
    ----------
    ambient
        Midpoint of the final bracket [degC], ``(trials,)``; +inf where the group is still
        stable at the upper search limit, -inf where it is already lost at the given ambient.
    lower
        Highest ambient found stable [degC], ``(trials,)`` (-inf if none).
    upper
        Lowest ambient found lost [degC], ``(trials,)`` (+inf if none).
    """

    ambient: NDArray[np.float64]
    lower: NDArray[np.float64]
    upper: NDArray[np.float64]


def runaway_ambient(
    devices: ParallelDevices,
    duty: ParallelDuty,
    *,
    upper_limit: float,
    tolerance: float = 0.01,
    **solver_options,
) -> RunawayAmbient:
    """Per trial, the ambient temperature at which the group runs away thermally.

    Parameters
    ----------
    devices, duty
        As for :func:`solve_equilibrium`; ``duty.ambient`` is the lower end of the search.
    upper_limit
        Upper end of the search [degC].
    tolerance
        Width of the final bracket [K], > 0.
    **solver_options
        Passed on to :func:`solve_equilibrium` (``tolerance`` excepted).

    Returns
    -------
    RunawayAmbient
        The ambient at which the equilibrium is lost, with its bracket.

    Notes
    -----
    "Lost" is the class ``"runaway"`` of :func:`solve_equilibrium` (T_j,max is not looked at).
    Bisection on T_a, all trials at once: the trials still bracketed are solved at the midpoint
    of their brackets, each warm-started from its last stable solution raised by the change of
    ambient, a start below the new equilibrium (dT_j/dT_a >= 1 on the stable branch of a convex
    heat balance). The loss of equilibrium is taken to be monotone in T_a (true of the Semenov
    problem, where it happens at one fold).
    """
    devices, duty = _broadcast(devices, duty)
    trials = np.shape(devices.threshold_voltage)[0]
    low = np.array(duty.ambient, dtype=float)
    high = np.full(trials, float(upper_limit))
    at_low = solve_equilibrium(devices, duty, **solver_options)
    at_high = solve_equilibrium(devices, replace(duty, ambient=high), **solver_options)
    lost_low = at_low.classification == RUNAWAY
    lost_high = at_high.classification == RUNAWAY
    lower = np.where(lost_low, -np.inf, np.where(lost_high, low, high))
    upper = np.where(lost_low, low, np.where(lost_high, high, np.inf))
    start = at_low.junction_temperature.copy()
    active = np.flatnonzero(~lost_low & lost_high & (upper - lower > tolerance))
    while active.size:
        middle = 0.5 * (lower[active] + upper[active])
        part_devices, part_duty = _rows(devices, duty, active)
        guess = start[active] + (middle - lower[active])[:, None, None]
        result = solve_equilibrium(part_devices, replace(part_duty, ambient=middle),
                                   initial_temperature=guess, **solver_options)
        lost = result.classification == RUNAWAY
        upper[active[lost]] = middle[lost]
        lower[active[~lost]] = middle[~lost]
        start[active[~lost]] = result.junction_temperature[~lost]
        active = active[upper[active] - lower[active] > tolerance]
    ambient = np.where(np.isfinite(lower) & np.isfinite(upper), 0.5 * (lower + upper),
                       np.where(np.isfinite(upper), -np.inf, np.inf))
    return RunawayAmbient(ambient=ambient, lower=lower, upper=upper)
