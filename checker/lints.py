"""Design lints: slips in a circuit file that no limit catches, reported as warnings (docs/lints.md).

Each lint is a `Finding` of a built-in warning rule `lint.CODE`, so it is reported in every
format, waived, compared with the base revision and promoted to a failure by `--strict`
exactly like a warning limit. Only lints that fire become findings. Static lints read the
declared parts; operating-point lints read the nominal operating point of every case.
The thresholds are common practice (the plausible value ranges, 50 % tolerance, 0.3 V
of forward bias), not values from a standard.
"""

from __future__ import annotations

import difflib
import math
import re
from collections import defaultdict
from typing import Iterable, Sequence

from checker.design import Design, OperatingPoint, Part
from checker.errors import Location
from checker.findings import LINT_SOURCE, Finding, Limit, Outcome
from checker.units import PREFIXES, SPELLINGS, UNITS, format_value

EVERY_CASE = "every case"  # the case of a lint on the declared parts, which holds in every case

# The rule of each lint in words (the limit's `check` in reports), by code.
RULES = {
    "single-connection": "every net joins at least two pins, or a limit names it",
    "implausible-value": "a part's value lies within the range usual for its kind",
    "slipped-prefix": "a value is not in milli where the design's other values of its kind are in mega",
    "wide-tolerance": "a tolerance is at most 50 %",
    "threshold-sign": "an nmos threshold is 0 V or more, a pmos threshold 0 V or less",
    "swapped-transistor": "a conducting bipolar transistor is not forward-biased at its base-collector junction "
                          "while reverse-biased at its base-emitter junction",
    "delivers-power": "a part that can only dissipate absorbs power, and a regulator or converter "
                      "draws power from its input",
}
IDS = tuple(f"lint.{code}" for code in RULES)

# Plausible primary values by (kind, unit), as magnitudes in SI; 0 means no lower end (common practice).
PLAUSIBLE = {
    ("resistor", "ohm"): (1e-3, 1e12),
    ("load", "ohm"): (1e-3, 1e12),
    ("capacitor", "F"): (1e-13, 1.0),
    ("inductor", "H"): (1e-9, 100.0),
    ("source", "V"): (0.0, 1e5),
    ("source", "A"): (0.0, 1e3),
    ("load", "A"): (0.0, 1e3),
    ("load", "W"): (0.0, 1e5),
}
SYMBOLS = {"ohm": "Ω", "F": "F", "H": "H", "V": "V", "A": "A", "W": "W"}
WIDE_TOLERANCE = 0.5
FORWARD_BIAS = 0.3  # V across a silicon junction that conducts noticeably (common practice)
ONLY_DISSIPATE = ("resistor", "capacitor", "inductor", "load", "switch", "diode", "led", "zener", "bjt", "mosfet")
CONVERTS = ("regulator", "converter")
POWER_FLOOR = 1e-9  # of the circuit's largest part power: below it a negative power is rounding
BARE_NUMBER = re.compile(r"(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?\s*(?:[,#]|$)")
WRITTEN_QUANTITY = re.compile(r"(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][-+]?\d+)?\s*([^\W\d_]+)\s*(?:[,#]|$)")


def lint_circuit(design: Design, points: Sequence[OperatingPoint], named: Iterable[str]) -> list[Finding]:
    """Every lint that fires on `design` and its nominal operating points; `named` holds every name
    the limits applying to the circuit use (a net a limit names is kept on purpose)."""
    found = [*single_connections(design, set(named)), *implausible_values(design), *slipped_prefixes(design),
             *wide_tolerances(design), *threshold_signs(design)]
    return found + swapped_transistors(design, points) + power_deliverers(design, points)


def _finding(code: str, design: Design, item: str, message: str, at: Location | None,
             outcomes: Sequence[Outcome]) -> Finding:
    limit = Limit(id=f"lint.{code}", about=message, check=RULES[code], severity="warning", source=LINT_SOURCE,
                  location=at)
    return Finding(limit, design.name, item, tuple(outcomes), "pass", item_location=at)


def _static(value: float, bound: float, unit: str) -> Outcome:
    """The failing outcome of a lint on declared values: the value against the end it crosses (NaN:
    none, the lint is not a comparison). A lint has no relative margin: it is not a limit's margin."""
    margin = -abs(value - bound) if math.isfinite(bound) else math.nan
    return Outcome(EVERY_CASE, value, bound, margin, math.nan, unit, holds=False)


