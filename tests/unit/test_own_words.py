"""Solver settings, convergence aids and model parameters carry our own names: none of the
all-capital option names of an established family of circuit solvers, nor a popular code
formatter's phrase, appears in the docs, the package or the README (as whole words, any case)."""

from __future__ import annotations

import re
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]
BORROWED = re.compile(r"\b(gmin|abstol|reltol|xti)\b|would reformat", re.IGNORECASE)


def test_no_borrowed_names_in_docs_package_or_readme():
    files = [ROOT / "README.md", *(ROOT / "docs").rglob("*.md"), *(ROOT / "checker").rglob("*")]
    found = [f"{path.relative_to(ROOT)}:{number}: {match.group(0)}"
             for path in files if path.is_file() and path.suffix in {".py", ".md", ".lark", ".j2", ".yaml", ".yml"}
             for number, line in enumerate(path.read_text(encoding="utf-8").splitlines(), 1)
             for match in BORROWED.finditer(line)]
    assert not found, found
