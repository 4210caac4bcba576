"""The composite action's own shell steps, run locally on the bundled example repository.

The steps are read from `.github/actions/check/action.yml` and run with bash exactly
as a runner would, with the real `nodegate` (a shim around `python -m checker`),
the runner's files (`GITHUB_OUTPUT`, `GITHUB_STEP_SUMMARY`) in a temporary folder,
and the example copied into a fresh git repository with a base commit.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from pathlib import Path

import pytest
import yaml

REPO = Path(__file__).resolve().parents[2]
ACTION = REPO / ".github" / "actions" / "check" / "action.yml"
EXAMPLE = REPO / "examples" / "weather_station"
# GitHub's workflow command format: ::error file=F,line=L,col=C,title=T::message
ANNOTATION = re.compile(r"^::(error|warning|notice)( [a-z]+=[^,:]*(,[a-z]+=[^,:]*)*)?::.*$")

pytestmark = pytest.mark.skipif(shutil.which("git") is None or shutil.which("bash") is None,
                                reason="needs git and bash, as a CI runner has")


def step(name: str) -> dict:
    steps = yaml.safe_load(ACTION.read_text(encoding="utf-8"))["runs"]["steps"]
    return next(s for s in steps if s.get("name") == name)


def git(repo: Path, *args: str) -> None:
    subprocess.run(["git", *args], cwd=repo, check=True, capture_output=True)


@pytest.fixture()
def runner(tmp_path: Path) -> dict:
    """A work folder holding the example as a git repository, and the runner's environment."""
    work = tmp_path / "work"
    shutil.copytree(EXAMPLE, work, ignore=shutil.ignore_patterns("build"))
    git(work, "init", "-q")
    git(work, "config", "user.email", "ci@example.invalid")
    git(work, "config", "user.name", "ci")
    git(work, "add", "-A")
    git(work, "commit", "-q", "-m", "base")
    circuit = work / "boards" / "mainboard" / "mainboard.circuit"
    circuit.write_text(circuit.read_text().replace("150 ohm, tol = 5%", "47 ohm, tol = 5%"))  # brighter LED
    git(work, "commit", "-q", "-am", "brighter power LED")
    shim = tmp_path / "bin" / "nodegate"
    shim.parent.mkdir()
    shim.write_text(f"#!/bin/sh\nexec '{sys.executable}' -m checker \"$@\"\n")
    shim.chmod(0o755)
    env = {**os.environ, "PATH": f"{shim.parent}{os.pathsep}{os.environ['PATH']}",
           "PYTHONPATH": str(REPO), "GITHUB_OUTPUT": str(tmp_path / "output"),
           "GITHUB_STEP_SUMMARY": str(tmp_path / "summary.md")}
    return {"work": work, "env": env, "tmp": tmp_path}


def run_step(name: str, runner: dict, inputs: dict) -> subprocess.CompletedProcess:
    return subprocess.run(["bash", "-e", "-c", step(name)["run"]], cwd=runner["work"], text=True,
                          capture_output=True, env={**runner["env"], **inputs}, timeout=600)


def test_check_and_summary_steps_on_the_example(runner):
    inputs = {"DIRECTORY": ".", "CONFIG": "", "BASE": "HEAD~1", "FAIL_ON": "any", "STRICT": "false",
              "OUT": "build/nodegate"}
    checked = run_step("Check the circuits", runner, inputs)
    assert checked.returncode == 0, checked.stderr  # the step always succeeds; the code is an output
    outputs = (runner["tmp"] / "output").read_text()
    code = int(re.search(r"exit-code=(\d+)", outputs).group(1))
    assert code == 1, checked.stdout + checked.stderr  # a 47 ohm LED resistor breaks the LED current limit
    annotations = [line for line in checked.stdout.splitlines() if line.startswith("::")]
    assert annotations and all(ANNOTATION.match(line) for line in annotations)
    assert any("power-led-current" in line for line in annotations)
    for name in ("report.md", "report.html", "report.json", "report.sarif"):
        assert (runner["work"] / "build" / "nodegate" / name).is_file()

    summary = run_step("Add the report to the job summary", runner,
                       {"REPORT": "build/nodegate/report.md", "CODE": str(code)})
    assert summary.returncode == 0, summary.stderr
    text = (runner["tmp"] / "summary.md").read_text()
    assert re.search(r"this change introduces [1-9]\d* failures?", text), text[:500]
