"""The private cache of built lark parsers (checker/larkcache.py): used when safe, harmless when not."""

import os

from checker.language.parser import _GRAMMAR
from checker.larkcache import cache_folder, cached_lark

TEXT = "circuit c\nground gnd\nresistor R1 from a to gnd : 1 kohm, tol = 5%\n"
OPTIONS = dict(parser="lalr", lexer="contextual", propagate_positions=True, maybe_placeholders=True)


def parsed(folder, monkeypatch):
    monkeypatch.setenv("NODEGATE_CACHE", str(folder))
    return cached_lark(_GRAMMAR, "test", **OPTIONS).parse(TEXT)


def test_language_larkcache_saves_then_loads_the_same_parser(tmp_path, monkeypatch):
    folder = tmp_path / "cache"
    first = parsed(folder, monkeypatch)
    saved = list(folder.iterdir())
    assert [p.suffix for p in saved] == [".lark"] and oct(folder.stat().st_mode & 0o777) == "0o700"
    assert parsed(folder, monkeypatch) == first
    assert list(folder.iterdir()) == saved  # loaded, not written again


def test_language_larkcache_without_a_usable_folder_builds_the_parser(tmp_path, monkeypatch):
    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder")
    assert parsed(blocker / "cache", monkeypatch).children
    monkeypatch.setenv("NODEGATE_CACHE", str(blocker / "cache"))
    assert cache_folder() is None


def test_language_larkcache_ignores_a_folder_others_can_write(tmp_path, monkeypatch):
    folder = tmp_path / "shared"
    folder.mkdir()
    os.chmod(folder, 0o777)
    assert parsed(folder, monkeypatch).children
    assert list(folder.iterdir()) == []


def test_language_larkcache_rebuilds_over_a_damaged_file(tmp_path, monkeypatch):
    folder = tmp_path / "cache"
    first = parsed(folder, monkeypatch)
    (saved,) = folder.iterdir()
    saved.write_bytes(saved.read_bytes()[:100])
    assert parsed(folder, monkeypatch) == first
