"""Everyday friction (issue 10, item 7), through `checker.cli.main`: the configuration found
from any folder of the repository, `explain LIMIT DIR`, what `init` writes (the README's
workflow, a `.gitignore` entry), the hints for `0` as a net and for `1/4 W`, and docs that
need no document from outside the repository.
"""

from __future__ import annotations

import re
from pathlib import Path

from checker.cli import main
from checker.commands.init import IGNORE_ENTRY, REPORT_FOLDER

ROOT = Path(__file__).resolve().parents[2]
CIRCUIT = """circuit lamp "Desk lamp dimmer"
ground gnd
source   VIN from vin to gnd : 12 V
resistor R1  from vin to dim : 470 ohm
resistor R2  from dim to gnd : 1 kohm
"""
LIMITS = """limits:
  - id: led-node
    about: The dimmer node stays below 9 V
    check: voltage(dim) <= 9 V
"""
OUTSIDE_DOCUMENTS = ("RULES.md", "LANGUAGE.md", "OUTPUTS.md", "ARCHITECTURE.md", "STYLE.md",
                     "REFERENCE-VALUES.md", "../shared")


def _repo(root: Path) -> Path:
    """A one-board repository with a `.git` folder at `root`; returns the board's folder."""
    board = root / "boards" / "lamp"
    board.mkdir(parents=True)
    (root / ".git").mkdir()
    (board / "lamp.circuit").write_text(CIRCUIT, encoding="utf-8")
    (board / "limits.yaml").write_text(LIMITS, encoding="utf-8")
    (root / "nodegate.yaml").write_text("circuits:\n  - boards/*/*.circuit\nlimits:\n  - boards/lamp/limits.yaml\n",
                                        encoding="utf-8")
    return board


def test_check_from_a_subfolder_finds_the_configuration_above(tmp_path, monkeypatch, capsys):
    board = _repo(tmp_path)
    monkeypatch.chdir(board)
    assert main(["check", "--format", "json"]) == 0
    assert "the 1 limit holds in 1 circuit" in capsys.readouterr().out  # 12 V * 1000/1470 = 8.16 V <= 9 V
    assert (tmp_path / "build" / "nodegate" / "report.json").is_file()


def test_search_stops_at_the_git_top_level_and_says_where_it_looked(tmp_path, capsys):
    (tmp_path / "nodegate.yaml").write_text("circuits: []\n", encoding="utf-8")  # above the repository
    repo = tmp_path / "repo"
    (repo / ".git").mkdir(parents=True)
    (repo / "boards").mkdir()
    assert main(["check", str(repo / "boards")]) == 2
    err = capsys.readouterr().err
    assert f"no nodegate.yaml in `{repo / 'boards'}` nor in any folder above it up to `{repo}`" in err
    assert "git top level" in err


def test_explain_takes_the_folder_as_check_does(tmp_path, monkeypatch, capsys):
    board = _repo(tmp_path / "r")
    monkeypatch.chdir(tmp_path)
    assert main(["explain", "led-node", str(board)]) == 0
    out = capsys.readouterr().out
    assert "limit led-node: The dimmer node stays below 9 V" in out
    assert "voltage(dim) <= 9 V" in out


def test_init_creates_a_gitignore_naming_the_report_folder(tmp_path, capsys):
    assert main(["init", str(tmp_path)]) == 0
    assert (tmp_path / ".gitignore").read_text(encoding="utf-8") == f"{IGNORE_ENTRY}\n"
    config = (tmp_path / "nodegate.yaml").read_text(encoding="utf-8")
    assert all(line.split(": ")[1].startswith(REPORT_FOLDER + "/")
               for line in config.splitlines() if re.match(r"  (markdown|html|json):", line))
    assert f"added {IGNORE_ENTRY}" in capsys.readouterr().out


