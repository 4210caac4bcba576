"""Quantities with physical dimensions, SI prefixes and engineering formatting.

Everything below the language and limit parsers is plain SI floats; this module is
the door: it turns `4.7 kohm` into 4700.0 with the dimension of resistance, checks
that arithmetic keeps dimensions consistent, and formats results as `4.70 kΩ`.

Temperatures are kept in kelvin. A quantity written in `degC` is an *absolute*
temperature (affine scale): it may be compared with other temperatures and offset
by temperature differences (`K`), but not added to another absolute temperature,
multiplied or divided.
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass

# Exponents over the SI base units (kg, m, s, A, K).
Dim = tuple[int, int, int, int, int]

DIMENSIONLESS: Dim = (0, 0, 0, 0, 0)
VOLT: Dim = (1, 2, -3, -1, 0)
AMPERE: Dim = (0, 0, 0, 1, 0)
WATT: Dim = (1, 2, -3, 0, 0)
OHM: Dim = (1, 2, -3, -2, 0)
SIEMENS: Dim = (-1, -2, 3, 2, 0)
FARAD: Dim = (-1, -2, 4, 2, 0)
HENRY: Dim = (1, 2, -2, -2, 0)
KELVIN: Dim = (0, 0, 0, 0, 1)
SECOND: Dim = (0, 0, 1, 0, 0)

ZERO_CELSIUS = 273.15  # K, by definition of the Celsius scale (SI Brochure, 9th ed., 2019, 2.3.1)

PREFIXES: dict[str, float] = {
    "p": 1e-12, "n": 1e-9, "u": 1e-6, "µ": 1e-6, "m": 1e-3,
    "k": 1e3, "M": 1e6, "G": 1e9, "T": 1e12,
}

# symbol -> (scale to SI, dimension)
UNITS: dict[str, tuple[float, Dim]] = {
    "V": (1.0, VOLT), "A": (1.0, AMPERE), "W": (1.0, WATT),
    "ohm": (1.0, OHM), "Ω": (1.0, OHM), "S": (1.0, SIEMENS),
    "F": (1.0, FARAD), "H": (1.0, HENRY), "K": (1.0, KELVIN), "s": (1.0, SECOND),
    "%": (0.01, DIMENSIONLESS), "ppm": (1e-6, DIMENSIONLESS),
}
# The other code points of micro (Greek mu) and ohm (the ohm sign), as both languages accept
# them (docs/language.md, Quantities): read as the spellings above.
SPELLINGS = str.maketrans({"\u03bc": "\u00b5", "\u2126": "\u03a9"})
# Units that take no prefix: `m%` or `kdegC` mean nothing.
UNPREFIXED = {"%", "ppm", "degC"}

# Display symbol for the dimensions a board designer meets, in order of preference.
_DISPLAY: dict[Dim, str] = {
    VOLT: "V", AMPERE: "A", WATT: "W", OHM: "Ω", SIEMENS: "S", FARAD: "F",
    HENRY: "H", KELVIN: "K", SECOND: "s", DIMENSIONLESS: "",
    (-1, -2, 3, 0, 1): "K/W", (0, 0, 0, 0, -1): "1/K", (1, 2, -3, -1, -1): "V/K",
    (-2, -4, 6, 3, 0): "A/V²", (-1, -2, 3, 1, 0): "1/V",
}
_BASE_NAMES = ("kg", "m", "s", "A", "K")


def dim_mul(a: Dim, b: Dim) -> Dim:
    return tuple(x + y for x, y in zip(a, b))  # type: ignore[return-value]


def dim_div(a: Dim, b: Dim) -> Dim:
    return tuple(x - y for x, y in zip(a, b))  # type: ignore[return-value]


def dim_pow(a: Dim, n: int) -> Dim:
    return tuple(x * n for x in a)  # type: ignore[return-value]


def dim_name(dim: Dim) -> str:
    """A readable unit for a dimension: `V`, `K/W`, or a product of SI base units."""
    if dim in _DISPLAY:
        return _DISPLAY[dim] or "dimensionless"
    parts = [f"{base}^{exp}" if exp != 1 else base for base, exp in zip(_BASE_NAMES, dim) if exp]
    return "·".join(parts)


def display_symbol(dim: Dim) -> str:
    """The symbol to print after a number of this dimension (empty for dimensionless)."""
    return _DISPLAY.get(dim, dim_name(dim))


@dataclass(frozen=True)
class Quantity:
    """An SI value with its dimension. `absolute` marks a temperature on the Celsius scale."""

    value: float
    dim: Dim = DIMENSIONLESS
    absolute: bool = False


def unit_scale(symbol: str) -> tuple[float, Dim, bool] | None:
    """Scale, dimension and absolute-temperature flag of one unit symbol with an optional prefix.

    Returns None when the symbol is not a unit. `degC` is absolute: its scale is 1 and
    `quantity` adds ZERO_CELSIUS.
    """
    if symbol == "degC":
        return 1.0, KELVIN, True
    if symbol in UNITS:
        scale, dim = UNITS[symbol]
        return scale, dim, False
    prefix, rest = symbol[:1], symbol[1:]
    if prefix in PREFIXES and rest in UNITS and rest not in UNPREFIXED:
        scale, dim = UNITS[rest]
        return PREFIXES[prefix] * scale, dim, False
    return None


def quantity(number: float, symbol: str) -> Quantity:
    """A number as written with its unit: `quantity(4.7, "kohm")` -> Quantity(4700.0, OHM).

    The one conversion of literals for both the circuit and the limit language, so that
    the same text gives the same float in both: a sign belongs to the written number
    (`quantity(-20, "degC")` is -20 + 273.15 K). `symbol` is any unit `parse_unit`
    reads; an empty one is a plain number. ValueError for a unit that is not one,
    OverflowError for a power too large to represent.
    """
    if not symbol:
        return Quantity(number)
    scale, dim, absolute = parse_unit(symbol)
    if absolute:
        return Quantity(number + ZERO_CELSIUS, KELVIN, True)
    return Quantity(number * scale, dim)


_ENG_PREFIXES = [(1e12, "T"), (1e9, "G"), (1e6, "M"), (1e3, "k"), (1.0, ""),
                 (1e-3, "m"), (1e-6, "µ"), (1e-9, "n"), (1e-12, "p"), (1e-15, "f")]


def format_value(value: float, symbol: str, digits: int = 3) -> str:
    """Engineering notation with `digits` significant figures: `4.70 kΩ`, `12.0 mA`, `-3.30 V`.

    Zero prints as `0 V`; non-finite values print as they are.
    """
    if not math.isfinite(value):
        return f"{value} {symbol}".strip()
    if value == 0:
        return f"0 {symbol}".strip()
    if symbol in UNPREFIXED:  # `-382 m%` means nothing: these units take no prefix
        return f"{_significant(value, digits)} {symbol}"
    rounded = float(f"{value:.{digits - 1}e}")  # round first so 999.7 becomes 1.00 k, not 1000
    if not _ENG_PREFIXES[-1][0] <= abs(rounded) < 1000 * _ENG_PREFIXES[0][0]:
        # below the smallest prefix or past the largest: plain scientific notation
        return f"{rounded:.{digits - 1}e} {symbol}".rstrip()
    scale, prefix = next(((s, p) for s, p in _ENG_PREFIXES if abs(rounded) >= s), _ENG_PREFIXES[-1])
    scaled = rounded / scale
    decimals = max(digits - 1 - int(math.floor(math.log10(abs(scaled)))), 0)
    return f"{scaled:.{decimals}f} {prefix}{symbol}".rstrip()


def _significant(number: float, digits: int) -> str:
    """`number` with `digits` significant figures in plain notation (`0.0038`, `125`), scientific
    notation only far from one (below 1e-4 or from 1e6 on), where plain digits would run long."""
    if number == 0 or not math.isfinite(number):
        return f"{number:g}"
    if not 1e-4 <= abs(number) < 1e6:
        return f"{number:.{digits - 1}e}"
    rounded = float(f"{number:.{digits - 1}e}")
    decimals = max(digits - 1 - int(math.floor(math.log10(abs(rounded)))), 0)
    return f"{rounded:.{decimals}f}"


def format_percent(fraction: float) -> str:
    """A fraction as a percentage, never with an SI prefix: one decimal from 1 % on (`-12.7 %`),
    two significant figures below (`-0.38 %`, `0.0012 %`) so a small margin does not read as
    `0.0 %`; beyond ±1e6 % in scientific notation, `-6.26e+270 %`, so that an absurd design
    (a 1e-300 ohm resistor) prints a short line, not 300 digits."""
    percent = fraction * 100
    if math.isfinite(percent) and abs(percent) >= 1e6:
        return f"{percent:.3g} %"
    if math.isfinite(percent) and 0 < abs(percent) < 1:
        return f"{percent:.2g} %"
    return f"{percent:.1f} %"


def format_temperature(kelvin: float, decimals: int = 1) -> str:
    """An absolute temperature in degrees Celsius: `85.0 °C` (more `decimals` where two must differ)."""
    return f"{kelvin - ZERO_CELSIUS:.{decimals}f} °C"


def parse_unit(text: str) -> tuple[float, Dim, bool]:
    """Scale, dimension and absolute flag of a unit text such as `kohm`, `ppm/K`, `mA/V^2`, `V^-1`.

    Factors are joined by `/` or `*`, each with an optional integer power `^N`.
    Raises ValueError with a short reason for anything else. `degC` stands only alone.
    Greek mu and the ohm sign read as the micro sign and omega (SPELLINGS).
    """
    text = text.translate(SPELLINGS)
    tokens = re.findall(r"([*/]?)([^*/^\s]+)(?:\^(-?\d+))?", text.replace(" ", ""))
    if not tokens or "".join(op + sym + (f"^{p}" if p else "") for op, sym, p in tokens) != text.replace(" ", ""):
        raise ValueError(f"`{text}` is not a unit")
    scale, dim, absolute = 1.0, DIMENSIONLESS, False
    for index, (op, symbol, power) in enumerate(tokens):
        if (index == 0) == bool(op):
            raise ValueError(f"`{text}` is not a unit")
        found = unit_scale(symbol)
        if found is None:
            raise ValueError(f"unknown unit `{symbol}`")
        factor_scale, factor_dim, factor_absolute = found
        if factor_absolute and (len(tokens) > 1 or power):
            raise ValueError("`degC` is a temperature on a shifted scale; use `K` inside a compound unit")
        exponent = int(power or 1) * (-1 if op == "/" else 1)
        scale *= factor_scale ** exponent
        dim = dim_mul(dim, dim_pow(factor_dim, exponent))
        absolute = factor_absolute
    return scale, dim, absolute

