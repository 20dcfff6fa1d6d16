"""What a config key is: :class:`Key` (type, range, default and meaning of one key) and the
builders the schema (``schema.py``) writes its tables with. The checks that use them are in
``checks.py``.
"""
from __future__ import annotations

from dataclasses import dataclass
from typing import Any

ANY = object()
"""Marks an ``unavailable`` entry that applies whatever the value is."""


@dataclass(frozen=True)
class Key:
    """One config key.

    Parameters
    ----------
    kind : str
        "float" (ints accepted), "int", "bool", "str", "table", "tables" (array of tables),
        "material" (a built-in name or a table), "ref" (a medium name or index), "floats" (an array
        of numbers, each within the bounds; ``size`` entries when given), "bounds" (an array of two
        numbers, lower < upper) or "strs" (an array of strings, each one of ``choices``).
    meaning : str
        What the key means, in a few words (used in the problem messages).
    required : bool
        The key must be given (where the table itself is given).
    default : object
        The value used when the key is absent (config units); None: no default.
    gt, ge, lt, le : float or None
        Bounds (config units): greater than, greater or equal, less than, less or equal.
    nonzero : bool
        Zero is not allowed (any sign otherwise).
    zero_ok : bool
        Zero is allowed besides the range ``ge .. le``.
    choices : tuple of str
        For strings: the allowed values.
    unavailable : tuple of (value, message)
        Values that are valid names but not available in this version (``ANY``: every value).
    plausible : bool
        The bounds are a plausible range of a physical quantity rather than a definition (a value
        outside it is almost always a slip of unit): the message says so.
    """

    kind: str
    meaning: str = ""
    required: bool = False
    default: Any = None
    gt: float | None = None
    ge: float | None = None
    lt: float | None = None
    le: float | None = None
    nonzero: bool = False
    zero_ok: bool = False
    choices: tuple[str, ...] = ()
    unavailable: tuple[tuple[Any, str], ...] = ()
    size: int | None = None
    plausible: bool = False


def number(meaning: str, **bounds: Any) -> Key:
    """A float key (ints accepted); ``bounds`` are the other :class:`Key` fields."""
    return Key("float", meaning, **bounds)


def quantity(meaning: str, **bounds: Any) -> Key:
    """A physical quantity: a float key whose bounds are its plausible range (README, "Plausible
    ranges"; common practice, wide enough for any laboratory or facility amplifier)."""
    return Key("float", meaning, plausible=True, **bounds)


def integer(meaning: str, low: int, high: int, **more: Any) -> Key:
    """An integer key in ``low .. high``."""
    return Key("int", meaning, ge=low, le=high, **more)


def choice(meaning: str, choices: tuple[str, ...], **more: Any) -> Key:
    """A string key that takes one of ``choices``."""
    return Key("str", meaning, choices=choices, **more)


def flag(meaning: str, **more: Any) -> Key:
    """A boolean key."""
    return Key("bool", meaning, **more)


def text(meaning: str, **more: Any) -> Key:
    """A free string key."""
    return Key("str", meaning, **more)
