"""Config text: TOML read with messages that point at the line, a dict given in Python made plain,
``--set PATH=VALUE`` overrides on dotted value paths (and the value lists of ``--vary``), and a config dict
written back as TOML.
``load.py`` uses these before it validates anything.
"""
from __future__ import annotations

import copy
import json
import re
from typing import Any, Mapping, Sequence

try:
    import tomllib
except ModuleNotFoundError:  # Python < 3.11
    import tomli as tomllib  # type: ignore[no-redef]
import tomli_w

from ampmodel.config.checks import ConfigError, PathError, Problems, join_path
from ampmodel.config.schema import walk

# Tables that a --set may create when its path runs through one that is not there yet.
_CREATABLE = frozenset({"grid", "seed", "limits", "solver", "sweep", "spread", "pump", "material", "train"})


# ----------------------------------------------------------------------------------------------
# Reading
# ----------------------------------------------------------------------------------------------

_AT = re.compile(r"\s*\(at line (\d+), column (\d+)\)\s*$")
# What some parser messages usually mean in a config (the parser's own words stay first).
_TOML_HINTS = (
    ("Cannot overwrite a value", " (a key given twice in one table, or a table given twice)"),
    ("Expected newline or end of document after a statement", " (something after the value: units belong in "
                                                              "the key's name, e.g. length_mm = 100.0; comments "
                                                              "start with #)"),
    ("Cannot declare", " (a table given twice)"),
    ("Illegal character '\\n'", " (perhaps a string without its closing quote)"),
    ("Invalid value", " (a value TOML cannot read: numbers without units or expressions, strings in "
                      "double quotes, true/false)"),
)


MAX_NESTING = 32       # tables and arrays nested deeper than this are refused (no config needs 5)


def nesting_depth(value: Any) -> int:
    """How deep tables and arrays nest in ``value`` (0 for a scalar), counted without recursion."""
    deepest, stack = 0, [(value, 0)]
    while stack:
        item, depth = stack.pop()
        children = item.values() if isinstance(item, dict) else item if isinstance(item, list) else None
        if children is None:
            continue
        deepest = max(deepest, depth + 1)
        if depth + 1 <= MAX_NESTING:
            stack.extend((c, depth + 1) for c in children)
    return deepest


def parse_toml(text: str, problems: Problems) -> dict | None:
    """Parse TOML text; a syntax error becomes one problem with its line and column; numbers beyond
    what the reader takes and nesting beyond :data:`MAX_NESTING` are problems too, not tracebacks."""
    try:
        parsed = tomllib.loads(text)
    except (RecursionError, MemoryError):
        problems.lines.append(f"{problems.source}: arrays or tables nested too deep to read (a config nests "
                              f"a few levels; at most {MAX_NESTING})")
        return None
    except ValueError as exc:
        if isinstance(exc, tomllib.TOMLDecodeError):
            return _syntax_error(exc, problems)
        problems.lines.append(f"{problems.source}: a number with too many digits ({str(exc).split(':')[0]}); "
                              f"write it in exponent form, e.g. 1e6")
        return None
    if nesting_depth(parsed) > MAX_NESTING:
        problems.lines.append(f"{problems.source}: tables or arrays nested more than {MAX_NESTING} levels deep "
                              f"(dotted keys count as tables); a config nests a few levels")
        return None
    return parsed


def _syntax_error(exc: Exception, problems: Problems) -> None:
    """A TOML syntax error as one problem with its line and column."""
    message = str(exc)
    m = _AT.search(message)
    if m:
        where = f"line {m.group(1)}, column {m.group(2)}"
        message = message[: m.start()]
    else:
        where = "the end of the file" if "end of document" in message else "an unknown place"
        message = re.sub(r"\s*\(at end of document\)\s*$", "", message)
    hint = next((h for start, h in _TOML_HINTS if message.startswith(start)), "")
    problems.lines.append(f"{problems.source}: TOML syntax error at {where}: {message}{hint}")
    return None


def plain_config(value: Any, path: str, problems: Problems) -> Any:
    """A dict given in Python, as TOML would give it: plain dicts, lists, str keys, no None."""
    if type(value).__module__ == "numpy" and hasattr(value, "tolist"):
        value = value.tolist()
    if isinstance(value, Mapping):
        out = {}
        for k, v in value.items():
            if not isinstance(k, str):
                problems.add(join_path(path, str(k)), "keys must be strings")
            elif v is not None:
                out[k] = plain_config(v, join_path(path, k), problems)
        return out
    if isinstance(value, (list, tuple)):
        if all(type(v) in (int, float) for v in value):      # an array of numbers (a frame's row): as it is
            return list(value)
        return [plain_config(v, path, problems) for v in value]
    return value


# ----------------------------------------------------------------------------------------------
# Value paths
# ----------------------------------------------------------------------------------------------

