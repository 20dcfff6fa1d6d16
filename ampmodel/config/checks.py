"""What every config check shares: :class:`Problems` (the collected problem lines), :func:`show` (a
value as it reads in TOML), :func:`did_you_mean`, :func:`check_value` (type and range of one value)
and :func:`check_table` (one table against its schema). What a key is (:class:`Key`) is in
``keys.py``; the tables themselves are in ``schema.py``.
"""
from __future__ import annotations

import dataclasses
import datetime
import difflib
import json
import math
import re
from typing import Any, Callable, Iterable, Mapping, Sequence

from ampmodel.config.keys import ANY, Key

PLAUSIBLE_NOTE = "; a plausible range: a value outside it is usually a slip of unit"
NO_VALUE = object()
"""Marks a problem that has no value to show (a missing key)."""


# ----------------------------------------------------------------------------------------------
# Helpers shared by every problem message
# ----------------------------------------------------------------------------------------------

def show(value: Any, limit: int = 70, depth: int = 0) -> str:
    """A value as it reads in a TOML file, shortened to about ``limit`` characters (nested arrays and
    tables beyond three levels shown as ``...``; an integer too long to print by its digit count)."""
    if depth > 3 and isinstance(value, (dict, list)):
        return "..."
    if isinstance(value, int) and not isinstance(value, bool) and value.bit_length() > 200:
        return f"an integer of about {int(value.bit_length() * 0.30103) + 1} digits"
    if isinstance(value, bool):
        out = "true" if value else "false"
    elif isinstance(value, str):
        out = json.dumps(value, ensure_ascii=False)
    elif isinstance(value, float):
        out = "nan" if math.isnan(value) else ("inf" if value > 0 else "-inf") if math.isinf(value) else repr(value)
    elif isinstance(value, int):
        out = str(value)
    elif isinstance(value, dict):
        items = [f"{show_key(k)} = {show(v, 20, depth + 1)}" for k, v in list(value.items())[:4]]
        out = "{" + ", ".join(items) + (", ...}" if len(value) > 4 else "}")
    elif isinstance(value, list):
        out = "[" + ", ".join(show(v, 20, depth + 1) for v in value[:5]) + (", ...]" if len(value) > 5 else "]")
    elif value is None:
        out = "nothing"
    else:
        out = str(value)
    return out if len(out) <= limit else out[: limit - 3] + "..."


def type_name(value: Any) -> str:
    """'a string', 'an integer', ... for the problem messages."""
    if isinstance(value, bool):
        return "a boolean"
    if isinstance(value, int):
        return "an integer"
    if isinstance(value, float):
        return "a number"
    if isinstance(value, str):
        return "a string"
    if isinstance(value, dict):
        return "a table"
    if isinstance(value, list):
        return "an array"
    if isinstance(value, (datetime.date, datetime.time)):
        return "a date/time"
    if value is None:
        return "nothing"
    return f"a {type(value).__name__}"


def quoted_list(names: Iterable[Any]) -> str:
    """"'a', 'b' or 'c'"."""
    names = [f"'{n}'" for n in names]
    if len(names) <= 1:
        return "".join(names)
    return ", ".join(names[:-1]) + " or " + names[-1]


def close_matches(word: Any, choices: Iterable[Any], n: int = 3) -> list[str]:
    """The choices closest to ``word`` (case-insensitive), best first (none for a word far longer than
    any choice: no key is a thousand characters long)."""
    if len(str(word)) > 200:
        return []
    lowered: dict[str, str] = {}
    for c in choices:
        lowered.setdefault(str(c).lower(), str(c))
    hits = difflib.get_close_matches(str(word).lower(), list(lowered), n=n, cutoff=0.6)
    return [lowered[h] for h in hits]


def did_you_mean(word: Any, choices: Iterable[Any]) -> str:
    """"; did you mean 'x'?" for the closest of ``choices``, or "" when none is close."""
    hits = close_matches(word, choices)
    return f"; did you mean {quoted_list(hits)}?" if hits else ""


def _fmt(x: float) -> str:
    """1e6, 0.5, 1e-24: the shortest form that reads back (and as one writes it in TOML)."""
    return re.sub(r"e([+-])0*(\d)", lambda m: "e" + ("-" if m.group(1) == "-" else "") + m.group(2), f"{x:g}")


