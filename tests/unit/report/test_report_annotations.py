"""Workflow-command lines for CI annotations.

Format and escaping as documented by GitHub in "Workflow commands for GitHub
Actions" (docs.github.com; the escaping table quoted from memory):
`::LEVEL k=v,k=v::message`; message data escapes `%` `\\r` `\\n` as `%25` `%0D` `%0A`, property values additionally `:` `,` as
`%3A` `%2C`. The unescaping below is the inverse that documentation implies.
"""

from __future__ import annotations

import datetime
import re
from pathlib import Path

from hypothesis import given
from hypothesis import strategies as st

from checker.errors import Location
from checker.findings import Finding, Findings, Limit, Outcome, Waiver, WaiverNote
from checker.report.annotations import escape_data, escape_property, render_annotations
from checker.units import format_value

# A property value contains no raw `,` `:` CR or LF; the message no raw CR or LF.
COMMAND = re.compile(r"^::(error|warning|notice)(?: ((?:[a-zA-Z]+=[^,:\r\n]*)(?:,[a-zA-Z]+=[^,:\r\n]*)*))?::([^\r\n]*)$")


def unescape(text: str, escapes: dict[str, str]) -> str:
    return re.sub(r"%(25|0D|0A|3A|2C)", lambda m: escapes["%" + m.group(1)], text)


DATA = {"%25": "%", "%0D": "\r", "%0A": "\n"}
PROPERTY = {**DATA, "%3A": ":", "%2C": ","}


def parse(line: str) -> tuple[str, dict[str, str], str]:
    match = COMMAND.match(line)
    assert match, f"not a workflow command: {line!r}"
    props = dict(pair.split("=", 1) for pair in match.group(2).split(",")) if match.group(2) else {}
    return match.group(1), {k: unescape(v, PROPERTY) for k, v in props.items()}, unescape(match.group(3), DATA)


@given(st.text())
def test_escaping_round_trips(text: str) -> None:
    assert unescape(escape_property(text), PROPERTY) == text
    assert unescape(escape_data(text), DATA) == text
    assert not re.search(r"[\r\n,:]", escape_property(text))
    assert not re.search(r"[\r\n]", escape_data(text))


def test_escapes_match_the_documented_table() -> None:
    assert escape_data("50% at\r\nnight: a,b") == "50%25 at%0D%0Anight: a,b"
    assert escape_property("50% at\r\nnight: a,b") == "50%25 at%0D%0Anight%3A a%2Cb"


ROOT = Path("/repo")
PER_PART = Limit(id="res-power", about="Resistor dissipation under half its rating", each="resistor",
                 check="power(part) <= 50% * part.rating",
                 location=Location("/repo/boards/bike/limits.yaml", 12, 5))
GLOBAL = Limit(id="led-current", about="Status LED current, 5 mA .. 15 mA", severity="warning",
               check="current(LED) in 5 mA .. 15 mA", location=Location("/repo/boards/bike/limits.yaml", 3, 5))


def outcome(case: str, value: float, bound: float, unit: str, absolute: bool = False) -> Outcome:
    margin = bound - value
    return Outcome(case, value, bound, margin, margin / abs(bound), unit, absolute, holds=margin >= 0)


def test_each_limit_is_located_at_the_part() -> None:
    found = Finding(PER_PART, "bike_light", "R_HEAT", status="fail",
                    outcomes=(outcome("cold", 0.040, 0.125, "W"), outcome("hot", 0.0612, 0.05, "W")),
                    item_location=Location("/repo/boards/bike/bike_light.circuit", 27, 3))
    text = render_annotations(Findings((found,), ()), ROOT)
    assert text.endswith("\n") and text.count("\n") == 1
    level, props, message = parse(text.rstrip("\n"))
    assert level == "error"
    assert props == {"file": "boards/bike/bike_light.circuit", "line": "27", "col": "3",
                     "title": "nodegate res-power on R_HEAT"}
    # The worst case is `hot` (margin -11.2 mW), values formatted by units.format_value.
    for expected in ("case hot", format_value(0.0612, "W"), format_value(0.05, "W"),
                     format_value(0.05 - 0.0612, "W"), format_value((0.05 - 0.0612) / 0.05 * 100, "%")):
        assert expected in message
    assert "61.2 mW" in message and "-11.2 mW" in message


