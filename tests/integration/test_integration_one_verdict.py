"""Every output of one `nodegate check` run tells the same verdict (issue 10, items 2 and 3).

A two-board repository invented for this test, in a git repository of two commits: a
kiln controller and a pond pump, both with a sense divider from `vin` to `tap`. Three
failures exist on both revisions (the supplies are above what two limits allow); the
second commit lowers the kiln's bottom resistor, which adds one warning (the tap falls
under 4 V) and no failure. Divider voltages by the divider rule (Alexander & Sadiku,
"Fundamentals of Electric Circuits", 6th ed., 2017, sec. 2.7):
kiln 12 V * 6.2k / 16.2k = 4.59 V, then 12 V * 3.3k / 13.3k = 2.98 V; pump 24 V / 2 = 12 V.

Under each policy the exit code, the terminal's last line, the Markdown's first line,
the HTML banner, JSON `verdict`, the JUnit failure count, the SARIF levels and invocation,
and the annotations must agree.
"""

from __future__ import annotations

import json
import re
import shutil
import subprocess
import xml.etree.ElementTree as ET
from pathlib import Path

import pytest

from checker.cli import main

pytestmark = pytest.mark.skipif(shutil.which("git") is None, reason="git is not installed on this machine")

BOARD = """\
# {title}, invented for this test
circuit {name} "{title}"
ground gnd
source   VIN from vin to gnd : {vin}
resistor R1  from vin to tap : 10 kohm
resistor R2  from tap to gnd : {r2}
"""

LIMITS = """\
limits:
  - id: supply-under-20
    about: the sense input survives at most 20 V
    check: voltage(vin) <= 20 V
  - id: supply-under-10
    about: the old regulator takes at most 10 V
    check: voltage(vin) <= 10 V
  - id: tap-high-enough
    about: the tap stays above 4 V for resolution
    check: voltage(tap) >= 4 V
    severity: warning
"""

WAIVER = """\
waivers:
  - limit: supply-under-20
    reason: the pump's sense input is rated 30 V on this batch
    until: 2031-03-31
"""

FORMATS = "md,html,json,junit,sarif,annotations"


def git(repo: Path, *args: str) -> str:
    return subprocess.run(["git", *args], cwd=repo, check=True, capture_output=True, text=True).stdout


def write_boards(root: Path, kiln_r2: str) -> None:
    for name, title, vin, r2 in (("kiln", "Kiln controller", "12 V", kiln_r2),
                                 ("pump", "Pond pump driver", "24 V", "10 kohm")):
        (root / "boards" / name).mkdir(parents=True, exist_ok=True)
        (root / "boards" / name / f"{name}.circuit").write_text(
            BOARD.format(name=name, title=title, vin=vin, r2=r2), encoding="utf-8")


@pytest.fixture()
def repo(tmp_path: Path) -> Path:
    root = tmp_path / "hw"
    root.mkdir()
    for setup in (["init", "-q"], ["config", "user.email", "test@example.invalid"], ["config", "user.name", "test"]):
        git(root, *setup)
    (root / "nodegate.yaml").write_text("circuits: [boards/*/*.circuit]\nlimits: [limits.yaml]\n", encoding="utf-8")
    (root / "limits.yaml").write_text(LIMITS, encoding="utf-8")
    write_boards(root, "6.2 kohm")
    git(root, "add", "-A")
    git(root, "commit", "-q", "-m", "two boards, three known failures")
    write_boards(root, "3.3 kohm")
    git(root, "commit", "-q", "-am", "kiln tap lower: one new warning")
    return root


def outputs(repo: Path, out: Path, capsys, *options: str) -> dict:
    """Every output of one run, reduced to what states the verdict."""
    code = main(["check", str(repo), "--base", "HEAD~1", "--format", FORMATS, "--out", str(out), *options])
    printed = capsys.readouterr().out.splitlines()
    html = (out / "report.html").read_text(encoding="utf-8")
    sarif = json.loads((out / "report.sarif").read_text(encoding="utf-8"))["runs"][0]
    return {
        "code": code,
        "terminal": printed[-1],
        "markdown": (out / "report.md").read_text(encoding="utf-8").splitlines()[0],
        "banner": re.search(r'<p class="verdict-mark">([^<]*)</p>\s*<h1>([^<]*)</h1>', html).groups(),
        "json": json.loads((out / "report.json").read_text(encoding="utf-8"))["verdict"],
        "junit": int(ET.parse(out / "report.junit.xml").getroot().get("failures")),
        "sarif_errors": [r["ruleId"] for r in sarif["results"] if r["level"] == "error" and not r.get("suppressions")],
        "sarif_exit": sarif["invocations"][0]["exitCode"],
        "annotation_errors": sum(1 for line in printed if line.startswith("::error ")),
    }


