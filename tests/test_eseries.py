"""Tests of stringcheck.eseries against IEC 60063 and the independent PyPI ``eseries`` package."""

from __future__ import annotations

import math

import eseries as reference  # PyPI package "eseries", an independent implementation
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from stringcheck import eseries
from stringcheck.errors import SizingError, StringcheckError

# --- the standard's tables, written out literally ------------------------------------------------
# IEC 60063:2015, Table 1 (E6, E12, E24) and Table 2 (E48, E96, E192); typed from memory of the
# standard's tables, and independently cross-checked below against the PyPI eseries package.
IEC_60063_TABLES = {
    "E6": "1.0 1.5 2.2 3.3 4.7 6.8",
    "E12": "1.0 1.2 1.5 1.8 2.2 2.7 3.3 3.9 4.7 5.6 6.8 8.2",
    "E24": """1.0 1.1 1.2 1.3 1.5 1.6 1.8 2.0 2.2 2.4 2.7 3.0
              3.3 3.6 3.9 4.3 4.7 5.1 5.6 6.2 6.8 7.5 8.2 9.1""",
    "E48": """1.00 1.05 1.10 1.15 1.21 1.27 1.33 1.40 1.47 1.54 1.62 1.69
              1.78 1.87 1.96 2.05 2.15 2.26 2.37 2.49 2.61 2.74 2.87 3.01
              3.16 3.32 3.48 3.65 3.83 4.02 4.22 4.42 4.64 4.87 5.11 5.36
              5.62 5.90 6.19 6.49 6.81 7.15 7.50 7.87 8.25 8.66 9.09 9.53""",
    "E96": """1.00 1.02 1.05 1.07 1.10 1.13 1.15 1.18 1.21 1.24 1.27 1.30
              1.33 1.37 1.40 1.43 1.47 1.50 1.54 1.58 1.62 1.65 1.69 1.74
              1.78 1.82 1.87 1.91 1.96 2.00 2.05 2.10 2.15 2.21 2.26 2.32
              2.37 2.43 2.49 2.55 2.61 2.67 2.74 2.80 2.87 2.94 3.01 3.09
              3.16 3.24 3.32 3.40 3.48 3.57 3.65 3.74 3.83 3.92 4.02 4.12
              4.22 4.32 4.42 4.53 4.64 4.75 4.87 4.99 5.11 5.23 5.36 5.49
              5.62 5.76 5.90 6.04 6.19 6.34 6.49 6.65 6.81 6.98 7.15 7.32
              7.50 7.68 7.87 8.06 8.25 8.45 8.66 8.87 9.09 9.31 9.53 9.76""",
    "E192": """1.00 1.01 1.02 1.04 1.05 1.06 1.07 1.09 1.10 1.11 1.13 1.14
               1.15 1.17 1.18 1.20 1.21 1.23 1.24 1.26 1.27 1.29 1.30 1.32
               1.33 1.35 1.37 1.38 1.40 1.42 1.43 1.45 1.47 1.49 1.50 1.52
               1.54 1.56 1.58 1.60 1.62 1.64 1.65 1.67 1.69 1.72 1.74 1.76
               1.78 1.80 1.82 1.84 1.87 1.89 1.91 1.93 1.96 1.98 2.00 2.03
               2.05 2.08 2.10 2.13 2.15 2.18 2.21 2.23 2.26 2.29 2.32 2.34
               2.37 2.40 2.43 2.46 2.49 2.52 2.55 2.58 2.61 2.64 2.67 2.71
               2.74 2.77 2.80 2.84 2.87 2.91 2.94 2.98 3.01 3.05 3.09 3.12
               3.16 3.20 3.24 3.28 3.32 3.36 3.40 3.44 3.48 3.52 3.57 3.61
               3.65 3.70 3.74 3.79 3.83 3.88 3.92 3.97 4.02 4.07 4.12 4.17
               4.22 4.27 4.32 4.37 4.42 4.48 4.53 4.59 4.64 4.70 4.75 4.81
               4.87 4.93 4.99 5.05 5.11 5.17 5.23 5.30 5.36 5.42 5.49 5.56
               5.62 5.69 5.76 5.83 5.90 5.97 6.04 6.12 6.19 6.26 6.34 6.42
               6.49 6.57 6.65 6.73 6.81 6.90 6.98 7.06 7.15 7.23 7.32 7.41
               7.50 7.59 7.68 7.77 7.87 7.96 8.06 8.16 8.25 8.35 8.45 8.56
               8.66 8.76 8.87 8.98 9.09 9.20 9.31 9.42 9.53 9.65 9.76 9.88""",
}
SIGNIFICANT_FIGURES = {"E6": 2, "E12": 2, "E24": 2, "E48": 3, "E96": 3, "E192": 3}


