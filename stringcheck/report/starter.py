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
waveform = "half-sine"          # dc | half-sine | square
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
