"""Findings → the text every human-readable report shows, decided once.

Markdown, HTML and the terminal summary render this view and never format a
number themselves, so the three can never disagree on a verdict, a value or a margin.
Strings here are raw: each renderer escapes them for its own format.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from checker.analysis.points import reproduce_command
from checker.analysis.tolerances import named_deviation
from checker.findings import Analysis, Finding, Findings, Outcome, Remedy, Waiver, WaiverNote
from checker.units import format_percent, format_temperature, format_value
from checker.verdict import Verdict, judge

CAUTION = ("nodegate supports, and does not replace, a qualified engineer's review "
           "and the applicable codes and standards.")

STATUS_WORDS = {"pass": "holds", "fail": "fails", "warn": "warning", "waived": "waived"}
NO_TEXT = "—"
NO_POINT = "no operating point"  # an outcome whose circuit has no solution: it fails, with no numbers
METHOD_NAMES = {"vertices": "vertices", "corner-search": "corner search", "interior": "interior search"}


def plural(count: int, word: str, many: str | None = None) -> str:
    """`1 circuit`, `2 circuits` (or the given irregular plural)."""
    return f"{count} {word if count == 1 else (many or word + 's')}"


MAX_DIGITS = 9  # significant figures a near comparison may take so that value and bound differ
NEAR = 0.05  # a relative margin below this (failing included) is a near comparison


def format_number(value: float, unit: str, absolute: bool = False, digits: int = 3) -> str:
    """A value or bound: temperatures in °C, dimensionless numbers plain, others with SI prefixes,
    to `digits` significant figures (a temperature keeps `digits - 2` decimals: `85.0 °C`);
    a dash for NaN and infinities, which no reader should see as `nan` or `inf`."""
    if not math.isfinite(value):
        return NO_TEXT
    if absolute:
        return format_temperature(value, max(digits - 2, 1))
    if not unit:
        return f"{value:.{digits}g}"
    return format_value(value, unit, digits)


def format_pair(value: float, bound: float, unit: str, absolute: bool = False,
                relative: float = math.nan) -> tuple[str, str]:
    """Value and bound of one comparison. A failing or near one (relative margin below NEAR, or
    undefined) takes more significant figures, up to MAX_DIGITS, until the two texts differ:
    never `1.62 V vs limit 1.62 V`. Equal numbers stay equal, at the usual three figures."""
    near = not relative >= NEAR
    digits = 3
    while True:
        texts = format_number(value, unit, absolute, digits), format_number(bound, unit, absolute, digits)
        if not near or value == bound or texts[0] != texts[1] or digits >= MAX_DIGITS:
            return texts
        digits += 1


def format_margin(margin: float, unit: str, absolute: bool = False, signed: bool = False) -> str:
    """A margin or a margin change; a difference of two temperatures is in kelvin."""
    text = format_number(margin, "K" if absolute else unit)
    if signed and margin > 0 and math.isfinite(margin):
        return "+" + text
    return text


UNCHANGED = "unchanged"


def format_margin_change(now: float, base: float, unit: str, absolute: bool = False) -> str:
    """Now minus base, signed; `unchanged` when the change is below the resolution the margins are
    shown with (half a unit in the third significant figure of the larger), never `+0 V` or `+1.00 fV`."""
    delta = now - base
    if not math.isfinite(delta):
        return ""
    largest = max(abs(now), abs(base))
    resolution = 10 ** (math.floor(math.log10(largest)) - 2) if largest > 0 else 0.0
    if abs(delta) < resolution / 2 or delta == 0:
        return UNCHANGED
    return format_margin(delta, unit, absolute, signed=True)


def format_base_margin(margin: float, unit: str, absolute: bool = False) -> str:
    """The base revision's worst margin: −inf there means the base had no operating point (Outcome)."""
    return NO_POINT if margin == -math.inf else format_margin(margin, unit, absolute)


def format_relative(relative: float) -> str:
    """The margin over the limit's scale, as a percentage with one decimal."""
    return format_percent(relative) if math.isfinite(relative) else NO_TEXT


def format_fraction(fraction: float | None) -> str:
    """A Monte Carlo failure fraction as a percentage of samples: `0 %`, `0.05 %`, `12.5 %`."""
    return "" if fraction is None else f"{fraction * 100:.3g} %"


MAX_DRIVERS_SHOWN = 3


def margin_unit(finding: Finding) -> tuple[str, bool]:
    """Unit and temperature flag of the finding's margins, from an outcome with an operating point
    (one without may carry no unit)."""
    solved = next((o for o in finding.outcomes if not o.error), finding.worst)
    return solved.unit, solved.absolute


