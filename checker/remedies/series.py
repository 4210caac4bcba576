"""Values a part can be bought in: the IEC 60063 preferred number series, common power ratings and
round numbers, and snapping a value to the next one of them in a given direction.

The E-series tables are IEC 60063:2015 "Preferred number series for resistors and capacitors",
Table 1 (E3, E6, E12, E24: two significant figures) and Table 2 (E48, E96, E192: three)
[table numbers from memory, not confirmed]. They are not the rounded geometric series
round(10^(i/n)) throughout: E24 keeps the historic 2.7 3.0 3.3 3.6 3.9 4.3 4.7 (i = 10..16) and
8.2 (i = 22), and E192 keeps 9.20 (i = 185), so the tables are written out here, never computed.
Each series has the tolerance it is made for (the same standard; the 2015 edition revised that
relationship): E3 above 20 %, E6 20 %, E12 10 %, E24 5 %, E48 2 %, E96 1 %, E192 0.5 % and finer.

Mantissas are integers (tenths for E3..E24, hundredths for E48..E192), so that a value is built
from its decimal digits and compares exactly with a value written in a circuit file.
"""

from __future__ import annotations

import math
from typing import Sequence

import numpy as np

# IEC 60063:2015, Table 1: one decade, in tenths (1.0 ... 9.1).
E3 = (10, 22, 47)
E6 = (10, 15, 22, 33, 47, 68)
E12 = (10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82)
E24 = (10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30, 33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91)

# IEC 60063:2015, Table 2: one decade, in hundredths (1.00 ... 9.88).
E48 = (100, 105, 110, 115, 121, 127, 133, 140, 147, 154, 162, 169, 178, 187, 196, 205, 215, 226, 237, 249,
       261, 274, 287, 301, 316, 332, 348, 365, 383, 402, 422, 442, 464, 487, 511, 536, 562, 590, 619, 649,
       681, 715, 750, 787, 825, 866, 909, 953)
E96 = (100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130, 133, 137, 140, 143, 147, 150, 154, 158,
       162, 165, 169, 174, 178, 182, 187, 191, 196, 200, 205, 210, 215, 221, 226, 232, 237, 243, 249, 255,
       261, 267, 274, 280, 287, 294, 301, 309, 316, 324, 332, 340, 348, 357, 365, 374, 383, 392, 402, 412,
       422, 432, 442, 453, 464, 475, 487, 499, 511, 523, 536, 549, 562, 576, 590, 604, 619, 634, 649, 665,
       681, 698, 715, 732, 750, 768, 787, 806, 825, 845, 866, 887, 909, 931, 953, 976)
E192 = (100, 101, 102, 104, 105, 106, 107, 109, 110, 111, 113, 114, 115, 117, 118, 120, 121, 123, 124, 126,
        127, 129, 130, 132, 133, 135, 137, 138, 140, 142, 143, 145, 147, 149, 150, 152, 154, 156, 158, 160,
        162, 164, 165, 167, 169, 172, 174, 176, 178, 180, 182, 184, 187, 189, 191, 193, 196, 198, 200, 203,
        205, 208, 210, 213, 215, 218, 221, 223, 226, 229, 232, 234, 237, 240, 243, 246, 249, 252, 255, 258,
        261, 264, 267, 271, 274, 277, 280, 284, 287, 291, 294, 298, 301, 305, 309, 312, 316, 320, 324, 328,
        332, 336, 340, 344, 348, 352, 357, 361, 365, 370, 374, 379, 383, 388, 392, 397, 402, 407, 412, 417,
        422, 427, 432, 437, 442, 448, 453, 459, 464, 470, 475, 481, 487, 493, 499, 505, 511, 517, 523, 530,
        536, 542, 549, 556, 562, 569, 576, 583, 590, 597, 604, 612, 619, 626, 634, 642, 649, 657, 665, 673,
        681, 690, 698, 706, 715, 723, 732, 741, 750, 759, 768, 777, 787, 796, 806, 816, 825, 835, 845, 856,
        866, 876, 887, 898, 909, 920, 931, 942, 953, 965, 976, 988)

SERIES: dict[str, tuple[int, ...]] = {"E3": E3, "E6": E6, "E12": E12, "E24": E24,
                                      "E48": E48, "E96": E96, "E192": E192}
# The tolerance each series is made for, finest first: a part takes the first series whose tolerance
# is at least its own (a 3 % part: E24). E3 serves everything coarser than 20 %.
FOR_TOLERANCE = (("E192", 0.005), ("E96", 0.01), ("E48", 0.02), ("E24", 0.05), ("E12", 0.10), ("E6", 0.20))
UNTOLERANCED = "E24"  # a resistor or capacitor that declares no `tol`: the series most commonly stocked

