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

import contextlib
import dataclasses
import datetime
import gc
import re
from dataclasses import dataclass, field, replace
from functools import cached_property
from typing import Callable, Iterable, Iterator, Mapping, Sequence

from checker.design import Design, OperatingPoint, Part
from checker.errors import LimitError, Location, did_you_mean
from checker.findings import CircuitResult, Finding, Findings, Limit, Outcome, Waiver, WaiverNote
from checker.limits.compiler import Absent, CaseValues, DeclaredValues, NoMatch, Scope, Unresolved, compile_condition
from checker.limits.files import LimitFile, unique_ids
from checker.limits.margins import Verdict
from checker.limits.sides import Split, split_check
from checker.limits.syntax import Locator, parse_expression
from checker.limits.vector import Program, signature
from checker.limits.waivers import apply_waivers
from checker.lints import IDS as LINT_IDS


@dataclass(frozen=True)
class CompiledItem:
    """One item of a limit in one circuit: the part of an `each` limit (or None), its compiled check,
    and the check split into its one-sided comparisons (for worst-case analysis).

    `check` and `split` are compiled on first use from the parsed `tree` and the item's `scope`:
    a limit's items are evaluated together as arrays (`checker.limits.vector`), and the engine
    compiles `check` eagerly for the first item of each signature, which validates the rest."""

    part: str | None
    location: Location | None
    tree: object = field(repr=False, compare=False)
    scope: Scope = field(repr=False, compare=False)

    @cached_property
    def check(self) -> Callable[[object], Verdict]:
        return compile_condition(self.tree, self.scope)

    @cached_property
    def split(self) -> Split:
        return split_check(self.tree, self.scope)

    def outcome(self, values: CaseValues, corner: str = "") -> Outcome | None:
        """The outcome in one case; None when a part or net the check reads is absent in that case."""
        try:
            return self.check(values).outcome(values.case, corner)
        except Absent:
            return None


@dataclass(frozen=True)
class Group:
    """Items of one limit evaluated together: `numbers` index the limit's items, `rows` the program's parts."""

    program: Program
    numbers: tuple[int, ...]
    rows: tuple[int, ...]


_NEW = object.__new__
_SET = object.__setattr__


@contextlib.contextmanager
def bulk() -> Iterator[None]:
    """The cyclic garbage collector paused while hundreds of thousands of acyclic records (Outcomes,
    Findings) are made: its passes over the growing heap would otherwise cost a third of the time."""
    enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        if enabled:
            gc.enable()


@dataclass(frozen=True)
class CompiledLimit:
    """A limit compiled for one circuit: its items (one, with part None, for limits without `each`),
    and the groups of items evaluated as arrays (the rest, and items in trouble, item by item)."""

    limit: Limit
    circuit: str
    items: tuple[CompiledItem, ...]
    groups: tuple[Group, ...] = ()

    def applies_to(self, case: str) -> bool:
        return self.limit.cases is None or case in self.limit.cases

    def outcomes(self, values: CaseValues, corner: str = "", state: str = "") -> list[Outcome | None]:
        """Every item's outcome in one case (None where its parts are absent), labelled with `corner`
        and the stable `state`; the same Outcomes as `CompiledItem.outcome`, computed as arrays."""
        found: list[Outcome | None] = [None] * len(self.items)
        pending = [True] * len(self.items)
        for group in self.groups:
            result = group.program.run(values)
            if result is None:
                continue
            arrays, trouble = result
            value, bound, margin, relative, holds, unit, bad = (
                array.tolist() for array in (arrays.value, arrays.bound, arrays.margin, arrays.relative(),
                                             arrays.holds, arrays.unit, trouble))
            symbols = group.program.symbols
            absolute = [flag for _, flag in group.program.units]
            case = values.case
            for number, row in zip(group.numbers, group.rows):
                if bad[row]:
                    continue
                outcome = _NEW(Outcome)  # an Outcome without its dataclass __init__: hundreds of thousands
                _SET(outcome, "__dict__", {
                    "case": case, "value": value[row], "bound": bound[row], "margin": margin[row],
                    "relative": relative[row], "unit": symbols[unit[row]], "absolute": absolute[unit[row]],
                    "holds": holds[row], "corner": corner, "method": "", "proved": False, "point": (), "error": "",
                    "state": state})
                found[number] = outcome
                pending[number] = False
        for number, item in enumerate(self.items):
            if pending[number]:
                outcome = item.outcome(values, corner)
                found[number] = replace(outcome, state=state) if state and outcome is not None else outcome
        return found


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


MIN_GROUP = 4
"""Items of one signature below this many are evaluated item by item: arrays would not pay."""


