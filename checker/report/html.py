"""The HTML report: one self-contained file (inline CSS and SVG, nothing fetched).

jinja2 with autoescape on renders the shared view (`checker.report.view`), plus, per
circuit, the operating point of every case and a margin chart per finding, after a margin
overview of every finding (`checker.report.overview`).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import lru_cache

import jinja2

from checker import __version__
from checker.design import OperatingPoint, PartResult
from checker.findings import CircuitResult, Findings
from checker.larkcache import cache_folder
from checker.report.overview import margin_overview
from checker.report.solve import DIGITS
from checker.report.svg import Chart, margin_chart
from checker.report.view import NEAR, NO_TEXT, STATUS_WORDS, ReportView, Row, build_view, plural, worst_first
from checker.units import format_temperature, format_value
from checker.verdict import Verdict


@dataclass(frozen=True)
class TableRow:
    name: str
    quantity: str
    cells: tuple[str, ...]


@dataclass(frozen=True)
class CircuitView:
    name: str
    title: str
    path: str
    cases: tuple[str, ...]  # column headings: case, ambient, how it was solved
    nets: tuple[TableRow, ...]
    parts: tuple[TableRow, ...]
    limits: tuple[tuple[Row, Chart], ...]
    rows: tuple[Row, ...] = ()  # findings in full but without a chart (beyond MAX_CHARTS), a table row each
    summaries: tuple["Summary", ...] = ()  # the findings holding with room to spare, one line per limit


@dataclass(frozen=True)
class Summary:
    """The items of one limit that hold with room to spare, summarised: how many, and the worst of them."""

    limit: str
    about: str
    count: int
    worst: Row


FULL_DETAIL = 200
"""A circuit with at most this many findings shows each in full. Above it, only the findings that
fail, warn, are waived or hold by less than NEAR (relative margin) are in full; the others are
summarised per limit (count, worst item and margin), so that 200,000 outcomes make a report of a
few megabytes. The JSON report keeps every outcome."""

MAX_CHARTS = 150
"""Above FULL_DETAIL findings, the worst this many findings shown in full have their margin chart
(a few kilobytes each); the others are a table row each, with every number and the waiver."""


def _reading(number: float, unit: str) -> str:
    """A net voltage or part quantity, to the significant figures of the `solve` table (its DIGITS)."""
    return format_value(number, unit, DIGITS)


def _case_heading(point: OperatingPoint) -> str:
    state = f" [state {point.state}]" if point.state else ""
    return f"{point.case}{state} ({format_temperature(point.ambient)})"


def _union(keys_per_case: list[list[str]]) -> list[str]:
    """Every key over the cases in declaration order: a part absent from some cases still
    appears where it is declared, right after its predecessor in a case that has it."""
    merged = list(max(keys_per_case, key=len, default=[]))
    known = set(merged)
    for keys in keys_per_case:
        for position, key in enumerate(keys):
            if key not in known:  # rare: only parts absent from the longest case
                merged.insert(merged.index(keys[position - 1]) + 1 if position else 0, key)
                known.add(key)
    return merged


def _net_rows(points: tuple[OperatingPoint, ...]) -> tuple[TableRow, ...]:
    names = _union([list(p.nets) for p in points])
    return tuple(TableRow(name, "voltage", tuple(
        _reading(p.nets[name], "V") if name in p.nets else NO_TEXT for p in points)) for name in names)


def _part_quantities(result: PartResult | None, pin_names: list[str]) -> list[tuple[str, str]]:
    """(quantity, text) rows for one part in one case: v, i, p or pin currents and p."""
    if result is None:
        return [(q, NO_TEXT) for q in ["voltage", "current"] if not pin_names] + \
               [(f"current into {pin}", NO_TEXT) for pin in pin_names] + [("power", NO_TEXT)]
    if result.voltage is not None:
        return [("voltage", _reading(result.voltage, "V")),
                ("current", _reading(result.current or 0.0, "A")),
                ("power", _reading(result.power, "W"))]
    return [(f"current into {pin}", _reading(result.pins[pin], "A") if pin in result.pins else NO_TEXT)
            for pin in pin_names] + [("power", _reading(result.power, "W"))]


def _part_rows(points: tuple[OperatingPoint, ...]) -> tuple[TableRow, ...]:
    rows = []
    for name in _union([list(p.parts) for p in points]):
        results = [p.parts.get(name) for p in points]
        multi = [r for r in results if r is not None and r.voltage is None]
        pin_names = _union([list(r.pins) for r in multi])
        columns = [_part_quantities(r, pin_names) for r in results]
        for index, (quantity, _) in enumerate(columns[0]):
            label = name if index == 0 else ""
            rows.append(TableRow(label, quantity, tuple(column[index][1] for column in columns)))
    return tuple(rows)


def _in_full(row: Row) -> bool:
    """Whether a finding needs its own section: it fails, warns or is waived, or holds by little."""
    if row.status != "pass":
        return True
    relative = row.finding.worst.relative
    return not relative >= NEAR  # NaN (no scale) too


def _summaries(rows: list[Row]) -> tuple[Summary, ...]:
    by_limit: dict[str, list[Row]] = {}
    for row in rows:
        by_limit.setdefault(row.limit, []).append(row)
    return tuple(Summary(limit, group[0].about, len(group), min(group, key=lambda r: r.finding.worst.relative))
                 for limit, group in by_limit.items())


def circuit_view(circuit: CircuitResult, rows: tuple[Row, ...], full_detail: int | None = None) -> CircuitView:
    """A circuit's operating-point tables and the margin chart of each of its findings; above
    `full_detail` findings, those holding with room to spare are summarised per limit."""
    points = circuit.operating_points
    mine = [row for row in rows if row.circuit == circuit.name and row.finding.outcomes]
    rest: list[Row] = []
    plain: list[Row] = []
    if len(mine) > (FULL_DETAIL if full_detail is None else full_detail):
        rest = [row for row in mine if not _in_full(row)]
        mine = [row for row in mine if _in_full(row)]
        charted = {id(row) for row in worst_first(mine)[:MAX_CHARTS]}
        plain = [row for row in mine if id(row) not in charted]
        mine = [row for row in mine if id(row) in charted]
    return CircuitView(name=circuit.name, title=circuit.title, path=circuit.path,
                       cases=tuple(_case_heading(p) for p in points),
                       nets=_net_rows(points), parts=_part_rows(points),
                       limits=tuple((row, margin_chart(row.finding)) for row in mine), rows=tuple(plain),
                       summaries=_summaries(rest))


def _strategies(circuit: CircuitResult) -> str:
    return "; ".join(f"{p.case}: {p.strategy}, {p.iterations} iteration{'s' if p.iterations != 1 else ''}"
                     for p in circuit.operating_points)


@lru_cache(maxsize=1)
def _environment() -> jinja2.Environment:
    # Compiled templates are kept in the private cache of checker.larkcache (compiling them took a
    # quarter of a second of every run that wrote HTML); without a safe folder they are compiled.
    folder = cache_folder()
    cache = jinja2.FileSystemBytecodeCache(str(folder), "jinja-%s.cache") if folder is not None else None
    env = jinja2.Environment(loader=jinja2.PackageLoader("checker.report", "templates"),
                             autoescape=True, undefined=jinja2.StrictUndefined,
                             trim_blocks=True, lstrip_blocks=True, bytecode_cache=cache)
    env.globals.update(status_word=lambda status: STATUS_WORDS.get(status, status),
                       strategies=_strategies, plural=plural)
    return env


def render_html(findings: Findings, verdict: Verdict | None = None) -> str:
    """The whole report as one HTML document."""
    view: ReportView = build_view(findings, verdict)
    circuits = tuple((c, circuit_view(c, view.rows)) for c in findings.circuits)
    template = _environment().get_template("report.html.j2")
    return template.render(view=view, circuits=circuits, overview=margin_overview(view.rows), version=__version__,
                           near=f"{NEAR:.0%}")