def _table(name: str) -> tuple[float, ...]:
    return tuple(float(token) for token in IEC_60063_TABLES[name].split())


def _reference_key(name: str) -> reference.ESeries:
    return getattr(reference, name)


def _decimal_member(value: float, name: str) -> bool:
    """Independent membership test: print with the table's figures, compare text and table."""
    figures = SIGNIFICANT_FIGURES[name]
    text = f"{value:.{figures - 1}e}"
    mantissa, _ = text.split("e")
    return float(text) == value and float(mantissa) in _table(name)


series_names = st.sampled_from(eseries.SERIES_NAMES)
# Log-uniform over 1e-15 ... 1e15, plus plain floats so that awkward binary values also appear.
positive_values = st.one_of(
    st.floats(min_value=-15.0, max_value=15.0).map(lambda exponent: 10.0**exponent),
    st.floats(min_value=1e-15, max_value=1e15, allow_subnormal=False),
)


# --- tables --------------------------------------------------------------------------------------
@pytest.mark.parametrize("name", eseries.SERIES_NAMES)
def test_tables_match_iec_60063(name):
    # IEC 60063:2015, Tables 1 and 2 (from memory), member by member.
    assert eseries.series_values(name) == _table(name)
    assert len(eseries.series_values(name)) == int(name[1:])


@pytest.mark.parametrize("name", eseries.SERIES_NAMES)
def test_tables_match_pypi_eseries(name):
    # PyPI eseries gives integer mantissas (10 ... 91, 100 ... 988).
    scale = 10 ** (SIGNIFICANT_FIGURES[name] - 1)
    theirs = reference.series(_reference_key(name))
    mine = tuple(round(value * scale) for value in eseries.series_values(name))
    assert mine == tuple(theirs)


@pytest.mark.parametrize(
    ("coarse", "fine"), [("E6", "E12"), ("E12", "E24"), ("E48", "E96"), ("E96", "E192")]
)
def test_each_series_is_every_other_member_of_the_next(coarse, fine):
    # IEC 60063:2015: E(N) takes every second member of E(2N) within the 2- and 3-figure families.
    assert eseries.series_values(coarse) == eseries.series_values(fine)[::2]


def test_e24_departs_from_geometric_formula_at_known_values():
    # IEC 60063:2015 keeps the historical E24 values; rounded 10^(i/24) would give 2.6, 2.9, 3.2,
    # 3.5, 3.8, 4.2, 4.6 and 8.3 instead (commonly noted property of the table).
    formula = np.round(10.0 ** (np.arange(24) / 24), 1)
    table = np.array(eseries.E24)
    differs = table[np.abs(formula - table) > 1e-9]
    np.testing.assert_array_equal(differs, [2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7, 8.2])


@pytest.mark.parametrize("name", ["E48", "E96", "E192"])
def test_three_figure_series_follow_formula_except_920(name):
    # IEC 60063:2015, Table 2: 10^(i/N) rounded to three figures, except 9.20 in E192
    # (the formula gives 9.19).
    count = int(name[1:])
    formula = np.round(10.0 ** (np.arange(count) / count), 2)
    table = np.array(eseries.series_values(name))
    differs = [
        (float(f), float(t)) for f, t in zip(formula, table, strict=True) if abs(f - t) > 1e-9
    ]
    assert differs == ([(9.19, 9.20)] if name == "E192" else [])


