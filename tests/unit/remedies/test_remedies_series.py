"""The IEC 60063 preferred number series and snapping.

The tables are typed from IEC 60063:2015 "Preferred number series for resistors and capacitors",
Table 1 (E3 to E24) and Table 2 (E48 to E192) [table numbers from memory], here as integers
(tenths, hundredths). E12, E24 and E96 are written out as the standard prints them; E6, E3 and E48
take every other value of the next finer series (a property of the standard's tables); E192 is
the rounded geometric series round(100 · 10^(i/192)) except at i = 185, where the standard keeps 920.
"""

from __future__ import annotations

import math

import pytest

from checker.language import parse_design
from checker.remedies import series
from checker.remedies.series import (E3, E6, E12, E24, E48, E96, E192, POWER_RATINGS, nearest, neighbours,
                                     on_series, preferred_value, series_for, snap)

IEC_E12 = (10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82)
IEC_E24 = (10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30, 33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91)
IEC_E96 = (100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130, 133, 137, 140, 143, 147, 150, 154, 158,
           162, 165, 169, 174, 178, 182, 187, 191, 196, 200, 205, 210, 215, 221, 226, 232, 237, 243, 249, 255,
           261, 267, 274, 280, 287, 294, 301, 309, 316, 324, 332, 340, 348, 357, 365, 374, 383, 392, 402, 412,
           422, 432, 442, 453, 464, 475, 487, 499, 511, 523, 536, 549, 562, 576, 590, 604, 619, 634, 649, 665,
           681, 698, 715, 732, 750, 768, 787, 806, 825, 845, 866, 887, 909, 931, 953, 976)


def test_tables_as_iec_60063_prints_them():
    assert E12 == IEC_E12 and E24 == IEC_E24 and E96 == IEC_E96
    assert E6 == IEC_E12[::2] == (10, 15, 22, 33, 47, 68)
    assert E3 == E6[::2] == (10, 22, 47)
    assert E12 == E24[::2] and E48 == IEC_E96[::2] and E96 == E192[::2]
    assert [len(s) for s in (E3, E6, E12, E24, E48, E96, E192)] == [3, 6, 12, 24, 48, 96, 192]


def test_e24_keeps_its_historic_values_where_the_geometric_series_differs():
    geometric = [round(10 * 10 ** (i / 24)) for i in range(24)]
    differ = {i: (E24[i], geometric[i]) for i in range(24) if E24[i] != geometric[i]}
    assert differ == {10: (27, 26), 11: (30, 29), 12: (33, 32), 13: (36, 35), 14: (39, 38),
                      15: (43, 42), 16: (47, 46), 22: (82, 83)}


def test_e96_is_the_geometric_series_and_e192_has_one_exception():
    assert list(E96) == [round(100 * 10 ** (i / 96)) for i in range(96)]
    geometric = [round(100 * 10 ** (i / 192)) for i in range(192)]
    assert [i for i in range(192) if E192[i] != geometric[i]] == [185]
    assert E192[185] == 920 and geometric[185] == 919


@pytest.mark.parametrize("tol, name", [(0.05, "E24"), (0.01, "E96"), (0.02, "E48"), (0.10, "E12"), (0.20, "E6"),
                                       (0.30, "E3"), (0.005, "E192"), (0.001, "E192"), (0.03, "E24"),
                                       (None, "E24")])
def test_series_of_a_tolerance(tol, name):
    assert series_for(tol) == name


@pytest.mark.parametrize("x, name, direction, expected", [
    (150.0, "E12", +1, 180.0), (150.0, "E12", -1, 120.0),
    (9.5, "E24", +1, 10.0), (9.1, "E24", +1, 10.0), (10.0, "E24", -1, 9.1), (1.0, "E12", -1, 0.82),
    (97.6, "E96", +1, 100.0), (100.0, "E96", -1, 97.6), (0.0988, "E192", +1, 0.1), (1e3, "E192", -1, 988.0),
    (4285.714, "E96", -1, 4220.0), (23333.3, "E96", +1, 23700.0), (0.0012, "E96", +1, 0.00121),
    (1e6, "E3", +1, 2.2e6), (-150.0, "E12", +1, -120.0), (-150.0, "E12", -1, -180.0),
])
def test_snapping_past_a_value_in_either_direction_across_decades(x, name, direction, expected):
    assert snap(x, name, direction) == expected


def test_a_value_within_float_rounding_of_a_series_value_is_that_value():
    written = parse_design('circuit c "c"\nground gnd\nresistor R1 from a to gnd : 4.7 kohm\n').parts[0].value
    assert on_series(written, "E24") and nearest(written, "E24") == written
    assert snap(written, "E24", +1) == 5100.0 and snap(written * (1 + 1e-12), "E24", -1) == 4300.0


def test_nearest_and_neighbours():
    assert nearest(3400.0, "E24") == 3300.0 and nearest(3500.0, "E24") == 3600.0
    assert nearest(4700.0, "E96") == 4750.0 and neighbours(4700.0, "E96") == (4640.0, 4750.0)
    assert preferred_value(4700.0, 0.05) == 4700.0 and preferred_value(4700.0, 0.01) == 4750.0
    assert preferred_value(0.0, 0.05) == 0.0


def test_power_ratings_and_round_values():
    assert POWER_RATINGS == (0.05, 0.0625, 0.1, 0.125, 0.25, 0.5, 1.0, 2.0, 3.0, 5.0)
    assert snap(0.32, series.RATINGS, +1) == 0.5 and snap(0.5, series.RATINGS, +1) == 1.0
    assert snap(5.0, series.RATINGS, +1) is None and snap(0.04, series.RATINGS, -1) is None
    assert snap(3.18, series.ROUND, -1) == 3.1 and snap(6.7, series.ROUND, +1) == 6.8
    assert snap(0.03, series.ROUND, -1) == pytest.approx(0.029, rel=1e-15)
    assert math.isclose(snap(99.5, series.ROUND, +1), 100.0)
