"""Text to lark tree: the grammar in `circuit.lark`, line continuation, syntax errors.

The grammar is loaded once (LALR, contextual lexer, positions kept; after the first run the
built tables come from `checker.larkcache`). Every lark error becomes a `CircuitSyntaxError`
at the offending token, in plain words.
"""

from __future__ import annotations

import re
import threading
from importlib import resources

from lark import Token, Tree
from lark.exceptions import UnexpectedCharacters, UnexpectedEOF, UnexpectedInput, UnexpectedToken
from lark.lexer import PatternStr

from checker.errors import CircuitSyntaxError, Location
from checker.larkcache import cached_lark
from checker.language.source import Source

MAX_PARENTHESES = 32  # nesting depth of `( … )`; deeper is an error, never a crash

_STATE = threading.local()  # per-parse memory of the post-lexer, read when reporting errors


class _Continuation:
    """Drops line ends inside parentheses and after a trailing `,` (docs/language.md, "Lines, comments, strings") or `:`.

    It also remembers, for error messages, the blocks whose `{` is not yet closed (each as its
    `block` keyword and name) and the line a statement continues from, until that statement ends.
    """

    always_accept = ("_NL",)

    def process(self, stream):
        _STATE.open, _STATE.continued, _STATE.blocks = [], None, []
        previous = previous_token = heading = None
        for token in stream:
            if token.type == "LPAR":
                _STATE.open.append(token)
                if len(_STATE.open) > MAX_PARENTHESES:
                    raise CircuitSyntaxError(
                        f"parentheses nested more than {MAX_PARENTHESES} deep", _STATE.source.at(token))
            elif token.type == "RPAR" and _STATE.open:
                _STATE.open.pop()
            elif token.type == "_NL" and (_STATE.open or previous in ("COMMA", "COLON")):
                if not _STATE.open:
                    _STATE.continued = previous_token
                continue
            heading = _block_heading(heading, previous_token, token)
            previous, previous_token = token.type, token
            yield token
            if token.type == "_NL":  # the parser took the statement's end: its continuation is over
                _STATE.continued = None


def _block_heading(heading: tuple | None, previous: Token | None, token: Token) -> tuple | None:
    """Follows `block NAME (...) {` and `}` into _STATE.blocks; returns the heading being read."""
    if token.type == "BLOCK":
        return (token, None)
    if token.type == "NAME" and heading is not None and previous is heading[0]:
        return (heading[0], token)
    if token.type == "LBRACE" and heading is not None:
        _STATE.blocks.append(heading)
        return None
    if token.type == "RBRACE" and _STATE.blocks:
        _STATE.blocks.pop()
    return heading


_POSTLEX = _Continuation()
_GRAMMAR = resources.files("checker.language").joinpath("circuit.lark").read_text(encoding="utf-8")
_PARSER = cached_lark(_GRAMMAR, "circuit", parser="lalr", lexer="contextual", propagate_positions=True,
                      maybe_placeholders=True, postlex=_POSTLEX)

# Common mistakes, recognised by the parser state they stop in (lark's match_examples).
# That state includes the depth of the parser's stack, which differs for the first
# and later items of a list and inside a block, so each mistake is listed in those
# positions and tried after a first statement, first in a block, and later in one.
_MISTAKES = {
    "a two-terminal part is written `KIND NAME from NET to NET`; "
    "a part with pins `KIND NAME (PIN: NET, ...)`": [
        "resistor R1 a to b\n", "resistor R1 a b\n"],
    "expected `to` after the first net: `KIND NAME from NET to NET`": [
        "resistor R1 from a b\n", "resistor R1 from a : 1 kohm\n"],
    "a property is written `KEY = VALUE`, for example `tol = 5%`": [
        "resistor R1 from a to b : tol 5%\n", "resistor R1 from a to b : 1 kohm, tol 5%\n",
        "resistor R1 from a to b : 1 kohm, rating = 1 W, tol 5%\n",
        "case c : VBAT 3 V\n", "case c : VBAT = 3 V, MCU 1 mA\n", "case c : VBAT = 3 V, R = 1 ohm, MCU 1 mA\n"],
    "properties follow a `:` after the nets, for example `resistor R1 from a to b : 10 kohm`": [
        "resistor R1 from a to b 10 kohm\n", "regulator U (in: a, out: b, gnd: c) vout = 3 V\n"],
    "a unit is written right after its number, prefix and unit together: `10 kohm`, `4.7 uF`": [
        "let x = 10 k ohm\n"],
    "a pin is written `PIN: NET`": [
        "bjt Q1 (c b, b: x, e: y)\n", "bjt Q1 (c: a, b x, e: y)\n", "bjt Q1 (c: a, b: x, e y)\n",
        "bjt Q1 (c = a)\n"],
    "a block's `{` ends its line and its `}` stands on a line of its own": [
        "block b (p) { resistor R from p to q : 1 ohm\n", "block b (p) {}\n"],
}
_CONTEXTS = ("circuit x\n", "circuit x\nblock b () {\n", "circuit x\nblock b () {\nlet y = 1\n")
_EXAMPLES = {label: [context + text for text in texts for context in _CONTEXTS]
             for label, texts in _MISTAKES.items()}

