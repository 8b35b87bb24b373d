"""Atomic file writing: a file is either fully written or not there at all."""

from __future__ import annotations

import os
import tempfile
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path


@contextmanager
def atomic_path(path: str | os.PathLike[str]) -> Iterator[Path]:
    """Yield a temporary path beside ``path``; on success it replaces ``path`` in one rename.

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
    target.parent.mkdir(parents=True, exist_ok=True)
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


def write_text(path: str | os.PathLike[str], text: str) -> Path:
    """Write ``text`` (UTF-8) to ``path`` atomically and return the path."""
    with atomic_path(path) as tmp:
        tmp.write_text(text, encoding="utf-8")
    return Path(path)


def write_with(path: str | os.PathLike[str], writer: Callable[[Path], object]) -> Path:
    """Call ``writer(tmp_path)`` and move the result to ``path`` atomically."""
    with atomic_path(path) as tmp:
        writer(tmp)
    return Path(path)
