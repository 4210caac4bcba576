"""The HTML report's operating-point tables print four significant figures, as the `solve` table does."""

from __future__ import annotations

import re

from report_bike_light import bike_light, operating_points

from checker.report import render_html
from checker.report.solve import render_solve_table


def cells(html: str, name: str) -> list[str]:
    """The numeric cells of the first table row whose first cell is `name`."""
    row = re.search(rf"<tr><td>{re.escape(name)}</td>(.*?)</tr>", html).group(1)
    return re.findall(r'<td class="num">([^<]*)</td>', row)


def test_net_voltages_have_four_significant_figures():
    # the pack: 3 V fresh, 2.6 V cold; the driver's collector sits at 120 mV in both cases
    html = render_html(bike_light())
    assert cells(html, "vbat") == ["3.000 V", "2.600 V"]
    assert cells(html, "drv") == ["120.0 mV", "120.0 mV"]


def test_html_and_solve_tables_print_the_same_text():
    html, points = render_html(bike_light()), operating_points()
    solve_lines = render_solve_table(points[:1]).splitlines()
    for net in points[0].nets:
        shown = cells(html, net)[0]
        assert any(line.split() == [net, *shown.split()] for line in solve_lines), (net, shown)
