"""Remedies of failing limits: one part change each, on a value that can be bought, confirmed on the
whole circuit (docs/remedies.md).

For each failing or warning finding (not design lints, not waived ones), worst first:

1. **Candidates.** The values that move the deciding side of the check most, each moved ±1 % alone
   at the nominal point of the worst case (`checker.analysis.sensitivity`, every primary value, with
   a tolerance or without), then the part properties the check reads by name (`U_LDO.dropout`,
   `part.rating`); at most MAX_CANDIDATES. A value a case sets (`VBAT = 3.5 V`) is a condition of
   that case, not a part choice, and is left alone.
2. **Root.** The limit's margin as a function of the one value, in the cases where it fails, each at
   the point of its worst outcome (the other toleranced values at their worst-case deviations), is
   solved by the real solver (`checker.solver`, warm-started from the last solve): a grid of factors
   either way brackets the nearest change of sign, then regula falsi with the Illinois modification
   narrows the bracket to ROOT_TOLERANCE of the value.
3. **Snap.** Past the root, in the direction that restores the margin, to the next value of the part's
   series (`checker.remedies.series`: the IEC 60063 series of its tolerance for resistors and
   capacitors, power ratings for `rating`, two significant figures otherwise).
4. **Confirm.** The changed circuit is checked again against every limit of the circuit in every
   case in the configured tolerance analysis (`checker.analysis.analyse`); when that analysis is not
   nominal, a nominal check first sorts out changes that break another limit (a worst case is never
   better than nominal) so that the costly confirmations go to the promising ones.

Findings of the `preferred-values` pack skip steps 1 to 3: their candidates are the part's own value
moved to the preferred values on either side of it.

Work is bounded per check by a `Budget` (solves and confirmations); a finding whose search it cut
short says so in its `remedy_note`.
"""

from __future__ import annotations

import dataclasses
import datetime
import math
import re
import time
from dataclasses import dataclass
from typing import Callable, Sequence

from checker.analysis.blocks import solve_each
from checker.analysis.boxpoints import BoxPoints
from checker.analysis.run import analyse, targets_of
from checker.analysis.sensitivity import Target, side_swings
from checker.analysis.tolerances import perturbed, primary_values, toleranced
from checker.analysis.worstcase import deciding_side
from checker.design import Design, Netlist, OperatingPoint, Part
from checker.findings import Analysis, Finding, Findings, Remedy
from checker.limits import LimitFile, LimitSet, compile_limits
from checker.limits.compiler import CaseValues
from checker.limits.vocabulary import property_type
from checker.remedies.series import RATINGS, ROUND, neighbours, series_for, snap
from checker.solver import Cache
from checker.units import display_symbol, parse_unit

DEFAULT_SOLVES = 3000
"""Solves the root searches of one check may spend (each netlist solved counts one): a grid and about
fifteen refining steps per candidate and failing case, so about 20 findings of 4 candidates."""
DEFAULT_CONFIRMATIONS = 6
"""Whole-circuit confirmations one check may spend in the configured analysis (a worst-case
confirmation costs as much as the check of that circuit itself). Nominal pre-checks are not counted."""
DEFAULT_SECONDS = 60.0
"""Wall-clock seconds the remedy search of one check may take; no new search or confirmation starts
after them (one that has started finishes). A safety net: the counted budgets above decide what is
found, so that the same check finds the same remedies on a fast machine and a slow one."""
MAX_CANDIDATES = 4  # values tried per finding
MAX_REMEDIES = 3  # remedies listed per finding
SWING_BAND = 0.01  # ±1 %: the move that ranks candidates
GRID = (1.02, 1.05, 1.1, 1.25, 1.5, 2.0, 3.0, 5.0, 10.0, 30.0, 100.0)  # factors tried either way
ROOT_TOLERANCE = 1e-13  # the bracket's width in ln(value) at which the root search stops
MAX_STEPS = 80
GOLDEN_STEPS = 40  # a narrow window between grid points: golden-section steps looking for a holding value
PACK = "pack:preferred-values"
STOPPED = "remedy search stopped early: its budget is spent (docs/remedies.md, \"Budget\")"
ADJUSTABLE = frozenset({"value", "vout", "rating", "dropout", "vmax", "imax", "pmax",
                        "vce_max", "vds_max", "vgs_max"})
