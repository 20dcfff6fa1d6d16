"""Validation of the [sweep] and [spread] tables (README "Sweeps, sizing and tolerance runs").

Both tables name values of the config by dotted paths (``"seed.energy_J"``, ``"medium.rod.length_mm"``);
each path must resolve to a key of the config's schema (``schema.leaf_schema``), and the
values given for it are checked against that key's type and range, so that a sweep or a tolerance
run cannot start with a value a single run would refuse. Problems go to a :class:`Problems` like
every other check of ``load.py``, which calls :func:`check_sweep` and :func:`check_spread`.
"""
from __future__ import annotations

from typing import Any, Callable

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


def _value_key(p: Problems, raw: dict, table: str, key: str, given: Any,
               verb: str) -> tuple[Key, Any, str] | None:
    """The schema entry, container and leaf of a value path named in [sweep] or [spread].

    Returns None (with a problem naming ``table.key``) when the path does not name a value."""
    path = join_path(table, key)
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


def check_sweep(p: Problems, raw: dict, builtin: Callable[[Problems, str, str], Any]) -> None:
    """The [sweep] table: paths that resolve to values, non-empty lists of valid values, combine.

    ``builtin(problems, path, name)`` checks a material name (``medium.builtin_material``)."""
    sweep = raw["sweep"]
    lengths: dict[str, int] = {}
    combine = "grid"
    if "combine" in sweep:
        combine, message = check_value(sweep["combine"], S.SWEEP_COMBINE)
        if message:
            p.add("sweep.combine", message, sweep["combine"])
    for key, values in sweep.items():
        if key == "combine":
            continue
        path = join_path("sweep", key)
        found = _value_key(p, raw, "sweep", key, values, "sweep")
        if found is None:
            continue
        spec = found[0]
        if not isinstance(values, list) or not values:
            p.add(path, "must be a non-empty array of values, e.g. [0.001, 0.01]", values)
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
    if not lengths and not any(k != "combine" for k in sweep):
        p.add("sweep", 'empty: give at least one path with its values, e.g. "seed.energy_J" = [0.001, 0.01]')
    if combine == "zip" and len(set(lengths.values())) > 1:
        listing = ", ".join(f"{k}: {n}" for k, n in lengths.items())
        p.add("sweep", f'combine = "zip" needs lists of equal length ({listing})')


def check_spread(p: Problems, raw: dict) -> None:
    """The [spread] table: samples, random_seed, and one distribution table per value path.

    Each path must name a number of this config; ``normal`` (a relative standard deviation) needs
    the config's own value at the path (given, or the key's default) and it must not be zero;
    ``uniform`` bounds must both be allowed values of the key."""
    spread = raw["spread"]
    own = {k: v for k, v in spread.items() if k in S.SPREAD}
    check_table(p, own, "spread", S.SPREAD)
    entries = 0
    for key, entry in spread.items():
        if key in S.SPREAD:
            continue
        path = join_path("spread", key)
        if not isinstance(entry, dict):
            hint = did_you_mean(key, S.SPREAD)
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
