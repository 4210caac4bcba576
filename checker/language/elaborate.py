"""Statements to a Design: the header, lets, blocks flattened into parts, then the cases.

Lets are evaluated in order (each sees the earlier ones); parts and blocks may
appear in any order. A block instance `DIV (top: vbat, ...)` becomes parts
`DIV.RA`, ... with internal nets `DIV.<net>`; the ground net is global.
"""

from __future__ import annotations

import math
from collections import ChainMap

from checker.design import Design, Part
from checker.errors import DesignError, NodegateError, UnitError
from checker.kinds import KINDS, VALUE_UNITS, Kind, check_range
from checker.language.cases import netlists
from checker.language.expressions import Scope, dim_text, evaluate
from checker.language.parts import build_part, check_complete, check_form, ordered_nets, unknown_kind
from checker.language.quick import QuickPart, Spots
from checker.language.source import Source
from checker.language.syntax import (
    RESERVED, Block, Case, Circuit, Ground, Let, Name, PartStatement, Statement, declared,
)
from checker.units import SPELLINGS, Quantity, quantity

MAX_BLOCK_DEPTH = 16  # blocks inside blocks
MAX_PARTS = 2_000_000  # after every block is expanded (docs/language.md, "Limits of size")


def elaborate(found: list[Statement], top: Source) -> Design:
    """The Design described by the statements of a top-level file (libraries spliced in)."""
    circuit, ground = _header(found, top)
    lets = _lets([s for s in found if isinstance(s, Let)], {})
    blocks = _blocks([s for s in found if isinstance(s, Block)])
    expander = _Expander(blocks, ground.net.text, lets)
    parts = expander.expand([s for s in found if isinstance(s, (PartStatement, QuickPart))], "", {}, lets, ())
    cases = [s for s in found if isinstance(s, Case)]
    return Design(
        name=circuit.name.text, title=circuit.title or circuit.name.text, path=top.path,
        ground=ground.net.text, parts=tuple(parts),
        netlists=netlists(circuit.name.text, ground.net.text, parts, cases, lets, expander.instances),
        location=circuit.name.location)


def _header(found: list[Statement], top: Source) -> tuple[Circuit, Ground]:
    circuits = [s for s in found if isinstance(s, Circuit)]
    grounds = [s for s in found if isinstance(s, Ground)]
    if not circuits:
        raise DesignError("a circuit file starts with `circuit NAME`", top.at_position(1, 1))
    if found[0] is not circuits[0]:
        raise DesignError("`circuit` must be the first statement of the file", circuits[0].location)
    if len(circuits) > 1:
        raise DesignError("a file describes one circuit; `circuit` is given again", circuits[1].location)
    if not grounds:
        raise DesignError("no `ground NET` statement: name the 0 V reference net", circuits[0].location)
    if len(grounds) > 1:
        raise DesignError("`ground` is given again; a circuit has one ground net", grounds[1].location)
    declared(circuits[0].name, "circuit")
    declared(grounds[0].net, "net")
    return circuits[0], grounds[0]


def _lets(lets: list[Let], outer: Scope, given: dict[str, tuple[Quantity, Name]] | None = None) -> Scope:
    """Let values in order; `given` replaces defaults (an instance's properties), same dimension."""
    local: dict[str, Quantity] = {}
    scope = ChainMap(local, outer)
    for let in lets:
        name = declared(let.name, "value")
        if name in local:
            raise DesignError(f"`{name}` is already defined", let.name.location)
        local[name] = evaluate(let.value, scope)
        if given and name in given:
            local[name] = _same_dimension(local[name], *given[name])
    return scope


def _same_dimension(default: Quantity, value: Quantity, key: Name) -> Quantity:
    if (default.dim, default.absolute) != (value.dim, value.absolute):
        raise UnitError(f"`{key.text}` is {dim_text(default)} in the block; got {dim_text(value)}",
                        key.location)
    return value


def _blocks(blocks: list[Block]) -> dict[str, Block]:
    table: dict[str, Block] = {}
    for block in blocks:
        name = declared(block.name, "block")
        if name in table:
            raise DesignError(f"block `{name}` is already defined at line {table[name].name.location.line}",
                              block.name.location)
        ports: dict[str, Name] = {}
        for port in block.ports:
            if declared(port, "port") in ports:
                raise DesignError(f"port `{port.text}` is listed twice in block `{name}`", port.location)
            ports[port.text] = port
        table[name] = block
    return table


def _in_range(statement: PartStatement, kind: Kind, part: Part) -> Part:
    """`part`, once every property it was given lies in its kind's range (`checker.kinds`); the
    error points at the value written, as a case override's does (`checker.language.cases`)."""
    for prop in statement.props:
        if prop.key is not None and prop.key.text in part.props:
            check_range(kind, prop.key.text, part.props[prop.key.text], prop.value.location)
    return part


