"""Writing files so that no file ever looks complete when it is not.

Every output file of ampmodel (result.h5, summary.json, plots, point files, sweep.h5, sweep.csv,
manifest.json, spread.json, spread.csv, size.json, rerun.json, report.html) is written through
:func:`target`:

1. the data go to a temporary file in the same folder, named ``.<name>.<random>.part`` (hidden, and
   marked partial by its suffix);
2. the file is flushed to the disk (``os.fsync``), so that a power cut after the next step cannot
   leave an empty or truncated file under the final name;
3. it is renamed to its final name (``os.replace``, atomic on POSIX file systems).

A process killed at any moment therefore leaves either the complete file or a ``.part`` file that
the next start removes (``remove_parts``); an exception (a full disk, Ctrl-C) removes the ``.part``
file at once. HDF5 files carry, besides, a root attribute ``complete = True`` written last, so that
a reader can tell a whole file from one that was cut short by other means (a copy interrupted
half-way, a file system that lost data): :func:`is_complete_hdf5`.
"""
from __future__ import annotations

import errno as errno_codes
import json
import os
import tempfile
from contextlib import contextmanager
from pathlib import Path
from typing import Any, Iterator

PART_SUFFIX = ".part"
COMPLETE_ATTR = "complete"


def _umask() -> int:
    mask = os.umask(0o022)
    os.umask(mask)
    return mask


def default_mode(folder: bool = False) -> int:
    """The permissions a new file (or folder) gets from the umask: temporary names are created private
    (0600, 0700), and given these before they are renamed into place."""
    return (0o777 if folder else 0o666) & ~_umask()


def _fsync_file(path: str | os.PathLike) -> None:
    fd = os.open(path, os.O_RDONLY)
    try:
        os.fsync(fd)
    finally:
        os.close(fd)


@contextmanager
def target(path: str | os.PathLike) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; when the block ends without an exception, flush it to
    the disk and rename it to ``path`` (replacing a file of that name); otherwise delete it.

    Parameters
    ----------
    path : the final file name; its folder must exist
    """
    path = Path(path)
    fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", suffix=PART_SUFFIX, dir=path.parent)
    os.close(fd)
    try:
        yield Path(tmp)
        os.chmod(tmp, default_mode())
        _fsync_file(tmp)
        os.replace(tmp, path)
    except BaseException:
        Path(tmp).unlink(missing_ok=True)
        raise


@contextmanager
def hdf5_file(path: str | os.PathLike) -> Iterator[Any]:
    """Yield a new HDF5 file (h5py.File) built in memory; when the block ends without an exception,
    its image is written to ``path`` with plain writes through :func:`target`.

    The HDF5 library never writes to the disk itself: a full or failing disk is an ordinary OSError
    naming ``path`` (no half-closed HDF5 objects whose clean-up could crash the interpreter), and the
    partial file is removed. The file's image is held in memory once while it is written."""
    import io

    import h5py
    buffer = io.BytesIO()
    with h5py.File(buffer, "w") as f:
        yield f
    with target(path) as tmp:
        try:
            with open(tmp, "wb") as fh:
                fh.write(buffer.getbuffer())
        except OSError as exc:
            raise OSError(exc.errno, exc.strerror, str(path)) from None


def write_text(path: str | os.PathLike, text: str) -> None:
    """Write ``text`` (UTF-8) to ``path`` through :func:`target`."""
    with target(path) as tmp:
        with open(tmp, "w", encoding="utf-8", newline="") as fh:
            fh.write(text)


def write_json(data: dict[str, Any], path: Path) -> None:
    """Write ``data`` as indented JSON, atomically (:func:`target`)."""
    with target(path) as tmp:
        with open(tmp, "w", encoding="utf-8") as fh:
            json.dump(data, fh, indent=2, allow_nan=False)
            fh.write("\n")


def remove_parts(*folders: str | os.PathLike) -> int:
    """Delete the ``.*.part`` files that killed writers left in ``folders``; return how many.

    Only for folders no other process is writing into (the caller holds the folder's lock, or the
    folder is a run's own temporary folder)."""
    n = 0
    for folder in folders:
        folder = Path(folder)
        if folder.is_dir():
            for part in folder.glob(f".*{PART_SUFFIX}"):
                part.unlink(missing_ok=True)
                n += 1
    return n


def is_complete_hdf5(path: str | os.PathLike) -> bool:
    """True when ``path`` opens as HDF5 and carries the root attribute ``complete = True``."""
    import h5py
    try:
        with h5py.File(path, "r") as f:
            return bool(f.attrs.get(COMPLETE_ATTR, False))
    except Exception:   # noqa: BLE001 - truncated or foreign files raise OSError, KeyError, ...
        return False


class OutputError(Exception):
    """An output that cannot be written: no permission, a full disk, a read-only file system, a path
    through a file. ``str()`` is a message for the user; ``path`` the file or folder concerned."""

    def __init__(self, message: str, path: str | os.PathLike | None = None):
        super().__init__(message)
        self.path = None if path is None else Path(path)


# errno names -> what they mean to someone writing results, and the fix
_WRITE_ERRORS = {
    "ENOSPC": "the disk is full (no space left on device): free some space, or give --out a folder on "
              "another disk",
    "EDQUOT": "the disk quota is used up: free some space, or give --out a folder on another disk",
    "EACCES": "no permission to write there: give --out a folder you can write to",
    "EPERM": "no permission to write there: give --out a folder you can write to",
    "EROFS": "the file system is read-only: give --out a folder on a writable disk",
    "ENOTDIR": "a part of the path is a file, not a folder: give --out another path",
    "ENAMETOOLONG": "the path is too long: give --out a shorter path",
    "EISDIR": "a folder stands where a file is to be written: give --out another path",
    "EEXIST": "a file stands where a folder is to be made: give --out another path",
}
WRITE_ERRNOS = frozenset(getattr(errno_codes, name) for name in _WRITE_ERRORS if hasattr(errno_codes, name))


def is_write_error(exc: BaseException) -> bool:
    """True for an OSError that an output folder or a full disk causes (not a bug of ampmodel)."""
    return isinstance(exc, OSError) and exc.errno in WRITE_ERRNOS


def describe_write_error(exc: OSError, what: str | os.PathLike | None = None) -> str:
    """"cannot write PATH: <what it means and the fix> [Errno 28]" for an OSError of a writer."""
    name = errno_codes.errorcode.get(exc.errno or 0, "")
    where = exc.filename if exc.filename else what
    meaning = _WRITE_ERRORS.get(name, exc.strerror or str(exc))
    return f"cannot write {where}: {meaning} ({name or 'error'}: {exc.strerror or exc})"