"""Properties a remedy may change when a check reads them by name: a different part (a lower dropout,
a higher rating). Temperatures (`tj_max`), `tol`, `tempco` and model parameters are left alone."""
E_SERIES_KINDS = frozenset({"resistor", "capacitor", "inductor"})
_PROPERTY = re.compile(r"([A-Za-z_][A-Za-z0-9_.]*)\.([A-Za-z_][A-Za-z0-9_]*)")

Progress = Callable[[str], None]


@dataclass
class Budget:
    """What the remedy search of one check may still spend; `spent` once a search was cut short."""

    solves: int = DEFAULT_SOLVES
    confirmations: int = DEFAULT_CONFIRMATIONS
    seconds: float = DEFAULT_SECONDS
    spent: bool = False
    started: float = dataclasses.field(default_factory=time.monotonic)

    @property
    def out_of_time(self) -> bool:
        if time.monotonic() - self.started > self.seconds:
            self.spent = True
        return self.spent

    def take_solves(self, count: int) -> bool:
        if count > self.solves or self.out_of_time:
            self.spent = True
            return False
        self.solves -= count
        return True

    def take_confirmation(self) -> bool:
        if self.confirmations <= 0 or self.out_of_time:
            self.spent = True
            return False
        self.confirmations -= 1
        return True


@dataclass(frozen=True)
class Knob:
    """One value a remedy may change: a part's primary value ("value") or a property, declared `value`."""

    part: str
    prop: str
    value: float
    series: str
    unit: str

    @property
    def name(self) -> str:
        return self.part if self.prop == "value" else f"{self.part}.{self.prop}"


@dataclass(frozen=True)
class Candidate:
    knob: Knob
    to: float
    root: float


@dataclass(frozen=True)
class Confirmed:
    remedy: Remedy
    fixes: bool


# --- changing a value -------------------------------------------------------------------------

def _read(part: Part, prop: str) -> float | None:
    return part.value if prop == "value" else part.props.get(prop)


def _changed(part: Part, prop: str, value: float) -> Part:
    if prop == "value":
        return part.copy_with(value=value)
    return part.copy_with(props={**part.props, prop: value})


def set_value(netlist: Netlist, part: str, prop: str, value: float) -> Netlist:
    """The netlist with one value of one part replaced (a part not fitted in it: unchanged)."""
    parts = tuple(_changed(p, prop, value) if p.name == part else p for p in netlist.parts)
    return dataclasses.replace(netlist, parts=parts)


def changed_design(design: Design, part: str, prop: str, value: float) -> Design:
    """The design with one declared value changed, in its declared parts and in every case."""
    parts = tuple(_changed(p, prop, value) if p.name == part else p for p in design.parts)
    netlists = tuple(set_value(n, part, prop, value) for n in design.netlists)
    return dataclasses.replace(design, parts=parts, netlists=netlists)


# --- candidates -------------------------------------------------------------------------------

def _knob(design: Design, part: Part, prop: str) -> Knob | None:
    """The knob for `prop` of `part`, or None when it has no such value, it is zero, or a case sets it."""
    value = _read(part, prop)
    if value is None or value == 0.0 or not math.isfinite(value):
        return None
    for netlist in design.netlists:
        fitted = next((p for p in netlist.parts if p.name == part.name), None)
        if fitted is not None and _read(fitted, prop) != value:
            return None  # a case sets it: an operating condition, not a part choice
    if prop == "value":
        unit = display_symbol(parse_unit(part.value_unit or "")[1]) if part.value_unit else ""
        series = series_for(part.props.get("tol")) if part.kind in E_SERIES_KINDS else ROUND
    else:
        typed = property_type(part.kind, prop)
        unit = display_symbol(typed[0]) if typed else ""
        series = RATINGS if prop == "rating" else ROUND
    return Knob(part.name, prop, float(value), series, unit)


def _named_in_check(finding: Finding, design: Design) -> list[tuple[Part, str]]:
    """The (part, property) pairs the check reads by name: `U_LDO.dropout`, `part.rating`."""
    declared = {part.name: part for part in design.parts}
    found = []
    for name, prop in _PROPERTY.findall(finding.limit.check):
        owner = finding.item if name == "part" else name
        if owner in declared and prop in ADJUSTABLE:
            found.append((declared[owner], "value" if prop == "value" else prop))
    return found


