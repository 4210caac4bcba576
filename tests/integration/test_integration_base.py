"""`nodegate check --base REF` in a real git repository built in the test.

Two commits: the second lowers a divider's bottom resistor, which makes one limit
fail (new) and lets another hold (fixed); a third limit fails on both revisions
(unchanged). The expected voltages follow from the divider rule (Alexander &
Sadiku, "Fundamentals of Electric Circuits", 6th ed., 2017, sec. 2.7).
"""

from __future__ import annotations

import json
import shutil
import subprocess
from pathlib import Path

import pytest

from checker.cli import main

pytestmark = pytest.mark.skipif(shutil.which("git") is None, reason="git is not installed on this machine")

CIRCUIT = """\
# Greenhouse vent controller sense divider, invented for this test
circuit vent "Vent controller"
ground gnd
source   VIN from vin to gnd : 12 V
resistor R1  from vin to tap : 10 kohm
resistor R2  from tap to gnd : {r2}
"""

LIMITS = """\
limits:
  - id: tap-low-enough
    about: tap stays under the ADC's 5 V
    check: voltage(tap) <= 5 V
  - id: tap-high-enough
    about: tap stays above 4.5 V for resolution
    check: voltage(tap) >= 4.5 V
  - id: always-fails
    about: a known, accepted failure of the old design
    check: voltage(vin) <= 10 V
"""


def git(repo: Path, *args: str) -> str:
    done = subprocess.run(["git", *args], cwd=repo, check=True, capture_output=True, text=True)
    return done.stdout


def commit(repo: Path, r2: str, message: str) -> None:
    (repo / "vent.circuit").write_text(CIRCUIT.format(r2=r2), encoding="utf-8")
    git(repo, "add", "-A")
    git(repo, "commit", "-q", "-m", message)


@pytest.fixture()
def repo(tmp_path: Path) -> Path:
    root = tmp_path / "hw"
    root.mkdir()
    git(root, "init", "-q")
    git(root, "config", "user.email", "test@example.invalid")
    git(root, "config", "user.name", "test")
    (root / "nodegate.yaml").write_text("circuits: [vent.circuit]\nlimits: [limits.yaml]\n", encoding="utf-8")
    (root / "limits.yaml").write_text(LIMITS, encoding="utf-8")
    # 12 V * 6.2k / 16.2k = 4.59 V: low-enough holds, high-enough holds; always-fails fails
    commit(root, "6.2 kohm", "first")
    # 12 V * 8.2k / 18.2k = 5.41 V: low-enough now fails (new); high-enough still holds
    commit(root, "8.2 kohm", "second")
    return root


def status(repo: Path) -> tuple[str, str]:
    return git(repo, "status", "--porcelain", "--untracked-files=all"), git(repo, "ls-files", "-s")


def findings_of(out: Path) -> dict:
    return json.loads((out / "report.json").read_text(encoding="utf-8"))


def test_new_fixed_and_unchanged_against_the_previous_commit(repo, tmp_path):
    before = status(repo)
    out = tmp_path / "out"
    code = main(["check", str(repo), "--base", "HEAD~1", "--format", "json,md", "--out", str(out)])
    assert status(repo) == before  # working tree and index untouched
    assert code == 1
    report = findings_of(out)
    changes = {f["limit"]: f["change"] for f in report["findings"]}
    assert changes["tap-low-enough"] == "new"
    assert changes["always-fails"] == "unchanged"
    assert report["verdict"]["new_failures"] == 1
    markdown = (out / "report.md").read_text(encoding="utf-8")
    assert "this change introduces 1 failure" in markdown


def test_a_fix_is_reported_as_fixed(repo, tmp_path):
    commit(repo, "6.2 kohm", "revert the divider")
    out = tmp_path / "out"
    code = main(["check", str(repo), "--base", "HEAD~1", "--format", "json", "--out", str(out)])
    report = findings_of(out)
    assert [f["limit"] for f in report["fixed"]] == ["tap-low-enough"]
    assert report["verdict"]["new_failures"] == 0
    assert code == 1  # always-fails still fails, and --fail-on any counts it
    code = main(["check", str(repo), "--base", "HEAD~1", "--fail-on", "new", "--out", str(out)])
    assert code == 0  # nothing new fails


def test_fail_on_new_fails_only_for_new_failures(repo, tmp_path):
    out = ["--out", str(tmp_path / "out")]
    assert main(["check", str(repo), "--base", "HEAD~1", "--fail-on", "new", *out]) == 1
    assert main(["check", str(repo), "--base", "HEAD", "--fail-on", "new", *out]) == 0
    assert main(["check", str(repo), "--base", "HEAD", "--fail-on", "any", *out]) == 1


def test_base_without_configuration_counts_everything_as_new(repo, tmp_path):
    git(repo, "checkout", "-q", "--orphan", "empty")
    git(repo, "rm", "-rq", "--cached", ".")
    (repo / "README").write_text("nothing yet\n")
    git(repo, "add", "README")
    git(repo, "commit", "-q", "-m", "empty base")
    git(repo, "checkout", "-q", "-f", "master" if "master" in git(repo, "branch") else "main")
    out = tmp_path / "out"
    main(["check", str(repo), "--base", "empty", "--format", "json", "--out", str(out)])
    changes = {f["limit"]: f["change"] for f in findings_of(out)["findings"] if f["status"] == "fail"}
    assert set(changes.values()) == {"new"}


def test_missing_ref_exits_2(repo, tmp_path, capsys):
    assert main(["check", str(repo), "--base", "no-such-branch", "--out", str(tmp_path / "out")]) == 2
    assert "no-such-branch" in capsys.readouterr().err
