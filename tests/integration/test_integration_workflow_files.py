"""The CI workflow, the composite action and the pre-commit hooks: parseable, complete, safe.

Keys and semantics follow GitHub's "Workflow syntax" and "Metadata syntax for GitHub
Actions" documentation and pre-commit's documentation of `.pre-commit-hooks.yaml`
(all from memory).
"""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import pytest
import yaml

ROOT = Path(__file__).resolve().parents[2]
ALLOWED_ACTIONS = {"actions/checkout", "actions/setup-python", "actions/upload-artifact", "actions/github-script"}


def load(relative: str):
    with open(ROOT / relative, encoding="utf-8") as handle:
        return yaml.safe_load(handle)


@pytest.fixture(scope="module")
def workflow() -> dict:
    return load(".github/workflows/ci.yml")


@pytest.fixture(scope="module")
def action() -> dict:
    return load(".github/actions/check/action.yml")


def steps_using(steps: list[dict], name: str) -> list[dict]:
    return [step for step in steps if step.get("uses", "").split("@")[0] == name]


def test_ci_runs_tests_on_push_and_pull_request(workflow: dict) -> None:
    triggers = workflow.get("on", workflow.get(True))  # YAML 1.1 reads a bare `on` as true
    assert {"push", "pull_request"} <= set(triggers)
    steps = workflow["jobs"]["test"]["steps"]
    assert steps_using(steps, "actions/checkout") and steps_using(steps, "actions/setup-python")
    runs = [step.get("run", "") for step in steps]
    assert any("pip install '.[test]'" in run for run in runs)
    assert any(re.search(r"python -m pytest -q\b", run) for run in runs)


def test_only_standard_actions_pinned_to_a_version(workflow: dict, action: dict) -> None:
    steps = [s for job in workflow["jobs"].values() for s in job["steps"]] + action["runs"]["steps"]
    used = [step["uses"] for step in steps if "uses" in step]
    assert used
    for uses in used:
        name, _, version = uses.partition("@")
        assert name in ALLOWED_ACTIONS and re.fullmatch(r"v\d+", version), uses


def test_action_is_composite_with_the_documented_inputs(action: dict) -> None:
    assert action["runs"]["using"] == "composite"
    assert {"config", "base", "fail-on", "python-version", "nodegate-source", "comment"} <= set(action["inputs"])
    assert "pull_request.base.sha" in action["inputs"]["base"]["default"]
    assert action["outputs"]["exit-code"]["value"] == "${{ steps.check.outputs.exit-code }}"


def step_named(action: dict, fragment: str) -> dict:
    found = [s for s in action["runs"]["steps"] if fragment in s.get("name", "")]
    assert len(found) == 1, fragment
    return found[0]


def test_action_steps_in_order(action: dict) -> None:
    steps = action["runs"]["steps"]
    install = step_named(action, "Install")
    assert "github.action_path" in install["env"]["ACTION_PATH"] and '"$ACTION_PATH/../../.."' in install["run"]
    fetch = step_named(action, "Fetch")
    assert "git fetch --no-tags --depth=1 origin --" in fetch["run"]
    check = step_named(action, "Check the circuits")
    assert check["id"] == "check"
    assert "--format md,html,json,sarif,annotations" in check["run"] and "--base" in check["run"]
    assert "set +e" in check["run"] and 'echo "exit-code=$code" >> "$GITHUB_OUTPUT"' in check["run"]
    summary = step_named(action, "summary")
    assert "GITHUB_STEP_SUMMARY" in summary["run"]
    upload, = steps_using(steps, "actions/upload-artifact")
    comment, = steps_using(steps, "actions/github-script")
    assert "<!-- nodegate-report -->" in comment["with"]["script"]
    assert "updateComment" in comment["with"]["script"] and "createComment" in comment["with"]["script"]
    assert "inputs.comment == 'true'" in comment["if"]
    last = steps[-1]
    assert last["if"] == "always()" and 'exit "$CODE"' in last["run"]
    assert last["env"]["CODE"] == "${{ steps.check.outputs.exit-code }}"
    order = [steps.index(s) for s in (install, fetch, check, summary, upload, comment, last)]
    assert order == sorted(order)
    # The reports must appear even when the check fails.
    for step in (summary, upload, comment):
        assert step["if"].startswith("always()")


def run_scripts(action: dict) -> list[str]:
    return [step["run"] for step in action["runs"]["steps"] if "run" in step]


def test_run_steps_declare_a_shell_and_take_inputs_from_env(action: dict) -> None:
    for step in action["runs"]["steps"]:
        if "run" in step:
            assert step.get("shell") == "bash", step["name"]  # required for composite run steps
            assert "${{" not in step["run"], f"expression pasted into a script: {step['name']}"
    comment, = steps_using(action["runs"]["steps"], "actions/github-script")
    assert "${{" not in comment["with"]["script"]


@pytest.mark.skipif(shutil.which("bash") is None, reason="bash is not on PATH")
def test_run_scripts_are_valid_bash(action: dict, tmp_path: Path) -> None:
    for index, script in enumerate(run_scripts(action)):
        path = tmp_path / f"step{index}.sh"
        path.write_text(script)
        done = subprocess.run(["bash", "-n", str(path)], capture_output=True, text=True)
        assert done.returncode == 0, done.stderr


