"""Hand-built Findings for the report tests: a bike rear light (our own scenario).

The numbers are self-consistent where a test relies on them: every margin is
value-vs-bound as RULES.md defines it (`a <= b` -> b - a; `a >= b` / ranges -> a - b
at the nearer end) and every relative margin is margin / |bound|.
Paths sit under ROOT, which does not exist on disk; nothing here reads files.
"""

from __future__ import annotations

import dataclasses
import datetime

from checker.design import Netlist, OperatingPoint, Part, PartResult
from checker.errors import Location
from checker.findings import CircuitResult, Finding, Findings, Limit, Outcome, Waiver, WaiverNote

ROOT = "/srv/bike-repo"
LIMITS = f"{ROOT}/boards/tail_light/limits.yaml"
CIRCUIT = f"{ROOT}/boards/tail_light/tail_light.circuit"
KELVIN_25C = 298.15
KELVIN_M10C = 263.15


def outcome(case: str, value: float, bound: float, upper: bool, unit: str, absolute: bool = False,
            corner: str = "") -> Outcome:
    """An outcome of `value <= bound` (upper) or `value >= bound`, with the margins of RULES.md."""
    margin = bound - value if upper else value - bound
    return Outcome(case=case, value=value, bound=bound, margin=margin, relative=margin / abs(bound),
                   unit=unit, absolute=absolute, holds=margin >= 0, corner=corner)


LED_CURRENT = Limit(id="led-current", about="Tail LED current stays in its visible range",
                    check="current(LED_TAIL) in 15 mA .. 25 mA", source=LIMITS,
                    location=Location(LIMITS, 3, 5))
DISSIPATION = Limit(id="resistor-dissipation", about="Resistors run at half their rating or less",
                    check="power(part) <= 50% * part.rating", each="resistor", where="part.rating > 0 W",
                    source=LIMITS, location=Location(LIMITS, 7, 5))
DRIVER_TJ = Limit(id="driver-junction", about="Driver transistor junction stays cool",
                  check="junction_temp(Q_DRV) <= 125 degC", severity="warning", source=LIMITS,
                  location=Location(LIMITS, 13, 5))
SENSE_RATIO = Limit(id="sense-ratio", about="Battery sense divider ratio below one half",
                    check="voltage(sense) / voltage(vbat) <= 0.5", source=LIMITS,
                    location=Location(LIMITS, 18, 5))

WAIVER_BASE = Waiver(limit="resistor-dissipation", part="R_BASE", reason="Pulsed drive, 10 % duty",
                     until=datetime.date(2031, 6, 30), location=Location(LIMITS, 24, 5))
WAIVER_UNUSED = Waiver(limit="sense-ratio", reason="Old divider", until=datetime.date(2031, 1, 31),
                       location=Location(LIMITS, 28, 5))
WAIVER_EXPIRED = Waiver(limit="led-current", case="cold_night", reason="Winter batch",
                        until=datetime.date(2020, 1, 31), location=Location(LIMITS, 32, 5))


def _findings() -> tuple[Finding, ...]:
    led = Finding(LED_CURRENT, "tail_light", None, (
        outcome("fresh_cells", 0.0192, 0.015, False, "A"),
        outcome("cold_night", 0.0131, 0.015, False, "A")), "fail")
    sense_r = Finding(DISSIPATION, "tail_light", "R_SENSE", (
        outcome("fresh_cells", 0.040, 0.050, True, "W"),
        outcome("cold_night", 0.028, 0.050, True, "W")), "pass",
        item_location=Location(CIRCUIT, 8, 1))
    base_r = Finding(DISSIPATION, "tail_light", "R_BASE", (
        outcome("fresh_cells", 0.0375, 0.03125, True, "W"),
        outcome("cold_night", 0.030, 0.03125, True, "W")), "waived", waiver=WAIVER_BASE,
        item_location=Location(CIRCUIT, 9, 1))
    tj = Finding(DRIVER_TJ, "tail_light", None, (
        outcome("fresh_cells", 403.15, 398.15, True, "K", absolute=True),
        outcome("cold_night", 353.15, 398.15, True, "K", absolute=True)), "warn")
    ratio = Finding(SENSE_RATIO, "tail_light", None, (
        outcome("fresh_cells", 0.42, 0.5, True, ""),
        outcome("cold_night", 0.42, 0.5, True, "")), "pass")
    return (led, sense_r, base_r, tj, ratio)