def rule(key: Key) -> str:
    """The allowed values of a number key, in words: "> 0 and <= 1", "from 8 to 4096"."""
    if key.ge is not None and key.le is not None:
        text_ = f"from {_fmt(key.ge)} to {_fmt(key.le)}"
    else:
        parts = [f"{op} {_fmt(v)}" for op, v in ((">", key.gt), (">=", key.ge), ("<", key.lt), ("<=", key.le))
                 if v is not None]
        if key.gt is not None and key.le is not None and key.ge is None and key.lt is None:
            parts = [f"> {_fmt(key.gt)} and <= {_fmt(key.le)}"]
        text_ = " and ".join(parts)
    if key.nonzero:
        text_ = ("non-zero " + text_).strip()
    if key.zero_ok:
        text_ = "0 or " + text_
    return text_


def expected(key: Key) -> str:
    """What a key takes, in words: "a number > 0", "an integer from 8 to 4096", "one of 'a', 'b'"."""
    if key.kind == "float":
        if key.nonzero:
            return f"a non-zero number {rule(dataclasses.replace(key, nonzero=False))}".strip()
        return f"a number {rule(key)}".strip()
    if key.kind == "int":
        return f"an integer {rule(key)}".strip()
    if key.kind == "bool":
        return "true or false"
    if key.kind == "str":
        return "one of " + ", ".join(f"'{c}'" for c in key.choices) if key.choices else "a string"
    if key.kind == "table":
        return "a table"
    if key.kind == "tables":
        return "an array of tables"
    if key.kind == "material":
        return "a built-in material name (string) or a [medium.material] table"
    if key.kind == "ref":
        return "a medium name (string) or index (integer from 0)"
    if key.kind == "floats":
        count = f"{key.size} numbers" if key.size else "numbers"
        return f"an array of {count} {rule(key)}".strip()
    if key.kind == "bounds":
        return "an array of two numbers [lower, upper] with lower < upper"
    if key.kind == "strs":
        return "an array of strings, each one of " + ", ".join(f"'{c}'" for c in key.choices)
    return key.kind


def _unavailable(value: Any, key: Key) -> str | None:
    for v, message in key.unavailable:
        if v is ANY or (type(value) is type(v) and value == v):
            return message
    return None


def _in_range(x: float, key: Key) -> bool:
    if key.zero_ok and x == 0:
        return True
    return not ((key.gt is not None and not x > key.gt) or (key.ge is not None and not x >= key.ge)
                or (key.lt is not None and not x < key.lt) or (key.le is not None and not x <= key.le)
                or (key.nonzero and x == 0))


def _looks_numeric(s: str) -> bool:
    try:
        float(s)
    except ValueError:
        return False
    return True


def _looks_like_expression(s: str) -> bool:
    """"2 * 0.005", "1e-3/2", "(3+4)": arithmetic written where a number belongs."""
    return (re.fullmatch(r"[\s\d.eE+\-*/()^%]+", s) is not None
            and re.search(r"[\d)]\s*[*/+\-^%]+\s*[\d(.]", s) is not None)


def _check_floats(value: Any, key: Key, want: str) -> tuple[Any, str | None]:
    """Check a "floats" value: an array of finite numbers within the bounds, ``key.size`` of them when given."""
    numbers = isinstance(value, list) and all(isinstance(v, (int, float)) and not isinstance(v, bool)
                                              for v in value)
    if not numbers:
        return None, f"must be {want}, not {type_name(value)}"
    if key.size is not None and len(value) != key.size:
        return None, f"must be {want}, not {len(value)}"
    if not all(math.isfinite(v) for v in value):
        return None, f"must be {want}; nan and inf are not allowed"
    if not all(_in_range(float(v), key) for v in value):
        return None, f"out of range: must be {want} ({key.meaning}{PLAUSIBLE_NOTE if key.plausible else ''})"
    return [float(v) for v in value], None


def _check_number(value: Any, key: Key, want: str) -> tuple[Any, str | None]:
    """Check a "float" or "int" value: its type (a hint for a quoted number or an expression) and range."""
    kind = key.kind
    if isinstance(value, bool):
        return None, f"must be {want}, not a boolean (true/false)"
    if kind == "int" and isinstance(value, float) and math.isfinite(value) and value.is_integer():
        return None, f"must be {want}: write {int(value)}, without a decimal point"
    ok_types = (int,) if kind == "int" else (int, float)
    if not isinstance(value, ok_types):
        hint = ""
        if isinstance(value, str) and _looks_numeric(value):
            hint = "; write the number without quotes"
        elif isinstance(value, str) and _looks_like_expression(value):
            hint = "; a config is data: expressions are not evaluated, write the number itself"
        return None, f"must be {want}, not {type_name(value)}{hint}"
    if kind == "float":
        try:
            value = float(value)
        except OverflowError:
            return None, f"out of range: must be {want}; this integer is too large for a number"
        if not math.isfinite(value):
            return None, f"must be {want}; nan and inf are not allowed"
    if not _in_range(value, key):
        return None, f"out of range: must be {want} ({key.meaning}{PLAUSIBLE_NOTE if key.plausible else ''})"
    return value, None


