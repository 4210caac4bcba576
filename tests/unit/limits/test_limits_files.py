"""Limit files and packs: fields as RULES.md defines them, every mistake at its key or value."""

import datetime

import pytest

from checker.errors import LimitError
from checker.limits import available_packs, load_limit_file, load_limit_text, load_pack

GOOD = """\
limits:
  - id: adc-batt-range
    about: Battery sense stays inside the ADC input range
    check: voltage(adc_batt) in 0.1 V .. 1.6 V
  - id: resistor-dissipation
    about: Resistors run cool
    each: resistor
    where: part.rating > 0 W
    check: power(part) <= 50% * part.rating
    severity: warning
    cases: [nominal, full_charge]
waivers:
  - limit: resistor-dissipation
    part: R_HEAT
    case: full_charge
    reason: Pulsed heater drive, 5 % duty
    until: 2027-06-30
"""


def test_limits_file_fields_are_read(tmp_path):
    path = tmp_path / "limits.yaml"
    path.write_text(GOOD)
    loaded = load_limit_file(path)
    first, second = loaded.limits
    assert (first.id, first.severity, first.each, first.cases) == ("adc-batt-range", "error", None, None)
    assert first.location.line == 2 and first.source == str(path)
    assert (second.each, second.where, second.severity, second.cases) == (
        "resistor", "part.rating > 0 W", "warning", ("nominal", "full_charge"))
    (waiver,) = loaded.waivers
    assert (waiver.limit, waiver.part, waiver.case, waiver.until) == (
        "resistor-dissipation", "R_HEAT", "full_charge", datetime.date(2027, 6, 30))


def test_limits_file_empty_has_no_limits():
    assert load_limit_text("", "empty.yaml").limits == ()


def error_of(text):
    with pytest.raises(LimitError) as caught:
        load_limit_text(text, "bad.yaml")
    return caught.value


def limit(**fields):
    body = {"id": "a-limit", "about": "about it", "check": "voltage(x) <= 1 V", **fields}
    lines = "".join(f"    {key}: {value}\n" for key, value in body.items() if value is not None)
    return "limits:\n  - " + lines[4:]


@pytest.mark.parametrize("text, line, column, word", [
    (limit(sevrity="error"), 5, 5, "severity"),
    (limit(chek="x"), 5, 5, "check"),
    ("limits:\n  - id: a\n    about: b\n    check: c\nwaiverz: []\n", 5, 1, "waivers"),
    ("waivers:\n  - limt: a\n    reason: r\n    until: 2027-01-01\n", 2, 5, "limit"),
])
def test_limits_file_unknown_key_is_located_with_nearest_valid_key(text, line, column, word):
    error = error_of(text)
    assert (error.location.line, error.location.column) == (line, column)
    assert any(f"`{word}`" in note for note in error.notes)


@pytest.mark.parametrize("text, line", [
    (limit(id="Adc_Range"), 2),
    (limit(id="adc--range"), 2),
    (limit(check="42"), 4),
    (limit(about="yes"), 3),
    (limit(severity="fatal"), 5),
    (limit(each="resistr"), 5),
    (limit(each="tag:two words"), 5),
    (limit(cases="nominal"), 5),
    (limit(cases="[]"), 5),
    (limit(cases="[1]"), 5),
    ("limits:\n  - id: a-b\n    about: x\n    check: y\n    where: part.tol > 1%\n", 5),
    ("limits: {id: x}\n", 1),
    ("limits:\n  - just text\n", 2),
    ("- a\n- b\n", 1),
])
def test_limits_file_wrong_values_are_errors_at_their_place(text, line):
    assert error_of(text).location.line == line


def test_limits_file_missing_fields_are_errors():
    assert "check" in error_of("limits:\n  - id: a-b\n    about: x\n").message
    assert "until" in error_of("waivers:\n  - limit: a\n    reason: r\n").message
    assert "reason" in error_of("waivers:\n  - limit: a\n    until: 2027-01-01\n").message


def test_limits_file_about_is_optional_as_in_the_spec_example():
    # RULES.md's own example has limits without `about`
    limits = load_limit_text("limits:\n  - id: a-b\n    check: voltage(x) <= 1 V\n", "l.yaml").limits
    assert limits[0].about == ""


def test_limits_file_duplicate_id_is_an_error_at_the_second():
    text = limit() + limit()[len("limits:\n"):]
    error = error_of(text)
    assert error.location.line == 5 and "twice" in error.message


def test_limits_file_unknown_kind_suggests_the_nearest():
    error = error_of(limit(each="capacitr"))
    assert any("capacitor" in note for note in error.notes)


def test_limits_file_until_accepts_quoted_dates_and_rejects_others():
    text = "waivers:\n  - limit: a\n    reason: r\n    until: '2027-01-31'\n"
    assert load_limit_text(text, "w.yaml").waivers[0].until == datetime.date(2027, 1, 31)
    error = error_of("waivers:\n  - limit: a\n    reason: r\n    until: next spring\n")
    assert (error.location.line, error.location.column) == (4, 12)


def test_limits_file_tag_each_is_accepted():
    assert load_limit_text(limit(each="tag:hot"), "t.yaml").limits[0].each == "tag:hot"


def test_limits_packs_are_listed_and_load():
    assert {"derating", "ratings"} <= set(available_packs())
    for name in available_packs():
        pack = load_pack(name)
        assert pack.limits and all(limit.source == f"pack:{name}" for limit in pack.limits)
        assert all(limit.about and limit.each for limit in pack.limits)


def test_limits_unknown_pack_lists_the_available_ones():
    with pytest.raises(LimitError) as caught:
        load_pack("deratng")
    assert any("derating" in note for note in caught.value.notes)
    with pytest.raises(LimitError):
        load_pack("../rules/derating")
