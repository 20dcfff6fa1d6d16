"""The summary of a run (summary.json) read as figures: which entries are numbers, which are the
scalars a table or a plot can show, and whether two summaries agree.

Comparison: a number matches when ``|a - b| <= rtol * max(|a|, |b|)`` (default rtol 1e-9). Figures
that are themselves relative round-off (``*_error``, ``*_residual``: an energy balance of 1e-16 may
read 3e-16 on another machine) match when ``|a - b| <= rtol``. Integers, strings and booleans must be
equal, lists element by element (warnings as texts), and a figure present in one summary only is a
difference.
"""
from __future__ import annotations

import json
import math
from dataclasses import dataclass
from typing import Any, Mapping, Sequence

import numpy as np

DEFAULT_RTOL = 1e-9
ROUND_OFF_SUFFIXES = ("_error", "_residual")
# Top-level summary entries that are not figures of a run (texts and nested tables).
NOT_SCALARS = ("mode", "title", "safety", "warnings", "steps", "media")


def is_number(v: Any) -> bool:
    """A number (Python or numpy), not a bool."""
    return isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, (bool, np.bool_))


def scalar_keys(summaries: Sequence[Mapping[str, Any] | None]) -> list[str]:
    """The scalar (number) entries of the summaries, in the order they first appear."""
    keys: list[str] = []
    for s in summaries:
        for k, v in (s or {}).items():
            if k not in NOT_SCALARS and k not in keys and is_number(v):
                keys.append(k)
    return keys


@dataclass
class Difference:
    """One figure that does not match: its path in summary.json, the stored and the new value."""

    path: str
    stored: Any
    new: Any

    def text(self) -> str:
        if isinstance(self.stored, float) and isinstance(self.new, float) and self.stored != 0:
            return f"{self.path}: stored {self.stored!r}, now {self.new!r} (relative {self.new / self.stored - 1:+.3e})"
        return f"{self.path}: stored {_short(self.stored)}, now {_short(self.new)}"


def _short(value: Any) -> str:
    text = json.dumps(value, default=str) if not isinstance(value, float) else repr(value)
    return text if len(text) <= 120 else text[:117] + "..."


def _flatten(value: Any, path: str, out: dict[str, Any]) -> None:
    if isinstance(value, Mapping):
        for k, v in value.items():
            _flatten(v, f"{path}.{k}" if path else str(k), out)
    elif isinstance(value, list) and not all(isinstance(v, str) for v in value):
        for i, v in enumerate(value):
            _flatten(v, f"{path}[{i}]", out)
    else:
        out[path] = value


def _matches(path: str, a: Any, b: Any, rtol: float) -> bool:
    if isinstance(a, float) or isinstance(b, float):
        if not (is_number(a) and is_number(b)):
            return False
        a, b = float(a), float(b)
        if math.isnan(a) or math.isnan(b):
            return math.isnan(a) and math.isnan(b)
        if a == b:
            return True
        name = path.rsplit(".", 1)[-1]
        if name.endswith(ROUND_OFF_SUFFIXES):
            return abs(a - b) <= rtol
        return abs(a - b) <= rtol * max(abs(a), abs(b))
    return type(a) is type(b) and a == b


def plain(summary: Mapping[str, Any]) -> dict[str, Any]:
    """The summary as summary.json holds it (numpy numbers as Python numbers)."""
    return json.loads(json.dumps(summary))


def compare_summaries(stored: Mapping[str, Any], new: Mapping[str, Any],
                      rtol: float = DEFAULT_RTOL) -> tuple[int, list[Difference]]:
    """Compare two summary.json dicts figure by figure; return (figures compared, differences)."""
    a: dict[str, Any] = {}
    b: dict[str, Any] = {}
    _flatten(stored, "", a)
    _flatten(new, "", b)
    differences = []
    for path in list(a) + [p for p in b if p not in a]:
        if path not in a or path not in b:
            differences.append(Difference(path, a.get(path, "(absent)"), b.get(path, "(absent)")))
        elif not _matches(path, a[path], b[path], rtol):
            differences.append(Difference(path, a[path], b[path]))
    return len(set(a) | set(b)), differences