def _check_bounds(value: Any, want: str) -> tuple[Any, str | None]:
    """Check a "bounds" value: two finite numbers, the lower first; returns them as floats."""
    if not isinstance(value, list) or len(value) != 2:
        return None, f"must be {want}, not {type_name(value)}" + (
            f" of {len(value)} values" if isinstance(value, list) else "")
    if any(isinstance(v, bool) or not isinstance(v, (int, float)) for v in value):
        return None, f"must be {want}; both bounds must be numbers"
    value = [float(v) for v in value]
    if not all(math.isfinite(v) for v in value):
        return None, f"must be {want}; nan and inf are not allowed"
    if not value[0] < value[1]:
        return None, f"must be {want}: the lower bound comes first and must be below the upper"
    return value, None


def _type_problem(value: Any, key: Key, want: str) -> str | None:
    """The problem with a value of a "bool", "str", "table", "material" or "ref" key, or None."""
    kind = key.kind
    if kind == "bool":
        if not isinstance(value, bool):
            return f"must be true or false, not {type_name(value)}"
    elif kind == "str":
        if not isinstance(value, str):
            return f"must be {want}, not {type_name(value)}"
        control = next((c for c in value if ord(c) < 32 and c != "\t" or ord(c) == 127), None)
        if control is not None:
            return (f"holds a control character (U+{ord(control):04X}): a text may not (the result files "
                    f"cannot store it); remove it")
        if key.choices and value not in key.choices:
            return f"must be {want}{did_you_mean(value, key.choices)}"
    elif kind == "table":
        if not isinstance(value, dict):
            return f"must be a table, not {type_name(value)}"
    elif kind == "material":
        if not isinstance(value, (str, dict)):
            return f"must be {want}, not {type_name(value)}"
    elif kind == "ref":
        if isinstance(value, bool) or not isinstance(value, (str, int)):
            return f"must be {want}, not {type_name(value)}"
    elif kind == "strs":
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            return f"must be an array of strings, not {type_name(value)}"
        for v in value:
            if key.choices and v not in key.choices:
                return f"'{v}' is not one of the codes{did_you_mean(v, key.choices)}; the codes: " + \
                    ", ".join(key.choices)
    return None


def check_value(value: Any, key: Key) -> tuple[Any, str | None]:
    """Check the type and range of one value.

    Parameters
    ----------
    value : object
        The value as read from the config.
    key : Key
        Its schema entry.

    Returns
    -------
    (value, problem) : tuple
        ``value`` normalised (ints given for floats become floats) and None, or (None, message)
        where ``message`` says what is wrong and what is allowed.
    """
    kind = key.kind
    if kind == "table" and (msg := _unavailable(value, key)):
        return None, msg
    want = expected(key)
    if kind == "floats":
        return _check_floats(value, key, want)
    if kind in ("float", "int"):
        return _check_number(value, key, want)
    if kind == "bounds":
        value, problem = _check_bounds(value, want)
    else:
        problem = _type_problem(value, key, want)
    if problem:
        return None, problem
    msg = _unavailable(value, key)
    return (None, msg) if msg else (value, None)


# ----------------------------------------------------------------------------------------------
# Problems, tables and value paths
# ----------------------------------------------------------------------------------------------

class ConfigError(Exception):
    """A config with problems. ``problems`` holds one line per problem, each naming file and key."""

    def __init__(self, problems: Sequence[str] | str):
        self.problems: list[str] = [problems] if isinstance(problems, str) else list(problems)
        super().__init__("\n".join(self.problems))


class PathError(KeyError):
    """A dotted value path that does not resolve; the message says why (with a "did you mean")."""

    def __str__(self) -> str:
        return str(self.args[0]) if self.args else ""