def assert_one_verdict(seen: dict, passed: bool, headline: str, failing: int) -> None:
    assert seen["code"] == (0 if passed else 1)
    assert seen["terminal"].startswith(f"nodegate: {headline}")
    assert seen["markdown"].startswith(f"**nodegate: {headline}**")
    assert seen["banner"] == ("CHECK PASSES" if passed else "CHECK FAILS", f"nodegate: {headline}")
    assert (seen["json"]["passed"], seen["json"]["exit_code"], seen["json"]["headline"]) == \
           (passed, seen["code"], headline)
    assert seen["junit"] == failing
    assert len(seen["sarif_errors"]) == failing and seen["sarif_exit"] == seen["code"]
    assert seen["annotation_errors"] == failing


def test_fail_on_any_counts_the_old_failures_everywhere(repo, tmp_path, capsys):
    seen = outputs(repo, tmp_path / "out", capsys, "--fail-on", "any")
    assert_one_verdict(seen, passed=False, headline="3 limits fail", failing=3)
    assert seen["markdown"] == "**nodegate: 3 limits fail** in 2 circuits, 1 warning"


def test_fail_on_new_with_old_failures_only_passes_everywhere(repo, tmp_path, capsys):
    seen = outputs(repo, tmp_path / "out", capsys, "--fail-on", "new")
    headline = "this change adds no failure; 3 existing failures remain"
    assert_one_verdict(seen, passed=True, headline=headline, failing=0)
    assert seen["json"]["reasons"] == [] and seen["json"]["fail"] == 3


def test_strict_makes_the_new_warning_fail_everywhere(repo, tmp_path, capsys):
    seen = outputs(repo, tmp_path / "out", capsys, "--fail-on", "new", "--strict")
    assert_one_verdict(seen, passed=False, headline="1 new warning fails under --strict", failing=1)
    assert seen["sarif_errors"] == ["tap-high-enough"]


def test_strict_without_a_warning_to_count_still_passes(repo, tmp_path, capsys):
    """Against a base that already had the warning, --fail-on new excuses it even under --strict,
    and the headline counts it among the existing failures (under --strict a warning is one)."""
    git(repo, "commit", "-q", "--allow-empty", "-m", "nothing changes")
    seen = outputs(repo, tmp_path / "out", capsys, "--fail-on", "new", "--strict")
    assert_one_verdict(seen, passed=True, headline="this change adds no failure; 4 existing failures remain",
                       failing=0)


def test_sarif_marks_a_waived_failure_suppressed(repo, tmp_path, capsys):
    (repo / "limits.yaml").write_text(LIMITS + WAIVER, encoding="utf-8")
    out = tmp_path / "out"
    assert main(["check", str(repo), "--format", "sarif,json", "--out", str(out), "--as-of", "2031-03-31"]) == 1
    results = json.loads((out / "report.sarif").read_text(encoding="utf-8"))["runs"][0]["results"]
    waived = [r for r in results if r.get("suppressions")]
    assert [r["ruleId"] for r in waived] == ["supply-under-20"]
    assert "pump" in waived[0]["message"]["text"]
    assert waived[0]["suppressions"] == [{
        "kind": "external", "status": "accepted",
        "justification": "the pump's sense input is rated 30 V on this batch",
        "properties": {"until": "2031-03-31"}}]
    statuses = {(f["limit"], f["circuit"]): f["status"]
                for f in json.loads((out / "report.json").read_text(encoding="utf-8"))["findings"]}
    assert statuses[("supply-under-20", "pump")] == "waived"


def test_a_new_design_lint_fails_under_strict_everywhere_and_an_old_one_does_not(repo, tmp_path, capsys):
    """A slip added to the pump (a resistor to a misspelt `tapp`, docs/lints.md) is a new design lint:
    under --fail-on new --strict it alone fails the check in every output; once the base has it too,
    it is an existing failure like the others."""
    git(repo, "commit", "-q", "--allow-empty", "-m", "base with the warning")
    pump = repo / "boards" / "pump" / "pump.circuit"
    pump.write_text(pump.read_text(encoding="utf-8") + "resistor R3  from tap to tapp : 1 kohm\n", encoding="utf-8")
    git(repo, "commit", "-q", "-am", "pump: a test resistor to a misspelt net")
    seen = outputs(repo, tmp_path / "out", capsys, "--fail-on", "new", "--strict")
    assert_one_verdict(seen, passed=False, headline="1 new design lint fails under --strict", failing=1)
    assert seen["sarif_errors"] == ["lint.single-connection"]
    git(repo, "commit", "-q", "--allow-empty", "-m", "nothing changes")
    seen = outputs(repo, tmp_path / "out2", capsys, "--fail-on", "new", "--strict")
    assert_one_verdict(seen, passed=True, headline="this change adds no failure; 5 existing failures remain",
                       failing=0)
