"""Writing reports: all rendered before any is written; each file replaced atomically."""

from __future__ import annotations

import json
import os

import pytest
from report_bike_light import bike_light

import checker.report.writer as writer
from checker.errors import NodegateError
from checker.report import render_json, write_reports


def test_write_set_creates_folders_and_leaves_no_temporary(tmp_path):
    target = tmp_path / "deep" / "er" / "report.md"
    writer.write_set([writer.Planned(tmp_path, target, "µ Ω °C\n")])
    assert target.read_text(encoding="utf-8") == "µ Ω °C\n"
    writer.write_set([writer.Planned(tmp_path, target, "second\r\n", replaces=lambda head: True)])
    assert target.read_bytes() == b"second\r\n"  # newlines written as given
    assert os.listdir(target.parent) == ["report.md"]


def test_unwritable_target_is_an_input_error(tmp_path):
    (tmp_path / "taken").write_text("a file, not a folder")
    with pytest.raises(NodegateError):
        writer.write_set([writer.Planned(tmp_path, tmp_path / "taken" / "report.md", "x")])
    folder = tmp_path / "folder.md"
    folder.mkdir()
    with pytest.raises(NodegateError):
        writer.write_set([writer.Planned(tmp_path, folder, "x", replaces=lambda head: True)])
    assert sorted(os.listdir(tmp_path)) == ["folder.md", "taken"]  # no temporary left behind
    assert not list(folder.iterdir())


def test_write_reports_writes_every_format(tmp_path):
    targets = {name: tmp_path / "out" / f"report.{name}" for name in writer.FORMATS}
    write_reports(bike_light(), targets, root=tmp_path)
    assert json.loads(targets["json"].read_text(encoding="utf-8")) == json.loads(render_json(bike_light()))
    assert targets["md"].read_text(encoding="utf-8").startswith("**nodegate:")
    assert targets["html"].read_text(encoding="utf-8").startswith("<!DOCTYPE html>")
    assert json.loads(targets["sarif"].read_text(encoding="utf-8"))["version"] == "2.1.0"


def test_nothing_is_written_when_a_renderer_fails(tmp_path, monkeypatch):
    def broken(findings, root, verdict):
        raise RuntimeError("renderer bug")
    monkeypatch.setattr(writer, "render_sarif", broken)
    targets = {"md": tmp_path / "report.md", "sarif": tmp_path / "report.sarif"}
    with pytest.raises(RuntimeError):
        write_reports(bike_light(), targets, root=tmp_path)
    assert list(tmp_path.iterdir()) == []


def test_unknown_format_is_refused(tmp_path):
    with pytest.raises(NodegateError, match="unknown report format `pdf`"):
        write_reports(bike_light(), {"pdf": tmp_path / "r.pdf"}, root=tmp_path)


def test_markdown_note_points_at_the_html(tmp_path, monkeypatch):
    monkeypatch.setattr(writer, "JOB_SUMMARY_LIMIT", 300)
    targets = {"md": tmp_path / "r.md", "html": tmp_path / "r.html"}
    write_reports(bike_light(), targets, root=tmp_path)
    text = targets["md"].read_text(encoding="utf-8")
    assert len(text.encode("utf-8")) <= 300
    assert f"The full report is in {(tmp_path / 'r.html').as_posix()}" in text.replace("\\_", "_")
