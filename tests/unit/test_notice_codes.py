"""The message codes: every code the package gives is catalogued, and the README's table lists them all."""
from __future__ import annotations

import re
from pathlib import Path

from ampmodel.notices import CODES

ROOT = Path(__file__).resolve().parents[2]


def test_every_code_given_in_the_package_is_catalogued():
    used = set()
    for path in (ROOT / "ampmodel").rglob("*.py"):
        used |= set(re.findall(r"""\b(?:warning|note)\(\s*["']([a-z0-9-]+)["']""", path.read_text(encoding="utf-8")))
    assert used, "no coded message found: the pattern is out of date"
    assert used <= set(CODES), used - set(CODES)
    unused = set(CODES) - used - {"other"}
    assert not unused, f"codes no message gives: {sorted(unused)}"


def test_the_readme_lists_every_code():
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    listed = re.findall(r"^\| `([a-z0-9-]+)` \|", text, flags=re.M)
    assert sorted(listed) == sorted(CODES)
