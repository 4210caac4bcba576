"""From limit files and solved circuits to Findings.

Two steps so that every rule error shows before any solving: `compile_limits`
(parse, resolve names against each circuit's Design, check dimensions, choose the
items of `each` limits) and `evaluate` (one Outcome per limit x circuit x item x
case, then waivers). `evaluate_limits` and `check_findings` do both.

Which circuits a limit applies to (docs/limits.md, "Binding limits to circuits"): a
bound limit (`circuits:` on the limit or on its file's entry in nodegate.yaml) to those,
and each of its names must resolve in each of them; an unbound one to every circuit
(having one of its `cases`), where its names must resolve too, or the error names the
circuits that lack them and suggests binding it. An `each` limit that names nothing but
`part` resolves everywhere and simply finds no items where none are fitted. Silently
skipping the circuits that lack a name would let a misspelt net move a limit to another
board and leave the intended node unchecked.
"""

from __future__ import annotations

import dataclasses
import datetime
import re
from dataclasses import dataclass
from typing import Callable, Iterable, Mapping, Sequence

from checker.design import Design, OperatingPoint, Part
from checker.errors import LimitError, Location, did_you_mean
from checker.findings import CircuitResult, Finding, Findings, Limit, Outcome, Waiver, WaiverNote
from checker.limits.compiler import Absent, CaseValues, DeclaredValues, NoMatch, Scope, Unresolved, compile_condition
from checker.limits.files import LimitFile, unique_ids
from checker.limits.margins import Verdict
from checker.limits.sides import Split, split_check
from checker.limits.syntax import Locator, parse_expression
from checker.limits.waivers import apply_waivers
from checker.lints import IDS as LINT_IDS


@dataclass(frozen=True)
class CompiledItem:
    """One item of a limit in one circuit: the part of an `each` limit (or None), its compiled check,
    and the check split into its one-sided comparisons (for worst-case analysis)."""

    part: str | None
    location: Location | None
    check: Callable[[object], Verdict]
    split: Split

    def outcome(self, values: CaseValues, corner: str = "") -> Outcome | None:
        """The outcome in one case; None when a part or net the check reads is absent in that case."""
        try:
            return self.check(values).outcome(values.case, corner)
        except Absent:
            return None


@dataclass(frozen=True)
class CompiledLimit:
    """A limit compiled for one circuit: its items (one, with part None, for limits without `each`)."""

    limit: Limit
    circuit: str
    items: tuple[CompiledItem, ...]

    def applies_to(self, case: str) -> bool:
        return self.limit.cases is None or case in self.limit.cases


@dataclass(frozen=True)
class LimitSet:
    """Every limit compiled for the circuits it applies to, and every waiver (checked against them)."""

    limits: tuple[CompiledLimit, ...]
    waivers: tuple[Waiver, ...]


def _locator(text: str, limit: Limit) -> Locator:
    return Locator(text, limit.location)


def _selected(part: Part, each: str) -> bool:
    return each[4:] in part.tags if each.startswith("tag:") else part.kind == each


def _where_holds(tree, scope: Scope, values: DeclaredValues) -> bool:
    """Whether a part passes `where`, judged on declared values; a property it lacks means no."""
    try:
        return compile_condition(tree, scope)(values).holds
    except NoMatch:
        return False


def compile_limit(limit: Limit, design: Design, trees: tuple | None = None) -> CompiledLimit:
    """Compile `limit` for one circuit; Unresolved when a name is not in this circuit, LimitError otherwise.

    `trees` are the parsed check and where, when the caller has parsed them already.
    """
    check_tree, where_tree = trees or _parse(limit)
    scope = Scope.of(design, _locator(limit.check, limit))
    if limit.each is None:
        return CompiledLimit(limit, design.name, (_item(None, None, check_tree, scope),))
    where_scope = dataclasses.replace(scope, where=_locator(limit.where or "", limit), static=True)
    declared = DeclaredValues(design)
    items = []
    for part in design.parts:
        if not _selected(part, limit.each):
            continue
        if where_tree is not None and not _where_holds(where_tree, dataclasses.replace(where_scope, item=part), declared):
            continue
        items.append(_item(part.name, part.location, check_tree, dataclasses.replace(scope, item=part)))
    return CompiledLimit(limit, design.name, tuple(items))


