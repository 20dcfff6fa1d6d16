"""Validation of the [sweep] and [spread] tables (README "Sweeps, sizing and tolerance runs").

Both tables name values of the config by dotted paths (``"seed.energy_J"``, ``"medium.rod.length_mm"``);
each path must resolve to a key of the config's schema (``schema.leaf_schema``), and the
values given for it are checked against that key's type and range, so that a sweep or a tolerance
run cannot start with a value a single run would refuse. Problems go to a :class:`Problems` like
every other check of ``load.py``, which calls :func:`check_sweep` and :func:`check_spread`.

Both tables may also name figures of summary.json (``figures = ["steps.3.peak_fluence_J_cm2"]``) and
[spread] bounds on figures (``limits = ["b_integral_rad<=3"]``). Their form is checked here, when the
config loads (:func:`figure_parts`, :func:`split_limit`: the grammar of a figure path, which
``ampmodel.studies.figures`` resolves against a summary); whether the figure exists is known only
after a run.

``--vary PATH=V1,V2,...`` (``ampmodel sweep``) gives a [sweep] table's value paths on the command line:
:func:`with_vary` puts them in place of the config's own, and :func:`check_sweep` checks them as it
checks the table, its problems naming ``--vary PATH``.
"""
from __future__ import annotations

import math
import re
from typing import Any, Callable, Mapping, Sequence

from ampmodel.config import schema as S
from ampmodel.config.checks import (
    Key,
    PathError,
    Problems,
    check_table,
    check_value,
    close_matches,
    did_you_mean,
    expected,
    given_keys,
    join_path,
    quoted_list,
)
from ampmodel.config.schema import item_names, leaf_schema, walk
from ampmodel.config.text import parse_values

# ----------------------------------------------------------------------------------------------
# Figure paths and limits: their form
# ----------------------------------------------------------------------------------------------

_KEY = re.compile(r"[A-Za-z_][A-Za-z0-9_]*")
_LIMIT = re.compile(r"^\s*([^<>=]+?)\s*(<=|>=|<|>)\s*(\S+)\s*$")
FIGURE_EXAMPLE = "output_energy_J, steps.3.peak_fluence_J_cm2, media.rod.stored_energy_J or train.average_power_W"


def figure_parts(text: Any) -> list[tuple[str, Any]]:
    """The parts of a figure path: ("key", name), ("step", index) or ("medium", name), in order.

    A figure path is a dotted path to a number in summary.json: a top-level key (``gain``), a key of
    a nested object (``train.average_power_W``), a step's key by the step's index in the summary's
    ``steps`` list (``steps.3.peak_fluence_J_cm2``; a repeat's inner steps ``steps.0.steps.2.gain``)
    or a medium's key by its name (``media.rod.stored_energy_J``; the name may hold dots).

    Raises
    ------
    ValueError : the text is not of that form (the message says what is wrong).
    """
    if not isinstance(text, str) or not text.strip():
        raise ValueError(f"expected a figure path such as {FIGURE_EXAMPLE}")
    if text != text.strip():
        raise ValueError("a figure path holds no spaces at its ends")
    segs = text.split(".")
    parts: list[tuple[str, Any]] = []
    i = 0
    while i < len(segs):
        seg = segs[i]
        if seg == "steps":
            if i + 1 >= len(segs) or not segs[i + 1].isdigit():
                raise ValueError("steps must be followed by a step index and a key, e.g. steps.0.gain")
            parts.append(("step", int(segs[i + 1])))
            i += 2
        elif seg == "media":
            if len(segs) - i < 3 or not ".".join(segs[i + 1:-1]):
                raise ValueError("media must be followed by a medium's name and a key, e.g. media.rod.stored_energy_J")
            parts.append(("medium", ".".join(segs[i + 1:-1])))
            i = len(segs) - 1
        elif _KEY.fullmatch(seg):
            parts.append(("key", seg))
            i += 1
        else:
            raise ValueError(f"{seg!r} is not a key name (letters, digits and _; steps by index: steps.0.gain)")
    if parts[-1][0] != "key":
        raise ValueError("a figure path ends with a key, e.g. steps.0.gain")
    return parts