def drivers_text(finding: Finding) -> str:
    """`R_TOP 12.3 mV, VBAT 8.10 mV`: the parts whose tolerance band moves the worst margin most."""
    if not finding.drivers or not finding.outcomes:
        return ""
    unit, absolute = margin_unit(finding)
    shown = [f"{part} {format_margin(change, unit, absolute)}" for part, change in finding.drivers[:MAX_DRIVERS_SHOWN]]
    return ", ".join(shown)


def analysis_sentence(analysis: Analysis) -> str:
    """How the margins were found, for the report header (docs/analysis.md)."""
    if analysis.mode == "worst-case":
        return ("Tolerance analysis: worst case. Each margin is the lowest found over the tolerance box, where "
                "every toleranced value may sit anywhere in its band. When a case has few enough toleranced "
                "values, every vertex of the box is solved, which proves the lowest margin for a linear circuit; "
                "otherwise a corner search and an interior search look for it, and a search is not a proof. "
                "The corner is named beside the case.")
    if analysis.mode == "monte-carlo":
        return (f"Tolerance analysis: Monte Carlo, {plural(analysis.samples or 0, 'sample')}, seed {analysis.seed}. "
                "Each margin is the lowest sample; fails in: the share of samples that fail.")
    return "Tolerance analysis: nominal values only."


def case_label(outcome: Outcome) -> str:
    """The case, with its stable state and the tolerance corner or sample when there are."""
    case = f"{outcome.case} [state {outcome.state}]" if outcome.state else outcome.case
    return f"{case} ({outcome.corner})" if outcome.corner else case


def method_text(outcome: Outcome) -> str:
    """How the worst case was found, and whether that proves nothing lower exists in the tolerance box."""
    if not outcome.method:
        return ""
    name = METHOD_NAMES.get(outcome.method, outcome.method)
    if outcome.proved:
        return f"{name}, proved"
    if outcome.method == "vertices":  # only a nonlinear circuit leaves the vertices unproved
        return f"{name}, not a proof for a nonlinear circuit"
    return f"{name} — a search, not a proof"


def point_texts(outcome: Outcome) -> tuple[str, ...]:
    """Every toleranced value of the point and its deviation (`R1 +5 %`), in netlist order, none left out."""
    return tuple(named_deviation(name, deviation) for name, deviation in outcome.point)


def reproduce_text(outcome: Outcome, path: str) -> str:
    """The shell command that solves the circuit at a failing point, so anyone can look at it."""
    if outcome.holds or not outcome.point or not path:
        return ""
    return reproduce_command(path, outcome.case, outcome.point)


def circuit_paths(findings: Findings) -> dict[str, str]:
    """Circuit name -> its file, for the reproduce commands."""
    return {circuit.name: circuit.path for circuit in findings.circuits}


@dataclass(frozen=True)
class Row:
    """One finding as text: its worst outcome, and against the base revision when given."""

    finding: Finding
    status: str
    circuit: str
    limit: str
    item: str
    about: str
    check: str
    severity: str
    case: str
    value: str
    bound: str
    margin: str
    relative: str
    change: str
    base_margin: str
    margin_change: str
    waiver: str
    drivers: str = ""
    fails_in: str = ""
    method: str = ""  # worst-case: how the worst was found, and whether that is a proof
    point: tuple[str, ...] = ()  # the full point of the worst outcome, `R1 +5 %` each
    error: str = ""  # the solver's message when the worst outcome has no operating point
    reproduce: str = ""  # the command that solves a failing worst outcome's point
    remedies: tuple[str, ...] = ()  # each remedy in words (`remedy_text`), best first
    remedy_note: str = ""  # why there are no remedies, or only partial ones

    @property
    def lint(self) -> bool:
        """A design lint (`checker.lints`): its `about` is the whole message."""
        return self.finding.lint

    @property
    def where(self) -> str:
        """`path:line:col` of the limit's `id:` line, or of the token a design lint points at."""
        location = self.finding.limit.location
        return str(location) if location else ""


@dataclass(frozen=True)
class NoteRow:
    """An expired or unused waiver as text."""

    problem: str
    limit: str
    part: str
    case: str
    reason: str
    until: str
    where: str


@dataclass(frozen=True)
class VerdictText:
    """The one verdict (`checker.verdict.Verdict`) as a report shows it: `headline` in bold,
    then `details` (where it fails, what else counts, what else was found) and `base`."""

    passed: bool
    headline: str
    details: tuple[str, ...]
    base: str

    @property
    def tail(self) -> str:
        """What follows the headline: ` in 2 circuits, 1 warning`, or `, 1 design lint` when no place leads."""
        tail = ", ".join(self.details)
        if not tail:
            return ""
        return f" {tail}" if tail.startswith(("in ", "(")) else f", {tail}"

    @property
    def text(self) -> str:
        """The verdict as one plain sentence."""
        return f"nodegate: {self.headline}{self.tail}"