def test_other_limits_are_located_at_the_limit_and_warn() -> None:
    found = Finding(GLOBAL, "bike_light", None, status="warn", outcomes=(outcome("nominal", 0.0171, 0.015, "A"),),
                    change="new")
    text = render_annotations(Findings((found,), (), base_ref="origin/main"), ROOT)
    level, props, message = parse(text.rstrip("\n"))
    assert level == "warning"
    assert props["file"] == "boards/bike/limits.yaml" and props["line"] == "3"
    assert props["title"] == "nodegate led-current"
    assert message.startswith("Status LED current, 5 mA .. 15 mA (bike_light, case nominal)")
    assert message.endswith("new since origin/main")


def test_passing_and_waived_findings_make_no_line() -> None:
    passing = Finding(GLOBAL, "bike_light", None, status="pass", outcomes=(outcome("nominal", 0.01, 0.015, "A"),))
    waived = Finding(PER_PART, "bike_light", "R1", status="waived", outcomes=(outcome("hot", 0.2, 0.1, "W"),))
    assert render_annotations(Findings((passing, waived), ()), ROOT) == ""


def test_temperatures_show_in_celsius_and_margins_in_kelvin() -> None:
    # 398.15 K is 125 degC (SI Brochure, 9th ed., 2019, 2.3.1: 0 degC = 273.15 K).
    hot = Limit(id="tj-max", about="Junction below 125 degC", check="junction_temp(U1) <= 125 degC")
    found = Finding(hot, "weather_station", None, status="fail",
                    outcomes=(outcome("sun", 403.15, 398.15, "K", absolute=True),))
    _, props, message = parse(render_annotations(Findings((found,), ()), ROOT).rstrip("\n"))
    assert "130.0 °C against 125.0 °C" in message and "margin -5.00 K" in message
    assert "file" not in props  # the limit has no location: an annotation without a file


def test_hostile_names_cannot_break_the_command() -> None:
    limit = Limit(id="x", about="line one\n::error::forged,title=x: 100%", check="a <= b",
                  location=Location("/repo/odd,name:1.yaml", 1, 1))
    found = Finding(limit, "c", "R,1:\r\nx", status="fail", outcomes=(outcome("n", 2.0, 1.0, "V"),))
    text = render_annotations(Findings((found,), ()), ROOT)
    assert text.count("\n") == 1
    _, props, message = parse(text.rstrip("\n"))
    assert props["file"] == "odd,name:1.yaml" and props["title"] == "nodegate x on R,1:\r\nx"
    assert message.startswith("line one\n::error::forged,title=x: 100%")


def test_paths_outside_root_and_relative_paths() -> None:
    outside = Limit(id="pack-limit", about="From a pack", check="a <= b", location=Location("/opt/packs/derating.yaml", 4))
    relative = Limit(id="rel", about="Relative", check="a <= b", location=Location("boards/x/limits.yaml", 2))
    found = [Finding(limit, "c", None, status="fail", outcomes=(outcome("n", 2.0, 1.0, "V"),))
             for limit in (outside, relative)]
    lines = render_annotations(Findings(tuple(found), ()), Path.cwd()).splitlines()
    assert parse(lines[0])[1]["file"] == "/opt/packs/derating.yaml"
    assert parse(lines[1])[1]["file"] == "boards/x/limits.yaml"


def test_waiver_problems() -> None:
    waiver = Waiver(limit="res-power", reason="pulsed", until=datetime.date(2026, 6, 30), part="R_HEAT",
                    location=Location("/repo/boards/bike/limits.yaml", 40, 5))
    notes = (WaiverNote(waiver, "expired"), WaiverNote(waiver, "unused"))
    lines = render_annotations(Findings((), (), waiver_notes=notes), ROOT).splitlines()
    (level0, props0, msg0), (level1, _, msg1) = parse(lines[0]), parse(lines[1])
    assert (level0, level1) == ("error", "warning")
    assert props0["file"] == "boards/bike/limits.yaml" and props0["line"] == "40"
    assert "R_HEAT" in msg0 and "2026-06-30" in msg0 and "matches no failure" in msg1