def _item(part: str | None, location: Location | None, tree, scope: Scope) -> CompiledItem:
    return CompiledItem(part, location, compile_condition(tree, scope), split_check(tree, scope))


def _parse(limit: Limit) -> tuple:
    where = parse_expression(limit.where, limit.location) if limit.where is not None else None
    return parse_expression(limit.check, limit.location), where


def _applies_to(limit: Limit, designs: Sequence[Design]) -> list[Design]:
    """The circuits of a limit: its binding, else every circuit that has one of its cases (all, without `cases`)."""
    if limit.circuits is not None:
        return [design for design in designs if design.name in limit.circuits]
    return [design for design in designs
            if limit.cases is None or any(case in design.cases for case in limit.cases)]


def _compile_in(limit: Limit, designs: Sequence[Design]) -> list[CompiledLimit]:
    """The limit compiled in each circuit it applies to; every name must resolve in each of them."""
    trees = _parse(limit)
    done, missed = [], []
    for design in _applies_to(limit, designs):
        try:
            done.append(compile_limit(limit, design, trees))
        except Unresolved as error:
            if limit.circuits is not None:
                raise  # bound: the name must be in this circuit; the error is at its token, with the nearest
            missed.append((design.name, error))
    if not missed:
        return done
    if not done:
        raise _nowhere(missed)
    raise _unbound(limit, [compiled.circuit for compiled in done], missed)


def _nowhere(missed: list[tuple[str, Unresolved]]) -> Unresolved:
    """A limit that resolves in no circuit: the miss placed latest in the check (the circuit where it
    got furthest), which is most likely the slip."""
    error = max((error for _, error in missed),
                key=lambda e: (e.location.line, e.location.column) if e.location else (0, 0))
    if len(missed) > 1:
        error.notes += ("no circuit has every name this limit uses",)
    return error


def _unbound(limit: Limit, resolved: list[str], missed: list[tuple[str, Unresolved]]) -> LimitError:
    """An unbound limit that resolves in some circuits only: written for those, so say where it fails
    and suggest binding it, instead of quietly checking it where its names happen to exist."""
    first = missed[0][1]
    failing = ", ".join(f"`{name}`" for name, _ in missed)
    return LimitError(
        f"{first.message}; limit `{limit.id}` is unbound, so it applies to every circuit, "
        f"and it fails to resolve in {failing}", first.location,
        first.notes + (f"bind it to the circuits it is written for: `circuits: [{', '.join(resolved)}]` "
                       "on the limit, or on its file's entry in nodegate.yaml",))


def _known(name: str, choices: Iterable[str], what: str, fallback: Location | None,
           notes: tuple[str, ...] = ()) -> None:
    """LimitError at `name` (a LocatedStr when loaded from a file) unless it is one of `choices`."""
    choices = tuple(choices)
    if name not in choices:
        raise LimitError(f"no {what} `{name}`", getattr(name, "location", fallback),
                         did_you_mean(name, choices) + notes)


def _known_circuits(names: Iterable[str] | None, designs: Sequence[Design], fallback: Location | None) -> None:
    """LimitError at the first name of a binding that is no circuit's `circuit NAME`."""
    circuits = [design.name for design in designs]
    for name in names or ():
        _known(name, circuits, "circuit", fallback, (f"circuits: {', '.join(circuits)}",))


NAME = re.compile(r"[A-Za-z_][A-Za-z0-9_.]*")


def names_used(limit_set: LimitSet, circuit: str) -> set[str]:
    """Every word the checks and `where` conditions applying to `circuit` are written with: a net
    among them is one a limit names (the single-connection lint leaves it alone)."""
    return {word for compiled in limit_set.limits if compiled.circuit == circuit
            for text in (compiled.limit.check, compiled.limit.where or "") for word in NAME.findall(text)}