def test_init_appends_the_entry_once_and_still_refuses_a_second_run(tmp_path):
    (tmp_path / ".gitignore").write_text("*.pyc\n__pycache__", encoding="utf-8")  # no final line end
    assert main(["init", str(tmp_path)]) == 0
    expected = f"*.pyc\n__pycache__\n{IGNORE_ENTRY}\n"
    assert (tmp_path / ".gitignore").read_text(encoding="utf-8") == expected
    assert main(["init", str(tmp_path)]) == 2  # the starter files are there: nothing is written
    assert (tmp_path / ".gitignore").read_text(encoding="utf-8") == expected


def test_init_leaves_a_gitignore_that_already_names_the_folder(tmp_path, capsys):
    (tmp_path / ".gitignore").write_text("build/nodegate\n", encoding="utf-8")
    assert main(["init", str(tmp_path)]) == 0
    assert (tmp_path / ".gitignore").read_text(encoding="utf-8") == "build/nodegate\n"
    assert "added" not in capsys.readouterr().out


def test_init_refuses_a_gitignore_that_is_a_link_and_writes_nothing(tmp_path):
    outside = tmp_path / "elsewhere"
    outside.write_text("keep\n", encoding="utf-8")
    repo = tmp_path / "repo"
    repo.mkdir()
    (repo / ".gitignore").symlink_to(outside)
    assert main(["init", str(repo)]) == 2
    assert outside.read_text(encoding="utf-8") == "keep\n"
    assert not (repo / "nodegate.yaml").exists()


def test_starter_workflow_is_the_readme_snippet():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    after = readme.index("`.github/workflows/nodegate.yml`")
    snippet = re.compile(r"```yaml\n(.*?)```", re.DOTALL).search(readme, after).group(1)
    starter = ROOT / "checker" / "starter" / ".github" / "workflows" / "nodegate.yml"
    assert starter.read_text(encoding="utf-8") == snippet


def _solve_error(tmp_path, capsys, text: str) -> str:
    path = tmp_path / "t.circuit"
    path.write_text(text, encoding="utf-8")
    assert main(["solve", str(path)]) == 2
    return capsys.readouterr().err


def test_zero_as_a_net_hints_at_ground(tmp_path, capsys):
    err = _solve_error(tmp_path, capsys, "circuit t\nground gnd\nsource V from a to 0 : 5 V\n")
    assert "t.circuit:3:20: error: a net is a name, not `0`: name the reference net with `ground NAME`" in err


def test_zero_as_a_pin_net_and_as_the_ground_hint_too(tmp_path, capsys):
    err = _solve_error(tmp_path, capsys, "circuit t\nground gnd\nsource V from a to gnd : 5 V\n"
                                         "resistor R (a: a, b: 0) : 1 kohm\n")
    assert "t.circuit:4:22: error: a net is a name, not `0`" in err
    err = _solve_error(tmp_path, capsys, "circuit t\nground 0\n")
    assert "t.circuit:2:8: error: a net is a name, not `0`" in err


def test_a_number_elsewhere_keeps_the_plain_syntax_error(tmp_path, capsys):
    err = _solve_error(tmp_path, capsys, "circuit t\nground gnd\ncase c : 0\n")
    assert "ground NAME" not in err and "unexpected `0`" in err


def test_quarter_watt_written_as_a_division_is_explained_in_watts(tmp_path, capsys):
    err = _solve_error(tmp_path, capsys, "circuit t\nground gnd\nsource V from a to gnd : 5 V\n"
                                         "resistor R from a to gnd : 1 kohm, rating = 1/4 W\n")
    assert "t.circuit:4:45: error: `rating` is in 1/W: the `/` divides by the whole `4 W`; expected W" in err
    assert "write `0.25 W` or `(1/4) W`" in err


def test_docs_name_no_document_outside_the_repository():
    files = [ROOT / "README.md", ROOT / "DEVELOPERS.md", *(ROOT / "docs").rglob("*"), *(ROOT / "checker").rglob("*")]
    offenders = {path.relative_to(ROOT).as_posix() for path in files
                 if path.is_file() and path.suffix != ".pyc"
                 and any(name in path.read_text(encoding="utf-8", errors="replace") for name in OUTSIDE_DOCUMENTS)}
    assert not offenders, sorted(offenders)
