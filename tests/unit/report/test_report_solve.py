"""`nodegate solve` output: the JSON of OUTPUTS.md and an aligned table in engineering units."""

from __future__ import annotations

import json
import math

from report_bike_light import KELVIN_25C, operating_points

from checker.report import render_solve_json, render_solve_table
from checker.units import format_value


def test_json_has_exactly_the_documented_shape():
    document = json.loads(render_solve_json("tail_light", operating_points()))
    assert set(document) == {"circuit", "cases"} and document["circuit"] == "tail_light"
    case = document["cases"][0]
    assert set(case) == {"case", "ambient_degC", "converged", "iterations", "state", "self_check", "nets", "parts"}
    assert (case["case"], case["converged"], case["iterations"]) == ("fresh_cells", True, 7)
    # SI Brochure, 9th ed. (2019), 2.3.1: t/°C = T/K - 273.15, so 298.15 K is 25 °C.
    assert math.isclose(case["ambient_degC"], KELVIN_25C - 273.15, abs_tol=1e-9)
    assert case["nets"] == dict(operating_points()[0].nets)


def test_json_parts_follow_the_sign_convention():
    point = operating_points()[0]
    parts = json.loads(render_solve_json("tail_light", [point]))["cases"][0]["parts"]
    resistor = parts["R_SENSE"]
    assert set(resistor) == {"voltage", "current", "power"}
    # Ohm's law and P = V·I for the 10 Ω sense resistor of the fixture, recomputed here.
    assert math.isclose(resistor["voltage"], 10.0 * resistor["current"], rel_tol=1e-12)
    assert math.isclose(resistor["power"], resistor["voltage"] * resistor["current"], rel_tol=1e-12)
    assert parts["VBAT"]["power"] < 0  # a source delivering power (LANGUAGE.md sign convention)
    transistor = parts["Q_DRV"]
    assert set(transistor) == {"pins", "power"} and set(transistor["pins"]) == {"c", "b", "e"}
    # Kirchhoff's current law: the currents into a part's pins sum to zero.
    assert abs(sum(transistor["pins"].values())) < 1e-15


def _block(text: str, case: str) -> list[str]:
    blocks = text.split("\n\n")
    start = next(i for i, b in enumerate(blocks) if b.startswith(f"case {case}:"))
    return blocks[start + 1].splitlines() + blocks[start + 2].splitlines()


def test_table_uses_engineering_units():
    """Four significant figures (issue 10, item 6)."""
    points = operating_points()
    text = render_solve_table(points)
    assert text.startswith("case fresh_cells: ambient 25.0 °C, newton, 7 iterations")
    assert "case cold_night: ambient -10.0 °C, newton, 9 iterations" in text
    for point in points:
        lines = _block(text, point.case)
        for net, volts in point.nets.items():
            assert any(line.split() == [net] + format_value(volts, "V", 4).split() for line in lines)
        resistor = point.parts["R_SENSE"]
        expected = ["R_SENSE"] + [w for v, u in ((resistor.voltage, "V"), (resistor.current, "A"),
                                                 (resistor.power, "W")) for w in format_value(v, u, 4).split()]
        assert any(line.split() == expected for line in lines)


def test_table_columns_are_aligned():
    lines = _block(render_solve_table(operating_points()), "fresh_cells")
    nets = [line for line in lines[:6]]
    assert len({len(line) for line in nets}) == 1  # right-aligned voltages end in one column
    parts = [line.split("  (flows")[0] for line in lines[6:] if line.split()[0] != "into"]  # direction in words after
    assert len({len(line) for line in parts}) == 1
    header = parts[0]
    for row in parts[1:]:
        # every number ends where its heading ends
        for title in ("voltage", "current", "power"):
            end = header.index(title) + len(title)
            assert row[end - 1] != " " and (end == len(row) or row[end] == " ")


def test_multi_terminal_parts_list_their_pin_currents():
    lines = _block(render_solve_table(operating_points()), "fresh_cells")
    start = next(i for i, line in enumerate(lines) if line.split()[0] == "Q_DRV")
    assert lines[start].split()[1:3] == ["—", "—"]
    pins = [line.split() for line in lines[start + 1:start + 4]]
    assert [p[:2] for p in pins] == [["into", "c"], ["into", "b"], ["into", "e"]]
    assert " ".join(pins[0][2:]) == format_value(operating_points()[0].parts["Q_DRV"].pins["c"], "A", 4)