_WORDS = {"NAME": "a name", "NUMBER": "a number", "UNIT": "a unit", "STRING": "a quoted string",
          "_NL": "the end of the line", "$END": "the end of the file", "_FROM": "`from`", "_TO": "`to`"}


def parse_tree(source: Source) -> Tree:
    """The parse tree of `source.text`; CircuitSyntaxError for anything not in the grammar."""
    _STATE.source = source
    try:
        return _PARSER.parse(source.text + "\n")
    except UnexpectedInput as error:
        raise _syntax_error(error, source) from None


def _syntax_error(error: UnexpectedInput, source: Source) -> CircuitSyntaxError:
    open_parens, continued, blocks = list(_STATE.open), _STATE.continued, list(_STATE.blocks)
    location = _location(error, source)
    if open_parens and (_at_end(error) or location.line > open_parens[-1].line):
        return CircuitSyntaxError("this `(` is never closed", source.at(open_parens[-1]))
    if blocks and _at_end(error):
        return CircuitSyntaxError(f"{_block_text(blocks[-1])} is never closed: add `}}` on a line of its own "
                                  "after its last statement", source.at(blocks[-1][0]))
    if isinstance(error, UnexpectedCharacters):
        return CircuitSyntaxError(_character_message(error), location)
    hint = _zero_net(error, source, open_parens) or _match_example(error)
    message = hint or _token_message(error)
    notes = ()
    if continued is not None and location.line > continued.line:
        notes = (f"line {continued.line} ends with `{continued.value}`, so the next line continues that statement",)
    if blocks and source.lines[location.line - 1].split(maxsplit=1)[:1] in _NOT_IN_BLOCKS:
        notes += (f"{_block_text(blocks[-1])} is still open here; a block holds only `let` and parts",)
    return CircuitSyntaxError(message, location, notes)


# Statements that cannot stand inside a block: met there, the block above was most likely left open.
_NOT_IN_BLOCKS = (["block"], ["case"], ["use"], ["circuit"], ["ground"])


def _block_text(heading: tuple) -> str:
    """`block `div` opened at line 4`, from the `block` keyword and its name (None if unread)."""
    keyword, name = heading
    return f"block `{name}` opened at line {keyword.line}" if name is not None else f"the block opened at line {keyword.line}"


def _at_end(error: UnexpectedInput) -> bool:
    token = getattr(error, "token", None)
    return isinstance(error, UnexpectedEOF) or (isinstance(token, Token) and token.type == "$END")


def _location(error: UnexpectedInput, source: Source) -> Location:
    if _at_end(error):
        return source.end()
    line, column = getattr(error, "line", -1), getattr(error, "column", -1)
    if not isinstance(line, int) or line < 1:
        return source.end()
    return source.at_position(line, column)


def _character_message(error: UnexpectedCharacters) -> str:
    char = error.char
    if char == '"':
        return "a string ends with `\"` on the same line"
    if char == "\r":
        return "unexpected carriage return; end lines with a newline"
    if char.isprintable() and not char.isspace():
        return f"unexpected character `{char}`"
    return f"unexpected character U+{ord(char):04X}"


# What stands just before a net: `from`, `to`, `ground`, or `PIN:` inside a part's parentheses.
_BEFORE_NET = re.compile(r"(?:\b(?:from|to|ground)|(?P<pin>[A-Za-z0-9_]\s*:))\s*$")


def _zero_net(error: UnexpectedInput, source: Source, open_parens: list) -> str | None:
    """The hint for `0` written where a net goes: SPICE habit, where node 0 is the ground,
    while here the reference net is any name declared by `ground`."""
    token = getattr(error, "token", None)
    if not isinstance(token, Token) or token.type != "NUMBER" or token.value.strip("0") not in ("", "."):
        return None
    before = _BEFORE_NET.search(source.lines[token.line - 1][:token.column - 1])
    if before is None or (before.group("pin") and not open_parens):
        return None
    return f"a net is a name, not `{token.value}`: name the reference net with `ground NAME` (say `ground gnd`) " \
           "and connect to that name"


def _match_example(error: UnexpectedInput) -> str | None:
    if not isinstance(error, UnexpectedToken):
        return None
    saved = (_STATE.open, _STATE.continued, _STATE.blocks)
    try:
        return error.match_examples(_PARSER.parse, _EXAMPLES, use_accepts=True)
    except Exception:  # a fixture that fails differently only means "no match"
        return None
    finally:
        _STATE.open, _STATE.continued, _STATE.blocks = saved


def _token_message(error: UnexpectedInput) -> str:
    token = getattr(error, "token", None)
    got = _describe_token(token) if isinstance(token, Token) else "the end of the file"
    expected = sorted({_describe_terminal(name) for name in getattr(error, "expected", ()) or ()})
    if not expected:
        return f"unexpected {got}"
    if len(expected) > 6:
        expected = expected[:6] + ["..."]
    return f"unexpected {got}; expected {', '.join(expected)}"


def _describe_token(token: Token) -> str:
    if token.type in ("_NL", "$END"):
        return _WORDS[token.type]
    return f"`{token.value}`"


def _describe_terminal(name: str) -> str:
    if name in _WORDS:
        return _WORDS[name]
    try:
        pattern = _PARSER.get_terminal(name).pattern
    except KeyError:
        return name.lower()
    return f"`{pattern.value}`" if isinstance(pattern, PatternStr) else name.lower()