class _Expander:
    """Flattens part statements, expanding block instances recursively with prefixed names."""

    def __init__(self, blocks: dict[str, Block], ground: str, lets: Scope):
        self.blocks, self.ground, self.lets = blocks, ground, lets
        self.count = 0
        self.instances: set[str] = set()
        self.quantities: dict[tuple, Quantity | None] = {}  # the quick path's literals, each read once
        self.items: dict[tuple, tuple | None] = {}  # the quick path's item lists by kind, each read once
        self.strings: dict = {}  # one string per net name (one tuple per spots' keys, columns) however often written
        self.sizes: dict[str, int] = {}  # parts per instance of each block, once expanded

    def expand(self, found: list[PartStatement | QuickPart], prefix: str, ports: dict[str, str],
               scope: Scope, stack: tuple[str, ...]) -> list[Part]:
        names: dict[str, int] = {}  # part name -> the line declaring it
        parts: list[Part] = []
        for statement in found:
            if type(statement) is QuickPart:
                part = self.quick(statement, names, scope)
                if part is not None:
                    names[part.name] = statement.line
                    parts.append(part)
                    self.count += 1
                    if self.count > MAX_PARTS:
                        self.counted(statement.statement())
                    continue
                statement = statement.statement()  # the general path below says what is wrong
            name = declared(statement.name, "part")
            if name in names:
                raise DesignError(f"`{name}` is already declared at line {names[name]}",
                                  statement.name.location)
            names[name] = statement.name.location.line
            if statement.kind.text in self.blocks:
                parts.extend(self.instance(statement, prefix, ports, scope, stack))
            elif statement.kind.text in KINDS:
                kind = KINDS[statement.kind.text]
                check_form(statement, kind)
                written = ordered_nets(statement, kind.pins, f"a {kind.name}")
                pins = self.nets(written, prefix, ports)
                parts.append(_in_range(statement, kind, build_part(statement, kind, prefix + name, pins, scope,
                                                                   written)))
                self.counted(statement)
            else:
                raise unknown_kind(statement.kind, self.blocks)
        return parts

    def quick(self, line: QuickPart, names: dict[str, int], scope: Scope) -> Part | None:
        """The Part of a top-level quick line, built as `build_part` builds it; None for anything
        unusual or wrong, which the general path then handles (and reports) itself."""
        kind = KINDS.get(line.kind)
        if (kind is None or not kind.two_terminal or line.kind in self.blocks or line.name in RESERVED
                or line.name in names or line.net_from == line.net_to):
            return None
        nets = []
        for net in (line.net_from, line.net_to):
            if net != self.ground and net in RESERVED:
                return None
            nets.append(self.strings.setdefault(net, net))
        read = self.items.get((kind.name, line.items), ())
        if read == ():  # the same items on many lines (`100 ohm`) are read once
            read = self.items[kind.name, line.items] = self.read_items(line, kind, scope)
        if read is None:
            return None
        value, unit, flags, tags, props, at, keys, offsets = read
        start = line.columns[4]
        columns = self.shared((line.columns[2], line.columns[3], *(start + offset for offset in offsets)))
        location = line.at(line.columns[1])
        return Part(line.name, kind.name, (("from", nets[0]), ("to", nets[1])), value, unit, flags, dict(props),
                    dict(at), tags, location, Spots(location, keys, columns))

    def read_items(self, line: QuickPart, kind: Kind, scope: Scope) -> tuple | None:
        """What the items of a quick line give a part of `kind`: value, unit, flags, tags, properties,
        test conditions, the spots' keys and each value's offset in the items; None when unusual."""
        value = unit = None
        keys, offsets = ["from", "to"], []
        flags, tags, props, at = frozenset(), set(), {}, {}
        for index, item in enumerate(line.parsed_items()):
            key, word = item.group("key", "vref")
            if key is None:
                if word is not None and word in kind.flags:
                    if flags:
                        return None
                    flags = frozenset((word,))
                    continue
                if index or not kind.values:
                    return None
                number = self.literal(item, "v", scope)
                if number is None or number.dim not in kind.values or number.absolute:
                    return None
                value, unit = number.value, VALUE_UNITS[number.dim]
            elif key == "tag":
                if word is None or item.group("anum", "aref") != (None, None):
                    return None
                tags.add(word)
                continue
            else:
                spec = kind.prop(key)
                number = self.literal(item, "v", scope)
                if (key in props or spec is None or number is None or number.dim != spec.dim
                        or (number.absolute and not spec.temperature)):
                    return None
                if (item.group("anum", "aref") == (None, None)) != (spec.at is None):
                    return None
                if spec.at is not None:
                    condition = self.literal(item, "a", scope)
                    if condition is None or condition.dim != spec.at or condition.absolute:
                        return None
                    at[key] = condition.value
                if spec.allowed is not None and not spec.allowed(number.value):
                    return None
                props[key] = number.value
            keys.append("value" if key is None else key)
            offsets.append(item.start("vref" if word is not None else "vneg" if item.group("vneg") else "vnum"))
        probe = Part(line.name, kind.name, (), value, unit, flags, props, at)
        try:
            check_complete(kind, probe, None)
        except NodegateError:
            return None
        return value, unit, flags, frozenset(tags), props, at, self.shared(tuple(keys)), tuple(offsets)

    def shared(self, value: tuple) -> tuple:
        """One tuple for equal ones: parts of a large circuit repeat the same keys and columns."""
        return self.strings.setdefault(value, value)

    def literal(self, item, tag: str, scope: Scope) -> Quantity | None:
        """The value of a quick item's quantity or let name, as `evaluate` gives it; None if that fails."""
        name = item.group(tag + "ref")
        if name is not None:
            found = scope.get(name)
            return found if found is not None and math.isfinite(found.value) else None
        key = item.group(tag + "neg", tag + "num", tag + "unit")
        if key not in self.quantities:
            negative, number, symbol = key
            try:
                found = quantity(-float(number) if negative else float(number),
                                 "" if symbol is None else symbol.translate(SPELLINGS))
            except (ValueError, OverflowError):
                found = None
            self.quantities[key] = found if found is not None and math.isfinite(found.value) else None
        return self.quantities[key]

    def nets(self, names: tuple[Name, ...], prefix: str, ports: dict[str, str]) -> tuple[str, ...]:
        """Net names as seen from the top: a port's outer net, the global ground, or prefixed."""
        return tuple(ports.get(n.text) or (self.ground if n.text == self.ground else prefix + declared(n, "net"))
                     for n in names)

    def counted(self, statement: PartStatement) -> None:
        self.count += 1
        if self.count > MAX_PARTS:
            raise DesignError(f"more than {MAX_PARTS} parts once blocks are expanded", statement.name.location)

    def instance(self, statement: PartStatement, prefix: str, ports: dict[str, str], scope: Scope,
                 stack: tuple[str, ...]) -> list[Part]:
        """The parts of a block instance; the block's lets see its parameters and the file's lets."""
        block = self.blocks[statement.kind.text]
        if block.name.text in stack:
            chain = " -> ".join((*stack[stack.index(block.name.text):], block.name.text))
            raise DesignError(f"block `{block.name.text}` uses itself: {chain}", statement.kind.location)
        if len(stack) >= MAX_BLOCK_DEPTH:
            raise DesignError(f"blocks nested more than {MAX_BLOCK_DEPTH} deep", statement.kind.location)
        if statement.two_terminal:
            raise DesignError(f"a block instance is written `{block.name.text} NAME (PORT: NET, ...)`",
                              statement.kind.location)
        if self.count + self.size(block, stack) > MAX_PARTS:  # before any work: blocks multiply parts
            raise DesignError(f"more than {MAX_PARTS} parts once blocks are expanded", statement.name.location)
        port_names = tuple(p.text for p in block.ports)
        outer = self.nets(ordered_nets(statement, port_names, f"block `{block.name.text}`"), prefix, ports)
        given = self.parameters(statement, block, scope)
        path = prefix + statement.name.text
        self.instances.add(path)
        try:
            inner = _lets([s for s in block.body if isinstance(s, Let)], self.lets, given)
            body = [s for s in block.body if isinstance(s, PartStatement)]
            return self.expand(body, path + ".", dict(zip(port_names, outer)), inner,
                               (*stack, block.name.text))
        except NodegateError as error:
            raise type(error)(error.message, error.location,
                              (*error.notes, f"in `{path}` at {statement.name.location}")) from None

    def size(self, block: Block, stack: tuple[str, ...]) -> int:
        """The parts an instance of `block` holds once expanded; a cycle or a nesting too deep
        adds nothing here, as expanding reports it."""
        if block.name.text in self.sizes:
            return self.sizes[block.name.text]
        if block.name.text in stack or len(stack) > MAX_BLOCK_DEPTH:
            return 0
        total = 0
        for statement in block.body:
            if isinstance(statement, PartStatement):
                inner = self.blocks.get(statement.kind.text)
                total += 1 if inner is None else self.size(inner, (*stack, block.name.text))
        self.sizes[block.name.text] = total
        return total

    def parameters(self, statement: PartStatement, block: Block, scope: Scope) -> dict:
        """The instance's `KEY = VALUE` items, which set the block's let values."""
        names = [s.name.text for s in block.body if isinstance(s, Let)]
        given: dict[str, tuple[Quantity, Name]] = {}
        for prop in statement.props:
            if prop.key is None or prop.at is not None:
                raise DesignError("a block instance takes only `NAME = VALUE` items, setting the block's lets",
                                  prop.location)
            if prop.key.text not in names:
                raise DesignError(f"block `{block.name.text}` has no let `{prop.key.text}`", prop.key.location,
                                  (f"its lets: {', '.join(names) or 'none'}",))
            if prop.key.text in given:
                raise DesignError(f"`{prop.key.text}` is given twice", prop.key.location)
            given[prop.key.text] = (evaluate(prop.value, scope), prop.key)
        return given
