"""The code's habits, checked as tests so that the one test command (README, CI) checks them too:
ruff's pyflakes, import-order and bugbear rules (configured in pyproject.toml) on the package and the
tests, and function lengths."""
from __future__ import annotations

import ast
import importlib.util
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[2]
LONGEST = 80          # lines of one function, docstring included
FUSED = "fused hot kernel"


@pytest.mark.skipif(importlib.util.find_spec("ruff") is None, reason="ruff comes with the test extras")
def test_ruff_is_clean():
    proc = subprocess.run([sys.executable, "-m", "ruff", "check", "--no-cache", "ampmodel", "tests"], cwd=ROOT,
                          capture_output=True, text=True, timeout=120)
    assert proc.returncode == 0, proc.stdout + proc.stderr


def long_functions(limit: int = LONGEST) -> list[str]:
    """Functions of the package longer than ``limit`` lines, except the fused hot kernels (whose
    docstring says so, and why)."""
    found = []
    for path in sorted((ROOT / "ampmodel").rglob("*.py")):
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, (ast.FunctionDef, ast.AsyncFunctionDef)):
                lines = node.end_lineno - node.lineno + 1
                if lines > limit and FUSED not in (ast.get_docstring(node) or ""):
                    found.append(f"{path.relative_to(ROOT)}:{node.lineno} {node.name} ({lines} lines)")
    return found


def test_no_long_functions():
    """A function past ~80 lines does several things: split it behind the same signature."""
    assert not long_functions(), "\n".join(long_functions())


def test_the_length_check_sees_a_long_function():
    assert long_functions(limit=20)
