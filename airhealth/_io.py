"""Atomic writing: a file, or a whole folder, is either fully written or not there at all."""

from __future__ import annotations

import os
import shutil
import tempfile
from collections.abc import Callable, Iterator, Sequence
from contextlib import contextmanager
from pathlib import Path

import pandas as pd

from .errors import DataError

#: ``pandas.read_csv`` options that read numbers exactly as written: pandas before 3.0 parses with a fast
#: routine that can lose the last digit unless ``float_precision="round_trip"``; pandas 3 reads exactly by
#: default and deprecates the option.
EXACT_FLOATS: dict[str, str] = {} if int(pd.__version__.split(".")[0]) >= 3 else {"float_precision": "round_trip"}


@contextmanager
def atomic_path(path: str | os.PathLike[str], *, make_parents: bool = True) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success it replaces ``path`` in one rename.

    With ``make_parents=True`` (for report directories the library lays out itself) missing parent
    directories are created. With ``make_parents=False`` (for a single file the user named, where a
    mistyped directory should not silently grow a new tree) the parent must already exist, else
    :class:`~airhealth.errors.DataError`.

    Examples
    --------
    >>> import tempfile, pathlib
    >>> target = pathlib.Path(tempfile.mkdtemp()) / "table.csv"
    >>> with atomic_path(target) as tmp:
    ...     _ = tmp.write_text("a,b\\n1,2\\n")
    >>> target.read_text()
    'a,b\\n1,2\\n'
    """
    target = Path(path)
    if make_parents:
        target.parent.mkdir(parents=True, exist_ok=True)
    elif not target.parent.is_dir():
        what = "is not a directory" if target.parent.exists() else "does not exist"
        raise DataError(
            f"cannot write {str(target)!r}: directory {str(target.parent)!r} {what}; create it first or "
            "choose another path."
        )
    if target.is_dir():
        raise DataError(f"cannot write {str(target)!r}: it is a directory; give a file name.")
    fd, tmp_name = tempfile.mkstemp(prefix=f".{target.name}.", suffix=".tmp", dir=target.parent)
    os.close(fd)
    tmp = Path(tmp_name)
    try:
        yield tmp
        _usual_permissions(tmp, 0o666)  # mkstemp creates 0600
        os.replace(tmp, target)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise


def write_text(path: str | os.PathLike[str], text: str, *, make_parents: bool = True) -> Path:
    """Write ``text`` (UTF-8) to ``path`` atomically and return the path (``make_parents``: see atomic_path)."""
    with atomic_path(path, make_parents=make_parents) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return Path(path)


def write_with(path: str | os.PathLike[str], writer: Callable[[Path], object], *, make_parents: bool = True) -> Path:
    """Call ``writer(tmp_path)`` and move the result to ``path`` atomically (``make_parents``: see atomic_path)."""
    with atomic_path(path, make_parents=make_parents) as tmp:
        writer(tmp)
    return Path(path)


def _usual_permissions(path: Path, mode: int) -> None:
    umask = os.umask(0)
    os.umask(umask)
    os.chmod(path, mode & ~umask)


@contextmanager
def atomic_directory(
    path: str | os.PathLike[str],
    *,
    foreign_entries: Callable[[Path], Sequence[str]] = lambda p: sorted(e.name for e in p.iterdir()),
) -> Iterator[Path]:
    """Yield a new temporary folder beside ``path``; on success it becomes ``path`` as a whole.

    Everything is written into ``.<name>.tmp-XXXX`` in the same parent folder (so the final move is a
    rename on one file system). When the block ends without an exception an existing ``path`` is moved
    aside, the new folder renamed into place and the old one deleted; when the block raises (or is
    interrupted) the temporary folder is deleted and ``path`` is left exactly as it was. A reader therefore
    sees the old folder, the new folder, or (for the instant between two renames) none — never a
    half-written one.

    Parameters
    ----------
    path : path
        The folder to create or replace. Its parent is created if missing.
    foreign_entries : callable, optional
        Called with an existing ``path``: the entries in it that must not be deleted; the folder is
        replaced only if there are none. The default counts every entry, so only an empty folder is
        replaced and a folder holding anything else is never deleted.

    Raises
    ------
    DataError
        ``path`` is a file, an existing folder holding ``foreign_entries``, or the current working
        directory or one of its parents (checked before anything is written).

    Notes
    -----
    A process killed outright (power loss, ``kill -9``) can leave its hidden ``.<name>.tmp-XXXX`` folder
    behind; it is never mistaken for the report and may be deleted.
    """
    target = Path(path).resolve()
    if target.exists() and not target.is_dir():
        raise DataError(f"cannot write the folder {str(path)!r}: a file of that name exists; choose another path.")
    here = Path.cwd().resolve()
    if target.is_dir() and (here == target or target in here.parents):
        raise DataError(
            f"cannot replace the folder {str(path)!r}: it holds the current working directory; give a new "
            "folder name (for example a sub-folder)."
        )
    foreign = foreign_entries(target) if target.is_dir() else ()
    if foreign:
        shown = ", ".join(foreign[:5]) + (", ..." if len(foreign) > 5 else "")
        raise DataError(
            f"the output folder {str(path)!r} already exists and holds files that airhealth did not write "
            f"({shown}); choose a new folder, or empty or delete this one first."
        )
    target.parent.mkdir(parents=True, exist_ok=True)
    tmp = Path(tempfile.mkdtemp(prefix=f".{target.name}.tmp-", dir=target.parent))
    try:
        yield tmp
        _usual_permissions(tmp, 0o777)  # mkdtemp creates 0700
        _swap_in(tmp, target)
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise


def _swap_in(new: Path, target: Path) -> None:
    """Rename ``new`` to ``target``, replacing an existing ``target`` folder (restored if the rename fails)."""
    if not target.exists():
        os.rename(new, target)
        return
    old = Path(tempfile.mkdtemp(prefix=f".{target.name}.old-", dir=target.parent))
    os.rename(target, old / "previous")
    try:
        os.rename(new, target)
    except BaseException:
        os.rename(old / "previous", target)
        shutil.rmtree(old, ignore_errors=True)
        raise
    shutil.rmtree(old, ignore_errors=True)