class Problems:
    """Collects problem lines for one source, and what the config brought in besides its own text.

    Parameters
    ----------
    source : the file name shown at the start of each problem line
    folder : the folder that relative paths in the config (data files) are taken from
    builtin : built-in materials to use instead of the material files, by name (a rerun uses the
        material data its result file recorded)
    stored_seeds : ``seed.from`` as written -> the beam a chained run took (a rerun passes its own copy)

    Attributes
    ----------
    used_builtin : the built-in materials the config referred to, by name, as used
    data_files : the data files the config read, path as written -> their text
    """

    def __init__(self, source: str, folder: Any = None, builtin: Mapping[str, Any] | None = None,
                 stored_seeds: Mapping[str, Any] | None = None):
        self.source = source
        self.lines: list[str] = []
        self.folder = folder
        self.builtin = dict(builtin or {})
        self.used_builtin: dict[str, Any] = {}
        self.data_files: dict[str, str] = {}
        self.stored_seeds = dict(stored_seeds or {})   # seed.from as written -> the beam a rerun passes in

    def add(self, path: str, message: str, value: Any = NO_VALUE) -> None:
        head = path if value is NO_VALUE else f"{path} = {show(value)}"
        self.lines.append(f"{self.source}: {head}: {message}")

    def __len__(self) -> int:
        return len(self.lines)


KeysProblem = tuple | Callable[[list[str]], tuple] | None
"""A problem of :func:`given_keys`: ``(path, message)`` or ``(path, message, value)`` as
:meth:`Problems.add` takes them, or a function of the given keys that returns one; None: allowed."""


def given_keys(p: Problems, table: Mapping[str, Any], keys: Iterable[str], *, none: KeysProblem = None,
               one: KeysProblem = None, several: KeysProblem = None) -> list[str]:
    """The keys of ``keys`` that ``table`` gives, in that order; a problem when their number is not allowed.

    ``none``, ``one``, ``several``: the problem (a ``KeysProblem``) when none, one or more than one of
    the keys is given. Exactly one of the keys: ``none`` and ``several``; at most one: ``several``; a
    pair given together or not at all: ``one``.
    """
    given = [k for k in keys if k in table]
    problem = (none, one, several)[min(len(given), 2)]
    if problem is not None:
        p.add(*(problem(given) if callable(problem) else problem))
    return given


KEY_SHOWN = 60      # a key longer than this is cut short in messages


def show_key(key: Any) -> str:
    """A key as shown in problems: quoted when it is not a bare TOML key, cut short when long."""
    key = str(key)
    if len(key) > KEY_SHOWN:
        key = f"{key[:KEY_SHOWN - 20]}...({len(key)} characters)"
    return key if re.fullmatch(r"[A-Za-z0-9_-]+", key) else json.dumps(key, ensure_ascii=False)


def join_path(path: str, key: Any) -> str:
    """``path.key`` as shown in problems (a key that is not a bare TOML key is quoted; a long one cut)."""
    part = show_key(key)
    return f"{path}.{part}" if path else part


def check_table(p: Problems, table: dict, path: str, schema: Mapping[str, Key], *,
                 require: bool = True, skip: tuple = (), unknown=None) -> dict:
    """Check every key of ``table`` against ``schema``, adding a problem for each bad one.

    Parameters
    ----------
    p : Problems
        Where the problems go.
    table : dict
        The table as read.
    path : str
        Its key path in the problem lines (``medium[0] (rod)``).
    schema : mapping of str -> Key
        The allowed keys.
    require : bool
        Report missing required keys (False: a base supplies them).
    skip : tuple of str
        Keys checked elsewhere.
    unknown : callable or None
        ``unknown(key) -> message`` for a key not in ``schema`` (default: "did you mean").

    Returns
    -------
    dict
        The good values (config units; ints for floats made floats) plus the defaults of the
        absent keys.
    """
    out: dict[str, Any] = {}
    for key, value in table.items():
        if key in skip:
            continue
        spec = schema.get(key)
        if spec is None:
            message = unknown(key) if unknown else f"unknown key{did_you_mean(key, schema) or allowed_keys(schema)}"
            p.add(join_path(path, key), message, value)
            continue
        good, message = check_value(value, spec)
        if message:
            p.add(join_path(path, key), message, value)
        else:
            out[key] = good
    for key, spec in schema.items():
        if key not in table and key not in skip:
            if spec.required and require:
                p.add(join_path(path, key), f"missing: {spec.meaning}, {expected(spec)}")
            elif spec.default is not None:
                out[key] = spec.default
    return out


def allowed_keys(schema: Mapping[str, Any]) -> str:
    """"; keys: a, b, c" for an unknown key with no close match."""
    return "; keys: " + ", ".join(schema)