@pytest.mark.parametrize("name", eseries.SERIES_NAMES)
def test_neighbour_ratio_is_tenth_root_within_table_rounding(name):
    # Geometric definition of a preferred-number series: member i is about 10^(i/N), so the ratio
    # of neighbours is about 10^(1/N). Each member departs from the formula by at most the
    # table's rounding (half a unit of the third figure, 0.5 %, for E48+) or, for the historical
    # two-figure values, 4.5 % (3.3 against 3.16); a ratio may carry two such errors.
    count = int(name[1:])
    table = np.array(eseries.series_values(name))
    formula = 10.0 ** (np.arange(count) / count)
    member_error = 0.045 if count <= 24 else 0.0057
    assert np.all(np.abs(table / formula - 1.0) <= member_error)
    ratios = np.append(table[1:], 10.0 * table[0]) / table
    ratio_error = (1.0 + member_error) / (1.0 - member_error) - 1.0
    assert np.all(np.abs(ratios / 10.0 ** (1.0 / count) - 1.0) <= ratio_error)


# --- names ---------------------------------------------------------------------------------------
def test_series_name_lookup_is_case_insensitive():
    assert eseries.canonical_series_name("e24") == "E24"
    assert eseries.canonical_series_name(" E192 ") == "E192"
    assert eseries.series_values("e6") == eseries.E6


@pytest.mark.parametrize("bad", ["E3", "E25", "", "R10", 24])
def test_unknown_series_names_the_valid_ones(bad):
    with pytest.raises(SizingError, match="E6, E12, E24, E48, E96, E192"):
        eseries.series_values(bad)
    assert issubclass(SizingError, StringcheckError)
    assert issubclass(SizingError, ValueError)


# --- rounding: worked cases ----------------------------------------------------------------------
def test_exact_preferred_values_are_kept():
    # 4.7e3 and 3.3e-9 are not exact binary fractions; they must not fall to the member below.
    assert eseries.round_down(4.7e3, "E24") == 4.7e3
    assert eseries.round_up(4.7e3, "E24") == 4.7e3
    assert eseries.round_down(1e-9 * 3.3, "E24") == 3.3e-9
    assert eseries.round_up(1e-9 * 3.3, "E24") == 3.3e-9
    assert eseries.round_nearest(3.3 * 1e-9, "E6") == 3.3e-9
    assert eseries.round_down(0.1 + 0.2, "E12") == 0.27
    assert eseries.round_down(0.1 + 0.2, "E24") == 0.3  # 0.30000000000000004 is 0.3 within 1e-9
    assert eseries.round_down(1e3 * (1 - 1e-12), "E24") == 1e3


def test_results_are_the_floats_a_user_would_type():
    assert eseries.round_up(3.2e-9, "E24") == 3.3e-9
    assert eseries.round_down(4.99e6, "E24") == 4.7e6
    assert eseries.round_up(1.001e-12, "E192") == 1.01e-12
    assert eseries.round_down(9.95e5, "E192") == 9.88e5
    assert eseries.round_up(9.9e5, "E192") == 1e6


def test_every_member_over_thirty_decades_rounds_to_itself():
    # Each member typed as text ("4.7e-9") is found by all three roundings and by is_preferred.
    for name in eseries.SERIES_NAMES:
        values = np.array(
            [
                float(f"{mantissa}e{exponent}")
                for exponent in range(-15, 16)
                for mantissa in _table(name)
            ]
        )
        np.testing.assert_array_equal(eseries.round_down(values, name), values)
        np.testing.assert_array_equal(eseries.round_up(values, name), values)
        np.testing.assert_array_equal(eseries.round_nearest(values, name), values)
        assert np.all(eseries.is_preferred(values, name))
        # and one more member up, crossing decades where needed
        np.testing.assert_array_equal(eseries.step(values[:-1], name, 1), values[1:])


def test_shapes_follow_input():
    grid = np.array([[1.1e3, 2.3e3], [4.8e-6, 9.9e9]])
    assert eseries.round_down(grid, "E12").shape == (2, 2)
    np.testing.assert_array_equal(
        eseries.round_down(grid, "E12"), [[1.0e3, 2.2e3], [4.7e-6, 8.2e9]]
    )
    assert np.ndim(eseries.round_up(2.3e3, "E12")) == 0