@dataclass(frozen=True)
class ReportView:
    verdict: VerdictText
    failures: tuple[Row, ...]
    warnings: tuple[Row, ...]  # warning-severity limits that fail
    lints: tuple[Row, ...]  # design lints that fired and are not waived (`checker.lints`)
    waived: tuple[Row, ...]
    expired: tuple[NoteRow, ...]
    unused: tuple[NoteRow, ...]
    fixed: tuple[Row, ...]
    rows: tuple[Row, ...]
    base_ref: str | None
    caution: str = CAUTION
    analysis: str = ""
    with_drivers: bool = False  # worst-case and Monte Carlo name the parts that drive each margin
    with_fractions: bool = False  # Monte Carlo gives each limit's failure fraction
    with_method: bool = False  # worst-case names how each worst case was found


def waiver_text(waiver: Waiver | None) -> str:
    return f"{waiver.reason} (until {waiver.until.isoformat()})" if waiver else ""


def _base_columns(finding: Finding, worst: Outcome) -> tuple[str, str, str]:
    """Change, base margin and margin change (now minus base), empty without --base.

    The change is left empty when either side has no operating point: there is no difference to give."""
    if finding.base_margin is None:
        return finding.change or "", "", ""
    unit, absolute = margin_unit(finding)
    base = format_base_margin(finding.base_margin, unit, absolute)
    change = format_margin_change(worst.margin, finding.base_margin, unit, absolute)
    return finding.change or "", base, change


def _worst_columns(worst: Outcome | None) -> dict[str, str]:
    """Case, value, bound, margin and relative margin of the worst outcome (dashes if none)."""
    if worst is None:
        return dict.fromkeys(("case", "value", "bound", "margin", "relative"), NO_TEXT)
    if worst.error:
        return dict(case=case_label(worst), value=NO_POINT, bound=NO_TEXT, margin=NO_TEXT, relative=NO_TEXT)
    value, bound = format_pair(worst.value, worst.bound, worst.unit, worst.absolute, worst.relative)
    return dict(case=case_label(worst), value=value, bound=bound,
                margin=format_margin(worst.margin, worst.unit, worst.absolute),
                relative=format_relative(worst.relative))


def _point_columns(worst: Outcome | None, path: str) -> dict[str, object]:
    """Method, full point, no-solution message and reproduce command of the worst outcome."""
    if worst is None:
        return {}
    return dict(method=method_text(worst), point=point_texts(worst), error=worst.error,
                reproduce=reproduce_text(worst, path))


def make_row(finding: Finding, path: str = "") -> Row:
    """The text of one finding, from its worst outcome; `path` is its circuit's file, for the
    reproduce command (none without it)."""
    worst = finding.worst if finding.outcomes else None
    change, base_margin, margin_change = (_base_columns(finding, worst) if worst
                                          else (finding.change or "", "", ""))
    return Row(
        finding=finding, status=finding.status, circuit=finding.circuit,
        limit=finding.limit.id, item=finding.item or "", about=finding.limit.about or finding.limit.check,
        check=finding.limit.check, severity=finding.limit.severity, **_worst_columns(worst),
        change=change, base_margin=base_margin, margin_change=margin_change,
        waiver=waiver_text(finding.waiver), drivers=drivers_text(finding),
        fails_in=format_fraction(finding.fail_fraction), **_point_columns(worst, path),
        remedies=tuple(remedy_text(remedy) for remedy in finding.remedies), remedy_note=finding.remedy_note,
    )


ARROW = "\u2192"


def remedy_text(remedy: Remedy) -> str:
    """`R_LED 150 Ω → 180 Ω (E12): margin +2.10 mA (+21.0 %); all 37 limits hold` (docs/remedies.md)."""
    change = (f"{remedy.name} {format_number(remedy.from_value, remedy.unit)} {ARROW} "
              f"{format_number(remedy.to_value, remedy.unit)} ({remedy.series})")
    if math.isfinite(remedy.margin_after):
        margin = (f"margin {format_margin(remedy.margin_after, remedy.margin_unit, remedy.absolute, signed=True)}"
                  f" ({format_relative(remedy.relative_after)})")
    else:
        margin = "the limit no longer applies"
    if remedy.all_limits_hold:
        return f"{change}: {margin}; " + (f"all {remedy.limits} limits hold" if remedy.limits > 1
                                           else "the only limit holds")
    others = [name for name in remedy.failing if name not in remedy.breaks]
    held = (["breaks " + _names(remedy.breaks)] if remedy.breaks else []) + \
        ([f"{_names(others)} still fail{'s' if len(others) == 1 else ''}"] if others else [])
    return f"{change}: {margin}; " + "; ".join(held or ["other limits fail"])


