"""Geometry of the margin overview at the top of the HTML report (SVG user units, px).

One horizontal bar per finding (limit x circuit x item), worst first, from the zero line
(the value sits exactly on the limit) to the finding's relative margin in its worst case
(the margin over the limit's scale, as in the tables), drawn within ±CLIP and marked
with an arrowhead where it goes further. Beside each bar: the relative margin as a
number (the true one, also when clipped) and, for bars that do not simply hold, FAIL,
WARN or WAIVED, so the chart reads without colour. A finding whose worst case has no
operating point (relative margin −inf) comes first, as a failing bar cut at the left edge,
with "no operating point" written in the empty right half of its row. Long reports show
the MAX_BARS worst and say how many more the circuit sections hold.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from checker.report.view import NO_POINT, Row, case_label, format_relative

MAX_BARS = 40
CLIP = 1.0  # relative margin drawn at most ±100 %
TICKS = (-1.0, -0.5, 0.0, 0.5, 1.0)
WIDTH = 960.0
LABEL_RIGHT = 330.0  # limit and item (first line) and worst case (second line) end here
PLOT_LEFT = 345.0
PLOT_RIGHT = 745.0
VALUE_X = 820.0  # relative margins end here
WORD_X = 832.0  # status words start here
TOP = 40.0  # room for the side words and tick labels above the first row
ROW_STEP = 32.0  # each row: limit and item, then the worst case below it
BAR_TOP = 8.0  # the bar's offset within its row
BAR_HEIGHT = 14.0
BOTTOM = 8.0
LABEL_CHARS = 44  # monospace characters that fit left of the plot at 12 px
CASE_CHARS = 52  # proportional characters at 11 px
WORDS = {"fail": "FAIL", "warn": "WARN", "waived": "WAIVED", "pass": ""}


@dataclass(frozen=True)
class OverviewBar:
    """One finding's bar: where it is drawn and the words beside it (raw text, escaped by the template)."""

    status: str  # pass | fail | warn | waived
    label: str  # limit id and item, shortened to fit
    case: str  # worst case, shortened to fit
    title: str  # everything, unshortened, for the tooltip
    value: str  # the relative margin as text
    word: str  # FAIL, WARN, WAIVED or ""
    top: float  # top of the row
    y: float  # top of the bar
    x: float  # left end of the bar
    width: float  # 0 when the relative margin is undefined
    clipped: int  # -1 or +1 when the bar is cut at ∓CLIP, else 0
    note: str = ""  # "no operating point" instead of a margin


@dataclass(frozen=True)
class Overview:
    bars: tuple[OverviewBar, ...]
    hidden: int  # findings not drawn (beyond MAX_BARS)
    height: float
    zero_x: float
    ticks: tuple[tuple[float, str], ...]  # (x, label) along the top
    width: float = WIDTH
    label_right: float = LABEL_RIGHT
    plot_left: float = PLOT_LEFT
    plot_right: float = PLOT_RIGHT
    value_x: float = VALUE_X
    word_x: float = WORD_X
    bar_height: float = BAR_HEIGHT

    row_step: float = ROW_STEP

    @property
    def plot_top(self) -> float:
        return TOP - 4.0

    @property
    def plot_bottom(self) -> float:
        return self.height - BOTTOM


def to_x(relative: float) -> float:
    """x of a relative margin in [−CLIP, CLIP] (linear, zero in the middle)."""
    return PLOT_LEFT + (relative + CLIP) / (2.0 * CLIP) * (PLOT_RIGHT - PLOT_LEFT)


def shorten(text: str, limit: int) -> str:
    """`text` on one line (SVG text does not wrap) and cut to `limit` characters, the cut marked
    with an ellipsis."""
    text = " ".join(text.split())
    return text if len(text) <= limit else text[:limit - 1].rstrip() + "\u2026"


def _tick(relative: float) -> str:
    """`-100 %`, `0`, `+50 %`, signed as the relative margins beside the bars."""
    return "0" if relative == 0.0 else f"{relative * 100:+.0f} %"


def _relative(row: Row) -> float:
    return row.finding.worst.relative


def _order(row: Row) -> tuple[bool, float]:
    """Worst first; undefined relative margins last (sorted() keeps the order of equals)."""
    relative = _relative(row)
    return (math.isnan(relative), 0.0 if math.isnan(relative) else relative)


def _bar(row: Row, index: int, with_circuit: bool) -> OverviewBar:
    relative = _relative(row)
    drawn = 0.0 if math.isnan(relative) else min(max(relative, -CLIP), CLIP)
    zero, end = to_x(0.0), to_x(drawn)
    clipped = 0 if math.isnan(relative) or abs(relative) <= CLIP else int(math.copysign(1, relative))
    name = row.limit + (f" \u00b7 {row.item}" if row.item else "")
    name = f"{row.circuit}: {name}" if with_circuit else name
    worst = f"worst: {case_label(row.finding.worst)}"
    value = format_relative(relative)
    said = f"{NO_POINT}: {row.error}" if row.error else f"relative margin {value}"
    return OverviewBar(status=row.status, label=shorten(name, LABEL_CHARS), case=shorten(worst, CASE_CHARS),
                       title=f"{name}, {worst}, {said}", value=value,
                       word=WORDS.get(row.status, row.status.upper()), top=TOP + index * ROW_STEP,
                       y=TOP + index * ROW_STEP + BAR_TOP, x=min(zero, end), width=abs(end - zero), clipped=clipped,
                       note=NO_POINT if row.error else "")


def margin_overview(rows: tuple[Row, ...], max_bars: int = MAX_BARS) -> Overview | None:
    """The overview of every finding with outcomes, or None when there is none."""
    ranked = sorted((row for row in rows if row.finding.outcomes), key=_order)
    if not ranked:
        return None
    with_circuit = len({row.circuit for row in ranked}) > 1
    shown = ranked[:max_bars]
    bars = tuple(_bar(row, index, with_circuit) for index, row in enumerate(shown))
    ticks = tuple((to_x(t), _tick(t)) for t in TICKS)
    return Overview(bars=bars, hidden=len(ranked) - len(shown), height=TOP + len(shown) * ROW_STEP + BOTTOM,
                    zero_x=to_x(0.0), ticks=ticks)
