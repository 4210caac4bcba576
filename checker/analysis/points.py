"""Points of the tolerance box in words a shell accepts: `R1=+5%,U1.vout=-2.5%`.

Reports print `nodegate solve FILE --case C --at POINT` beside a failing worst case;
`solve --at` parses the same text back, so every reported point can be reproduced.
A value is named as in `Tolerance.name`: the part for its primary value, `PART.vout`
for a regulator's output voltage. Deviations are percentages of the declared value.
"""

from __future__ import annotations

import re
import shlex
from decimal import Decimal
from typing import Iterable, Mapping, Sequence

from checker.analysis.tolerances import Tolerance, named_deviation, primary_values, toleranced
from checker.design import Netlist
from checker.errors import DesignError, did_you_mean

MAX_PERCENT = Decimal(1_000_000)  # a deviation above this is a typo, not an exploration
FIXED_FROM = -6  # percentages with a smaller decimal exponent are written as 1e-9, not 0.000000001
LISTED = 10  # values named in an error before "and N more"
SLACK = 1e-9  # relative: `tol = 0.7%` as elaborated is one bit below `--at` 0.7 %, yet at the band's end
_ENTRY = re.compile(r"\s*([A-Za-z_][\w.]*)\s*=\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*%\s*")


def format_deviation(deviation: float) -> str:
    """`+5%`, `-2.5%`, `+0%`: a fraction as a signed percentage, ASCII only (it goes into commands).

    The digits are the shortest that give the float back (its repr), shifted two places,
    so `parse_point` returns the very deviation a report found, not one rounded near it.
    """
    if deviation == 0.0:
        return "+0%"
    shifted = Decimal(repr(deviation)).scaleb(2).normalize()
    text = format(shifted, "f" if shifted.adjusted() >= FIXED_FROM else "e")
    return (text if text.startswith("-") else "+" + text) + "%"


def format_point(point: Iterable[tuple[str, float]]) -> str:
    """Every (name, deviation) joined: `R1=+5%,U1.vout=-5%`; values at 0 are left out."""
    return ",".join(f"{name}={format_deviation(d)}" for name, d in point if d != 0.0)


def point_label(point: Iterable[tuple[str, float]]) -> str:
    """`R1 +5 %, U1.vout −2.5 %` for people; unlike `corner_label` it names every value, as a
    reproduced point must be shown whole."""
    return ", ".join(named_deviation(name, d) for name, d in point)


def _entry(text: str) -> tuple[str, Decimal]:
    match = _ENTRY.fullmatch(text)
    if match is None:
        raise DesignError(f"`--at` entry `{text.strip()}` is not NAME=±X%", None,
                          ("write for example `--at \"R1=+5%,U1.vout=-2%\"`",))
    return match.group(1), Decimal(match.group(2))


def parse_point(text: str) -> dict[str, float]:
    """`R1=+5%,U1.vout=-5%` -> {"R1": 0.05, "U1.vout": -0.05}; DesignError naming the bad entry.

    The percentage is divided by 100 in decimal, then rounded once to a float, so the
    text `format_point` writes gives back exactly the float it was written from.
    """
    found: dict[str, float] = {}
    for entry in text.split(","):
        if not entry.strip():
            continue
        name, percent = _entry(entry)
        if name in found:
            raise DesignError(f"`--at` names `{name}` twice")
        fraction = float(percent.scaleb(-2))
        if not (percent <= MAX_PERCENT and fraction > -1.0):  # -99.99...9 % rounds to -1: a value of 0
            raise DesignError(f"`--at` moves `{name}` by {percent:g} %: a deviation must be above "
                              f"\u2212100 % and at most {MAX_PERCENT:,} %")
        found[name] = fraction
    if not found:
        raise DesignError("`--at` names no value", None, ("write for example `--at \"R1=+5%,U1.vout=-2%\"`",))
    return found


def reproduce_command(path: str, case: str, point: Sequence[tuple[str, float]]) -> str:
    """The command that solves `path` in `case` at `point` (quoted for a POSIX shell)."""
    words = ["nodegate", "solve", path, "--case", case]
    text = format_point(point)
    if text:
        words += ["--at", text]
    return " ".join(shlex.quote(word) for word in words)


def movable(netlist: Netlist) -> dict[str, Tolerance]:
    """Every value `--at` may move in this case, by name, with its declared tolerance (0 when none).

    Any value a tolerance could move is allowed, not only toleranced ones: a reviewer
    may ask what a part without `tol` would do at +5 %.
    """
    declared = {t.name: t for t in toleranced(netlist)}
    return {t.name: declared.get(t.name, t) for t in primary_values(netlist, 0.0)}


def _listing(names: Sequence[str]) -> str:
    rest = len(names) - LISTED
    return ", ".join(names[:LISTED]) + (f" and {rest} more" if rest > 0 else "")


def _unknown(name: str, values: Mapping[str, Tolerance], netlist: Netlist) -> DesignError:
    """Why `name` is no value of the case, with the name that was probably meant."""
    parts = {p.name: p for p in netlist.parts}
    owner = name if name in parts else name.rpartition(".")[0]
    where = f"circuit `{netlist.circuit}` in case `{netlist.case}`"
    if owner in parts:
        kind = parts[owner].kind
        named = [t.name for t in values.values() if t.part == owner]
        if named:
            return DesignError(f"`--at` names `{name}`, but the value of {kind} `{owner}` is named `{named[0]}`",
                               None, (f"write `{named[0]}=...`; only a regulator's output voltage is "
                                      "named `PART.vout`, other parts' values by the part's name",))
        return DesignError(f"`--at` names `{name}`, but {kind} `{owner}` has no value a tolerance moves",
                           None, (f"values it can move in {where}: {_listing(list(values))}",))
    return DesignError(f"`--at` names `{name}`, which is not a value of {where}", None,
                       did_you_mean(name, values) + (f"values it can move: {_listing(list(values))}",))


def _resolve(name: str, values: Mapping[str, Tolerance], netlist: Netlist) -> Tolerance:
    """The value `name` means: its `Tolerance.name`, or `PART.value` for a part's primary value."""
    if name in values:
        return values[name]
    part, _, prop = name.rpartition(".")
    if prop == "value" and part in values:
        return values[part]
    raise _unknown(name, values, netlist)


def resolve_point(point: Mapping[str, float], netlist: Netlist) -> tuple[tuple[Tolerance, float], ...]:
    """Each named value of `point` in this case, with its deviation; DesignError for a name it cannot move."""
    values = movable(netlist)
    resolved: dict[str, tuple[Tolerance, float]] = {}
    for name, deviation in point.items():
        value = _resolve(name, values, netlist)
        if value.name in resolved:
            raise DesignError(f"`--at` names `{value.name}` twice (as `{name}` too)")
        resolved[value.name] = (value, deviation)
    return tuple(resolved.values())


def outside_band(value: Tolerance, deviation: float) -> bool:
    """Whether `deviation` lies beyond the declared tolerance (any nonzero deviation when none is declared)."""
    return abs(deviation) > value.fraction * (1.0 + SLACK)
