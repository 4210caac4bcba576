"""`use` of library files and reading files: relative paths, the root, cycles, bad files."""

import os

import pytest

from checker.errors import CircuitSyntaxError, DesignError
from checker.language import load_design, parse_design
from checker.language import files

LIBRARY = """\
# shared parts of the weather-station boards
let r_pull = 4.7 kohm
block pullup (line) {
    resistor R from vdd to line : r_pull, tol = 5%
}
"""


def write(path, text):
    path.parent.mkdir(parents=True, exist_ok=True)
    path.write_text(text, encoding="utf-8")
    return path


def failure(path, cls=DesignError, **kwargs):
    with pytest.raises(cls) as caught:
        load_design(path, **kwargs)
    assert type(caught.value) is cls
    return caught.value


def top(tmp_path, use_line, name="board/station.circuit"):
    return write(tmp_path / name, f"circuit station\nground gnd\n{use_line}\n")


def test_language_use_relative_to_including_file(tmp_path):
    write(tmp_path / "board/lib/pull.circuit", 'use "consts.circuit"\n' + LIBRARY)
    write(tmp_path / "board/lib/consts.circuit", "let r_i2c = 2.2 kohm\n")
    path = write(tmp_path / "board/station.circuit",
                 'circuit station\nground gnd\nuse "lib/pull.circuit"\nuse "lib/consts.circuit"\n'
                 "pullup SDA (line: sda)\nresistor R_SCL from vdd to scl : r_i2c\n")
    design = load_design(path)
    assert [(p.name, p.value) for p in design.parts] == [("SDA.R", 4700.0), ("R_SCL", 2200.0)]
    assert design.parts[0].pins == (("from", "SDA.vdd"), ("to", "sda"))
    assert design.parts[0].location.path == os.path.normpath(tmp_path / "board/lib/pull.circuit")
    assert design.path == str(path)


def test_language_parse_design_uses_path_and_root(tmp_path):
    write(tmp_path / "lib/pull.circuit", LIBRARY)
    text = 'circuit station\nground gnd\nuse "lib/pull.circuit"\npullup P (line: x)\n'
    design = parse_design(text, path=str(tmp_path / "station.circuit"))
    assert design.parts[0].name == "P.R"


def test_language_use_outside_root_by_dots(tmp_path):
    write(tmp_path / "elsewhere.circuit", "let x = 1\n")
    caught = failure(top(tmp_path, 'use "../elsewhere.circuit"'))
    assert (caught.location.line, caught.location.column) == (3, 5)
    assert "outside the root" in caught.message


def test_language_use_absolute_path_is_outside_root(tmp_path):
    library = write(tmp_path / "elsewhere.circuit", "let x = 1\n")
    assert "outside the root" in failure(top(tmp_path, f'use "{library}"')).message


def test_language_use_outside_root_by_symlink(tmp_path):
    write(tmp_path / "elsewhere.circuit", "let x = 1\n")
    (tmp_path / "board").mkdir()
    os.symlink(tmp_path / "elsewhere.circuit", tmp_path / "board/link.circuit")
    assert "outside the root" in failure(top(tmp_path, 'use "link.circuit"')).message


def test_language_use_wider_root_allows_parent(tmp_path):
    write(tmp_path / "shared/pull.circuit", LIBRARY)
    path = top(tmp_path, 'use "../shared/pull.circuit"')
    assert load_design(path, root=tmp_path).parts == ()


def test_language_use_cycle_names_the_chain(tmp_path):
    write(tmp_path / "board/a.circuit", 'use "b.circuit"\n')
    write(tmp_path / "board/b.circuit", 'let y = 1\nuse "a.circuit"\n')
    caught = failure(top(tmp_path, 'use "a.circuit"'))
    assert "a.circuit -> b.circuit -> a.circuit" in caught.message
    assert (caught.location.path, caught.location.line) == (os.path.normpath(tmp_path / "board/b.circuit"), 2)


def test_language_use_of_itself_is_a_cycle(tmp_path):
    path = top(tmp_path, 'use "station.circuit"')
    assert "cycle" in failure(path).message


def test_language_use_missing_file(tmp_path):
    caught = failure(top(tmp_path, 'use "nothere.circuit"'))
    assert (caught.location.line, caught.location.column, caught.location.source_line) == (
        3, 5, 'use "nothere.circuit"')


def test_language_library_holds_only_lets_and_blocks(tmp_path):
    write(tmp_path / "board/lib.circuit", "let x = 1\nresistor R from a to b : 1 ohm\n")
    caught = failure(top(tmp_path, 'use "lib.circuit"'))
    assert caught.location.line == 2 and "only `let`, `block`" in caught.message


def test_language_library_names_clash_with_the_file(tmp_path):
    write(tmp_path / "board/lib.circuit", LIBRARY)
    path = write(tmp_path / "board/station.circuit",
                 'circuit s\nground gnd\nuse "lib.circuit"\nlet r_pull = 1 ohm\n')
    assert "already defined" in failure(path).message


def test_language_missing_top_file(tmp_path):
    caught = failure(tmp_path / "none.circuit")
    assert caught.location is None and "cannot find" in caught.message


def test_language_file_too_large(tmp_path, monkeypatch):
    monkeypatch.setattr(files, "MAX_FILE_BYTES", 2 * 1024 * 1024)  # the real cap is 128 MiB
    path = tmp_path / "big.circuit"
    path.write_bytes(b"#" * (2 * 1024 * 1024 + 1))
    caught = failure(path)
    assert "larger than" in caught.message
    assert (caught.location.line, caught.location.column) == (1, 1)
    assert caught.location.path.endswith("big.circuit")  # at the file itself: it has no `use` to blame


def test_language_file_not_utf8(tmp_path):
    path = tmp_path / "latin.circuit"
    path.write_bytes(b"circuit t\nground gnd\n# caf\xe9\n")
    caught = failure(path, CircuitSyntaxError)
    assert (caught.location.line, caught.location.column) == (3, 6)


def test_language_directory_is_not_a_file(tmp_path):
    (tmp_path / "board/lib.circuit").mkdir(parents=True)
    assert "cannot find" in failure(top(tmp_path, 'use "lib.circuit"')).message


def test_language_use_path_with_nul_byte(tmp_path):
    assert "cannot resolve" in failure(top(tmp_path, 'use "a\x00b.circuit"')).message
