"""Margins of comparisons, as docs/limits.md ("Margins") defines them.

`a <= b` -> b - a; `a >= b` -> a - b; `x in lo .. hi` -> min(x - lo, hi - x);
`and` -> the smaller margin, `or` -> the larger; `not` flips the sign. Strict `<`
and `>` hold only when the margin is above zero. A margin is positive when the
check holds and is in the units of its comparison (SI; kelvin for temperatures).

The relative margin is the margin over the comparison's reference `scale`, chosen so
that relative margins compare across limits: a window's half-width, the headroom from
the ambient to the bound for absolute temperatures, otherwise |bound| (|value| when
the bound is 0).
"""

from __future__ import annotations

from dataclasses import dataclass

from checker.findings import Outcome
from checker.units import Dim, display_symbol

NO_HEADROOM = 1e-9
"""A bound within this share of its kelvin value of the ambient has no headroom to measure against."""


def reference_scale(value: float, bound: float, ambient: float | None = None) -> float:
    """What a one-sided margin is relative to. `ambient` (K) only for absolute temperatures: then the
    headroom the design had before dissipating anything, |bound - ambient|, since a bound's distance
    from absolute zero says nothing about it; otherwise, or with no headroom, |bound|, or |value|
    when the bound is 0."""
    if ambient is not None:
        headroom = abs(bound - ambient)
        if headroom > NO_HEADROOM * abs(bound):
            return headroom
    return abs(bound) or abs(value)


def window_scale(low: float, high: float, value: float, bound: float, ambient: float | None = None) -> float:
    """What a margin in `low .. high` is relative to: the half-width, so the centre reads 100 %;
    an empty window (low == high) falls back to `reference_scale`."""
    half = (high - low) / 2
    return half if half > 0 else reference_scale(value, bound, ambient)


def relative_margin(margin: float, scale: float) -> float:
    """The margin over its reference scale; 0 when there is no scale (value and bound both 0)."""
    return margin / scale if scale else 0.0


@dataclass(frozen=True)
class Verdict:
    """The deciding comparison of a condition: its two sides, margin, whether it holds, and the
    reference `scale` its relative margin is measured against."""

    margin: float
    value: float
    bound: float
    holds: bool
    dim: Dim
    absolute: bool
    scale: float

    @property
    def relative(self) -> float:
        return relative_margin(self.margin, self.scale)

    def outcome(self, case: str, corner: str = "") -> Outcome:
        return Outcome(case=case, value=self.value, bound=self.bound, margin=self.margin,
                       relative=self.relative, unit=display_symbol(self.dim), absolute=self.absolute,
                       holds=self.holds, corner=corner)


def compare(op: str, left: float, right: float, dim: Dim, absolute: bool, ambient: float | None = None) -> Verdict:
    """`left op right` for op in `<= < >= >`; `ambient` (K) is the case's, for temperatures."""
    margin = right - left if op in ("<=", "<") else left - right
    holds = margin > 0 if op in ("<", ">") else margin >= 0
    scale = reference_scale(left, right, ambient if absolute else None)
    return Verdict(margin, left, right, holds, dim, absolute, scale)


def in_range(value: float, low: float, high: float, dim: Dim, absolute: bool,
             ambient: float | None = None) -> Verdict:
    """`value in low .. high`, inclusive; the nearer end is the bound."""
    above, below = value - low, high - value
    bound, margin = (low, above) if above <= below else (high, below)
    scale = window_scale(low, high, value, bound, ambient if absolute else None)
    return Verdict(margin, value, bound, margin >= 0, dim, absolute, scale)


def _key(verdict: Verdict, other: Verdict) -> float:
    """Margins in one unit compare directly; across units (volts and amps) by relative margin."""
    same = verdict.dim == other.dim and verdict.absolute == other.absolute
    return verdict.margin if same else verdict.relative


def both(a: Verdict, b: Verdict) -> Verdict:
    """`a and b`: the smaller margin decides; on a tie a failing side decides."""
    first = (_key(a, b), a.holds) <= (_key(b, a), b.holds)
    decider = a if first else b
    return Verdict(decider.margin, decider.value, decider.bound, a.holds and b.holds, decider.dim, decider.absolute,
                   decider.scale)


def either(a: Verdict, b: Verdict) -> Verdict:
    """`a or b`: the larger margin decides; on a tie a holding side decides."""
    first = (_key(a, b), a.holds) >= (_key(b, a), b.holds)
    decider = a if first else b
    return Verdict(decider.margin, decider.value, decider.bound, a.holds or b.holds, decider.dim, decider.absolute,
                   decider.scale)


def negate(a: Verdict) -> Verdict:
    """`not a`: the margin changes sign (so `not (x <= b)` behaves as the strict `x > b`)."""
    return Verdict(-a.margin, a.value, a.bound, not a.holds, a.dim, a.absolute, a.scale)
