"""Each drawn device's parameters at a junction temperature: its rank kept across the rows.

A parameter given in datasheet rows at several temperatures (``Part.rows``) draws one latent value
per device (:mod:`stringcheck.montecarlo.sampling` maps it onto the part's hottest row). At another
temperature each row's own spread is mapped at the same latent value and the device's value is
interpolated between the rows (``physics.temperature_laws.interpolate_rows``: exponential in T for
leakage and recovery, linear for V_T0 and r_T; the end rows' law extended outside). A device at
the 90th percentile of one row is at the 90th percentile of every row, so the rows' ranks agree
(a Gaussian copula of correlation 1 between the rows: the conservative reading of a datasheet
that does not say how its rows are related).

A parameter in one row follows the part's law: leakage doubling every ``doubling_temperature``;
recovery parameters their device class's rate (``Part.recovery_rate``); V_T0 and r_T their
tempcos.

The temperature is an array broadcasting to (trials, parallel, series): a position's (ambient +
temperature_rise) or each device's own junction temperature in each trial.
"""

from __future__ import annotations

from dataclasses import replace

import numpy as np
from numpy.typing import ArrayLike

from stringcheck.constants import DATASHEET_TEMPERATURE
from stringcheck.design.model import LOGNORMAL_PARAMETERS, Design, Part, row_screened
from stringcheck.montecarlo.mixed_stock import device_part_grid
from stringcheck.montecarlo.quantile_maps import spread_quantile
from stringcheck.montecarlo.sampling import DrawnStrings
from stringcheck.physics.leakage import temperature_factor
from stringcheck.physics.temperature_laws import (
    doubling_temperature_from_rows,
    exponential_law,
    interpolate_rows,
)

__all__ = ["RECOVERY_PARAMETERS", "device_coefficient", "parameter_at_temperature",
           "position_temperature", "strings_at_temperature", "temperature_dependent"]

RECOVERY_PARAMETERS = ("q_rr", "i_rm", "t_rr")


def position_temperature(design: Design) -> np.ndarray:
    """Each position's junction temperature today, ambient + temperature_rise [degC],
    (parallel, series)."""
    return design.duty.ambient + design.string.temperature_rise_grid()


def temperature_dependent(design: Design, parameter: str, *, rows_only: bool = False) -> bool:
    """Whether any part used gives ``parameter`` in rows at several temperatures, or (unless
    ``rows_only``) in one row with a temperature law that moves it (a recovery parameter of a
    class whose rate is not zero)."""
    for name in design.parts_used():
        part = design.parts[name]
        if len(part.rows(parameter)) >= 2:
            return True
        if not rows_only and parameter in RECOVERY_PARAMETERS and part.spread(parameter) \
                is not None and part.recovery_rate(parameter) != 0.0:
            return True
    return False


def parameter_at_temperature(design: Design, drawn: DrawnStrings, parameter: str,
                             temperature: ArrayLike) -> np.ndarray:
    """``parameter`` of each drawn device at ``temperature`` [degC] [SI unit of the parameter],
    (trials, parallel, series).

    ``temperature`` broadcasts to (trials, parallel, series). ``drawn`` must hold ``parameter``
    (its value at the part's own row, the hottest of a list) and its latent values.
    """
    values = np.asarray(drawn.parameters[parameter], dtype=float)
    shape = values.shape
    temperature = np.broadcast_to(np.asarray(temperature, dtype=float), shape)
    grid = np.broadcast_to(device_part_grid(design, drawn), shape)
    out = np.array(values, dtype=float)
    lognormal = parameter in LOGNORMAL_PARAMETERS
    for name in design.parts_used():
        mask = grid == name
        if not mask.any():
            continue
        part = design.parts[name]
        rows = part.rows(parameter)
        if not rows:
            continue
        here = temperature[mask]
        if len(rows) >= 2:
            latent = drawn.latent[parameter][mask]
            mapped = np.stack([spread_quantile(
                row, latent, lognormal=lognormal,
                sigma_at_limit=design.monte_carlo.sigma_at_limit,
                screened=row_screened(row, design.monte_carlo),
                uniform=drawn.latent_uniform) for row in rows], axis=-1)
            at = interpolate_rows(here, [row.at_temperature for row in rows], mapped,
                                  exponential=lognormal,
                                  typical_values=[row.typ for row in rows])
            # Relative to the device's own drawn value (a measured device keeps its measurement
            # and moves with its rank's rows).
            own = mapped[..., -1]
            out[mask] = values[mask] * (at / own) if lognormal else values[mask] + (at - own)
        else:
            out[mask] = _one_row(part, parameter, values[mask], here)
    return out


