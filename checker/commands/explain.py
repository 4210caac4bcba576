"""`nodegate explain LIMIT_ID [DIR] [--config FILE]`: one limit, case by case, and the parts that drive it.

Runs the configuration's tolerance analysis for this limit only (and only on the
circuits it applies to), then prints, per circuit and item, a table of every case's
value, bound, margin and status (with how each worst case was found), the waiver if
any, and for each one-sided comparison of the check (each end of a range, each sign
of `abs`, ...) the toleranced values that move it, largest first (±1 % on every
value when the circuit has no tolerances).
"""

from __future__ import annotations

import argparse
import datetime
from pathlib import Path

import numpy as np

from checker.analysis import analyse
from checker.analysis.run import targets_of
from checker.analysis.boxpoints import BoxPoints
from checker.analysis.sensitivity import SideSwing, Target, side_swings
from checker.analysis.tolerances import percent, primary_values, toleranced
from checker.design import Design
from checker.errors import ConfigError, did_you_mean
from checker.findings import Finding, Findings, Limit
from checker.limits import LimitFile, LimitSet, compile_limits
from checker.pipeline import analysis_of, load_designs, load_limit_files
from checker.repo.config import find_config, load_config
from checker.solver import Cache, solve
from checker.remedies.explain import explained_remedies, remedy_lines
from checker.report.view import (NO_TEXT, STATUS_WORDS, analysis_sentence, case_label, format_fraction,
                                 format_margin, format_pair, format_relative, waiver_text)

PLAIN_BAND = 0.01  # ±1 % on every value when a circuit declares no tolerance
MAX_DRIVER_ROWS = 10


def run(args: argparse.Namespace) -> int:
    config = load_config(find_config(Path(args.directory), args.config))
    files = load_limit_files(config)
    limit = find_limit(args.limit_id, files)
    designs = load_designs(config)
    compiled = compile_limits(files, designs)
    mine = LimitSet(tuple(c for c in compiled.limits if c.limit.id == limit.id), compiled.waivers)
    used = [d for d in designs if any(c.circuit == d.name for c in mine.limits)]
    findings = analyse(mine, used, datetime.date.today(), analysis_of(config))
    if not getattr(args, "no_remedies", False):
        findings = explained_remedies(findings, files, designs, datetime.date.today(), analysis_of(config))
    print("\n".join(explain_lines(limit, findings, used, mine)))
    return 0


def find_limit(limit_id: str, files: list[LimitFile]) -> Limit:
    """The limit with this id; ConfigError naming the nearest id when there is none."""
    limits = {limit.id: limit for file in files for limit in file.limits}
    if limit_id in limits:
        return limits[limit_id]
    notes = did_you_mean(limit_id, limits) or (f"the configuration's limits have {len(limits)} id(s)",)
    raise ConfigError(f"no limit with id `{limit_id}`", None, notes)


def _table(rows: list[list[str]], right: set[int]) -> list[str]:
    """Columns padded to their widest cell; columns in `right` aligned right."""
    widths = [max(len(row[i]) for row in rows) for i in range(len(rows[0]))]
    return ["  ".join(cell.rjust(w) if i in right else cell.ljust(w)
                      for i, (cell, w) in enumerate(zip(row, widths))).rstrip() for row in rows]


def header_lines(limit: Limit, findings: Findings) -> list[str]:
    where = f"{limit.location.path}:{limit.location.line}" if limit.location else limit.source
    fields = [("severity", limit.severity), ("defined", where), ("check", limit.check),
              ("each", limit.each), ("where", limit.where),
              ("cases", ", ".join(limit.cases) if limit.cases is not None else "all")]
    lines = [f"limit {limit.id}: {limit.about}"] + [f"  {name:<10}{value}" for name, value in fields if value]
    return lines + ["", analysis_sentence(findings.analysis)]


