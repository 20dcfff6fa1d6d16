"""Warnings and notes: every message a run gives about its result has a code and a severity.

A **warning** says that a figure is beyond a threshold a designer should act on (damage, B-integral,
clipping, a grid too coarse for the result); a **note** says something worth knowing that does not
call for action (a check that passed with room, an approximation in force). Each is one line of text
starting with where it applies ("step 3 (pass rod)", "medium rod", "grid", "train", "layout").

The codes are ampmodel's own (:data:`CODES`); the config's ``[limits] mute = ["code", ...]`` silences
codes: a muted message leaves ``warnings`` and ``notes`` but stays in ``notices`` with ``muted``
true, so that nothing is lost. summary.json: ``warnings`` and ``notes`` (lists of strings) and
``notices`` (per message ``code``, ``severity``, ``text``, ``muted``). Sweeps and tolerance runs count
the runs with warnings; notes do not count.
"""
from __future__ import annotations

from typing import Any, Iterable

WARNING, NOTE = "warning", "note"

# code -> what it is about (the README lists them; every message is given one of these)
CODES: dict[str, str] = {
    "damage-fluence": "peak fluence above the set fraction of a surface's damage fluence (scaled to the pulse length)",
    "damage-intensity": "cw: peak intensity above the set fraction of an optic's damage intensity",
    "b-integral-step": "B-integral of one step above its budget",
    "b-integral-total": "B-integral of the layout above its budget",
    "self-focusing": "peak power above the critical power for self-focusing (a warning when the collapse "
                     "distance is within reach of the path through the medium, else a note)",
    "clipping": "an aperture, a clear aperture, a pinhole or the window clips more than the set fraction",
    "window-edge": "with diffraction: the beam reaches the window's absorbing edge",
    "grid-sampling": "with diffraction: the beam's angular spectrum nears the grid's sampling limit",
    "grid-coarse": "too few pixels across the beam, or the beam reaches the window's edge",
    "time-slices": "few time slices for the pulse shape",
    "parasitic-gain": "transverse gain-length product above the set level: parasitic oscillation risk",
    "spectrum-table": "part of a stretched seed lies outside a material's cross-section table",
    "repeat": "a repeat step's round trips (the energy still rising at max_count)",
    "cavity-mode": "a regenerative cavity without a mode, or a mode the grid resolves poorly",
    "train": "a pulse train that did not settle, settles into a cycle, or whose steady state was not reached",
    "lens-sampling": "with diffraction: a lens phase undersampled at the beam's edge",
    "pinhole": "with diffraction: a pinhole wider than the focal plane the grid samples",
    "fibre-modes": "a fibre's V number: more than one mode guided, or weakly guided",
    "ase": "fibres: amplified spontaneous emission large against the signal, or left out where it matters",
    "raman": "fibres: peak power above the stimulated-Raman threshold",
    "pulse-clipped": "a measured pulse's trace cut by the time window with more than the set fraction of its "
                     "energy outside",
    "pulse-ends": "a measured pulse's trace that does not fall to its background at its ends",
    "pulse-coarse": "a measured pulse's trace coarser than the time slices, or slices too coarse for its "
                    "fastest edge",
    "seed-from": "a seed taken from an earlier run's result: the beam rebuilt where the file holds only part of it",
    "other": "a message without a code of its own",
}


class Notice(str):
    """A message: its text (the string itself), its ``code`` (one of :data:`CODES`) and its ``severity``
    ("warning" or "note"). Being a string, it goes wherever a message text went."""

    code: str
    severity: str

    def __new__(cls, code: str, text: str, severity: str = WARNING) -> Notice:
        if code not in CODES:
            raise ValueError(f"unknown notice code {code!r}")
        if severity not in (WARNING, NOTE):
            raise ValueError(f"unknown severity {severity!r}")
        obj = super().__new__(cls, text)
        obj.code = code
        obj.severity = severity
        return obj

    def __reduce__(self):        # pickled with its code and severity (parallel sweeps carry notices)
        return (Notice, (self.code, str(self), self.severity))

    def prefixed(self, prefix: str) -> Notice:
        """The same notice with ``prefix`` (where it applies) before its text."""
        return Notice(self.code, f"{prefix}: {self}", self.severity)


def warning(code: str, text: str) -> Notice:
    return Notice(code, text, WARNING)


def note(code: str, text: str) -> Notice:
    return Notice(code, text, NOTE)


def code_of(message: str) -> str:
    return message.code if isinstance(message, Notice) else "other"


def severity_of(message: str) -> str:
    return message.severity if isinstance(message, Notice) else WARNING


def sort_out(messages: Iterable[str], mute: Iterable[str] = ()) -> dict[str, Any]:
    """The messages of a run as summary.json holds them: ``warnings`` and ``notes`` (texts, muted codes
    left out) and ``notices`` (every message with its code, severity and whether it is muted). The same
    text given twice is kept once."""
    muted = set(mute)
    seen: set[str] = set()
    warnings, notes, notices = [], [], []
    for m in messages:
        text = str(m)
        if text in seen:
            continue
        seen.add(text)
        code, severity = code_of(m), severity_of(m)
        silenced = code in muted
        notices.append({"code": code, "severity": severity, "text": text, "muted": silenced})
        if not silenced:
            (warnings if severity == WARNING else notes).append(text)
    return {"warnings": warnings, "notes": notes, "notices": notices}


def settle(summary: dict[str, Any], mute: Iterable[str] = ()) -> dict[str, Any]:
    """``summary`` with its ``warnings`` sorted out (:func:`sort_out`): ``warnings``, then ``notes`` and
    ``notices`` after it, the other keys in their order."""
    sorted_out = sort_out(summary.get("warnings", []), mute)
    out: dict[str, Any] = {}
    for key, value in summary.items():
        if key in ("notes", "notices"):
            continue
        if key == "warnings":
            out.update(sorted_out)
        else:
            out[key] = value
    if "warnings" not in summary:
        out.update(sorted_out)
    return out