def _names(names) -> str:
    names = list(names)
    return ", ".join(names[:3]) + (f" and {len(names) - 3} more" if len(names) > 3 else "")


def make_note(note: WaiverNote) -> NoteRow:
    waiver = note.waiver
    where = f"{waiver.location.path}:{waiver.location.line}" if waiver.location else ""
    return NoteRow(problem=note.problem, limit=waiver.limit, part=waiver.part or "",
                   case=waiver.case or "", reason=waiver.reason,
                   until=waiver.until.isoformat(), where=where)


def worst_first(rows: list[Row]) -> tuple[Row, ...]:
    """No operating point first (−inf), then most negative relative margin; undefined relative
    margins last, order kept."""
    def key(row: Row) -> float:
        relative = row.finding.worst.relative if row.finding.outcomes else math.inf
        return math.inf if math.isnan(relative) or relative == math.inf else relative
    return tuple(sorted(rows, key=key))


def _where_details(findings: Findings, verdict: Verdict) -> list[str]:
    """Which circuits fail the check, or how many limits hold where when it passes."""
    counted = {f.circuit for f in findings.findings if verdict.counts(f)}
    if counted:
        return [f"in {plural(len(counted), 'circuit')}"]
    limits = findings.limit_findings
    total, holding = len(limits), sum(1 for f in limits if f.status == "pass")
    if not verdict.passed or not total:
        return []
    circuits = plural(len(findings.circuits), "circuit")
    return [f"({holding} of {total} hold in {circuits})" if holding < total else f"in {circuits}"]


def make_verdict(findings: Findings, verdict: Verdict) -> VerdictText:
    """The verdict's words: its headline, its other reasons, then counts the reasons do not give
    already (warnings and unused waivers count as reasons under --strict)."""
    strict = verdict.policy.strict
    lints = sum(1 for f in findings.lints if f.status == "warn")
    counts = [(0 if strict else len(findings.warnings) - lints, "warning", None),
              (0 if strict else lints, "design lint", None),
              (len(findings.with_status("waived")), "waived", "waived"),
              (0 if strict else len(findings.unused_waivers), "unused waiver", None)]
    details = (_where_details(findings, verdict) + list(verdict.reasons[1:])
               + [plural(n, word, many) for n, word, many in counts if n])
    return VerdictText(passed=verdict.passed, headline=verdict.headline, details=tuple(details),
                       base=_base_sentence(findings))


def new_failures(findings: Findings) -> int:
    """Error-severity failures that the base revision did not have."""
    return sum(1 for f in findings.failures if f.change == "new")


def _base_sentence(findings: Findings) -> str:
    """How this change moves the failures, against the base revision."""
    if findings.base_ref is None:
        return ""
    new = new_failures(findings)
    return (f"Against {findings.base_ref}, this change introduces {plural(new, 'failure')} "
            f"and fixes {len(findings.fixed)}.")


def build_view(findings: Findings, verdict: Verdict | None = None) -> ReportView:
    """The shared view of a check run, for Markdown, HTML and the terminal; without a verdict,
    the one of the default policy (`--fail-on any`, not strict)."""
    paths = circuit_paths(findings)
    rows = [make_row(f, paths.get(f.circuit, "")) for f in findings.findings]
    return ReportView(
        verdict=make_verdict(findings, verdict or judge(findings)),
        failures=worst_first([r for r in rows if r.status == "fail"]),
        warnings=worst_first([r for r in rows if r.status == "warn" and not r.lint]),
        lints=tuple(r for r in rows if r.lint and r.status != "waived"),
        waived=tuple(r for r in rows if r.status == "waived"),
        expired=tuple(make_note(n) for n in findings.expired_waivers),
        unused=tuple(make_note(n) for n in findings.unused_waivers),
        fixed=tuple(make_row(f, paths.get(f.circuit, "")) for f in findings.fixed),
        rows=tuple(r for r in rows if not r.lint),
        base_ref=findings.base_ref,
        analysis=analysis_sentence(findings.analysis),
        with_drivers=findings.analysis.mode != "nominal",
        with_fractions=findings.analysis.mode == "monte-carlo",
        with_method=findings.analysis.mode == "worst-case",
    )
