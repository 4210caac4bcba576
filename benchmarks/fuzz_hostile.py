"""The hostile-input fuzzer of tests/hostile/test_hostile_fuzz.py, run longer; counts printed, nothing asserted.

Run from the repository root: `python benchmarks/fuzz_hostile.py [TRIALS] [SEED]` (default 2000
trials, seed 9). It prints how many trials ended in each exit code, how long they took, and
every problem met (an exit 3, a traceback, a printed CI workflow command, a write outside
the report folder), each with its trial number so that it can be replayed with the same seed.
"""

from __future__ import annotations

import os
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path[:0] = [str(ROOT), str(ROOT / "tests" / "hostile")]

from test_hostile_fuzz import SEED, campaign  # noqa: E402


def main(argv: list[str]) -> None:
    trials = int(argv[0]) if argv else 2000
    seed = int(argv[1]) if len(argv) > 1 else SEED
    with tempfile.TemporaryDirectory(prefix="nodegate-fuzz-") as folder:
        os.chdir(folder)
        start = time.perf_counter()
        codes, problems = campaign(Path(folder), trials, seed)
        elapsed = time.perf_counter() - start
    for code in sorted(codes):
        print(f"exit {code}: {codes[code]} trials")
    print(f"{trials} trials in {elapsed:.1f} s ({trials / elapsed:.1f} per second), seed {seed}")
    print(f"problems: {len(problems)}")
    for problem in problems:
        print(f"  {problem[:300]}")


if __name__ == "__main__":
    main(sys.argv[1:])