def candidate_knobs(finding: Finding, design: Design, target: Target, point: OperatingPoint,
                    budget: Budget, cache: Cache) -> list[Knob]:
    """The values most worth changing: those moving the deciding side most (±1 % each, at the nominal
    point of the worst case), then the properties the check names; at most MAX_CANDIDATES."""
    declared = {part.name: part for part in design.parts}
    netlist = point.netlist
    bands = primary_values(netlist, SWING_BAND)
    pairs: list[tuple[Part, str]] = []
    if bands and budget.take_solves(2 * len(bands)):
        box = BoxPoints(netlist, bands, point, cache)
        swing = side_swings(box, [target])[target.key]
        by_name = {band.name: band for band in bands}
        for name, _ in swing.drivers(deciding_side(target.item.split, point), limit=len(bands)):
            band = by_name[name]
            pairs.append((declared[band.part], band.prop))
    pairs += _named_in_check(finding, design)
    knobs: list[Knob] = []
    for part, prop in pairs:
        knob = _knob(design, part, prop)
        if knob is not None and all(k.name != knob.name for k in knobs):
            knobs.append(knob)
    return knobs[:MAX_CANDIDATES]


# --- the root search on the real solver ---------------------------------------------------------

class MarginAt:
    """The finding's lowest relative margin over its failing cases, each at its worst point, with one
    value set: each call solves those cases (warm-started at the nearest solve so far)."""

    def __init__(self, finding: Finding, design: Design, target: Target, knob: Knob, cache: Cache,
                 budget: Budget):
        self.target, self.knob, self.cache, self.budget = target, knob, cache, budget
        failing = [o for o in finding.outcomes if not o.holds] or [finding.worst]
        self.cases = [(design.netlist(o.case), dict(o.point)) for o in failing]
        self.guesses: dict[float, list[OperatingPoint | None]] = {}

    def netlist(self, base: Netlist, point: dict[str, float], value: float) -> Netlist:
        moved = set_value(base, self.knob.part, self.knob.prop, value)
        names = {t.name: t.part for t in toleranced(moved)}
        return perturbed(moved, {names[name]: d for name, d in point.items() if name in names and d != 0.0})

    def __call__(self, values: Sequence[float]) -> list[tuple[float, bool]] | None:
        """(lowest relative margin, every case holds) at each value; None when the budget is spent."""
        if not self.budget.take_solves(len(values) * len(self.cases)):
            return None
        netlists, guesses = [], []
        for value in values:
            near = self._nearest_guesses(value)
            for number, (base, point) in enumerate(self.cases):
                netlists.append(self.netlist(base, point, value))
                guesses.append(near[number] if near else None)
        solved = solve_each(netlists, self.cache, guesses)
        found = []
        for position, value in enumerate(values):
            row = solved[position * len(self.cases):(position + 1) * len(self.cases)]
            found.append(self._judge(row))
            if all(isinstance(s, OperatingPoint) for s in row):
                self.guesses[value] = row  # type: ignore[assignment]
        return found

    def _nearest_guesses(self, value: float) -> list[OperatingPoint | None] | None:
        if not self.guesses:
            return None
        return self.guesses[min(self.guesses, key=lambda known: abs(math.log(known / value)))]

    def _judge(self, row: list) -> tuple[float, bool]:
        lowest, holds = math.inf, True
        for solved in row:
            if not isinstance(solved, OperatingPoint):
                return -math.inf, False
            outcome = self.target.item.outcome(CaseValues(solved))
            if outcome is None:
                continue
            relative = outcome.relative if math.isfinite(outcome.relative) else outcome.margin
            lowest, holds = min(lowest, relative), holds and outcome.holds
        return lowest, holds


