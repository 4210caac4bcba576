"""Regression tests from the adversarial review, through `checker.cli.main` on real files.

Each test is a defect that was found by using the tool as a user (or an attacker
writing a pull request) would: a crash with exit 3, an error without its location,
or a configuration that made nodegate overwrite the repository's own files.
"""

from __future__ import annotations

import textwrap
from pathlib import Path

import pytest

from checker.cli import main

# A bike light's battery sense divider, invented for these tests.
CIRCUIT = """\
circuit bike "Bike light"
ground gnd
source   VBAT from vbat to gnd : 3.7 V
resistor R1   from vbat to adc : 68 kohm, rating = 63 mW
resistor R2   from adc to gnd  : 32 kohm, rating = 63 mW
"""
LIMITS = """\
limits:
  - id: adc-range
    about: Battery sense stays inside the ADC range
    check: voltage(adc) <= 1.8 V
"""


def write(folder: Path, name: str, text: str) -> Path:
    path = folder / name
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(textwrap.dedent(text), encoding="utf-8")
    return path


def repo(tmp_path: Path, config: str, limits: str = LIMITS) -> Path:
    write(tmp_path, "bike.circuit", CIRCUIT)
    write(tmp_path, "limits.yaml", limits)
    write(tmp_path, "nodegate.yaml", config)
    return tmp_path


def run(capsys, *argv: str) -> tuple[int, str, str]:
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def first_line(err: str) -> str:
    return err.splitlines()[0]


def test_qa_single_component_glob_does_not_crash(tmp_path, capsys):
    # `*.circuit` used to end in exit 3: pathlib refused the YAML string subclass.
    folder = repo(tmp_path, "circuits: ['*.circuit']\nlimits: [limits.yaml]\n")
    code, out, err = run(capsys, "check", str(folder), "--format", "json")
    assert code == 0, err
    assert (folder / "build" / "nodegate" / "report.json").is_file()


@pytest.mark.parametrize("config, position", [
    ('circuits: ["a\\0b"]\n', (1, 13)),
    ('circuits: [bike.circuit]\nreport: {markdown: "out/\\0x.md"}\n', (2, 21)),
])
def test_qa_nul_in_a_path_is_a_configuration_error(tmp_path, capsys, config, position):
    folder = repo(tmp_path, config)
    code, _, err = run(capsys, "check", str(folder))
    assert code == 2
    assert first_line(err).endswith("NUL character")
    assert f"nodegate.yaml:{position[0]}:{position[1]}: error:" in first_line(err)


def test_qa_impossible_waiver_date_is_an_error_at_the_date(tmp_path, capsys):
    # `2030-13-01` looks like a date to YAML but not to the calendar: it used to crash (exit 3).
    limits = LIMITS + "waivers:\n  - limit: adc-range\n    reason: bench log 12\n    until: 2030-13-01\n"
    folder = repo(tmp_path, "circuits: [bike.circuit]\nlimits: [limits.yaml]\n", limits)
    code, _, err = run(capsys, "check", str(folder))
    assert code == 2
    assert "limits.yaml:8:12: error: cannot read this value" in first_line(err)


@pytest.mark.parametrize("report", [
    "nodegate.yaml", "bike.circuit", "limits.yaml", "lib/common.yml", ".git/config", ".", "build",
    "bike.circuit/report.md",
])
def test_qa_report_path_never_overwrites_the_repository(tmp_path, capsys, report):
    # These all used to be accepted; the first two replaced the configuration or the circuit by a report.
    config = f"circuits: [bike.circuit]\nlimits: [limits.yaml]\nreport:\n  markdown: '{report}'\n"
    folder = repo(tmp_path, config)
    (folder / "build").mkdir()
    (folder / ".git").mkdir()
    (folder / ".git" / "config").write_text("[core]\n", encoding="utf-8")
    before = {p: p.read_bytes() for p in folder.rglob("*") if p.is_file()}
    code, _, err = run(capsys, "check", str(folder))
    assert code == 2
    assert "nodegate.yaml:4:14: error: report path" in first_line(err)
    assert {p: p.read_bytes() for p in folder.rglob("*") if p.is_file()} == before


def test_qa_two_formats_cannot_share_a_report_path(tmp_path, capsys):
    config = "circuits: [bike.circuit]\nreport:\n  markdown: out/r.md\n  html: out/r.md\n"
    folder = repo(tmp_path, config)
    code, _, err = run(capsys, "check", str(folder))
    assert code == 2
    assert "nodegate.yaml:4:9: error: report path `out/r.md` is already the path of `report.markdown`" in err
    assert not (folder / "out").exists()


def test_qa_out_through_a_file_writes_nothing(tmp_path, capsys):
    folder = repo(tmp_path, "circuits: [bike.circuit]\nlimits: [limits.yaml]\n")
    code, _, err = run(capsys, "check", str(folder), "--out", str(folder / "bike.circuit" / "reports"))
    assert code == 2
    assert "is a file" in err
    assert (folder / "bike.circuit").read_text(encoding="utf-8") == CIRCUIT


@pytest.mark.parametrize("entries, message", [
    ("[limits.yaml, limits.yaml]", "limits file `limits.yaml` is listed twice"),
    ("[{pack: ratings}, limits.yaml, {pack: ratings}]", "pack `ratings` is listed twice"),
])
def test_qa_limits_listed_twice_is_said_plainly(tmp_path, capsys, entries, message):
    # Used to surface as "limit id `adc-range` is used twice", pointing into the limits file.
    folder = repo(tmp_path, f"circuits: [bike.circuit]\nlimits: {entries}\n")
    code, _, err = run(capsys, "check", str(folder))
    assert code == 2
    assert "nodegate.yaml:2:" in first_line(err) and message in first_line(err)