def _one_row(part: Part, parameter: str, values: np.ndarray, temperature: np.ndarray
             ) -> np.ndarray:
    """A one-row parameter at ``temperature`` by the part's law."""
    row = part.spread(parameter)
    reference = DATASHEET_TEMPERATURE if row.at_temperature is None else row.at_temperature
    if parameter == "i_r":
        return values * temperature_factor(temperature, reference_temperature=reference,
                                           doubling_temperature=part.doubling_temperature)
    if parameter in RECOVERY_PARAMETERS:
        return exponential_law(temperature, values, reference_temperature=reference,
                               rate=part.recovery_rate(parameter))
    if parameter == "v_t0":
        return values + part.tempco_v_t0 * (temperature - reference)
    return values * (1.0 + part.tempco_r_t * (temperature - reference))


def strings_at_temperature(design: Design, drawn: DrawnStrings, temperature: ArrayLike,
                           parameters: tuple[str, ...] = RECOVERY_PARAMETERS) -> DrawnStrings:
    """``drawn`` with each of ``parameters`` it holds at ``temperature`` [degC] (broadcasting to
    (trials, parallel, series)); itself where none of them moves with temperature."""
    moved = {parameter: parameter_at_temperature(design, drawn, parameter, temperature)
             for parameter in parameters if parameter in drawn.parameters
             and temperature_dependent(design, parameter)}
    if not moved:
        return drawn
    return replace(drawn, parameters={**drawn.parameters, **moved})


def device_coefficient(design: Design, drawn: DrawnStrings, parameter: str,
                       default: np.ndarray) -> np.ndarray:
    """Each drawn device's own temperature coefficient of ``parameter`` through its coolest and
    hottest rows, referred to the hottest (the part's own row), for a model that takes one law
    per device: ``v_t0`` tempco [V/K] (v(T) = v_hot + a (T - T_hot)), ``r_t`` relative tempco
    [1/K] (r(T) = r_hot (1 + a (T - T_hot))), ``i_r`` doubling temperature [K]; both linear forms
    are the linear interpolation between the rows exactly, the doubling the exponential one. Where
    no part used gives ``parameter`` in rows, ``default`` itself (the parts' own values, shape
    broadcasting to (trials, parallel, series)); else (trials, parallel, series) with ``default``
    for the devices of parts in one row."""
    if not temperature_dependent(design, parameter, rows_only=True):
        return default
    shape = np.shape(drawn.parameters[parameter])
    out = np.array(np.broadcast_to(default, shape), dtype=float)
    grid = np.broadcast_to(device_part_grid(design, drawn), shape)
    lognormal = parameter in LOGNORMAL_PARAMETERS
    for name in design.parts_used():
        rows = design.parts[name].rows(parameter)
        mask = grid == name
        if len(rows) < 2 or not mask.any():
            continue
        latent = drawn.latent[parameter][mask]
        cool, hot = (spread_quantile(row, latent, lognormal=lognormal,
                                     sigma_at_limit=design.monte_carlo.sigma_at_limit,
                                     screened=row_screened(row, design.monte_carlo),
                                     uniform=drawn.latent_uniform) for row in (rows[0], rows[-1]))
        span = rows[-1].at_temperature - rows[0].at_temperature
        if parameter == "i_r":
            out[mask] = doubling_temperature_from_rows(0.0, cool, span, hot)
        elif parameter == "v_t0":
            out[mask] = (hot - cool) / span
        else:
            out[mask] = (1.0 - cool / hot) / span
    return out
