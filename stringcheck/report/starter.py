"""The commented starter design that ``stringcheck new`` writes."""

from __future__ import annotations

_STARTER = '''\
# stringcheck design file (TOML). Quantities are text with a unit ("36 kV", "4.7 MOhm", "2.2 nF",
# "50 A/us", "45 degC", "10 K") or bare numbers in SI units. A spread is a table
# { min = ..., typ = ..., max = ... }: typ is the median, a limit sits sigma_at_limit standard
# deviations from it; { typ = ... } alone is a fixed value; { max = ... } alone takes typ from a
# documented assumption that the report lists. Replace every value below with your own.

[design]
title = "My stack"
notes = ""

[duty]
reverse_voltage = "10 kV"       # peak reverse voltage across the whole string
forward_current = "1 A"
waveform = "half-sine"          # dc | half-sine | square | offset-sine
frequency = "50 Hz"
di_dt = "10 A/us"               # current slope at turn-off (omit for a dc duty with no turn-off)
ambient = "40 degC"

[string]
series = 10                     # devices in series per branch
parallel = 1                    # branches in parallel
derating = 0.8                  # allowed fraction of V_RRM per device
part = "MAIN"                   # default part of every position

# Optional per-position overrides (index 1..series; branch 1..parallel, omitted = every branch):
# [[string.position]]
# index = 1
# temperature_rise = "15 K"     # this position runs hotter than ambient
# part = "OTHER"                # a different part in this position
# serial = "L7-012"             # this measured device of the part's lot (see measured below)

[parts.MAIN]
class = "si-fast-recovery"      # si-rectifier | si-fast-recovery | si-schottky | sic-schottky
v_rrm = "1.6 kV"
i_fav = "1 A"
i_r = { typ = "0.5 uA", max = "5 uA", at_temperature = "25 degC", at_voltage = "1.6 kV" }
q_rr = { typ = "100 nC", max = "200 nC", at_di_dt = "10 A/us", at_temperature = "25 degC" }
c_j = "15 pF"
t_j_max = "150 degC"
# leakage_doubling = "10 K"     # leakage doubles every ... (silicon: about 10 K)
# leakage_voltage_exponent = 0.5
# measured = "lot.csv"          # a measured lot: one row per device, header like
#                               #   serial,i_r [uA],q_rr [nC]   (at the test conditions above)
# fit = "resample"              # resample (whole rows) | lognormal | normal | auto

[grading]
resistor = "4.7 MOhm"           # per stage
resistor_tolerance = "1 %"
resistor_tcr = "100 ppm/K"
resistor_rated_voltage = "2 kV"
resistor_rated_power = "0.5 W"
capacitor = "2.2 nF"            # per stage
capacitor_tolerance = "10 %"
capacitor_rated_voltage = "2 kV"
damping_resistor = "100 Ohm"

[thermal]                       # for the thermal check (junction temperatures, runaway)
heatsink = "separate"           # separate | shared (one sink for every device)
r_th_sa = "2 K/W"               # heatsink to ambient, per sink
path_resistance = "0 Ohm"       # wiring / ballast in series with each branch

[monte_carlo]
trials = 20000
seed = 1
confidence = 0.95
sigma_at_limit = 3
screened = true                 # devices outside the datasheet limits were rejected by the maker
lot_share = 0.3                 # fraction of the scatter common to one lot (one string)

[sizing]
target_p_fail = 1e-3
resistor_series = "E96"
capacitor_series = "E12"
target_share = 1.1              # parallel groups: allowed max / mean branch current (ballast advice)
'''


def starter_design() -> str:
    """The text of a valid, commented starter design file."""
    return _STARTER


_DUTY_BLOCK_START = "[duty]\n"
_DUTY_BLOCK_END = "\n[string]\n"

# The [circuit] table of each topology's starter (issue 23), sized for the starter's string of
# 10 x 1.6 kV at derating 0.8 (12.8 kV).
_CIRCUIT_LINES = {
    "half-wave": ('secondary_voltage = "4 kV"      # rms (or secondary_peak = "5.66 kV")',
                  'filter_capacitor = "100 nF"     # reservoir; omit for a resistive load'),
    "center-tap": ('secondary_voltage = "4 kV"      # rms of each half of the winding',
                   'filter_capacitor = "100 nF"     # reservoir; omit for a choke-fed load'),
    "bridge": ('secondary_voltage = "8 kV"      # rms (line-to-line with phases = 3)',
               '# phases = 1                     # 1 | 3 (a three-phase bridge: '
               'line-commutated)',
               '# filter_capacitor = "100 nF"   # capacitor input instead of a dc choke'),
    "doubler": ('secondary_peak = "5 kV"         # peak of the ac input',
                'stage_capacitor = "2.2 nF"'),
    "multiplier": ('stages = 6                      # Cockcroft-Walton stages (2 stacks each)',
                   'secondary_peak = "5 kV"         # peak of the ac input',
                   'stage_capacitor = "2.2 nF"      # every stage capacitor'),
}
_LOADS = {"half-wave": '"20 mA"', "center-tap": '"20 mA"', "bridge": '"0.5 A"',
          "doubler": '"1 mA"', "multiplier": '"1 mA"'}


def circuit_starter_design(topology: str) -> str:
    """The starter design with a ``[circuit]`` table of ``topology`` in place of ``[duty]``.

    Raises
    ------
    StringcheckError
        For a topology that is not one of :data:`stringcheck.design.model.TOPOLOGIES`.
    """
    from stringcheck.design.model import TOPOLOGIES
    from stringcheck.errors import StringcheckError

    if topology not in TOPOLOGIES:
        raise StringcheckError(f"unknown circuit topology {topology!r}; one of "
                               + ", ".join(TOPOLOGIES))
    ac = topology in ("doubler", "multiplier")
    lines = ["[circuit]                       # the circuit the string is a stack of "
             "(instead of [duty])",
             f'topology = "{topology}"          # half-wave | center-tap | bridge | doubler | '
             "multiplier",
             *_CIRCUIT_LINES[topology][:1 if topology != "multiplier" else 2],
             f'frequency = "{"40 kHz" if ac else "50 Hz"}"',
             f"load_current = {_LOADS[topology]}          # or load_resistance = \"...\"",
             *_CIRCUIT_LINES[topology][1 if topology != "multiplier" else 2:],
             ('commutation_inductance = "50 mH" # transformer leakage (referred to the '
              'secondary): the overlap and turn-off slope') if topology == "bridge" else
             '# commutation_inductance = "1 H" # transformer leakage, referred to the secondary',
             'ambient = "40 degC"']
    start = _STARTER.index(_DUTY_BLOCK_START)
    end = _STARTER.index(_DUTY_BLOCK_END)
    return _STARTER[:start] + "\n".join(lines) + "\n" + _STARTER[end:]