# Rated powers of resistors in common use, in W: 1/20, 1/16, 1/10, 1/8, 1/4, 1/2, 1, 2, 3, 5 W
# (manufacturers' practice, e.g. chip sizes 0201 to 2512; not a standard table).
POWER_RATINGS = (0.05, 0.0625, 0.1, 0.125, 0.25, 0.5, 1.0, 2.0, 3.0, 5.0)
RATINGS = "power ratings"
ROUND = "round"  # everything else: round numbers, two significant figures
ROUND_DIGITS = tuple(range(10, 100))
SAME = 1e-9  # values closer than this share are one value: float rounding of a decimal written value


def series_for(tol: float | None) -> str:
    """The E-series name for a part of tolerance `tol` (a fraction), UNTOLERANCED without one."""
    if tol is None:
        return UNTOLERANCED
    for name, made_for in FOR_TOLERANCE:
        if tol <= made_for * (1 + SAME):
            return name
    return "E3"


def _mantissas(series: str) -> tuple[int, ...]:
    return ROUND_DIGITS if series == ROUND else SERIES[series]


def _decade_values(mantissas: Sequence[int], exponent: int) -> list[float]:
    """The values of one decade, from their decimal digits: mantissa × 10^(exponent − digits + 1)."""
    digits = len(str(mantissas[0]))
    return [float(f"{m}e{exponent - digits + 1}") for m in mantissas]


def _around(x: float, series: str) -> list[float]:
    """The series' values in the decades below, of and above positive `x`, ascending."""
    exponent = math.floor(math.log10(x))
    mantissas = _mantissas(series)
    return [v for e in (exponent - 1, exponent, exponent + 1) for v in _decade_values(mantissas, e)]


def snap(x: float, series: str, direction: int) -> float | None:
    """The first value of `series` strictly past `x` in `direction` (+1 up, −1 down); values within
    SAME of `x` count as `x` itself. Negative values snap by magnitude; None past the end of a
    finite list (the power ratings) or for zero."""
    if x == 0.0 or not math.isfinite(x):
        return None
    if x < 0.0:
        found = snap(-x, series, -direction)
        return None if found is None else -found
    if series == RATINGS:
        values = list(POWER_RATINGS)
    else:
        values = _around(x, series)
    if direction > 0:
        return next((v for v in values if v > x * (1 + SAME)), None)
    return next((v for v in reversed(values) if v < x * (1 - SAME)), None)


def on_series(x: float, series: str) -> bool:
    """Whether `x` is a value of `series` (within SAME)."""
    if x <= 0.0 or not math.isfinite(x):
        return False
    values = list(POWER_RATINGS) if series == RATINGS else _around(x, series)
    return any(abs(v - x) <= SAME * x for v in values)


def nearest(x: float, series: str) -> float:
    """The value of `series` nearest `x` (by ratio: the series are geometric); `x` itself when it is on
    the series, so a written value compares equal; the lower one on a tie. Zero stays zero."""
    if x == 0.0 or not math.isfinite(x) or on_series(abs(x), series):
        return x
    if x < 0.0:
        return -nearest(-x, series)
    below, above = snap(x, series, -1), snap(x, series, +1)
    if below is None or above is None:
        return below if above is None else above  # type: ignore[return-value]
    return below if x / below <= above / x else above


def neighbours(x: float, series: str) -> tuple[float | None, float | None]:
    """The values of `series` just below and just above `x` (`x` itself excluded)."""
    return snap(x, series, -1), snap(x, series, +1)


def _preferred_scalar(x: float, tol: float) -> float:
    return nearest(float(x), series_for(float(tol)))


_PREFERRED_ARRAY = np.vectorize(_preferred_scalar, otypes=[float])


def preferred_value(x, tol):
    """The limit function `preferred(X, TOL)`: `x` snapped to the nearest value of the series made for
    tolerance `tol`; elementwise on the arrays of a tolerance analysis (`checker.analysis.stacked`)."""
    if isinstance(x, np.ndarray) or isinstance(tol, np.ndarray):
        return _PREFERRED_ARRAY(x, tol)
    return _preferred_scalar(x, tol)


def series_words(series: str) -> str:
    """What a value of `series` is, in words: `E24 value`, `common power rating`, `round value ...`."""
    if series == RATINGS:
        return "common power rating"
    if series == ROUND:
        return "round value (two significant figures)"
    return f"{series} value"