@pytest.mark.parametrize("text, position, code_point", [
    ('"ADC range \\x1b[31m"', (3, 23), "U+001B"),
    ('"ADC range \\u202e reversed"', (3, 23), "U+202E"),
])
def test_qa_control_characters_in_about_are_refused(tmp_path, capsys, text, position, code_point):
    limits = f"limits:\n  - id: adc-range\n    about: {text}\n    check: voltage(adc) <= 1.8 V\n"
    folder = repo(tmp_path, "circuits: [bike.circuit]\nlimits: [limits.yaml]\n", limits)
    code, _, err = run(capsys, "check", str(folder))
    assert code == 2
    assert f"limits.yaml:{position[0]}:{position[1]}: error: `about` holds the control character {code_point}" \
        in first_line(err)


def test_qa_control_characters_in_a_waiver_reason_are_refused(tmp_path, capsys):
    limits = LIMITS + 'waivers:\n  - limit: adc-range\n    reason: "ok \\x1b[2J"\n    until: 2030-01-01\n'
    folder = repo(tmp_path, "circuits: [bike.circuit]\nlimits: [limits.yaml]\n", limits)
    code, _, err = run(capsys, "check", str(folder))
    assert code == 2
    assert "limits.yaml:7:17: error: `reason` holds the control character U+001B" in first_line(err)


def test_qa_byte_order_mark_does_not_shift_yaml_columns(tmp_path, capsys):
    folder = repo(tmp_path, "circuits: [bike.circuit]\nlimits: [limits.yaml]\n")
    (folder / "nodegate.yaml").write_text("\ufeffcircuit: [bike.circuit]\n", encoding="utf-8")
    code, _, err = run(capsys, "check", str(folder))
    assert code == 2
    assert "nodegate.yaml:1:1: error: unknown key `circuit`" in first_line(err)


def test_qa_check_given_a_file_says_what_it_takes(tmp_path, capsys):
    # Used to suggest `nodegate init bike.circuit`, inside a file.
    folder = repo(tmp_path, "circuits: [bike.circuit]\n")
    code, _, err = run(capsys, "check", str(folder / "bike.circuit"))
    assert code == 2
    assert "is a file; `nodegate check` takes the repository's folder" in err
    assert "nodegate init" not in err


def test_qa_config_option_naming_a_folder(tmp_path, capsys):
    folder = repo(tmp_path, "circuits: [bike.circuit]\n")
    code, _, err = run(capsys, "check", str(folder), "--config", str(folder))
    assert code == 2
    assert "is a folder" in err


def test_qa_explain_finds_the_configuration_like_check(tmp_path, capsys, monkeypatch):
    # `explain` defaulted to the literal path nodegate.yaml, so nodegate.yml was never found.
    repo(tmp_path, "circuits: [bike.circuit]\nlimits: [limits.yaml]\n")
    (tmp_path / "nodegate.yaml").rename(tmp_path / "nodegate.yml")
    monkeypatch.chdir(tmp_path)
    code, out, err = run(capsys, "explain", "adc-range")
    assert code == 0, err
    assert out.startswith("limit adc-range: Battery sense stays inside the ADC range")


def test_qa_strict_says_why_it_fails(tmp_path, capsys):
    limits = LIMITS.replace("1.8 V", "1.0 V") + "    severity: warning\n"
    folder = repo(tmp_path, "circuits: [bike.circuit]\nlimits: [limits.yaml]\n", limits)
    assert run(capsys, "check", str(folder))[0] == 0
    code, out, _ = run(capsys, "check", str(folder), "--strict")
    assert code == 1
    assert "fails under --strict" in out


@pytest.mark.parametrize("make", ["file", "inside-file"])
def test_qa_init_into_a_file_is_an_input_error(tmp_path, capsys, make):
    # Both used to crash with exit 3 (FileExistsError, NotADirectoryError).
    blocker = tmp_path / "notes.txt"
    blocker.write_text("x", encoding="utf-8")
    target = blocker if make == "file" else blocker / "hw"
    code, out, err = run(capsys, "init", str(target))
    assert code == 2
    assert err.startswith("nodegate: error:")
    assert blocker.read_text(encoding="utf-8") == "x"


def test_qa_about_has_a_length_bound(tmp_path, capsys):
    # A 900 000-character `about` was copied into every report.
    limits = f"limits:\n  - id: adc-range\n    about: {'y' * 600}\n    check: voltage(adc) <= 1.8 V\n"
    folder = repo(tmp_path, "circuits: [bike.circuit]\nlimits: [limits.yaml]\n", limits)
    code, _, err = run(capsys, "check", str(folder))
    assert code == 2
    assert "limits.yaml:3:512: error: `about` is longer than 500 characters" in first_line(err)


def test_qa_swapped_range_is_a_rule_error_and_writes_no_report(tmp_path, capsys):
    # `in 1.6 V .. 0.1 V` can never hold; it used to fail silently as if the circuit were wrong.
    limits = LIMITS.replace("voltage(adc) <= 1.8 V", "voltage(adc) in 1.6 V .. 0.1 V")
    folder = repo(tmp_path, "circuits: [bike.circuit]\nlimits: [limits.yaml]\n", limits)
    code, _, err = run(capsys, "check", str(folder))
    assert code == 2
    assert "limits.yaml:4:28: error: the range's low end is above its high end" in first_line(err)
    assert not (folder / "build").exists()