def find_root(margin: MarginAt, value: float) -> tuple[float, int] | None:
    """The value nearest `value` (by ratio) at which the margin turns to holding, on its holding side,
    and the direction (+1: larger values hold); None when no factor up to 100 either way restores it."""
    steps = [(sign, factor) for sign in (1, -1) for factor in GRID]
    judged = margin([value * factor ** sign for sign, factor in steps])
    if judged is None:
        return None
    at = dict(zip(steps, judged))
    best = None
    for sign in (1, -1):
        before = (0.0, -math.inf)
        for factor in GRID:
            u = sign * math.log(factor)
            level, holds = at[(sign, factor)]
            if holds:
                if best is None or abs(u) < abs(best[1][0]):  # the nearer side's first holding factor
                    best = (before, (u, level), sign)
                break
            before = (u, level)
    if best is None:
        best = _window(margin, value, at)
    if best is None:
        return None
    (u_fail, f_fail), (u_hold, f_hold), sign = best
    return _narrow(margin, value, u_fail, f_fail, u_hold, f_hold), sign


def _window(margin: MarginAt, value: float, at: dict) -> tuple | None:
    """No factor of the grid holds, yet a narrow window between two of them may (a range narrower
    than a grid step): a golden-section search for the largest margin between the neighbours of the
    best grid point, stopping at the first point that holds; then the bracket towards `value`."""
    points = sorted([(0.0, -math.inf)] + [(sign * math.log(factor), level) for (sign, factor), (level, _) in at.items()])
    best = max(range(len(points)), key=lambda i: points[i][1])
    low, high = points[max(best - 1, 0)][0], points[min(best + 1, len(points) - 1)][0]
    ratio = (math.sqrt(5.0) - 1.0) / 2.0
    a, b = low + (1 - ratio) * (high - low), low + ratio * (high - low)
    judged = margin([value * math.exp(a), value * math.exp(b)])
    for _ in range(GOLDEN_STEPS):
        if judged is None:
            return None
        (fa, ha), (fb, hb) = judged
        for u, level, holds in ((a, fa, ha), (b, fb, hb)):
            if holds:
                sign = 1 if u > 0 else -1
                outer = [p for p in points if p[0] * sign >= 0 and abs(p[0]) < abs(u)]
                before = max(outer, key=lambda p: abs(p[0])) if outer else (0.0, -math.inf)
                return before, (u, level), sign
        if fa >= fb:
            high, b, fb = b, a, fa
            a = low + (1 - ratio) * (high - low)
            judged = margin([value * math.exp(a)])
            judged = None if judged is None else [judged[0], (fb, False)]
        else:
            low, a, fa = a, b, fb
            b = low + ratio * (high - low)
            judged = margin([value * math.exp(b)])
            judged = None if judged is None else [(fa, False), judged[0]]
    return None


def _narrow(margin: MarginAt, value: float, u_fail: float, f_fail: float, u_hold: float, f_hold: float) -> float:
    """Regula falsi with the Illinois modification on u = ln(x / value), bisecting where a margin is not
    finite; the holding end of the last bracket."""
    last = 0
    for _ in range(MAX_STEPS):
        if abs(u_hold - u_fail) <= ROOT_TOLERANCE:
            break
        u = (u_fail + u_hold) / 2
        if math.isfinite(f_fail) and math.isfinite(f_hold) and f_hold != f_fail:
            secant = u_hold - f_hold * (u_hold - u_fail) / (f_hold - f_fail)
            if min(u_fail, u_hold) < secant < max(u_fail, u_hold):
                u = secant
        judged = margin([value * math.exp(u)])
        if judged is None:
            break
        level, holds = judged[0]
        if holds:
            u_hold, f_hold = u, level
            if last == 1:
                f_fail /= 2
            last = 1
        else:
            u_fail, f_fail = u, level
            if last == -1:
                f_hold /= 2
            last = -1
    return value * math.exp(u_hold)


# --- confirmation -----------------------------------------------------------------------------

@dataclass(frozen=True)
class Context:
    """What a confirmation needs: the limit files, every design, the day and the configured analysis."""

    files: tuple[LimitFile, ...]
    designs: tuple[Design, ...]
    today: datetime.date
    analysis: Analysis
    compiled: LimitSet  # the limits compiled for `designs` as they are