@pytest.mark.parametrize("bad", [0.0, -1.0, math.inf, math.nan, 1e-300])
def test_values_outside_range_are_refused(bad):
    with pytest.raises(SizingError, match="value"):
        eseries.round_down(bad, "E24")


def test_round_nearest_uses_log_scale():
    # Between 1.0 and 1.5 (E6) the geometric mean is 1.2247 and the arithmetic mean 1.25:
    # 1.23 is nearer 1.5 in log scale, nearer 1.0 on a linear scale.
    assert eseries.round_nearest(1.23, "E6") == 1.5
    assert eseries.round_nearest(1.22, "E6") == 1.0
    assert reference.find_nearest(reference.E6, 1.23) == 1.0  # linear, for contrast


def test_step_crosses_decades_both_ways():
    assert eseries.step(1e3, "E24", -1) == 910.0
    assert eseries.step(9.1e2, "E24", 1) == 1e3
    assert eseries.step(4.7e3, "E24", 1) == 5.1e3
    assert eseries.step(1.0, "E6", 12) == 100.0
    assert eseries.step(1.0, "E6", -1) == 0.68
    assert eseries.step(1.0, "E6", -7) == 0.068
    np.testing.assert_array_equal(eseries.step(np.array([1.0, 1.0]), "E6", [1, -1]), [1.5, 0.68])


def test_step_refuses_values_off_the_series():
    with pytest.raises(SizingError, match="not a member of E24"):
        eseries.step(4.8e3, "E24", 1)
    with pytest.raises(SizingError, match="whole number"):
        eseries.step(4.7e3, "E24", 0.5)


def test_values_between_matches_pypi_erange():
    mine = eseries.values_between(1e3, 1e4, "E12")
    expected = [
        1.0e3, 1.2e3, 1.5e3, 1.8e3, 2.2e3, 2.7e3, 3.3e3, 3.9e3, 4.7e3, 5.6e3, 6.8e3, 8.2e3, 1e4
    ]  # fmt: skip
    np.testing.assert_array_equal(mine, expected)
    for name in eseries.SERIES_NAMES:
        low, high = 3.3e-10, 2.2e-7
        theirs = list(reference.erange(_reference_key(name), low, high))
        np.testing.assert_allclose(eseries.values_between(low, high, name), theirs, rtol=1e-12)
    assert eseries.values_between(4.8, 5.0, "E12").size == 0
    with pytest.raises(SizingError, match="must not exceed"):
        eseries.values_between(2.0, 1.0, "E12")


# --- cross-check with the PyPI eseries package on random values ----------------------------------
RANDOM_VALUES = 10.0 ** np.random.default_rng(60063).uniform(-14.0, 14.0, size=300)


@pytest.mark.parametrize("name", eseries.SERIES_NAMES)
def test_rounding_agrees_with_pypi_eseries(name):
    key = _reference_key(name)
    down = eseries.round_down(RANDOM_VALUES, name)
    up = eseries.round_up(RANDOM_VALUES, name)
    nearest = eseries.round_nearest(RANDOM_VALUES, name)
    for value, d, u, n in zip(RANDOM_VALUES, down, up, nearest, strict=True):
        assert d == pytest.approx(reference.find_less_than_or_equal(key, value), rel=1e-12)
        assert u == pytest.approx(reference.find_greater_than_or_equal(key, value), rel=1e-12)
        linear = reference.find_nearest(key, value)
        if n != pytest.approx(linear, rel=1e-12):
            # The package picks the nearest on a linear scale; we pick it on a log scale. They
            # may differ only between the geometric and the arithmetic mean of the neighbours.
            assert math.sqrt(d * u) <= value <= (d + u) / 2


# --- tolerance-aware picks -----------------------------------------------------------------------
def test_largest_resistor_with_tolerance_worked_example():
    # Hand calculation: bound 5 MOhm, +/-5 %: R <= 5e6 / 1.05 = 4.762e6, so E24 gives 4.7 MOhm;
    # with +/-1 % R <= 4.950e6 and E96 gives 4.87 MOhm.
    assert eseries.largest_with_tolerance(5e6, "E24", 0.05) == 4.7e6
    assert eseries.largest_with_tolerance(5e6, "E96", 0.01) == 4.87e6
    # A bound exactly at R (1 + t) admits R.
    assert eseries.largest_with_tolerance(4.7e6 * 1.05, "E24", 0.05) == 4.7e6


