"""Points of the tolerance box in words a shell accepts: `R1=+5%,U1.vout=-2.5%`.

Reports print `nodegate solve FILE --case C --at POINT` beside a failing worst case;
`solve --at` parses the same text back, so every reported point can be reproduced.
A value is named as in `Tolerance.name`: the part for its primary value, `PART.vout`
for a regulator's output voltage. Deviations are percentages of the declared value.
"""

from __future__ import annotations

import re
import shlex
from typing import Mapping, Sequence

from checker.errors import DesignError

DIGITS = 10  # significant digits of a deviation: enough to reproduce a margin to far below 1e-6
_ENTRY = re.compile(r"\s*([A-Za-z_][\w.]*)\s*=\s*([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*%\s*")


def format_deviation(deviation: float) -> str:
    """`+5%`, `-2.5%`, `+0%`: a fraction as a signed percentage, ASCII only (it goes into commands)."""
    text = f"{deviation * 100:.{DIGITS}g}"
    if text in ("0", "-0"):
        return "+0%"
    return (text if text.startswith("-") else "+" + text) + "%"


def format_point(point: Sequence[tuple[str, float]]) -> str:
    """Every (name, deviation) joined: `R1=+5%,U1.vout=-5%`; values at 0 are left out."""
    return ",".join(f"{name}={format_deviation(d)}" for name, d in point if d != 0.0)


def parse_point(text: str) -> dict[str, float]:
    """`R1=+5%,U1.vout=-5%` -> {"R1": 0.05, "U1.vout": -0.05}; DesignError naming the bad entry."""
    found: dict[str, float] = {}
    for entry in text.split(","):
        if not entry.strip():
            continue
        match = _ENTRY.fullmatch(entry)
        if match is None:
            raise DesignError(f"`--at` entry `{entry.strip()}` is not NAME=±X%", None,
                              ("write for example `--at \"R1=+5%,U1.vout=-2%\"`",))
        name, percent = match.group(1), float(match.group(2))
        if name in found:
            raise DesignError(f"`--at` names `{name}` twice")
        if not percent > -100.0 or percent > 1e6:
            raise DesignError(f"`--at` moves `{name}` by {percent:g} %: a deviation must be above −100 %")
        found[name] = percent / 100.0
    return found


def reproduce_command(path: str, case: str, point: Sequence[tuple[str, float]]) -> str:
    """The command that solves `path` in `case` at `point` (quoted for a POSIX shell)."""
    words = ["nodegate", "solve", path, "--case", case]
    text = format_point(point)
    if text:
        words += ["--at", text]
    return " ".join(shlex.quote(word) for word in words)
