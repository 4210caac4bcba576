"""Cases: one Netlist per `case`, the declared parts with the case's overrides applied.

`NAME = VALUE` sets a part's primary value or flag word, `NAME.prop = VALUE` a
property (hierarchical: `DIV.RA.tol`), `NAME = absent` removes a part (or every
part of a block instance), `ambient = T` the temperature (default 25 degC), and
`NET starts at V` picks, among several stable states, the one nearest that voltage.
"""

from __future__ import annotations

from dataclasses import replace

from checker.design import Netlist, Part
from checker.errors import DesignError, UnitError, did_you_mean
from checker.kinds import KINDS, check_range
from checker.language.expressions import Scope, dim_text, evaluate
from checker.language.parts import check_complete, primary_value, property_value
from checker.language.syntax import Case, Override, declared
from checker.units import KELVIN, VOLT, ZERO_CELSIUS

DEFAULT_AMBIENT = ZERO_CELSIUS + 25.0  # K: the reference temperature of docs/models.md
MAX_CASES = 1000


def netlists(circuit: str, ground: str, parts: list[Part], cases: list[Case], scope: Scope,
             instances: set[str]) -> tuple[Netlist, ...]:
    """One Netlist per case in declaration order, or one named `default`."""
    if not cases:
        return (Netlist(circuit, "default", DEFAULT_AMBIENT, ground, tuple(parts)),)
    if len(cases) > MAX_CASES:
        raise DesignError(f"more than {MAX_CASES} cases", cases[MAX_CASES].location)
    seen: dict[str, int] = {}
    result = []
    for case in cases:
        if case.name.text in seen:
            raise DesignError(f"case `{case.name.text}` is already declared at line {seen[case.name.text]}",
                              case.name.location)
        declared(case.name, "case")
        seen[case.name.text] = case.name.location.line
        result.append(_Case(circuit, ground, parts, scope, instances).apply(case))
    return tuple(result)


class _Case:
    """The parts of one case while its overrides are applied, in declaration order."""

    def __init__(self, circuit: str, ground: str, parts: list[Part], scope: Scope, instances: set[str]):
        self.circuit, self.ground, self.scope, self.instances = circuit, ground, scope, instances
        self.parts: dict[str, Part | None] = {part.name: part for part in parts}
        self.ambient = DEFAULT_AMBIENT

    def apply(self, case: Case) -> Netlist:
        done: set[str] = set()
        starts: list[Override] = []
        for override in case.overrides:
            key = ".".join(n.text for n in override.target) or "ambient"
            key += " starts" if override.start else ""
            if key in done:
                raise DesignError(f"`{key}` is set twice in case `{case.name.text}`", override.location)
            done.add(key)
            if override.start:
                starts.append(override)
            else:
                self.override(override)
        parts = tuple(p for p in self.parts.values() if p is not None)
        return Netlist(self.circuit, case.name.text, self.ambient, self.ground, parts, case.name.location,
                       tuple(self.start(override, parts) for override in starts))

    def start(self, override: Override, parts: tuple[Part, ...]) -> tuple[str, float]:
        """(net, volts) of `NET starts at VALUE`: a net of this case, and a voltage."""
        name = override.target[0]
        nets = {net for part in parts for net in part.nets} - {self.ground}
        if len(override.target) > 1 or name.text not in nets:
            raise DesignError(f"no net `{'.'.join(n.text for n in override.target)}` in this case to start at a "
                              "voltage", name.location, did_you_mean(name.text, sorted(nets)))
        value = evaluate(override.value, self.scope)
        if value.dim != VOLT or value.absolute:
            raise UnitError(f"a net starts at a voltage; got {dim_text(value)}", override.value.location)
        return name.text, value.value

    def override(self, override: Override) -> None:
        if not override.target:
            self.ambient = self.temperature(override)
            return
        path = ".".join(n.text for n in override.target)
        owner = path.rpartition(".")[0]  # the part whose property `path` names, if it is one
        if override.absent:
            self.remove(path, override)
        elif path in self.parts:
            self.set_value(path, override)
        elif owner in self.parts:
            self.set_property(owner, override)
        else:
            raise self.unknown(path, override)

    def part(self, name: str, override: Override) -> Part:
        part = self.parts[name]
        if part is None:
            raise DesignError(f"`{name}` is absent in this case", override.location)
        return part

    def temperature(self, override: Override) -> float:
        value = evaluate(override.value, self.scope)
        if value.dim != KELVIN:
            raise UnitError(f"ambient is a temperature (degC or K); got {dim_text(value)}", override.value.location)
        if value.value <= 0:
            raise DesignError("ambient is below absolute zero", override.value.location)
        return value.value

    def remove(self, path: str, override: Override) -> None:
        """Not fitted in this case: a part, or every part of a block instance (which may hold none)."""
        if path in self.parts:
            self.parts[path] = None
        elif path in self.instances:
            for name in self.parts:
                if name.startswith(path + "."):
                    self.parts[name] = None
        else:
            raise self.unknown(path, override)

    def set_value(self, name: str, override: Override) -> None:
        part = self.part(name, override)
        kind = KINDS[part.kind]
        if override.at is not None:
            raise DesignError("a test condition (`at`) belongs to a property, as in `D1.vf = 2 V at 10 mA`",
                              override.at.location)
        word = override.value.bare_word()
        if word is not None and word in kind.flags:
            self.parts[name] = replace(part, flags=frozenset({word}))
            return
        value, unit = primary_value(kind, override.value, self.scope)
        if unit != part.value_unit:
            raise UnitError(f"{kind.name} `{name}` is declared in {part.value_unit}; a case sets its value in the "
                            f"same unit, not {unit}", override.value.location,
                            ("a case cannot turn one part into another (a voltage source into a current source)",))
        self.parts[name] = replace(part, value=value, value_unit=unit)

    def set_property(self, name: str, override: Override) -> None:
        part = self.part(name, override)
        kind, key = KINDS[part.kind], override.target[-1]
        if key.text == "tag":
            raise DesignError("tags are fixed by the part; a case cannot change them", key.location)
        value, condition = property_value(kind, key, override.value, override.at, self.scope)
        check_range(kind, key.text, value, override.value.location)
        at = {k: v for k, v in part.at.items() if k != key.text}
        if condition is not None:
            at[key.text] = condition
        updated = replace(part, props={**part.props, key.text: value}, at=at)
        check_complete(kind, updated, override.location)
        self.parts[name] = updated

    def unknown(self, path: str, override: Override) -> DesignError:
        location = override.target[0].location
        instance = next((p for p in (path, path.rsplit(".", 1)[0]) if p in self.instances), None)
        if instance is not None:
            return DesignError(f"`{instance}` is a block instance; a case sets the parts inside it "
                               f"(`{instance}.PART = VALUE`) or removes it (`{instance} = absent`)", location)
        return DesignError(f"no part `{path}`", location, did_you_mean(path, self.parts))