def test_smallest_capacitor_with_tolerance_worked_example():
    # Hand calculation: bound 2 nF, +/-10 %: C >= 2e-9 / 0.9 = 2.222e-9, so E12 gives 2.7 nF
    # (2.2 nF at -10 % is 1.98 nF, below the bound).
    assert eseries.smallest_with_tolerance(2e-9, "E12", 0.10) == 2.7e-9
    assert eseries.smallest_with_tolerance(2.2e-9 * 0.9, "E12", 0.10) == 2.2e-9


@pytest.mark.parametrize("bad", [-0.01, 1.0, 2.0])
def test_tolerance_must_be_a_fraction(bad):
    with pytest.raises(SizingError, match="tolerance"):
        eseries.largest_with_tolerance(1e6, "E24", bad)
    with pytest.raises(SizingError, match="tolerance"):
        eseries.smallest_with_tolerance(1e-9, "E24", bad)


@given(bound=positive_values, name=series_names, tolerance=st.floats(0.0, 0.5))
def test_tolerance_picks_are_extreme(bound, name, tolerance):
    slack = 1.0 + 1e-9
    resistor = float(eseries.largest_with_tolerance(bound, name, tolerance))
    assert resistor * (1.0 + tolerance) <= bound * slack
    assert float(eseries.step(resistor, name, 1)) * (1.0 + tolerance) > bound
    capacitor = float(eseries.smallest_with_tolerance(bound, name, tolerance))
    assert capacitor * (1.0 - tolerance) * slack >= bound
    assert float(eseries.step(capacitor, name, -1)) * (1.0 - tolerance) < bound


# --- hypothesis properties -----------------------------------------------------------------------
@given(value=positive_values, name=series_names)
def test_round_down_and_up_bracket_the_value(value, name):
    down = float(eseries.round_down(value, name))
    up = float(eseries.round_up(value, name))
    assert down <= value * (1.0 + 1e-9)
    assert up >= value * (1.0 - 1e-9)
    assert _decimal_member(down, name)
    assert _decimal_member(up, name)
    if eseries.is_preferred(value, name):
        assert down == up
    else:
        # no member strictly between: up is the next member after down
        assert up == float(eseries.step(down, name, 1))


@given(value=positive_values, name=series_names)
def test_rounding_is_idempotent(value, name):
    for rounding in (eseries.round_down, eseries.round_up, eseries.round_nearest):
        once = rounding(value, name)
        assert rounding(once, name) == once


@given(first=positive_values, second=positive_values, name=series_names)
def test_rounding_is_monotone(first, second, name):
    low, high = sorted((first, second))
    for rounding in (eseries.round_down, eseries.round_up, eseries.round_nearest):
        assert rounding(low, name) <= rounding(high, name)


@given(value=positive_values, name=series_names)
def test_round_nearest_is_the_log_nearest_neighbour(value, name):
    nearest = float(eseries.round_nearest(value, name))
    down = float(eseries.round_down(value, name))
    up = float(eseries.round_up(value, name))
    assert nearest in (down, up)
    assert abs(math.log(value / nearest)) <= min(
        abs(math.log(value / down)), abs(math.log(value / up))
    ) + 1e-9


@given(value=positive_values, name=series_names, steps=st.integers(-400, 400))
def test_step_there_and_back(value, name, steps):
    member = eseries.round_nearest(value, name)
    assert eseries.step(eseries.step(member, name, 1), name, -1) == member
    assert eseries.step(eseries.step(member, name, steps), name, -steps) == member
    # N steps is exactly one decade
    assert eseries.step(member, name, int(name[1:])) == pytest.approx(10.0 * member, rel=1e-15)


@settings(max_examples=50)
@given(values=st.lists(positive_values, min_size=1, max_size=20), name=series_names)
def test_vectorized_equals_elementwise(values, name):
    array = eseries.round_down(np.array(values), name)
    np.testing.assert_array_equal(array, [eseries.round_down(value, name) for value in values])