def _parts() -> tuple[Part, ...]:
    return (
        Part("VBAT", "source", (("from", "vbat"), ("to", "gnd")), 3.0, "V"),
        Part("R_SENSE", "resistor", (("from", "vbat"), ("to", "led_a")), 10.0, "ohm", props={"rating": 0.1}),
        Part("LED_TAIL", "led", (("from", "led_a"), ("to", "drv"))),
        Part("Q_DRV", "bjt", (("c", "drv"), ("b", "base"), ("e", "gnd")), flags=frozenset({"npn"})),
        Part("R_BASE", "resistor", (("from", "vbat"), ("to", "base")), 2200.0, "ohm", props={"rating": 0.0625}),
    )


def _point(case: str, ambient: float, vbat: float, i_led: float, strategy: str, iterations: int) -> OperatingPoint:
    """An operating point with the signs of LANGUAGE.md; values rounded for readability, not solved."""
    netlist = Netlist("tail_light", case, ambient, "gnd", _parts())
    v_led_a, v_drv, v_base = vbat - 10.0 * i_led, 0.12, 0.70
    i_base = (vbat - v_base) / 2200.0
    two = lambda v, i: PartResult(power=v * i, pins={"from": i, "to": -i}, voltage=v, current=i)  # noqa: E731
    parts = {
        "VBAT": two(vbat, -(i_led + i_base)),
        "R_SENSE": two(vbat - v_led_a, i_led),
        "LED_TAIL": two(v_led_a - v_drv, i_led),
        "Q_DRV": PartResult(power=v_drv * i_led + v_base * i_base,
                            pins={"c": i_led, "b": i_base, "e": -(i_led + i_base)}),
        "R_BASE": two(vbat - v_base, i_base),
    }
    nets = {"gnd": 0.0, "vbat": vbat, "led_a": v_led_a, "drv": v_drv, "base": v_base}
    return OperatingPoint(netlist, nets, parts, iterations, strategy)


def operating_points() -> tuple[OperatingPoint, ...]:
    return (_point("fresh_cells", KELVIN_25C, 3.0, 0.0192, "newton", 7),
            _point("cold_night", KELVIN_M10C, 2.6, 0.0131, "newton", 9))


def bike_light() -> Findings:
    """Findings with one failure, one warning, one waived, two passes, an expired and an unused waiver."""
    circuit = CircuitResult("tail_light", "Bike tail light, rev C", CIRCUIT, operating_points())
    notes = (WaiverNote(WAIVER_EXPIRED, "expired"), WaiverNote(WAIVER_UNUSED, "unused"))
    return Findings(_findings(), (circuit,), notes)


def bike_light_with_base() -> Findings:
    """The same run against a base revision: the LED failure is new, the warning unchanged, one fixed."""
    led, sense_r, base_r, tj, ratio = _findings()
    led = dataclasses.replace(led, change="new", base_margin=0.0006)
    tj = dataclasses.replace(tj, change="unchanged", base_margin=-4.0)
    sense_r = dataclasses.replace(sense_r, change="unchanged", base_margin=0.012)
    fixed = Finding(SENSE_RATIO, "tail_light", None, (outcome("cold_night", 0.42, 0.5, True, ""),),
                    "pass", change="fixed", base_margin=-0.02)
    base = bike_light()
    return dataclasses.replace(base, findings=(led, sense_r, base_r, tj, ratio), fixed=(fixed,), base_ref="main")


def hostile() -> Findings:
    """Names and texts that try to break tables and inject markup."""
    evil = "x|y</td><script>alert(1)</script>\n# head [link](http://example.invalid) `code` *em* @someone\x01"
    limit = Limit(id="evil|id<script>", about=evil, check="current(P) <= 1 mA", source=LIMITS,
                  location=Location(LIMITS, 2, 1))
    bad = Finding(limit, "circ|uit\n<b>", "P|1\r\n<i>", (outcome("case|<s>\nx", 0.002, 0.001, True, "A"),), "fail")
    circuit = CircuitResult("circ|uit\n<b>", evil, CIRCUIT, operating_points())
    return Findings((bad,), (circuit,), base_ref="main<script>|x\ny")
