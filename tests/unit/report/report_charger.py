"""Hand-built worst-case Findings for the report tests: a solar charger (our own scenario, not solved).

Margins follow RULES.md (`a <= b` -> b - a, relative = margin / |bound|); an outcome without an
operating point has value and bound NaN and margin and relative −inf, as
`checker.findings.Outcome` defines it. Paths sit under ROOT, which does not exist on disk.
"""

from __future__ import annotations

import math

from checker.findings import Analysis, CircuitResult, Finding, Findings, Limit, Outcome

ROOT = "/srv/solar-repo"
CIRCUIT = f"{ROOT}/boards/charger/charger.circuit"
NO_SOLUTION = "the matrix is singular: net `sw` has no DC path to ground"

# Six toleranced values; the corner label names three, the full point all six.
POINT = (("R_TOP", 0.01), ("R_BOT", -0.01), ("VPANEL", -0.02), ("U1.vout", -0.05), ("R_LOAD", 0.05),
         ("C_IN", 0.0))
LABEL = "R_TOP +1 %, R_BOT −1 %, VPANEL −2 % and 3 more"


def limit(name: str, severity: str = "error") -> Limit:
    return Limit(id=name, about=f"about {name}", check="voltage(out) <= 5 V", severity=severity,
                 source=f"{ROOT}/limits.yaml")


def at(case: str, value: float, bound: float, unit: str = "V", **fields) -> Outcome:
    """`value <= bound` in `case`, with the worst-case fields given."""
    margin = bound - value
    return Outcome(case=case, value=value, bound=bound, margin=margin, relative=margin / abs(bound), unit=unit,
                   holds=margin >= 0, **fields)


def no_point(case: str, **fields) -> Outcome:
    return Outcome(case=case, value=math.nan, bound=math.nan, margin=-math.inf, relative=-math.inf, unit="V",
                   holds=False, error=NO_SOLUTION, **fields)


def charger() -> Findings:
    """A proved failure, a failure with no operating point, a searched pass and an unproved warning."""
    proved = Finding(limit("out-max"), "charger", None, (
        at("sunny", 4.8, 5.0, corner="nominal", method="vertices", proved=True),
        at("cloudy", 5.2, 5.0, corner=LABEL, method="vertices", proved=True, point=POINT)), "fail")
    broken = Finding(limit("sw-max"), "charger", "Q_SW", (
        at("sunny", 3.0, 5.0, corner="nominal", method="corner-search"),
        no_point("cloudy", corner=LABEL, method="corner-search", point=POINT)), "fail")
    searched = Finding(limit("ref-max"), "charger", None, (
        at("sunny", 2.0, 5.0, corner=LABEL, method="interior", point=POINT),), "pass")
    warned = Finding(limit("temp-max", "warning"), "charger", None, (
        at("sunny", 5.1, 5.0, corner=LABEL, method="vertices", point=POINT),), "warn")
    circuit = CircuitResult("charger", "Solar charger", CIRCUIT, ())
    return Findings((proved, broken, searched, warned), (circuit,), analysis=Analysis("worst-case"))