def _check_waivers(waivers: Sequence[Waiver], limits: Sequence[Limit], designs: Sequence[Design]) -> None:
    """Every name a waiver uses must exist: its limit anywhere, its circuits, and its case and part
    in the circuits it is narrowed to."""
    ids = [limit.id for limit in limits] + list(LINT_IDS)
    for waiver in waivers:
        _known(waiver.limit, ids, "limit with id", waiver.location)
        if not designs:
            continue
        _known_circuits(waiver.circuits, designs, waiver.location)
        mine = [design for design in designs if waiver.circuits is None or design.name in waiver.circuits]
        if waiver.case is not None:
            _known(waiver.case, {case for design in mine for case in design.cases}, "case", waiver.location)
        if waiver.part is not None:
            named = {part.name for design in mine for part in design.parts}
            if waiver.limit == "lint.single-connection":  # its items are nets
                named = {net for design in mine for part in design.parts for net in part.nets}
            _known(waiver.part, named, "net" if waiver.limit == "lint.single-connection" else "part",
                   waiver.location)


def compile_limits(limit_files: Sequence[LimitFile], designs: Sequence[Design]) -> LimitSet:
    """Check every limit and waiver against the circuits, before any solving. LimitError on the first problem."""
    limits = unique_ids(limit for file in limit_files for limit in file.limits)
    cases = sorted({case for design in designs for case in design.cases})
    for file in limit_files if designs else ():
        _known_circuits(file.circuits, designs, None)
    compiled: list[CompiledLimit] = []
    for limit in limits:
        if designs:
            _known_circuits(limit.circuits, designs, limit.location)
        for case in (limit.cases or ()) if designs else ():
            _known(case, cases, "case", limit.location)
        compiled.extend(_compile_in(limit, designs))
    waivers = tuple(waiver for file in limit_files for waiver in file.waivers)
    _check_waivers(waivers, limits, designs)
    return LimitSet(tuple(compiled), waivers)


def evaluate(limit_set: LimitSet, operating_points: Mapping[str, Sequence[OperatingPoint]],
             today: datetime.date) -> tuple[tuple[Finding, ...], tuple[WaiverNote, ...]]:
    """One Finding per limit x circuit x item with its outcome in each selected case, waivers applied.

    An item whose parts are absent in every selected case yields no Finding.
    """
    values = {circuit: [CaseValues(op) for op in ops] for circuit, ops in operating_points.items()}
    findings = []
    for compiled in limit_set.limits:
        cases = [case for case in values.get(compiled.circuit, ()) if compiled.applies_to(case.case)]
        for item in compiled.items:
            outcomes = tuple(o for o in (item.outcome(case) for case in cases) if o is not None)
            if outcomes:
                findings.append(Finding(compiled.limit, compiled.circuit, item.part, outcomes, "pass",
                                        item_location=item.location))
    return apply_waivers(findings, limit_set.waivers, today)


def evaluate_limits(limit_files: Sequence[LimitFile], designs: Sequence[Design],
                    operating_points: Mapping[str, Sequence[OperatingPoint]],
                    today: datetime.date) -> tuple[tuple[Finding, ...], tuple[WaiverNote, ...]]:
    """`compile_limits` then `evaluate`: findings and waiver notes for solved circuits."""
    return evaluate(compile_limits(limit_files, designs), operating_points, today)


def check_findings(limit_files: Sequence[LimitFile], designs: Sequence[Design],
                   circuits: Sequence[CircuitResult], today: datetime.date) -> Findings:
    """The whole `Findings` of a run, from the limit files, the designs and their solved cases."""
    findings, notes = evaluate_limits(limit_files, designs, {c.name: c.operating_points for c in circuits}, today)
    return Findings(findings=findings, circuits=tuple(circuits), waiver_notes=notes)
