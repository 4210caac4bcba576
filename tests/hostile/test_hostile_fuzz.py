"""A seeded mutation fuzzer over the example repository (issue 9, item 7).

Each trial copies examples/weather_station, mutates its files the way a hostile or careless
pull request might (lines deleted, duplicated or swapped, characters flipped, hostile tokens
inserted), runs `nodegate check --out` on it through `checker.cli.main` as the CI action
does, and demands what CI
relies on: exit 0, 1 or 2, never a traceback, no printed line that is a CI workflow command,
and nothing written anywhere but the report folder. The analysis is nominal, so that 200
trials stay well under a minute; `benchmarks/fuzz_hostile.py` runs more and prints counts.
"""

from __future__ import annotations

import contextlib
import hashlib
import io
import random
import shutil
from collections import Counter
from dataclasses import dataclass
from pathlib import Path

from checker.cli import main

EXAMPLE = Path(__file__).resolve().parents[2] / "examples" / "weather_station"
REPORTS = Path("build") / "nodegate"  # the example's report folder, relative to its root
TRIALS = 200
SEED = 9

HOSTILE = (
    "::", "::warning file=README.md,line=1::x", "\x00", "\x07", "\x1b[2J", "\ufeff", "\u202e", "\ud800",
    "1e308", "1e-320", "-1e308", "9" * 400, "0", "nan", "inf", "../", "../../../../../../etc/passwd", "/etc/passwd",
    "(" * 40, ")" * 40, "[" * 200, "{" * 200, "- " * 100, "&a", "*a", "!!python/object/apply:os.system",
    "%", "µ", "Ω", "\t", "\r", "\n", ":", ",", "#", '"', "'", "block b () {", "}", "case x", "use \"../x\"",
)


def mutate(text: str, rng: random.Random) -> str:
    """`text` with one mutation chosen by `rng`."""
    lines = text.split("\n")
    choice = rng.randrange(6)
    if choice == 0 and len(lines) > 1:
        del lines[rng.randrange(len(lines))]
    elif choice == 1:
        index = rng.randrange(len(lines))
        lines[index:index] = [lines[index]] * rng.choice((1, 2, 50))
    elif choice == 2 and len(lines) > 1:
        a, b = rng.randrange(len(lines)), rng.randrange(len(lines))
        lines[a], lines[b] = lines[b], lines[a]
    elif choice == 3 and text:
        at = rng.randrange(len(text))
        return text[:at] + chr(rng.choice((rng.randrange(32, 127), rng.randrange(0, 0x3000)))) + text[at + 1:]
    else:
        at = rng.randrange(len(text) + 1)
        return text[:at] + rng.choice(HOSTILE) + text[at:]
    return "\n".join(lines)


def prepare(root: Path) -> Path:
    """A copy of the example under `root`, set to nominal analysis; returns its folder."""
    repo = root / "repo"
    shutil.copytree(EXAMPLE, repo)
    config = repo / "nodegate.yaml"
    config.write_text(config.read_text(encoding="utf-8").replace("tolerances: worst-case", "tolerances: nominal"),
                      encoding="utf-8")
    return repo


def inputs(repo: Path) -> list[Path]:
    return sorted(p for p in repo.rglob("*") if p.is_file() and p.suffix in (".yaml", ".circuit"))


def snapshot(root: Path, reports: Path) -> dict[str, str]:
    """Every file and folder under `root` outside `reports` (and the folders that hold it), with a
    digest of its content."""
    found = {}
    for path in root.rglob("*"):
        if path == reports or reports in path.parents or path in reports.parents:
            continue
        digest = "dir" if path.is_dir() and not path.is_symlink() else hashlib.sha256(
            path.read_bytes() if path.is_file() else str(path.readlink()).encode()).hexdigest()
        found[str(path.relative_to(root))] = digest
    return found


@dataclass
class Trial:
    code: int
    problems: list[str]


def trial(root: Path, pristine: dict[Path, bytes], rng: random.Random) -> Trial:
    """Restore the copy, mutate one to three of its files, check it, and list what went wrong."""
    repo = root / "repo"
    shutil.rmtree(repo / REPORTS, ignore_errors=True)
    for path, data in pristine.items():
        path.write_bytes(data)
    for _ in range(rng.randint(1, 3)):
        path = rng.choice(list(pristine))
        path.write_text(mutate(path.read_bytes().decode("utf-8", "surrogatepass"), rng),
                        encoding="utf-8", errors="surrogatepass")
    before = snapshot(root, repo / REPORTS)
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(["check", str(repo), "--format", "json,md", "--out", str(repo / REPORTS)])
    printed = out.getvalue() + err.getvalue()
    problems = []
    if code not in (0, 1, 2):
        problems.append(f"exit {code}: {printed[-500:]}")
    if "Traceback" in printed:
        problems.append("a traceback was printed")
    if any(line.strip().startswith("::") for line in printed.splitlines()):
        problems.append("a printed line is a CI workflow command")
    if snapshot(root, repo / REPORTS) != before:
        problems.append("a file outside the report folder changed")
    return Trial(code, problems)


def campaign(root: Path, trials: int, seed: int) -> tuple[Counter, list[str]]:
    """Exit codes counted over `trials` seeded trials in `root`, and each problem met (with its trial)."""
    repo = prepare(root)
    pristine = {path: path.read_bytes() for path in inputs(repo)}
    rng = random.Random(seed)
    codes: Counter = Counter()
    problems = []
    for number in range(trials):
        result = trial(root, pristine, rng)
        codes[result.code] += 1
        problems += [f"trial {number}: {problem}" for problem in result.problems]
    return codes, problems


def test_hostile_fuzz_example_repository(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    codes, problems = campaign(tmp_path, TRIALS, SEED)
    assert problems == []
    assert sum(codes.values()) == TRIALS
