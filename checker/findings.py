"""The result of a check as plain data: what every report renders and the exit code is decided from.

The engine (`checker.limits`) builds these; renderers in `checker.report` only format
them. All numbers are SI floats (temperatures in kelvin).
"""

from __future__ import annotations

import datetime
from dataclasses import dataclass, field

from checker.design import OperatingPoint
from checker.errors import Location


LINT_SOURCE = "lint"  # the `source` of the built-in rules of design lints (`checker.lints`)


@dataclass(frozen=True)
class Limit:
    """One limit as written in a limits file (or a built-in pack)."""

    id: str
    about: str
    check: str
    severity: str = "error"  # "error" | "warning"
    each: str | None = None  # a part kind, or "tag:WORD"
    where: str | None = None
    cases: tuple[str, ...] | None = None  # None: every case
    source: str = ""  # the limits file, or "pack:NAME"
    location: Location | None = field(default=None, compare=False)  # the limit's `id:` line
    circuits: tuple[str, ...] | None = None  # bound to these circuits (docs/limits.md); None: unbound


@dataclass(frozen=True)
class Waiver:
    """An accepted failure of one limit, optionally narrowed to a part, a case and circuits, until a date."""

    limit: str
    reason: str
    until: datetime.date
    part: str | None = None
    case: str | None = None
    location: Location | None = field(default=None, compare=False)
    circuits: tuple[str, ...] | None = None  # None: every circuit


@dataclass(frozen=True)
class Outcome:
    """One limit evaluated in one case on one item.

    `value` and `bound` are the two sides of the comparison that decided the margin
    (for `x in lo .. hi`, x and the nearer end). `margin` is positive when the
    limit holds; `relative` is the margin over the comparison's reference scale
    (docs/limits.md, "Relative margin"): a window's half-width; for absolute temperatures
    the headroom from the case's ambient to the bound; otherwise |bound|, or |value| when
    the bound is zero. `unit` is the display symbol of the
    three numbers; `absolute` marks temperatures to show in °C.

    Under worst-case analysis `method` says how the worst was found ("vertices",
    "corner-search" or "interior", docs/analysis.md), `proved` whether that method
    proves it is the lowest margin over the whole tolerance box, and `point` is the
    full point: every toleranced value of the case (`R1`, `U1.vout`) with its
    deviation as a fraction, in netlist order. `state` names the stable state of the
    case the outcome was found in, when the case has several (docs/models.md, "Several
    states"). `error` is set when the circuit has no
    operating point at that corner or sample: the solver's message; the outcome then
    fails with value and bound NaN and margin −inf.
    """

    case: str
    value: float
    bound: float
    margin: float
    relative: float
    unit: str = ""
    absolute: bool = False
    holds: bool = True
    corner: str = ""  # a tolerance corner or sample, when tolerances are analysed
    method: str = ""  # worst-case only: "vertices" | "corner-search" | "interior"
    proved: bool = False  # worst-case only: the method proves this is the lowest margin
    point: tuple[tuple[str, float], ...] = ()  # every toleranced value and its deviation
    error: str = ""  # no operating point here: why (the outcome fails)
    state: str = ""  # which stable state of its case (`1 of 2`) when the case has several


@dataclass(frozen=True)
class Remedy:
    """One part change that restores a failing limit (docs/remedies.md), confirmed on the whole circuit.

    `property` is "value" (the primary value), "vout", "rating", ...; `from_value` and `to_value`
    are SI, `to_value` a value of `series` ("E24", "power ratings", "2 digits"); `root_value`
    is where the search found the margin to cross zero, before snapping. `margin_after` (and
    `relative_after`) is the limit's worst margin with the change, in the configured tolerance
    analysis; `all_limits_hold` is true only when every limit of the circuit then holds (waived
    failures aside) in every case; `breaks` names the limits that held before and fail with it.
    """

    part: str
    property: str
    from_value: float
    to_value: float
    series: str
    margin_after: float
    all_limits_hold: bool
    root_value: float
    unit: str = ""  # the unit of the values, as written ("ohm", "V", "W")
    relative_after: float = 0.0
    margin_unit: str = ""  # the unit of margin_after (the limit's)
    absolute: bool = False  # margin of an absolute temperature: shown in K either way
    limits: int = 0  # how many limits of the circuit were confirmed
    breaks: tuple[str, ...] = ()
    failing: tuple[str, ...] = ()  # every other limit that fails with the change (`breaks` among them)

    @property
    def name(self) -> str:
        """`R1` for a primary value, `U1.vout` otherwise, as reports and `solve --at` name values."""
        return self.part if self.property == "value" else f"{self.part}.{self.property}"