def split_limit(text: Any) -> tuple[str, str, float]:
    """``"steps.3.peak_fluence_J_cm2<=5"`` -> (path, "<=", 5.0); ``<`` and ``>`` read as ``<=`` and ``>=``.

    Raises
    ------
    ValueError : not FIGURE<=VALUE or FIGURE>=VALUE with a figure path and a finite number.
    """
    m = _LIMIT.match(text) if isinstance(text, str) else None
    if not m:
        raise ValueError("expected FIGURE<=VALUE or FIGURE>=VALUE, e.g. peak_fluence_J_cm2<=5")
    figure_parts(m.group(1))
    try:
        value = float(m.group(3))
    except ValueError:
        raise ValueError(f"{m.group(3)!r} is not a number") from None
    if not math.isfinite(value):
        raise ValueError(f"the bound must be a finite number, not {m.group(3)}")
    return m.group(1), {"<": "<=", ">": ">="}.get(m.group(2), m.group(2)), value


def check_figure_list(p: Problems, table: dict, name: str, key: str) -> None:
    """``[name].key``: an array of figure paths (``figures``) or of limits (``limits``), each of good form."""
    if key not in table:
        return
    path = join_path(name, key)
    items = table[key]
    example = '["steps.0.peak_fluence_J_cm2"]' if key == "figures" else '["b_integral_rad<=3"]'
    if not isinstance(items, list) or not all(isinstance(v, str) for v in items):
        p.add(path, f"must be an array of texts, e.g. {key} = {example}", items)
        return
    for j, text in enumerate(items):
        try:
            split_limit(text) if key == "limits" else figure_parts(text)
        except ValueError as exc:
            p.add(f"{path}[{j}]", str(exc), text)



def _value_key(p: Problems, raw: dict, table: str, key: str, given: Any,
               verb: str, label: str | None = None) -> tuple[Key, Any, str] | None:
    """The schema entry, container and leaf of a value path named in [sweep] or [spread].

    Returns None (with a problem naming ``label``, default ``table.key``) when the path does not name
    a value."""
    path = label or join_path(table, key)
    try:
        container, leaf, trail = walk(raw, key)
    except PathError as exc:
        p.add(path, f"not a value path of this config: {exc}", given)
        return None
    schema = leaf_schema(raw, trail)
    if schema is None or leaf not in schema:
        prefix = key.rsplit(".", 1)[0] + "." if "." in key else ""
        hits = close_matches(leaf, schema) if schema else []
        hint = f"; did you mean {quoted_list(prefix + h for h in hits)}?" if hits else ""
        p.add(path, f"not a value this config can {verb}; give a path such as seed.energy_J or "
                    f"medium.<name>.length_mm{hint}", given)
        return None
    return schema[leaf], container, leaf


