"""Which values carry a tolerance, and netlists with those values moved.

A part's `tol` (a fraction: 1 % is 0.01) applies to its primary value (resistance,
source voltage or current, load current, power or resistance, capacitance); for a
`regulator` it applies to `vout`. A deviation d moves the value to value x (1 + d),
so a corner is a mapping part -> deviation with |d| <= tol. Case overrides count:
`tol` is read from each case's own netlist.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from typing import Mapping, Sequence

from checker.design import Netlist, Part

MAX_CORNER_PARTS = 3  # parts named in a corner's description before "and N more"
MINUS = "\u2212"


@dataclass(frozen=True)
class Tolerance:
    """One toleranced value: the part and its tolerance as a fraction (0.01 for 1 %)."""

    part: str
    fraction: float
    prop: str = "value"  # the field it moves: "value" (the primary value) or "vout" (a regulator)

    @property
    def name(self) -> str:
        """How reports and `solve --at` name the value: `R1` for a primary value, `U1.vout` otherwise."""
        return self.part if self.prop == "value" else f"{self.part}.{self.prop}"


def _moved_value(part: Part) -> str | None:
    """The field a tolerance moves: "vout" for regulators, "value" for a part with a primary value."""
    if part.kind == "regulator":
        return "vout" if "vout" in part.props else None
    return "value" if part.value is not None else None


def toleranced(netlist: Netlist) -> tuple[Tolerance, ...]:
    """Every part of the case with a tolerance above zero, in netlist order (the language keeps `tol`
    from 0 % to below 100 %, `checker.kinds`)."""
    found = []
    for part in netlist.parts:
        tol = part.props.get("tol")
        if tol is None or _moved_value(part) is None:
            continue
        if tol > 0.0:
            found.append(Tolerance(part.name, float(tol), _moved_value(part)))
    return tuple(found)


def primary_values(netlist: Netlist, fraction: float) -> tuple[Tolerance, ...]:
    """Every part with a value a tolerance could move, each given the band ±`fraction` (for `explain`)."""
    return tuple(Tolerance(part.name, fraction, _moved_value(part)) for part in netlist.parts
                 if _moved_value(part) is not None)


def _moved(part: Part, deviation: float) -> Part:
    factor = 1.0 + deviation
    if _moved_value(part) == "vout":
        return part.copy_with(props={**part.props, "vout": part.props["vout"] * factor})
    return part.copy_with(value=part.value * factor)


def perturbed(netlist: Netlist, deviations: Mapping[str, float]) -> Netlist:
    """The netlist with each named part's toleranced value multiplied by (1 + deviation)."""
    if not deviations:
        return netlist
    parts = tuple(_moved(p, deviations[p.name]) if p.name in deviations else p for p in netlist.parts)
    return dataclasses.replace(netlist, parts=parts)


def percent(deviation: float) -> str:
    """`+1 %`, `−2.5 %` (a true minus sign, as in print)."""
    text = f"{abs(deviation) * 100:.3g} %"
    return ("+" if deviation >= 0 else MINUS) + text


def named_deviation(name: str, deviation: float) -> str:
    """`R1 +5 %`: one toleranced value and its deviation, as every report and command shows it."""
    return f"{name} {percent(deviation)}"


def corner_label(deviations: Sequence[tuple[str, float]]) -> str:
    """A corner in words short enough for a table cell, most important part first.

    `deviations` are (part, deviation) in the order to name them; after
    MAX_CORNER_PARTS the rest is counted: "R_TOP +1 %, R_BOT −1 %, VBAT −2 % and 4 more".
    """
    shown = ", ".join(named_deviation(part, d) for part, d in deviations[:MAX_CORNER_PARTS])
    rest = len(deviations) - MAX_CORNER_PARTS
    return shown + (f" and {rest} more" if rest > 0 else "")
