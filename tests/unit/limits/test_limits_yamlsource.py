"""The line-aware safe YAML loader: locations, bounds, refusal of aliases, error locations."""

import datetime

import pytest

from checker.errors import ConfigError, LimitError, nearest
from checker.yamlsource import LocatedDict, LocatedList, LocatedStr, check_keys, load_yaml, load_yaml_text

DOC = """\
top:
  plain: voltage(x) <= 3 V
  single: 'it''s voltage(x)'
  double: "q\\"x voltage(x)"
  literal: |
    first line
      voltage(x) <= 1 V
  folded: >-
    folded line
    voltage(x) <= 2 V
  multi: plain
    continued voltage(x)
  number: 3
  date: 2027-06-30
  items:
    - one
    - 2
"""


def located(key):
    doc = load_yaml_text(DOC, "doc.yaml")
    return doc["top"][key]


@pytest.mark.parametrize("key, line, column", [
    ("plain", 2, 10), ("single", 3, 18), ("double", 4, 17), ("literal", 7, 7), ("folded", 10, 5), ("multi", 12, 15),
])
def test_yamlsource_points_at_a_character_inside_every_scalar_style(key, line, column):
    value = located(key)
    where = value.location_at(value.index("voltage"))
    assert (where.line, where.column) == (line, column)
    assert where.source_line[where.column - 1:].startswith("voltage")


def test_yamlsource_string_location_is_its_first_character():
    doc = load_yaml_text(DOC, "doc.yaml")
    assert doc["top"]["plain"].location.column == 10
    assert doc["top"]["single"].location.column == 12  # inside the quote
    assert isinstance(doc["top"]["plain"], LocatedStr)


def test_yamlsource_containers_remember_key_value_and_item_locations():
    doc = load_yaml_text(DOC, "doc.yaml")
    top = doc["top"]
    assert isinstance(top, LocatedDict) and isinstance(top["items"], LocatedList)
    assert (top.key_location("number").line, top.key_location("number").column) == (13, 3)
    assert (top.value_location("number").line, top.value_location("number").column) == (13, 11)
    assert top["number"] == 3 and top["date"] == datetime.date(2027, 6, 30)
    assert top["items"].item_location(1).line == 17


def test_yamlsource_syntax_error_has_line_and_column():
    with pytest.raises(ConfigError) as caught:
        load_yaml_text("a: 1\nb: [1, 2\nc: 3\n", "bad.yaml")
    assert caught.value.location.path == "bad.yaml" and caught.value.location.line == 3


def test_yamlsource_error_class_is_chosen_by_the_caller():
    with pytest.raises(LimitError):
        load_yaml_text("a: [", "bad.yaml", LimitError)


def test_yamlsource_refuses_aliases_so_billion_laughs_cannot_expand():
    bomb = "a: &a [x, x, x, x, x, x, x, x, x]\n" + "".join(
        f"{chr(98 + i)}: &{chr(98 + i)} [*{chr(97 + i)}, *{chr(97 + i)}, *{chr(97 + i)}]\n" for i in range(8))
    with pytest.raises(ConfigError) as caught:
        load_yaml_text(bomb, "bomb.yaml")
    assert "alias" in caught.value.message and caught.value.location.line == 2


def test_yamlsource_refuses_merge_keys():
    with pytest.raises(ConfigError):
        load_yaml_text("base: {a: 1}\nother:\n  <<: {b: 2}\n", "m.yaml")


def test_yamlsource_bounds_nesting_depth():
    with pytest.raises(ConfigError) as caught:
        load_yaml_text("a: " + "[" * 200 + "]" * 200, "deep.yaml")
    assert "nesting" in caught.value.message


def test_yamlsource_refuses_duplicate_keys_at_the_second():
    with pytest.raises(ConfigError) as caught:
        load_yaml_text("a: 1\nb: 2\na: 3\n", "dup.yaml")
    assert caught.value.location.line == 3


@pytest.mark.parametrize("text", [
    "a: !!python/object/apply:os.system ['true']\n",
    "a: !!python/name:os.system\n",
    "a: !!set {x: null}\n",
])
def test_yamlsource_refuses_python_and_unusual_tags(text):
    with pytest.raises(ConfigError) as caught:
        load_yaml_text(text, "evil.yaml")
    assert caught.value.location.line == 1


def test_yamlsource_bounds_file_size(tmp_path):
    path = tmp_path / "big.yaml"
    path.write_text("a: " + "x" * 200 + "\n")
    with pytest.raises(ConfigError) as caught:
        load_yaml(path, max_bytes=100)
    assert "bytes" in caught.value.message
    assert load_yaml(path)["a"] == "x" * 200


def test_yamlsource_missing_and_non_utf8_files_are_errors(tmp_path):
    with pytest.raises(ConfigError):
        load_yaml(tmp_path / "nope.yaml")
    path = tmp_path / "latin.yaml"
    path.write_bytes(b"a: \xff\xfe\n")
    with pytest.raises(ConfigError):
        load_yaml(path)


def test_yamlsource_empty_document_is_none():
    assert load_yaml_text("# nothing\n", "empty.yaml") is None


def test_yamlsource_nearest_and_check_keys():
    assert nearest("severty", ["severity", "cases"]) == "severity"
    assert nearest("zzz", ["severity", "cases"]) is None
    mapping = load_yaml_text("id: x\nsevrity: error\n", "k.yaml")
    with pytest.raises(LimitError) as caught:
        check_keys(mapping, ("id", "severity"), "a limit", LimitError)
    assert caught.value.location.line == 2 and caught.value.location.column == 1
    assert any("severity" in note for note in caught.value.notes)
