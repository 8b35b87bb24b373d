"""Atomic file writing: a file is either fully written or not there at all."""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path

from .errors import DataError


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
        umask = os.umask(0)
        os.umask(umask)
        os.chmod(tmp, 0o666 & ~umask)  # mkstemp creates 0600; give the usual permissions
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
