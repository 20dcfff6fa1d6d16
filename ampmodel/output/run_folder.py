"""The output folder of one run (``run``, ``size --out``, ``rerun``): written whole or not at all.

A run writes into a hidden temporary folder ``.<name>.<random>.partial`` beside its final name,
created *before* the computation starts (so that an unwritable place is reported at once, not after
hours of work), and renamed to the first free name (``<name>``, ``<name>-2``, ...) when every file is
in it: a run never overwrites another, and a folder under a run's name is always complete.

While a run works, it holds an advisory lock (flock) on its temporary folder. A run killed outright
(SIGKILL, a power cut) leaves its temporary folder behind; the next run into the same place removes
such folders when their lock is free (their owner is gone) and they are older than
``STALE_AFTER_S`` seconds (a run that has only just created its folder may not hold the lock yet).
"""
from __future__ import annotations

import glob
import os
import shutil
import tempfile
import time
from contextlib import contextmanager
from pathlib import Path
from typing import Iterator

from ampmodel.output.atomic import OutputError, default_mode, describe_write_error, is_write_error

PARTIAL_SUFFIX = ".partial"
STALE_AFTER_S = 30.0


def free_name(base: Path) -> Path:
    """``base`` if free, else base-2, base-3, ...: a run never overwrites another."""
    if not os.path.lexists(base):            # a dangling symbolic link is taken too: never written through
        return base
    n = 2
    while os.path.lexists(f"{base}-{n}"):
        n += 1
    return Path(f"{base}-{n}")


def claim(tmp: Path, base: Path) -> Path:
    """Move the finished temporary folder to the first free name, atomically."""
    while True:
        target = free_name(base)
        try:
            os.rename(tmp, target)
            return target
        except OSError:
            if not target.exists():
                raise
            # someone took the name in between: try the next one


def _try_lock(fd: int) -> bool:
    try:
        import fcntl
    except ImportError:          # not POSIX: no locks, no clean-up of other runs' folders
        return False
    try:
        fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        return True
    except OSError:
        return False


def remove_stale(parent: Path, name: str) -> list[Path]:
    """Remove the temporary folders of runs named ``name`` in ``parent`` whose owner is gone."""
    removed = []
    for folder in parent.glob(f".{glob.escape(name)}.*{PARTIAL_SUFFIX}"):   # the name literally
        try:
            if time.time() - folder.stat().st_mtime < STALE_AFTER_S:
                continue
            fd = os.open(folder, os.O_RDONLY)
        except OSError:
            continue
        try:
            if _try_lock(fd):
                shutil.rmtree(folder, ignore_errors=True)
                removed.append(folder)
        finally:
            os.close(fd)
    return removed


def check_name(base: Path) -> None:
    """A run folder needs a name of its own: not the root of the file system, not ``.`` or ``..``
    (ConfigError, bad input, before anything is computed)."""
    from ampmodel.config.checks import ConfigError
    if base.name in ("", ".", "..") or base.resolve() == Path(base.resolve().anchor):
        raise ConfigError([f"--out {base}: not a folder name of its own (the root, . or ..): give a new folder's "
                           f"path, e.g. runs/NAME"])


@contextmanager
def partial_folder(base: Path) -> Iterator[Path]:
    """Create and lock the temporary folder of a run that will be named ``base``; yield it.

    The caller writes every file into it and calls :func:`claim` at the end. When the block raises
    (an error, Ctrl-C, SIGTERM through the command line) the folder is removed: nothing is left
    that looks like a run.

    Raises
    ------
    OutputError
        The folder cannot be created (no permission, a read-only or full disk, a path through a file).
    """
    base = Path(base)
    check_name(base)
    made = [p for p in (base.parent, *base.parent.parents) if not p.exists()]    # removed again on failure
    try:
        base.parent.mkdir(parents=True, exist_ok=True)
        remove_stale(base.parent, base.name)
        tmp = Path(tempfile.mkdtemp(prefix=f".{base.name}.", suffix=PARTIAL_SUFFIX, dir=base.parent))
        os.chmod(tmp, default_mode(folder=True))
    except OSError as exc:
        if is_write_error(exc):
            raise OutputError(describe_write_error(exc, base.parent), base.parent) from None
        raise
    fd = os.open(tmp, os.O_RDONLY)
    try:
        _try_lock(fd)
        yield tmp
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        for folder in made:                    # innermost first; only while empty
            try:
                folder.rmdir()
            except OSError:
                break
        raise
    finally:
        os.close(fd)