def resolve_path(raw: dict, path: str) -> tuple[Any, Any]:
    """Find the container and key a dotted value path names.

    Parameters
    ----------
    raw : dict
        The config as read from TOML.
    path : str
        Dotted, media and steps by name or index: ``"seed.energy_J"``, ``"medium.rod.length_mm"``,
        ``"medium.0.slices"``, ``"step.1.transmission"``, ``"grid.points"``.

    Returns
    -------
    (container, key) : tuple
        ``container[key]`` is the value (a dict and a str key; a list and an int index when the
        path ends at a medium or step). The key need not exist yet in its table.

    Raises
    ------
    PathError
        A KeyError whose message says which part does not resolve, with a "did you mean".
    """
    container, key, _ = walk(raw, path)
    return container, key


# ----------------------------------------------------------------------------------------------
# Overrides and writing
# ----------------------------------------------------------------------------------------------

def parse_value(text: str) -> Any:
    """A --set VALUE as a TOML value, or the plain string when it is not one (also one the reader
    cannot take: too deep, too many digits; the value check then says what is wrong with it)."""
    try:
        parsed = tomllib.loads("v = " + text)
    except (ValueError, RecursionError, MemoryError):     # TOMLDecodeError is a ValueError
        return text
    if list(parsed) != ["v"] or nesting_depth(parsed) > MAX_NESTING:
        return text
    return parsed["v"]


def parse_values(text: str) -> list | None:
    """A --vary list ``V1,V2,...``: read as the items of a TOML array (numbers, booleans, quoted strings,
    which may hold commas), else split at the commas and each item read as a --set value (plain
    strings such as ``flat,gaussian``). None when an item is empty (two commas in a row, a comma at
    the start); an empty text is the empty list."""
    whole = parse_value("[" + text + "]")
    if isinstance(whole, list):
        return whole
    items = [item.strip() for item in text.split(",")]
    if items and items[-1] == "":          # a comma at the end, as TOML allows
        items.pop()
    if any(item == "" for item in items):
        return None
    return [parse_value(item) for item in items]


def apply_into(raw: dict, overrides: Sequence[str], problems: Problems) -> dict:
    """Apply overrides to a copy of ``raw``; a path that does not resolve is a problem."""
    out = copy.deepcopy(raw)
    for item in overrides:
        path, sep, value_text = str(item).partition("=")
        if not sep or not path.strip():
            problems.add(f"--set {item}", "expected PATH=VALUE, e.g. --set seed.energy_J=0.01")
            continue
        try:
            container, key, _ = walk(out, path.strip(), create=_CREATABLE)
        except PathError as exc:
            problems.add(f"--set {item}", f"the path does not resolve: {exc}")
            continue
        container[key] = parse_value(value_text.strip())
    return out


def apply_overrides(raw: dict, overrides: Sequence[str], source_name: str) -> dict:
    """Apply ``--set PATH=VALUE`` overrides to a copy of ``raw``.

    Parameters
    ----------
    raw : dict
        The config as read from TOML (not changed).
    overrides : sequence of str
        ``"PATH=VALUE"``; VALUE is read as a TOML value (``0.01``, ``true``, ``"rod"``, ``[1, 2]``),
        or taken as a plain string when it is not one (``seed.shape=flat``).
    source_name : str
        The file name shown in the problem lines.

    Returns
    -------
    dict
        A new dict with the values set. A key new to an existing table is added; a path through a
        [grid], [seed], [limits], [sweep], [medium.pump] or [medium.material] table that is not
        there creates it.

    Raises
    ------
    ConfigError
        With one line per override whose path does not resolve.
    """
    problems = Problems(source_name)
    out = apply_into(raw, overrides, problems)
    if problems.lines:
        raise ConfigError(problems.lines)
    return out


def _key_text(key: str) -> str:
    """A TOML key: bare where possible, else quoted."""
    return key if re.fullmatch(r"[A-Za-z0-9_-]+", key) else json.dumps(key, ensure_ascii=False)


def _is_aot(value: Any) -> bool:
    """True for a non-empty list of tables (written as [[name]] sections)."""
    return isinstance(value, list) and bool(value) and all(isinstance(v, dict) for v in value)


def _dump_table(table: dict, name: list[str], header: str, out: list[str]) -> None:
    """Append one table: its header, its plain values, then its sub-tables."""
    scalars = {k: v for k, v in table.items() if not isinstance(v, dict) and not _is_aot(v)}
    if header:
        out.append(("\n" if out else "") + header + "\n")
    if scalars:
        out.append(tomli_w.dumps(scalars))
    for k, v in table.items():
        dotted = ".".join(_key_text(p) for p in name + [k])
        if isinstance(v, dict):
            _dump_table(v, name + [k], f"[{dotted}]", out)
        elif _is_aot(v):
            for item in v:
                _dump_table(item, name + [k], f"[[{dotted}]]", out)


def dump_toml(raw: dict) -> str:
    """Write a config dict as TOML text (tables and arrays of tables under their own headers).

    Parameters
    ----------
    raw : dict
        A config as read from TOML (values: str, int, float, bool, dates, lists, dicts).

    Returns
    -------
    str
        TOML text that reads back to an equal dict.
    """
    out: list[str] = []
    _dump_table(raw, [], "", out)
    return "".join(out)