def single_connections(design: Design, named: set[str]) -> list[Finding]:
    """Nets that join one pin only: usually a misspelt net name, which floats silently."""
    pins: dict[str, list[tuple[Part, str]]] = defaultdict(list)
    for part in design.parts:
        for pin, net in part.pins:
            pins[net].append((part, pin))
    found = []
    for net, joined in pins.items():
        if len(joined) != 1 or net == design.ground or net in named:
            continue
        part, pin = joined[0]
        close = difflib.get_close_matches(net, [n for n in pins if n != net], n=3, cutoff=0.6)
        hint = f"; did you mean {' or '.join(f'`{n}`' for n in close)}?" if close else ""
        message = (f"net `{net}` joins one pin only ({part.name}.{pin}): a net must join two pins to carry "
                   f"current, and a misspelt net name makes such a node{hint}")
        found.append(_finding("single-connection", design, net, message, part.spots.get(pin, part.location),
                              [_static(1.0, 2.0, "")]))
    return found


def implausible_values(design: Design) -> list[Finding]:
    """Primary values far outside what parts of their kind are made with, most often a slipped prefix."""
    found = []
    for part in design.parts:
        span = PLAUSIBLE.get((part.kind, part.value_unit or ""))
        if span is None or part.value is None:
            continue
        low, high = span
        size = abs(part.value)
        if low <= size <= high or size == 0.0 and low == 0.0:
            continue
        symbol = SYMBOLS[part.value_unit]
        usual = (f"{format_value(low, symbol)} to {format_value(high, symbol)}" if low
                 else f"up to {format_value(high, symbol)}")
        message = (f"{part.name} is {format_value(part.value, symbol)}, outside the range usual for a "
                   f"{part.kind} ({usual}); check the unit prefix")
        bound = high if size > high else low
        found.append(_finding("implausible-value", design, part.name, message,
                              part.spots.get("value", part.location),
                              [_static(part.value, math.copysign(bound, part.value), symbol)]))
    return found


def written_prefix(part: Part) -> tuple[str, str] | None:
    """(prefix, unit as written) of a value written as one number and one prefixed unit (`10 mohm`);
    None for an expression, a let name or an unprefixed unit."""
    at = part.spots.get("value")
    line = at.source_line if at else None
    if line is None:
        return None
    match = WRITTEN_QUANTITY.match(line, at.column - 1)
    if match is None:
        return None
    unit = match.group(1).translate(SPELLINGS)
    if len(unit) > 1 and unit[0] in PREFIXES and unit[1:] in UNITS and unit not in UNITS:
        return unit[0], match.group(1)
    return None


def slipped_prefixes(design: Design) -> list[Finding]:
    """Values in milli (`10 mohm`, 10 mΩ) where the design's other values of that kind are in mega:
    `m` for `M` turns a pull-up into a short."""
    written = {part.name: written_prefix(part) for part in design.parts}
    found = []
    for part in design.parts:
        prefix = written[part.name]
        if prefix is None or prefix[0] != "m":
            continue
        mega = next((other for other in design.parts if other.kind == part.kind
                     and other.value_unit == part.value_unit and (written[other.name] or ("",))[0] == "M"), None)
        if mega is None:
            continue
        unit = prefix[1]
        message = (f"{part.name} is written in {unit} (milli), while {mega.name} of the same kind is written in "
                   f"{written[mega.name][1]} (mega); did you mean `{'M' + unit[1:]}`?")
        found.append(_finding("slipped-prefix", design, part.name, message, part.spots.get("value", part.location),
                              [_static(part.value, math.nan, SYMBOLS.get(part.value_unit or "", ""))]))
    return found


def wide_tolerances(design: Design) -> list[Finding]:
    """Tolerances above 50 %: accepted (below 100 %), but most often a percentage written as a bare
    number (`tol = 0.6` is 60 %)."""
    found = []
    for part in design.parts:
        tol = part.props.get("tol", 0.0)
        if tol > WIDE_TOLERANCE:
            at = part.spots.get("tol")
            bare = at is not None and BARE_NUMBER.match(at.source_line or "", at.column - 1) is not None
            hint = f"; a bare number is a fraction: did you mean tol = {tol:g}%?" if bare else ""
            message = f"{part.name} has tol = {tol * 100:g} %, wider than the 50 % parts are made with{hint}"
            found.append(_finding("wide-tolerance", design, part.name, message, part.spots.get("tol", part.location),
                                  [_static(tol * 100, WIDE_TOLERANCE * 100, "%")]))
    return found


