"""Every format for the bike-light fixture, compared with golden files reviewed by hand.

After an intended change of layout, regenerate with
`NODEGATE_UPDATE_GOLDEN=1 python3 -m pytest -q tests/unit/report/test_report_golden.py`
and review the diff of `tests/unit/report/golden/` before committing it.
"""

from __future__ import annotations

import difflib
import os
from pathlib import Path

import pytest
from report_bike_light import ROOT, bike_light, bike_light_with_base, operating_points
from report_charger import charger

from checker import __version__
from checker.report import (render_html, render_json, render_junit, render_markdown, render_sarif,
                            render_solve_json, render_solve_table)

GOLDEN = Path(__file__).parent / "golden"

RENDERS = {
    "tail_light.md": lambda: render_markdown(bike_light()),
    "tail_light_base.md": lambda: render_markdown(bike_light_with_base()),
    "tail_light_base.html": lambda: render_html(bike_light_with_base()),
    "tail_light.json": lambda: render_json(bike_light()),
    "tail_light.junit.xml": lambda: render_junit(bike_light()),
    "tail_light_base.sarif": lambda: render_sarif(bike_light_with_base(), Path(ROOT)),
    "tail_light_solve.txt": lambda: render_solve_table(operating_points()) + "\n",
    "tail_light_solve.json": lambda: render_solve_json("tail_light", operating_points()) + "\n",
    "charger_worstcase.md": lambda: render_markdown(charger()),
    "charger_worstcase.json": lambda: render_json(charger()),
}


def _stable(text: str) -> str:
    """The version number changes with every release; the layout should not."""
    return text.replace(f"nodegate {__version__}", "nodegate VERSION") \
               .replace(f'"version": "{__version__}"', '"version": "VERSION"')


@pytest.mark.parametrize("name", sorted(RENDERS))
def test_matches_golden_file(name):
    actual = _stable(RENDERS[name]())
    path = GOLDEN / name
    if os.environ.get("NODEGATE_UPDATE_GOLDEN") == "1":
        path.parent.mkdir(exist_ok=True)
        path.write_text(actual, encoding="utf-8", newline="")
    if not path.is_file():
        pytest.fail(f"no golden file {path}; create it with NODEGATE_UPDATE_GOLDEN=1 and review it")
    expected = path.read_text(encoding="utf-8")
    diff = "".join(difflib.unified_diff(expected.splitlines(True), actual.splitlines(True),
                                        f"golden/{name}", "rendered now"))
    assert actual == expected, f"{name} differs from its golden file:\n{diff}"