def confirm(context: Context, finding: Finding, before: Sequence[Finding], candidate: Candidate,
            analysis: Analysis) -> Confirmed:
    """The changed circuit checked against all its limits under `analysis`: the remedy as reported."""
    knob = candidate.knob
    design = next(d for d in context.designs if d.name == finding.circuit)
    changed = changed_design(design, knob.part, knob.prop, candidate.to)
    designs = [changed if d is design else d for d in context.designs]
    compiled = compile_limits(context.files, designs)  # `where` and `declared()` read the new value
    mine = LimitSet(tuple(c for c in compiled.limits if c.circuit == finding.circuit), compiled.waivers)
    after = [f for f in analyse(mine, [changed], context.today, analysis).findings if not f.lint]
    held = {f.key for f in before if f.status in ("pass", "waived")}
    failing = [f for f in after if f.status in ("fail", "warn")]
    broken = tuple(sorted({_named(f) for f in failing if f.key in held}))
    fixed = next((f for f in after if f.key == finding.key), None)
    worst = fixed.worst if fixed is not None else finding.worst
    remedy = Remedy(knob.part, knob.prop, knob.value, candidate.to, knob.series,
                    worst.margin if fixed is not None else math.nan,
                    all(f.status in ("pass", "waived") for f in after), candidate.root, knob.unit,
                    worst.relative if fixed is not None else math.nan, worst.unit, worst.absolute,
                    len(after), broken, tuple(sorted({_named(f) for f in failing if f.key != finding.key})))
    return Confirmed(remedy, fixed is not None and fixed.status in ("pass", "waived"))


def _named(finding: Finding) -> str:
    return finding.limit.id + (f" [{finding.item}]" if finding.item else "")


# --- one finding, one check ---------------------------------------------------------------------

def _candidates(finding: Finding, design: Design, target: Target, point: OperatingPoint, budget: Budget,
                cache: Cache) -> tuple[list[Candidate], str]:
    """Snapped candidates, and a note when there are none."""
    if finding.limit.source == PACK and finding.item is not None:
        knob = _knob(design, next(p for p in design.parts if p.name == finding.item), "value")
        if knob is None:
            return [], "a case sets this value"
        return [Candidate(knob, to, knob.value) for to in neighbours(knob.value, knob.series) if to is not None], ""
    found = []
    for knob in candidate_knobs(finding, design, target, point, budget, cache):
        rooted = find_root(MarginAt(finding, design, target, knob, cache, budget), knob.value)
        if rooted is None:
            continue
        root, sign = rooted
        to = snap(root, knob.series, sign)
        if to is not None:
            found.append(Candidate(knob, to, root))
    return found, ("" if found else "no single value within a factor of 100 restores this limit")


def _change(candidate: Candidate) -> float:
    return abs(math.log(abs(candidate.to / candidate.knob.value)))


def _good(confirmed: Confirmed) -> bool:
    """Fixes its limit and breaks no limit that held: what a reviewer can apply as it is."""
    return confirmed.fixes and not confirmed.remedy.breaks


@dataclass
class Search:
    """One finding's search: its candidates screened at nominal (best first), and those confirmed."""

    finding: Finding
    before: tuple[Finding, ...]
    screened: list[tuple[Confirmed, Candidate]]
    note: str = ""
    confirmed: list[Confirmed] = dataclasses.field(default_factory=list)
    cut: bool = False

    def next_candidate(self) -> Candidate | None:
        """The next candidate worth confirming: the next screened one, but once a good remedy is
        confirmed only those good at nominal (a worst case is never better than nominal), and never
        more than MAX_REMEDIES good ones, or MAX_REMEDIES when none is good."""
        good = [c for c in self.confirmed if _good(c)]
        if len(good) >= MAX_REMEDIES or (not good and len(self.confirmed) >= MAX_REMEDIES):
            return None
        for screened, candidate in self.screened[len(self.confirmed):]:
            return candidate if not good or _good(screened) else None
        return None

    def result(self) -> tuple[tuple[Remedy, ...], str]:
        good = [c for c in self.confirmed if _good(c)]
        chosen = sorted(good, key=lambda c: not c.remedy.all_limits_hold)[:MAX_REMEDIES] or \
            sorted(self.confirmed, key=lambda c: (not c.fixes, len(c.remedy.breaks)))[:MAX_REMEDIES]
        notes = [self.note] if self.note and not chosen else []
        if chosen and not any(c.fixes for c in chosen):
            notes.append("no single change found fixes this limit in the configured analysis; the closest follow")
        elif chosen and not good:
            notes.append("no single change fixes this limit without breaking another; the best partial ones follow")
        if self.cut:
            notes.append(STOPPED)
        return tuple(c.remedy for c in chosen), "; ".join(notes)