def compile_limit(limit: Limit, design: Design, trees: tuple | None = None) -> CompiledLimit:
    """Compile `limit` for one circuit; Unresolved when a name is not in this circuit, LimitError otherwise.

    `trees` are the parsed check and where, when the caller has parsed them already.
    """
    check_tree, where_tree = trees or _parse(limit)
    scope = Scope.of(design, _locator(limit.check, limit))
    if limit.each is None:
        item = CompiledItem(None, None, check_tree, scope)
        item.check  # compiled now, so that a rule error shows before any solving
        return CompiledLimit(limit, design.name, (item,))
    where_scope = dataclasses.replace(scope, where=_locator(limit.where or "", limit), static=True)
    return _Items(check_tree, where_tree, scope, where_scope, design).compile(limit)


class _Items:
    """The items of an `each` limit, chosen and compiled in part order, so that the first rule error
    is the one the items would raise one by one. Per signature (`checker.limits.vector.signature`)
    the first item is compiled as a closure (which validates the rest); the others are evaluated as
    arrays, `where` included, and only those the arrays cannot judge exactly fall back to closures."""

    def __init__(self, check_tree, where_tree, scope: Scope, where_scope: Scope, design: Design):
        self.check_tree, self.where_tree = check_tree, where_tree
        self.scope, self.where_scope, self.design = scope, where_scope, design
        self.declared = DeclaredValues(design)
        self.wheres: dict[tuple, tuple | None] = {}  # signature -> (holds, trouble) over its candidates
        self.programs: dict[tuple, Program] = {}  # signature -> the check's program over its candidates
        self.by_signature: dict[tuple, list[Part]] = {}
        self.row: dict[str, int] = {}  # part -> its row among the candidates of its signature

    def compile(self, limit: Limit) -> CompiledLimit:
        candidates = [part for part in self.design.parts if _selected(part, limit.each)]
        for part in candidates:
            members = self.by_signature.setdefault(signature(part), [])
            self.row[part.name] = len(members)
            members.append(part)
        items: list[CompiledItem] = []
        grouped: dict[tuple, list[int]] = {}
        for part in candidates:
            key = signature(part)
            if self.where_tree is not None and not self._selects(part, key):
                continue
            item = CompiledItem(part.name, part.location, self.check_tree, dataclasses.replace(self.scope, item=part))
            if key not in self.programs:
                item.check  # the first item of its signature: validates the others
                self.programs[key] = Program(self.check_tree, item.scope, self.by_signature[key])
            elif self.programs[key].declared_trouble[self.row[part.name]]:
                item.check  # `declared` the arrays cannot give: its own closure decides
            grouped.setdefault(key, []).append(len(items))
            items.append(item)
        groups = tuple(Group(self.programs[key], tuple(numbers), tuple(self.row[items[n].part] for n in numbers))
                       for key, numbers in grouped.items() if len(numbers) >= MIN_GROUP)
        return CompiledLimit(limit, self.design.name, tuple(items), groups)

    def _selects(self, part: Part, key: tuple) -> bool:
        """`where` for one part: its signature's first part by closure, the others from the arrays."""
        scope = dataclasses.replace(self.where_scope, item=part)
        if key not in self.wheres:
            try:
                holds = compile_condition(self.where_tree, scope)(self.declared).holds
            except NoMatch:
                self.wheres[key] = None
                return False
            result = Program(self.where_tree, scope, self.by_signature[key]).run(self.declared)
            self.wheres[key] = (None, None) if result is None else (result[0].holds, result[1])
            return holds
        found = self.wheres[key]
        if found is None:
            return False
        holds, trouble = found
        row = self.row[part.name]
        if holds is None or trouble[row]:
            return _where_holds(self.where_tree, scope, self.declared)
        return bool(holds[row])


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
    with bulk():
        findings = _evaluated(limit_set, values)
    return apply_waivers(findings, limit_set.waivers, today)


def _evaluated(limit_set: LimitSet, values: Mapping[str, list[CaseValues]]) -> list[Finding]:
    findings = []
    for compiled in limit_set.limits:
        cases = [case for case in values.get(compiled.circuit, ()) if compiled.applies_to(case.case)]
        try:
            per_case = [compiled.outcomes(case) for case in cases]
        except LimitError:  # raise the error the items meet first taken one by one, each in every case
            for item in compiled.items:
                for case in cases:
                    item.outcome(case)
            raise
        for number, item in enumerate(compiled.items):
            outcomes = tuple(found[number] for found in per_case if found[number] is not None)
            if outcomes:
                findings.append(Finding(compiled.limit, compiled.circuit, item.part, outcomes, "pass",
                                        item_location=item.location))
    return findings


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
