"""Geometry of the margin chart the HTML report draws for each finding (SVG user units, px).

One horizontal bar per outcome (case, and corner when tolerances are analysed), from
the zero-margin line (where the value sits exactly on the limit) to the outcome's
margin: to the right when the limit holds, to the left when it fails. The text at
the right says the margin in words, with "FAIL" for failing bars, so the chart also
reads in black and white. An outcome with no operating point (margin −inf) is a failing bar
cut at the plot's left edge, marked with an arrowhead there and labelled in words instead
of a number. With --base, a dashed line marks the base revision's worst margin.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from checker.findings import Finding, Outcome
from checker.report.overview import shorten
from checker.report.view import NO_POINT, case_label, format_base_margin, format_margin, margin_unit

WIDTH = 640.0
LABEL_WIDTH = 170.0  # case names, left
LABEL_CHARS = 26  # characters of a case name that fit there at 12 px; a tolerance corner is cut
TEXT_WIDTH = 150.0  # margin in words, right
BAR_HEIGHT = 16.0
ROW_STEP = 24.0
TOP = 26.0  # room for the zero-line label
BOTTOM = 10.0
PLOT_LEFT = LABEL_WIDTH + 10.0
PLOT_RIGHT = WIDTH - TEXT_WIDTH - 10.0


@dataclass(frozen=True)
class Bar:
    label: str  # the case and corner, shortened to fit
    title: str  # the same unshortened, for the tooltip
    text: str
    holds: bool
    x: float
    y: float
    width: float
    clipped: bool = False  # the margin lies beyond the plot's left edge (no operating point)


@dataclass(frozen=True)
class Chart:
    title: str
    width: float
    height: float
    zero_x: float
    bars: tuple[Bar, ...]
    base_x: float | None = None
    base_text: str = ""

    label_x: float = LABEL_WIDTH - 4.0  # case names end here
    text_x: float = WIDTH - 6.0  # margins in words end here
    bar_height: float = BAR_HEIGHT

    @property
    def plot_bottom(self) -> float:
        return self.height - BOTTOM


def scale(lo: float, hi: float):
    """A linear map from margins in [lo, hi] to x in [PLOT_LEFT, PLOT_RIGHT]; lo < hi."""
    def to_x(margin: float) -> float:
        return PLOT_LEFT + (margin - lo) / (hi - lo) * (PLOT_RIGHT - PLOT_LEFT)
    return to_x


def _span(margins: list[float]) -> tuple[float, float]:
    """The margins' range, always including zero; widened when it is a single point, and to the
    left at least as far as to the right when a margin is −inf, so its bar has room to fail."""
    finite = [m for m in margins if math.isfinite(m)] or [0.0]
    lo, hi = min(min(finite), 0.0), max(max(finite), 0.0)
    if -math.inf in margins:
        lo = min(lo, -hi)
    if hi - lo <= 0.0:
        return -1.0, 1.0
    return lo, hi


def _clip(margin: float, lo: float, hi: float) -> float:
    """Non-finite margins drawn at the end of the plot, on their side."""
    if math.isnan(margin):
        return 0.0
    return min(max(margin, lo), hi)


def _bar_text(outcome: Outcome) -> str:
    """The margin in words, or why there is none; failing bars say FAIL first."""
    text = NO_POINT if outcome.error else format_margin(outcome.margin, outcome.unit, outcome.absolute)
    return text if outcome.holds else f"FAIL {text}"


def margin_chart(finding: Finding) -> Chart:
    """The chart of one finding's margin in every outcome, in order."""
    outcomes = finding.outcomes
    margins = [o.margin for o in outcomes]
    if finding.base_margin is not None:
        margins.append(finding.base_margin)
    lo, hi = _span(margins)
    to_x = scale(lo, hi)
    zero = to_x(0.0)
    bars = []
    for index, outcome in enumerate(outcomes):
        end = to_x(_clip(outcome.margin, lo, hi))
        label = case_label(outcome)
        bars.append(Bar(label=shorten(label, LABEL_CHARS), title=label, text=_bar_text(outcome), holds=outcome.holds,
                        x=min(zero, end), y=TOP + index * ROW_STEP, width=abs(end - zero),
                        clipped=outcome.margin == -math.inf))
    base_x = base_text = None
    if finding.base_margin is not None and outcomes:
        base_x = to_x(_clip(finding.base_margin, lo, hi))
        base_text = "base " + format_base_margin(finding.base_margin, *margin_unit(finding))
    height = TOP + len(outcomes) * ROW_STEP + BOTTOM
    title = finding.limit.id + (f" [{finding.item}]" if finding.item else "")
    return Chart(title=title, width=WIDTH, height=height, zero_x=zero, bars=tuple(bars),
                 base_x=base_x, base_text=base_text or "")
