"""The Markdown report: verdict first, tables that no input can break, truncation under a byte limit."""

from __future__ import annotations

import dataclasses
import re

from hypothesis import given, settings
from hypothesis import strategies as st
from report_bike_light import LED_CURRENT, bike_light, bike_light_with_base, hostile, outcome

from checker.findings import Finding, Findings
from checker.report import JOB_SUMMARY_LIMIT, render_markdown
from checker.report.markdown import escape

CELL_SPLIT = re.compile(r"(?<!\\)\|")


def cells(line: str) -> list[str]:
    """The cells of a Markdown table row, split at pipes that are not escaped."""
    assert line.startswith("|") and line.endswith("|"), line
    return [c.strip() for c in CELL_SPLIT.split(line)[1:-1]]


def section(text: str, title: str) -> list[str]:
    """The table and list lines of the section under `### title`, up to the next heading."""
    lines = text.splitlines()
    start = lines.index(f"### {title}") + 2
    end = next((i for i in range(start, len(lines)) if lines[i].startswith(("###", "<details>"))), len(lines))
    return [line for line in lines[start:end] if line.startswith(("|", "- "))]


def test_verdict_comes_first_and_counts_every_status():
    text = render_markdown(bike_light())
    first = text.splitlines()[0]
    assert first == ("**nodegate: 1 limit fails** in 1 circuit, 1 waiver has expired, 1 warning, 1 waived, "
                     "1 unused waiver")


def test_verdict_when_everything_holds():
    passing = tuple(dataclasses.replace(f, status="pass") for f in bike_light().findings)
    text = render_markdown(Findings(passing, bike_light().circuits))
    assert text.splitlines()[0] == "**nodegate: all 5 limits hold** in 1 circuit"


def test_verdict_against_base_counts_new_and_fixed():
    text = render_markdown(bike_light_with_base())
    assert "Against main, this change introduces 1 failure and fixes 1." in text
    assert "### Fixed by this change" in text


def test_failing_table_shows_worst_case_with_independent_margins():
    rows = section(render_markdown(bike_light()), "Failing limits")
    assert cells(rows[0]) == ["circuit", "limit", "part", "worst case", "value", "bound", "margin", "relative"]
    row = cells(rows[2])
    # RULES.md: `x in lo .. hi` -> x - lo at the lower end: 13.1 mA - 15 mA = -1.9 mA, -1.9/15 = -12.7 %.
    assert row == ["tail\\_light", "led-current", "—", "cold\\_night", "13.1 mA", "15.0 mA", "-1.90 mA", "-12.7 %"]


def test_margin_against_base_is_now_minus_base():
    rows = section(render_markdown(bike_light_with_base()), "Failing limits")
    # -1.9 mA now, +0.6 mA on the base: the change moved the margin by -2.5 mA.
    assert cells(rows[2])[-2:] == ["new", "-2.50 mA"]


def test_warnings_hold_warning_failures_and_waiver_problems():
    lines = section(render_markdown(bike_light()), "Warnings")
    assert cells(lines[2])[1] == "driver-junction"
    assert cells(lines[2])[4:6] == ["130.0 °C", "125.0 °C"]  # 403.15 K and 398.15 K, shown in °C
    assert any(line.startswith("- expired waiver of led-current") for line in lines)
    assert any(line.startswith("- unused waiver of sense-ratio") for line in lines)


def test_every_limit_is_in_a_collapsed_section_and_caution_closes():
    text = render_markdown(bike_light())
    details = text[text.index("<details>"):text.index("</details>")]
    assert sum(1 for line in details.splitlines() if line.startswith("| ")) == 1 + 5
    assert text.rstrip().endswith("does not replace, a qualified engineer's review and the "
                                  "applicable codes and standards._")


def test_hostile_names_stay_in_one_row_and_render_as_text():
    text = render_markdown(hostile())
    assert "<script" not in text and "<b>" not in text and "<i>" not in text
    rows = section(text, "Failing limits")
    assert len(rows) == 3  # header, rule, one row: the newlines in the names did not split it
    assert len(cells(rows[2])) == len(cells(rows[0]))
    assert "](" not in text.replace("\\](", "")  # no live link
    assert not any(line.startswith("#") and not line.startswith("### ") for line in text.splitlines())


def test_escape_neutralises_markup():
    assert escape("a|b") == "a\\|b"
    assert escape("x\ny\r\nz") == "x y z"
    assert escape("<script>") == "&lt;script&gt;"
    assert escape("[x](y)") == "\\[x\\](y)"
    assert escape("`code`") == "\\`code\\`"
    assert escape("# heading") == "\\# heading"
    assert escape("1. item") == "1\\. item"
    assert escape("- item") == "\\- item"
    assert escape("-1.90 mA") == "-1.90 mA"
    assert escape("a\u202eb") == "ab"


@settings(max_examples=150, deadline=None)
@given(st.text(max_size=40), st.text(max_size=40), st.text(max_size=40))
def test_any_names_keep_the_table_shape(limit_id, circuit, item):
    limit = dataclasses.replace(LED_CURRENT, id=limit_id, about=item)
    finding = Finding(limit, circuit, item or None, (outcome("nominal", 0.01, 0.015, False, "A"),), "fail")
    text = render_markdown(Findings((finding,), ()))
    rows = section(text, "Failing limits")
    assert len(rows) == 3
    assert len(cells(rows[2])) == 8
    assert "<" not in text.replace("<details>", "").replace("</details>", "").replace("<summary>", "") \
        .replace("</summary>", "")


def _many(count: int) -> Findings:
    one = bike_light().findings[0]
    return Findings(tuple(dataclasses.replace(one, item=f"LED_{i:05d}") for i in range(count)), ())


def test_huge_report_is_cut_at_whole_rows_with_a_note():
    limit = 40_000
    full = render_markdown(_many(2000))
    assert len(full.encode()) > limit
    text = render_markdown(_many(2000), max_bytes=limit, full_report="in report.html")
    assert len(text.encode("utf-8")) <= limit
    assert text.startswith("**nodegate: 2000 limits fail**")
    note = re.search(r"_Truncated to fit 40000 bytes: (\d+) more rows not shown\. The full report is in "
                     r"report\.html\._", text)
    assert note
    shown = sum(1 for line in text.splitlines() if line.startswith("| tail"))
    assert shown + int(note.group(1)) == 2 * 2000  # each finding has a row in two sections
    assert all(line.endswith("|") for line in text.splitlines() if line.startswith("|"))
    assert text.count("<details>") == text.count("</details>")
    assert "qualified engineer's review" in text


def test_report_that_fits_is_not_cut():
    text = render_markdown(bike_light(), max_bytes=JOB_SUMMARY_LIMIT)
    assert text == render_markdown(bike_light())
    assert "Truncated" not in text
    assert JOB_SUMMARY_LIMIT == 1_000_000


def test_tiny_limit_never_overflows_and_keeps_the_verdict_longest():
    verdict = "**nodegate: 50 limits fail** in 1 circuit"
    for limit in (0, 10, 60, 200, 600):
        text = render_markdown(_many(50), max_bytes=limit)
        assert len(text.encode("utf-8")) <= limit
        assert text == (verdict + "\n")[:limit] or text.startswith(verdict + "\n")
    assert "Truncated" in render_markdown(_many(50), max_bytes=200)


def test_waiver_notes_are_a_list_apart_from_the_warning_table():
    lines = render_markdown(bike_light()).splitlines()
    first_note = next(i for i, line in enumerate(lines) if line.startswith("- "))
    assert lines[first_note - 1] == "" and lines[first_note - 2].startswith("| ")