@dataclass(frozen=True)
class Finding:
    """One limit on one circuit and one item (the part, for `each` limits), over its cases.

    `status`: "pass", "fail" (an error-severity limit fails), "warn" (a
    warning-severity limit fails) or "waived" (it fails under a valid waiver).
    With `--base`, `change` is "new", "fixed" or "unchanged" and `base_margin` the
    worst margin on the base revision. With tolerance analysis, `drivers` lists the
    parts whose tolerances move the worst margin most, as (part, margin change over
    its tolerance band in the margin's unit), largest first; Monte Carlo fills
    `fail_fraction`, the share of samples in which the limit fails.
    """

    limit: Limit
    circuit: str
    item: str | None
    outcomes: tuple[Outcome, ...]
    status: str
    waiver: Waiver | None = None
    item_location: Location | None = field(default=None, compare=False)
    change: str | None = None
    base_margin: float | None = None
    drivers: tuple[tuple[str, float], ...] = ()
    fail_fraction: float | None = None
    remedies: tuple[Remedy, ...] = ()  # failing and warning limits: part changes that fix them (docs/remedies.md)
    remedy_note: str = ""  # why there are none, or fewer than asked: no candidate, none holds all, budget spent

    @property
    def worst(self) -> Outcome:
        return min(self.outcomes, key=lambda outcome: outcome.margin)

    @property
    def lint(self) -> bool:
        """A design lint (`checker.lints`) rather than a limit: its `limit.about` is its whole message."""
        return self.limit.source == LINT_SOURCE

    @property
    def key(self) -> tuple[str, str, str]:
        """Identity across revisions: limit id, circuit, item."""
        return (self.limit.id, self.circuit, self.item or "")


@dataclass(frozen=True)
class WaiverNote:
    """A waiver that has expired (an error) or matched no failure (a warning)."""

    waiver: Waiver
    problem: str  # "expired" | "unused"


@dataclass(frozen=True)
class CircuitResult:
    """One circuit's operating points, one per case in declaration order."""

    name: str
    title: str
    path: str
    operating_points: tuple[OperatingPoint, ...]


@dataclass(frozen=True)
class Analysis:
    """How tolerances were analysed (docs/analysis.md): `mode` is "nominal",
    "worst-case" or "monte-carlo"; `samples` and `seed` are set for "monte-carlo" only;
    `vertex_values` for "worst-case": every vertex of the tolerance box is solved when a
    case has at most this many toleranced values (docs/analysis.md)."""

    mode: str = "nominal"
    samples: int | None = None
    seed: int | None = None
    vertex_values: int | None = None
    scheduler: str | None = None  # monte-carlo: where the samples run (a Dask scheduler's address); None: here


@dataclass(frozen=True)
class Findings:
    """Everything one `nodegate check` run found."""

    findings: tuple[Finding, ...]
    circuits: tuple[CircuitResult, ...]
    waiver_notes: tuple[WaiverNote, ...] = ()
    fixed: tuple[Finding, ...] = ()  # with --base: failed on the base, hold now or are gone
    base_ref: str | None = None
    analysis: Analysis = Analysis()

    def with_status(self, status: str) -> tuple[Finding, ...]:
        return tuple(f for f in self.findings if f.status == status)

    @property
    def limit_findings(self) -> tuple[Finding, ...]:
        """The findings of limits, without design lints."""
        return tuple(f for f in self.findings if not f.lint)

    @property
    def lints(self) -> tuple[Finding, ...]:
        """The design lints that fired (`checker.lints`), waived ones included."""
        return tuple(f for f in self.findings if f.lint)

    @property
    def failures(self) -> tuple[Finding, ...]:
        return self.with_status("fail")

    @property
    def warnings(self) -> tuple[Finding, ...]:
        return self.with_status("warn")

    @property
    def expired_waivers(self) -> tuple[WaiverNote, ...]:
        return tuple(n for n in self.waiver_notes if n.problem == "expired")

    @property
    def unused_waivers(self) -> tuple[WaiverNote, ...]:
        return tuple(n for n in self.waiver_notes if n.problem == "unused")
