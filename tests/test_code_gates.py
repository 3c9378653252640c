"""Code gates that CI enforces with the project's own tools: lint, complexity, module size.

Each failure lists every offender with its place, so the fix is obvious.
"""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "walkcomfort"
MAX_MODULE_LINES = 600
WORST_GRADE = "D"  # radon's grades: A (simplest) ... F; E and F fail


def test_ruff_finds_nothing():
    res = subprocess.run([sys.executable, "-m", "ruff", "check", "--no-cache", "--output-format", "concise",
                          "walkcomfort", "tests", "benchmarks"], cwd=ROOT, capture_output=True, text=True)
    assert res.returncode == 0, res.stdout + res.stderr


def test_no_function_worse_than_grade_d():
    from radon.complexity import cc_rank, cc_visit

    worse = []
    for path in sorted(PACKAGE.rglob("*.py")):
        for block in cc_visit(path.read_text(encoding="utf-8")):
            grade = cc_rank(block.complexity)
            if grade > WORST_GRADE:
                worse.append(f"{path.relative_to(ROOT)}:{block.lineno} {block.name} {grade} ({block.complexity})")
    assert not worse, "functions above grade D:\n" + "\n".join(worse)


def test_modules_under_600_lines():
    long = [f"{p.relative_to(ROOT)} {n}" for p in sorted(PACKAGE.rglob("*.py"))
            if (n := len(p.read_text(encoding="utf-8").splitlines())) > MAX_MODULE_LINES]
    assert not long, "modules over 600 lines:\n" + "\n".join(long)