def screen(context: Context, finding: Finding, before: Sequence[Finding], budget: Budget, cache: Cache) -> Search:
    """A finding's candidates, each checked at nominal against every limit, best first (in a nominal
    analysis that check is the confirmation)."""
    design = next(d for d in context.designs if d.name == finding.circuit)
    point = _nominal_point(design, finding.worst.case, cache)
    if point is None:
        return Search(finding, tuple(before), [], "the worst case has no nominal operating point to search from")
    candidates, note = _candidates(finding, design, _target(context, design, finding), point, budget, cache)
    screened = [(confirm(context, finding, before, c, Analysis()), c) for c in candidates]
    screened.sort(key=lambda pair: (not _good(pair[0]), not pair[0].remedy.all_limits_hold, not pair[0].fixes,
                                    len(pair[0].remedy.breaks), _change(pair[1])))
    search = Search(finding, tuple(before), screened, STOPPED if not candidates and budget.spent else note)
    if context.analysis.mode == "nominal":
        while (candidate := search.next_candidate()) is not None:
            search.confirmed.append(next(s for s, c in screened if c is candidate))
    return search


def confirm_all(context: Context, searches: Sequence[Search], budget: Budget) -> None:
    """Confirmations in the configured analysis, breadth first: each finding's best candidate, then each
    one's second, ..., so that a spent budget leaves every finding its best remedy it could afford."""
    while True:
        pending = [(search, search.next_candidate()) for search in searches]
        pending = [(search, candidate) for search, candidate in pending if candidate is not None]
        if not pending:
            return
        for search, candidate in pending:
            if not budget.take_confirmation():
                for rest, _ in pending:
                    rest.cut = True
                return
            search.confirmed.append(confirm(context, search.finding, search.before, candidate, context.analysis))


def _nominal_point(design: Design, case: str, cache: Cache) -> OperatingPoint | None:
    solved = solve_each([design.netlist(case)], cache, [None])[0]  # type: ignore[list-item]
    return solved if isinstance(solved, OperatingPoint) else None


def _target(context: Context, design: Design, finding: Finding) -> Target:
    return next(t for t in targets_of(context.compiled, design.name)
                if t.limit.limit.id == finding.limit.id and t.item.part == finding.item)


def with_remedies(findings: Findings, files: Sequence[LimitFile], designs: Sequence[Design],
                  today: datetime.date, analysis: Analysis, progress: Progress | None = None,
                  budget: Budget | None = None) -> Findings:
    """`findings` with remedies on every failing and warning limit (not lints, not waived), the lowest
    relative margins first, within `budget` (by default DEFAULT_SOLVES and DEFAULT_CONFIRMATIONS)."""
    report = progress or (lambda message: None)
    budget = Budget() if budget is None else budget
    context = Context(tuple(files), tuple(designs), today, analysis, compile_limits(files, designs))
    wanted = sorted((f for f in findings.findings if f.status in ("fail", "warn") and not f.lint),
                    key=lambda f: (f.status != "fail", f.worst.relative))
    cache = Cache()
    found: dict[tuple[str, str, str], tuple[tuple[Remedy, ...], str]] = {}
    searches = []
    for finding in wanted:
        if budget.spent:
            found[finding.key] = ((), STOPPED)
            continue
        report(f"{finding.circuit}: remedies for {finding.limit.id}")
        before = [f for f in findings.findings if f.circuit == finding.circuit and not f.lint]
        searches.append(screen(context, finding, before, budget, cache))
    if analysis.mode != "nominal":
        report(f"confirming remedies ({analysis.mode})")
        confirm_all(context, searches, budget)
    found.update((search.finding.key, search.result()) for search in searches)
    updated = tuple(dataclasses.replace(f, remedies=found[f.key][0], remedy_note=found[f.key][1])
                    if f.key in found else f for f in findings.findings)
    return dataclasses.replace(findings, findings=updated)
