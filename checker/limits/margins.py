"""Margins of comparisons, as docs/limits.md ("Margins") defines them.

`a <= b` -> b - a; `a >= b` -> a - b; `x in lo .. hi` -> min(x - lo, hi - x);
`and` -> the smaller margin, `or` -> the larger; `not` flips the sign. Strict `<`
and `>` hold only when the margin is above zero. A margin is positive when the
check holds and is in the units of its comparison (SI; kelvin for temperatures).
"""

from __future__ import annotations

from dataclasses import dataclass

from checker.findings import Outcome
from checker.units import Dim, display_symbol


def relative_margin(margin: float, value: float, bound: float) -> float:
    """The margin over the limit's scale: |bound|, or |value| when the bound is 0, or 0 when both are."""
    scale = abs(bound) or abs(value)
    return margin / scale if scale else 0.0


@dataclass(frozen=True)
class Verdict:
    """The deciding comparison of a condition: its two sides, margin and whether it holds."""

    margin: float
    value: float
    bound: float
    holds: bool
    dim: Dim
    absolute: bool = False

    @property
    def relative(self) -> float:
        return relative_margin(self.margin, self.value, self.bound)

    def outcome(self, case: str, corner: str = "") -> Outcome:
        return Outcome(case=case, value=self.value, bound=self.bound, margin=self.margin,
                       relative=self.relative, unit=display_symbol(self.dim), absolute=self.absolute,
                       holds=self.holds, corner=corner)


def compare(op: str, left: float, right: float, dim: Dim, absolute: bool) -> Verdict:
    """`left op right` for op in `<= < >= >`."""
    margin = right - left if op in ("<=", "<") else left - right
    holds = margin > 0 if op in ("<", ">") else margin >= 0
    return Verdict(margin, left, right, holds, dim, absolute)


def in_range(value: float, low: float, high: float, dim: Dim, absolute: bool) -> Verdict:
    """`value in low .. high`, inclusive; the nearer end is the bound."""
    above, below = value - low, high - value
    bound, margin = (low, above) if above <= below else (high, below)
    return Verdict(margin, value, bound, margin >= 0, dim, absolute)


def _key(verdict: Verdict, other: Verdict) -> float:
    """Margins in one unit compare directly; across units (volts and amps) by relative margin."""
    same = verdict.dim == other.dim and verdict.absolute == other.absolute
    return verdict.margin if same else verdict.relative


def both(a: Verdict, b: Verdict) -> Verdict:
    """`a and b`: the smaller margin decides; on a tie a failing side decides."""
    first = (_key(a, b), a.holds) <= (_key(b, a), b.holds)
    decider = a if first else b
    return Verdict(decider.margin, decider.value, decider.bound, a.holds and b.holds, decider.dim, decider.absolute)


def either(a: Verdict, b: Verdict) -> Verdict:
    """`a or b`: the larger margin decides; on a tie a holding side decides."""
    first = (_key(a, b), a.holds) >= (_key(b, a), b.holds)
    decider = a if first else b
    return Verdict(decider.margin, decider.value, decider.bound, a.holds or b.holds, decider.dim, decider.absolute)


def negate(a: Verdict) -> Verdict:
    """`not a`: the margin changes sign (so `not (x <= b)` behaves as the strict `x > b`)."""
    return Verdict(-a.margin, a.value, a.bound, not a.holds, a.dim, a.absolute)