def threshold_signs(design: Design) -> list[Finding]:
    """An nmos with a negative or a pmos with a positive threshold: in this model's convention
    (docs/models.md) the sign says the type, so a sign slip makes an enhancement part a depletion one."""
    found = []
    for part in design.parts:
        vth = part.props.get("vth")
        if part.kind != "mosfet" or vth is None:
            continue
        pmos = "pmos" in part.flags
        if (vth > 0.0) if pmos else (vth < 0.0):
            expected = "negative" if pmos else "positive"
            message = (f"{part.name} is {'a pmos' if pmos else 'an nmos'} with vth = {format_value(vth, 'V')}; "
                       f"an enhancement {'pmos' if pmos else 'nmos'} has a {expected} threshold, so this one "
                       f"conducts with no gate drive; did you mean vth = {format_value(-vth, 'V')}?")
            found.append(_finding("threshold-sign", design, part.name, message, part.spots.get("vth", part.location),
                                  [_static(vth, 0.0, "V")]))
    return found


def _by_part(design: Design, points: Sequence[OperatingPoint], kinds: Sequence[str]) -> dict[str, list]:
    """For each declared part of `kinds`: (operating point, part as fitted in that case) in every case
    where it is present."""
    present: dict[str, list] = {part.name: [] for part in design.parts if part.kind in kinds}
    for point in points:
        for part in point.netlist.parts:
            if part.name in present and part.name in point.parts:
                present[part.name].append((point, part))
    return present


def swapped_transistors(design: Design, points: Sequence[OperatingPoint]) -> list[Finding]:
    """Bipolar transistors working reverse-active: base-collector forward-biased, base-emitter reverse-biased.

    A transistor is built to work the other way round, so at the operating point this is almost
    always a collector and an emitter swapped in the file (or an npn where a pnp was meant)."""
    found = []
    for name, present in _by_part(design, points, ("bjt",)).items():
        outcomes, worst = [], None
        for point, part in present:
            sign = -1.0 if "pnp" in part.flags else 1.0
            base = point.nets[part.net("b")]
            vbc, vbe = sign * (base - point.nets[part.net("c")]), sign * (base - point.nets[part.net("e")])
            if vbc >= FORWARD_BIAS and vbe < 0.0:
                outcomes.append(Outcome(point.case, sign * vbc, math.nan, math.nan, math.nan, "V", holds=False))
                worst = worst or (part, vbc, vbe, point.case)
        if worst:
            part, vbc, vbe, case = worst
            polarity = "pnp" if "pnp" in part.flags else "npn"
            message = (f"{part.name} ({polarity}) works reverse-active in case `{case}`: its base-collector junction "
                       f"is forward-biased ({format_value(vbc, 'V')}) and its base-emitter junction reverse-biased "
                       f"({format_value(vbe, 'V')}); collector and emitter look swapped"
                       + (", or the part is not an " + polarity if polarity == "npn" else ", or it is not a pnp"))
            found.append(_finding("swapped-transistor", design, name, message, part.location, outcomes))
    return found


def power_deliverers(design: Design, points: Sequence[OperatingPoint]) -> list[Finding]:
    """Parts that give out power they cannot have: a dissipating part with negative power, a regulator
    or converter whose input receives power (its output is driven from outside, or its pins swapped)."""
    found = []
    floors: dict[int, float] = {}  # per operating point, computed once: not once per part (quadratic)
    for name, present in _by_part(design, points, ONLY_DISSIPATE + CONVERTS).items():
        outcomes, first = [], None
        for point, part in present:
            if id(point) not in floors:
                floors[id(point)] = POWER_FLOOR * max((abs(result.power) for result in point.parts.values()),
                                                      default=0.0)
            floor = floors[id(point)]
            power = point.parts[name].power
            if part.kind in CONVERTS:
                power = min(power, _input_power(point, part))
            if power < -floor:
                outcomes.append(Outcome(point.case, power, 0.0, power, math.nan, "W", holds=False))
                first = first or (part, power, point)
        if first:
            part, power, point = first
            case, delivered = point.case, format_value(-power, "W")
            if part.kind in CONVERTS and _input_power(point, part) == power:
                message = (f"{part.name} ({part.kind}) delivers {delivered} into its input in case `{case}`: "
                           "it is fed backwards through its output, or its in and out pins are swapped")
            elif part.kind in CONVERTS:
                message = (f"{part.name} ({part.kind}) gives out {delivered} more than it draws in case `{case}`: "
                           "its output is held above what its input can give, or its pins are swapped")
            else:
                message = (f"{part.name} ({part.kind}) delivers {delivered} in case `{case}`, but a {part.kind} "
                           "can only absorb power: a source or a pin is likely connected the wrong way round")
            found.append(_finding("delivers-power", design, name, message, part.location, outcomes))
    return found


def _input_power(point: OperatingPoint, part: Part) -> float:
    """Power into a regulator's or converter's input port: (V_in - V_gnd) x the current into `in`."""
    volts = point.nets[part.net("in")] - point.nets[part.net("gnd")]
    return volts * point.parts[part.name].pins["in"]