def check_sweep(p: Problems, raw: dict, builtin: Callable[[Problems, str, str], Any],
                labels: Mapping[str, str] | None = None) -> None:
    """The [sweep] table: paths that resolve to values, non-empty lists of valid values, combine.

    ``builtin(problems, path, name)`` checks a material name (``medium.builtin_material``).
    ``labels``: how problems name a key given on the command line instead of ``sweep.<key>``
    (``--vary seed.energy_J``, ``--combine``; :func:`with_vary`)."""
    sweep = raw["sweep"]
    labels = labels or {}
    vary = any(key != "combine" for key in labels)
    lengths: dict[str, int] = {}
    combine = "grid"
    if "combine" in sweep:
        combine, message = check_value(sweep["combine"], S.SWEEP_COMBINE)
        if message:
            p.add(labels.get("combine", "sweep.combine"), message, sweep["combine"])
    check_figure_list(p, sweep, "sweep", "figures")
    for key, values in sweep.items():
        if key in S.SWEEP_OWN:
            continue
        path = labels.get(key) or join_path("sweep", key)
        found = _value_key(p, raw, "sweep", key, values, "sweep", path)
        if found is None:
            continue
        spec = found[0]
        if not isinstance(values, list) or not values:
            p.add(path, f"give at least one value after =, separated by commas, e.g. {VARY_EXAMPLE}"
                  if key in labels else "must be a non-empty array of values, e.g. [0.001, 0.01]", values)
            continue
        lengths[key] = len(values)
        for j, value in enumerate(values):
            _, message = check_value(value, spec)
            if message:
                p.add(f"{path}[{j}]", message, value)
            elif spec.kind == "material" and isinstance(value, str):
                builtin(p, f"{path}[{j}]", value)
            elif spec.kind == "ref" and value not in item_names(raw["medium"], "medium") \
                    and not (isinstance(value, int) and 0 <= value < len(raw["medium"])):
                p.add(f"{path}[{j}]", "no such medium; media: "
                                      f"{', '.join(item_names(raw['medium'], 'medium'))}", value)
    if not lengths and not any(k not in S.SWEEP_OWN for k in sweep):
        p.add("sweep", 'empty: give at least one path with its values, e.g. "seed.energy_J" = [0.001, 0.01]'
                       f" (or on the command line: {VARY_EXAMPLE})")
    if combine == "zip" and len(set(lengths.values())) > 1:
        listing = ", ".join(f"{k}: {n}" for k, n in lengths.items())
        if vary:
            where = "--combine zip" if "combine" in labels else 'sweep.combine = "zip" (kept with --vary)'
            p.add("--vary", f"{where} needs lists of equal length ({listing}): give every --vary the same number "
                            "of values, or use --combine grid")
        else:
            p.add("sweep", f'combine = "zip" needs lists of equal length ({listing})')


# ----------------------------------------------------------------------------------------------
# --vary PATH=V1,V2,...: a [sweep] table's value paths from the command line
# ----------------------------------------------------------------------------------------------

VARY_EXAMPLE = "--vary seed.energy_J=0.001,0.01"


def vary_entries(p: Problems, vary: Mapping[str, Any] | Sequence[str]) -> dict[str, Any]:
    """The value paths and their lists from ``--vary PATH=V1,V2,...`` strings (or a mapping given in
    Python, ``{path: [values]}``, taken as it is). A string without ``=``, a path given twice, an empty
    item between commas: problems naming ``--vary``."""
    if isinstance(vary, Mapping):
        return {str(k): v.tolist() if hasattr(v, "tolist") else list(v) if isinstance(v, tuple) else v
                for k, v in vary.items()}
    entries: dict[str, Any] = {}
    for item in [vary] if isinstance(vary, str) else vary:
        path, sep, text = str(item).partition("=")
        path = path.strip()
        if not sep or not path:
            p.add(f"--vary {item}", f"expected PATH=V1,V2,... (a value path, =, its values separated by commas), "
                                    f"e.g. {VARY_EXAMPLE}")
            continue
        if path in entries:
            p.add(f"--vary {path}", "given twice: give each path once, with all its values, e.g. "
                                    f"--vary {path}=1,2,3")
            continue
        values = parse_values(text.strip())
        if values is None:
            p.add(f"--vary {item}", "an empty value between two commas: separate the values by single commas, "
                                    f"e.g. {VARY_EXAMPLE}")
            continue
        entries[path] = values
    return entries


