"""The JUnit XML report, for CI hosts that show test results.

One <testsuite> per circuit, one <testcase> per finding (classname = circuit,
name = limit id, with the part in brackets for `each` limits). A <failure> is exactly
what fails the check under the one verdict (`checker.verdict`), so the failure count is
zero when, and only when, the check passes:
- fail   -> <failure> (worst case, value vs bound, margin, or that there is no operating
            point; and the command that reproduces a tolerance point); a failure the base
            already had passes under --fail-on new, with the failure in <system-out>;
- warn   -> passes, with the warning in <system-out>; under --strict a <failure>;
- waived -> <skipped> with the waiver's reason and end date;
- pass   -> an empty testcase.
Waivers that expired or matched nothing form one more suite, "waivers": an expired one
is a failure, an unused one a <system-out> note (a failure under --strict).
ElementTree does all the escaping.
"""

from __future__ import annotations

import re
import xml.etree.ElementTree as ET

from checker.findings import Finding, Findings, WaiverNote
from checker.report.view import Row, circuit_paths, make_row, waiver_text
from checker.verdict import Verdict, judge

WAIVER_SUITE = "waivers"
# Characters XML 1.0 does not allow at all, not even as references (XML 1.0, 2.2 "Characters").
_NOT_XML = re.compile("[^\t\n\r\x20-\ud7ff\ue000-\ufffd\U00010000-\U0010ffff]")


def worst_sentence(row: Row) -> str:
    """`case cold (R1 +5 %): value 13.1 mA vs bound 15.0 mA, margin -1.90 mA (-12.7 %)`,
    or `case cold (R1 +5 %): no operating point: MESSAGE`; for a design lint, where it is written."""
    if row.lint:
        return f"at {row.where}" if row.where else ""
    if row.error:
        return f"case {row.case}: {row.value}: {row.error}"
    return (f"case {row.case}: value {row.value} vs bound {row.bound}, "
            f"margin {row.margin} ({row.relative})")


def _failure_text(row: Row) -> str:
    """The failure's body: what the limit is, how it failed, and how to see it again."""
    lines = [row.finding.limit.about, f"check: {row.check}", worst_sentence(row)]
    if row.method:
        lines.append(f"found by: {row.method}")
    if row.reproduce:
        lines.append(f"reproduce: {row.reproduce}")
    return "\n".join(lines)


def testcase_name(finding: Finding) -> str:
    return finding.limit.id + (f" [{finding.item}]" if finding.item else "")


def _unfailing_note(finding: Finding, row: Row) -> str:
    """Why a limit that does not hold still passes here: a warning, or a failure the base already had."""
    word = "warning" if finding.status == "warn" else "existing failure, unchanged against the base"
    return f"{word}: {finding.limit.about}; {worst_sentence(row)}"


def _testcase(suite: ET.Element, finding: Finding, path: str, verdict: Verdict) -> None:
    row = make_row(finding, path)
    case = ET.SubElement(suite, "testcase", classname=finding.circuit, name=testcase_name(finding))
    if verdict.counts(finding):
        kind = "limit" if finding.status == "fail" else "warning"
        failure = ET.SubElement(case, "failure", message=worst_sentence(row), type=kind)
        failure.text = _failure_text(row)
    elif finding.status in ("fail", "warn"):
        ET.SubElement(case, "system-out").text = _unfailing_note(finding, row)
    elif finding.status == "waived":
        ET.SubElement(case, "skipped", message=f"waived: {waiver_text(finding.waiver)}")


def _suite(parent: ET.Element, name: str, cases: int, failures: int, skipped: int) -> ET.Element:
    return ET.SubElement(parent, "testsuite", name=name, tests=str(cases), failures=str(failures),
                         errors="0", skipped=str(skipped))


def _circuit_suite(parent: ET.Element, circuit: str, findings: list[Finding], path: str, verdict: Verdict) -> None:
    failures = sum(1 for f in findings if verdict.counts(f))
    skipped = sum(1 for f in findings if f.status == "waived")
    suite = _suite(parent, circuit, len(findings), failures, skipped)
    for finding in findings:
        _testcase(suite, finding, path, verdict)


def _waiver_suite(parent: ET.Element, notes: tuple[WaiverNote, ...], verdict: Verdict) -> None:
    suite = _suite(parent, WAIVER_SUITE, len(notes), sum(1 for n in notes if verdict.counts_note(n)), 0)
    for note in notes:
        waiver = note.waiver
        name = waiver.limit + "".join(f" [{v}]" for v in (waiver.part, waiver.case) if v)
        case = ET.SubElement(suite, "testcase", classname=WAIVER_SUITE, name=name)
        text = f"{note.problem} waiver: {waiver_text(waiver)}"
        if verdict.counts_note(note):
            ET.SubElement(case, "failure", message=text, type="waiver")
        else:
            ET.SubElement(case, "system-out").text = text


def _clean(root: ET.Element) -> None:
    """Replace characters XML cannot carry (control characters from free text) with U+FFFD."""
    for element in root.iter():
        element.attrib.update({k: _NOT_XML.sub("\ufffd", v) for k, v in element.attrib.items()})
        if element.text:
            element.text = _NOT_XML.sub("\ufffd", element.text)


def render_junit(findings: Findings, verdict: Verdict | None = None) -> str:
    """The JUnit XML document, UTF-8, with an XML declaration; failures are what fails under
    `verdict` (default: `--fail-on any`, not strict)."""
    verdict = verdict or judge(findings)
    by_circuit: dict[str, list[Finding]] = {c.name: [] for c in findings.circuits}
    for finding in findings.findings:
        by_circuit.setdefault(finding.circuit, []).append(finding)
    paths = circuit_paths(findings)
    root = ET.Element("testsuites", name="nodegate")
    for circuit, items in by_circuit.items():
        _circuit_suite(root, circuit, items, paths.get(circuit, ""), verdict)
    if findings.waiver_notes:
        _waiver_suite(root, findings.waiver_notes, verdict)
    suites = root.findall("testsuite")
    for total in ("tests", "failures", "errors", "skipped"):
        root.set(total, str(sum(int(s.get(total, "0")) for s in suites)))
    _clean(root)
    ET.indent(root)
    return ET.tostring(root, encoding="unicode", xml_declaration=False).join(
        ['<?xml version="1.0" encoding="UTF-8"?>\n', "\n"])