@pytest.mark.skipif(shutil.which("node") is None, reason="node is not on PATH")
def test_comment_script_is_valid_javascript(action: dict, tmp_path: Path) -> None:
    # github-script runs the text as the body of an async function.
    script, = [s["with"]["script"] for s in action["runs"]["steps"] if "script" in s.get("with", {})]
    path = tmp_path / "comment.js"
    path.write_text(f"(async function (github, context, core, require) {{\n{script}\n}});\n")
    done = subprocess.run(["node", "--check", str(path)], capture_output=True, text=True)
    assert done.returncode == 0, done.stderr


@pytest.mark.skipif(shutil.which("bash") is None, reason="bash is not on PATH")
def test_check_step_keeps_the_exit_code(action: dict, tmp_path: Path) -> None:
    # Run the check step's script with a stand-in `nodegate` that records its arguments and exits 1.
    fake = tmp_path / "bin" / "nodegate"
    fake.parent.mkdir()
    fake.write_text('#!/bin/sh\nprintf "%s\\n" "$@" > "$ARGS_FILE"\nexit 1\n')
    fake.chmod(0o755)
    output = tmp_path / "output"
    env = {"PATH": f"{fake.parent}:/usr/bin:/bin", "GITHUB_OUTPUT": str(output), "ARGS_FILE": str(tmp_path / "args"),
           "DIRECTORY": "hw", "CONFIG": "", "BASE": "abc123", "FAIL_ON": "new", "STRICT": "true", "OUT": "build/ng"}
    script = step_named(action, "Check the circuits")["run"]
    done = subprocess.run(["bash", "--noprofile", "--norc", "-eo", "pipefail", "-c", script], env=env,
                          capture_output=True, text=True)
    assert done.returncode == 0, done.stderr
    assert output.read_text() == "exit-code=1\n"
    assert (tmp_path / "args").read_text().split("\n")[:-1] == [
        "check", "hw", "--format", "md,html,json,sarif,annotations", "--out", "build/ng",
        "--fail-on", "new", "--base", "abc123", "--strict"]


def git(cwd: Path, *args: str) -> str:
    command = ["git", "-c", "user.name=Bike Light", "-c", "user.email=bike@example.invalid",
               "-c", "commit.gpgsign=false", *args]
    return subprocess.run(command, cwd=cwd, check=True, capture_output=True, text=True).stdout.strip()


@pytest.mark.skipif(shutil.which("git") is None or shutil.which("bash") is None, reason="git or bash is not on PATH")
def test_fetch_step_brings_the_base_into_a_shallow_clone(action: dict, tmp_path: Path) -> None:
    origin = tmp_path / "origin"
    origin.mkdir()
    git(origin, "init", "-q")
    git(origin, "config", "uploadpack.allowAnySHA1InWant", "true")  # as the hosting side allows
    (origin / "bike_light.circuit").write_text("first\n")
    git(origin, "add", "-A")
    git(origin, "commit", "-q", "-m", "base")
    base = git(origin, "rev-parse", "HEAD")
    (origin / "bike_light.circuit").write_text("second\n")
    git(origin, "commit", "-q", "-am", "change")
    git(tmp_path, "clone", "-q", "--depth=1", f"file://{origin}", "work")
    work = tmp_path / "work"
    script = step_named(action, "Fetch")["run"]

    def fetch(ref: str) -> subprocess.CompletedProcess:
        output = tmp_path / "output"
        output.write_text("")
        env = {"PATH": f"{Path(shutil.which('git')).parent}:/usr/bin:/bin", "HOME": str(tmp_path), "GITHUB_OUTPUT": str(output), "BASE": ref}
        return subprocess.run(["bash", "--noprofile", "--norc", "-eo", "pipefail", "-c", script], cwd=work,
                              env=env, capture_output=True, text=True)

    with pytest.raises(subprocess.CalledProcessError):
        git(work, "cat-file", "-e", f"{base}^{{commit}}")  # not in the shallow clone yet
    done = fetch(base)
    assert done.returncode == 0, done.stderr
    assert (tmp_path / "output").read_text() == f"rev={base}\n"
    assert git(work, "show", f"{base}:bike_light.circuit") == "first"
    done = fetch("HEAD")  # already present: resolved without fetching
    assert (tmp_path / "output").read_text() == f"rev={git(work, 'rev-parse', 'HEAD')}\n"
    done = fetch("--upload-pack=touch pwned")
    assert done.returncode == 2 and not (work / "pwned").exists()


def test_pre_commit_hooks() -> None:
    hooks = {hook["id"]: hook for hook in load(".pre-commit-hooks.yaml")}
    assert set(hooks) == {"nodegate-check", "nodegate-fmt"}
    for hook in hooks.values():
        assert {"id", "name", "entry", "language"} <= set(hook) and hook["language"] == "python"
    check, fmt = hooks["nodegate-check"], hooks["nodegate-fmt"]
    assert check["entry"] == "nodegate check" and check["pass_filenames"] is False
    assert fmt["entry"] == "nodegate fmt --check"
    # pre-commit matches `files` with re.search on repository-relative paths.
    matches = {path: bool(re.search(check["files"], path)) for path in (
        "boards/bike_light/bike_light.circuit", "nodegate.yaml", "sub/nodegate.yml",
        "boards/bike_light/limits.yaml", "limits-derating.yml", "README.md", "boards/notes.txt")}
    assert [p for p, hit in matches.items() if hit] == [
        "boards/bike_light/bike_light.circuit", "nodegate.yaml", "sub/nodegate.yml",
        "boards/bike_light/limits.yaml", "limits-derating.yml"]
    assert re.search(fmt["files"], "a/b.circuit") and not re.search(fmt["files"], "a/b.circuit.bak")
