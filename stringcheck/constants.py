"""Constants that more than one layer uses, each with its unit and its source.

A constant used inside one layer only lives in that layer's lowest module (for example the design
file's defaults in :mod:`stringcheck.design.model`, the sampling block in
:mod:`stringcheck.montecarlo.sampling`). This module is the base layer: it imports nothing from the
package.
"""

from __future__ import annotations

__all__ = [
    "DATASHEET_TEMPERATURE",
    "HEATSINKS",
    "RESISTOR_TCR_REFERENCE",
    "SAFE_DISCHARGE_TIME",
    "SAFE_VOLTAGE",
    "WAVEFORMS",
]

# Temperature [degC] at which a datasheet row is taken when it names none: the 25 degC reference
# temperature of semiconductor datasheets (common practice).
DATASHEET_TEMPERATURE = 25.0

# Temperature [degC] from which a grading resistor's temperature coefficient (TCR) is specified,
# i.e. where the resistor has its nominal value (common practice).
RESISTOR_TCR_REFERENCE = 25.0

# Residual-voltage criterion: after switching off, the stack must fall below SAFE_VOLTAGE [V] within
# SAFE_DISCHARGE_TIME [s] (IEC 60204-1:2016 clause 6.2.4, from memory).
SAFE_VOLTAGE = 60.0
SAFE_DISCHARGE_TIME = 5.0

# Waveform names of the forward current (the design file's ``duty.waveform``; the shapes are defined
# in stringcheck.physics.forward): constant, half-wave sine pulses, half-period square pulses [-].
# "offset-sine": a capacitor-input or multiplier stack, reverse voltage (V/2)(1 - sin wt), whose
# forward current is taken as a half-sine pulse (issue 23).
WAVEFORMS = ("dc", "half-sine", "square", "offset-sine")

# Heat-sink arrangements of a parallel group (the design file's ``thermal.heatsink``; the model is in
# stringcheck.physics.thermal): one sink for every device, or one sink per device [-].
HEATSINKS = ("shared", "separate")
