"""Run the fuzz suite deeply and count the inputs each reader survived.

    python tools/fuzz.py                  # LAMPCAST_FUZZ=long: 20 000 inputs per fuzz test
    python tools/fuzz.py --examples 5000  # another number of inputs per fuzz test
    python tools/fuzz.py -k lm63          # only the tests whose name matches (pytest -k)

It runs ``pytest tests/test_fuzz_*.py`` with hypothesis's statistics, then prints one line per
fuzz test with the inputs generated and run (passing plus failing, invalid draws not counted)
and the total. The CI run of the same tests uses a small budget (tests/fuzzing.py).
"""

from __future__ import annotations

import argparse
import os
import re
import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
_TEST = re.compile(r"^(tests/test_fuzz_\S+::\S+):\s*$")
_PHASE = re.compile(r"^\s*- during (\w+) phase")
_COUNTS = re.compile(r"(\d+) passing, (\d+) failing, and (\d+) invalid test cases")


def count_inputs(statistics: str) -> dict[str, int]:
    """Inputs run per test (every phase: generate, reuse, shrink, explain) from pytest's
    ``--hypothesis-show-statistics`` text."""
    counts: dict[str, int] = {}
    test = None
    for line in statistics.splitlines():
        m = _TEST.match(line.strip())
        if m:
            test = m.group(1)
            counts.setdefault(test, 0)
            continue
        m = _COUNTS.search(line)
        if m and test is not None:
            counts[test] += int(m.group(1)) + int(m.group(2))
    return counts


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--examples", type=int, default=None, help="inputs per fuzz test (default: the long budget)")
    parser.add_argument("-k", default=None, help="only fuzz tests matching this pytest expression")
    args = parser.parse_args(argv)
    env = dict(os.environ, LAMPCAST_FUZZ="long")
    if args.examples:
        env["LAMPCAST_FUZZ_EXAMPLES"] = str(args.examples)
    tests = sorted(str(p.relative_to(ROOT)) for p in (ROOT / "tests").glob("test_fuzz_*.py"))
    cmd = [sys.executable, "-m", "pytest", "-q", "-p", "no:cacheprovider", "--hypothesis-show-statistics", *tests]
    if args.k:
        cmd += ["-k", args.k]
    run = subprocess.run(cmd, cwd=ROOT, env=env, capture_output=True, text=True)
    counts = count_inputs(run.stdout)
    width = max((len(t) for t in counts), default=10)
    for test, n in sorted(counts.items()):
        print(f"{test:<{width}}  {n:>9,} inputs")
    print(f"{'total':<{width}}  {sum(counts.values()):>9,} inputs")
    print(run.stdout.strip().splitlines()[-1] if run.stdout.strip() else run.stderr[-2000:])
    if run.returncode:
        print(run.stdout[-20000:], file=sys.stderr)
    return run.returncode


if __name__ == "__main__":
    raise SystemExit(main())