def with_vary(p: Problems, raw: dict, vary: Mapping[str, Any] | Sequence[str] | None,
              combine: str | None) -> tuple[dict, dict[str, str], list[str]]:
    """``raw`` with its [sweep] table's value paths replaced by ``vary`` (its ``combine`` and ``figures``
    kept; ``combine`` replaced when given).

    Returns
    -------
    (raw, labels, replaced)
        the new config dict (``raw`` is not changed); the problem labels of the keys from the command
        line for :func:`check_sweep`; the value paths of the config's own table that were replaced.
    """
    own = raw.get("sweep") if isinstance(raw.get("sweep"), dict) else {}
    replaced = [k for k in own if k not in S.SWEEP_OWN] if vary is not None else []
    table = {k: v for k, v in own.items() if k in S.SWEEP_OWN or vary is None}
    labels: dict[str, str] = {}
    if vary is not None:
        entries = vary_entries(p, vary)
        if not entries:             # each --vary is a problem already, or none is given
            if not len(p):
                p.add("--vary", f"no value path given: give at least one, e.g. {VARY_EXAMPLE}")
            return {k: v for k, v in raw.items() if k != "sweep"}, labels, replaced
        table = {**entries, **table}
        labels.update({k: f"--vary {k}" for k in entries})
    if combine is not None:
        table["combine"] = combine
        labels["combine"] = "--combine"
    return {**raw, "sweep": table}, labels, replaced


def check_spread(p: Problems, raw: dict) -> None:
    """The [spread] table: samples, random_seed, and one distribution table per value path.

    Each path must name a number of this config; ``normal`` (a relative standard deviation) needs
    the config's own value at the path (given, or the key's default) and it must not be zero;
    ``uniform`` bounds must both be allowed values of the key."""
    spread = raw["spread"]
    own = {k: v for k, v in spread.items() if k in S.SPREAD}
    check_table(p, own, "spread", S.SPREAD)
    for key in S.SPREAD_LISTS:
        check_figure_list(p, spread, "spread", key)
    entries = 0
    for key, entry in spread.items():
        if key in S.SPREAD or key in S.SPREAD_LISTS:
            continue
        path = join_path("spread", key)
        if not isinstance(entry, dict):
            hint = did_you_mean(key, (*S.SPREAD, *S.SPREAD_LISTS))
            p.add(path, f"must be a table giving the distribution, e.g. {S.SPREAD_HINT}" + hint, entry)
            continue
        entries += 1
        found = _value_key(p, raw, "spread", key, entry, "spread")
        if found is None:
            continue
        spec, container, leaf = found
        if spec.kind != "float":
            p.add(path, f"only numbers can spread; {leaf} takes {expected(spec)}", entry)
            continue
        v = check_table(p, entry, path, S.DISTRIBUTIONS)
        unknown = [k for k in entry if k not in S.DISTRIBUTIONS]     # reported already: no second problem
        distribution = None if unknown else (path, "give exactly one distribution, normal (relative standard "
                                                   f"deviation) or uniform (bounds), e.g. {S.SPREAD_HINT}", entry)
        if len(given_keys(p, entry, S.DISTRIBUTIONS, none=distribution, several=distribution)) != 1:
            continue
        if "uniform" in v:
            for bound, value in zip(("lower", "upper"), v["uniform"], strict=True):
                _, message = check_value(value, spec)
                if message:
                    p.add(join_path(path, "uniform"), f"the {bound} bound {value:g} is not an allowed value of "
                                                      f"{leaf}: {message}", entry["uniform"])
        if "normal" in v:
            nominal = container.get(leaf, spec.default) if isinstance(container, dict) else None
            if isinstance(nominal, bool) or not isinstance(nominal, (int, float)):
                p.add(path, f"normal: the config gives no value of {leaf} to spread around; give it, "
                            "or use uniform = [lower, upper]", entry)
            elif nominal == 0:
                p.add(path, f"normal: the config's value of {leaf} is 0, and a relative spread of 0 is 0; "
                            "use uniform = [lower, upper]", entry)
    if not entries:
        p.add("spread", f"no value to spread: give at least one path with its distribution, e.g. {S.SPREAD_HINT}")