def case_table(finding: Finding) -> list[str]:
    methods = any(o.method for o in finding.outcomes)
    rows = [["case", "value", "bound", "margin", "relative", "status"] + (["found by"] if methods else [])]
    for o in finding.outcomes:
        row = [case_label(o), *format_pair(o.value, o.bound, o.unit, o.absolute, o.relative),
               format_margin(o.margin, o.unit, o.absolute),
               format_relative(o.relative), "holds" if o.holds else "fails"]
        if methods:
            row.append(o.method.replace("-", " ") + (", proved" if o.proved else ", searched"))
        rows.append(row)
    lines = ["  " + line for line in _table(rows, {1, 2, 3, 4})]
    return lines + [f"    {o.case}: no operating point: {o.error}" for o in finding.outcomes if o.error]


def side_swing(finding: Finding, design: Design, limit_set: LimitSet) -> tuple[Target, SideSwing, bool]:
    """Each side's swing over each value at the nominal point of the finding's worst case; True when
    the bands are plain ±1 % (the circuit declares no tolerance)."""
    netlist = design.netlist(finding.worst.case)
    target = next(t for t in targets_of(limit_set, design.name) if t.item.part == finding.item)
    declared = [t for n in design.netlists for t in toleranced(n)]
    bands = toleranced(netlist) if declared else primary_values(netlist, PLAIN_BAND)
    box = BoxPoints(netlist, bands, solve(netlist), Cache())
    return target, side_swings(box, [target])[target.key], not declared


def driver_lines(finding: Finding, target: Target, swing: SideSwing, bands: dict[str, float], plain: bool) -> list[str]:
    """Per side of the check, the values that move it, largest first: a value whose effect on the
    whole margin cancels at nominal (the centre of a range, the kink of `abs`) still shows on a side."""
    worst = finding.worst
    unit, absolute = worst.unit, worst.absolute
    what = "each value ±1 % (the circuit declares no tolerance)" if plain else "each value over its tolerance band"
    lines = [f"  values that move each side (case {worst.case}, at nominal, {what}):"]
    for number, side in enumerate(target.item.split.sides):
        change = swing.change(number)
        order = [i for i in np.argsort(-change, kind="stable") if change[i] > 0]
        lines.append(f"    side {number + 1}: {side.text}")
        if not order:
            lines.append("      none: no toleranced value moves this side")
            continue
        rows = [["value", "band", "margin at +band", "margin at \u2212band", "change"]]
        for i in order[:MAX_DRIVER_ROWS]:
            name = swing.names[i]
            rows.append([name, "\u00b1" + percent(bands[name])[1:],
                         format_margin(swing.up[number, i], unit, absolute),
                         format_margin(swing.down[number, i], unit, absolute),
                         format_margin(change[i], unit, absolute)])
        lines += ["      " + line for line in _table(rows, {2, 3, 4})]
        if len(order) > MAX_DRIVER_ROWS:
            lines.append(f"      and {len(order) - MAX_DRIVER_ROWS} more that move it less")
    return lines


def finding_lines(finding: Finding, design: Design, limit_set: LimitSet) -> list[str]:
    item = f", part {finding.item}" if finding.item else ""
    lines = [f"circuit {finding.circuit}{item}: {STATUS_WORDS.get(finding.status, finding.status)}"]
    lines += case_table(finding)
    if finding.fail_fraction is not None:
        lines.append(f"  fails in {format_fraction(finding.fail_fraction)} of the samples")
    if finding.waiver is not None:
        lines.append(f"  waived: {waiver_text(finding.waiver)}")
    target, swing, plain = side_swing(finding, design, limit_set)
    netlist = design.netlist(finding.worst.case)
    bands = {t.name: t.fraction for t in (primary_values(netlist, PLAIN_BAND) if plain else toleranced(netlist))}
    return lines + driver_lines(finding, target, swing, bands, plain) + remedy_lines(finding)


def explain_lines(limit: Limit, findings: Findings, designs: list[Design], limit_set: LimitSet) -> list[str]:
    """The whole explanation, line by line."""
    lines = header_lines(limit, findings)
    by_name = {d.name: d for d in designs}
    for finding in findings.findings:
        lines += [""] + finding_lines(finding, by_name[finding.circuit], limit_set)
    if not findings.findings:
        lines += ["", f"{NO_TEXT} no circuit has a case this limit applies to with its parts fitted"]
    return lines
