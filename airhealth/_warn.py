"""Warnings that point at the user's code, not at the line inside airhealth that issued them."""

from __future__ import annotations

import sys
import warnings
from functools import lru_cache
from pathlib import Path

__all__ = ["user_stacklevel", "warn_user", "warnings_issued"]

_PACKAGE_DIR = Path(__file__).resolve().parent
_issued = [0]  # warn_user calls so far (whatever the filters then do with them)


def warnings_issued() -> int:
    """How many warnings :func:`warn_user` has issued in this process (for caches that must not skip one)."""
    return _issued[0]


@lru_cache(maxsize=256)
def _inside_package(filename: str) -> bool:
    if filename.startswith("<"):  # "<stdin>", "<doctest ...>", notebook cells and the like
        return False
    try:
        resolved = Path(filename).resolve()
    except (OSError, ValueError):
        return False
    return resolved.is_relative_to(_PACKAGE_DIR)


def user_stacklevel() -> int:
    """``stacklevel`` for :func:`warnings.warn` called by the caller of this function.

    Counts the frames from that caller outwards up to the first one whose file lies outside the airhealth
    package (a script, a notebook cell, a test), so the warning is reported at the user's line however deep
    inside the library it was raised. Falls back to the outermost frame if every frame is inside.
    """
    frame = sys._getframe(1)  # the function that will call warnings.warn
    level = 1
    while frame is not None and _inside_package(frame.f_code.co_filename):
        if frame.f_back is None:
            break
        frame = frame.f_back
        level += 1
    return level


def warn_user(message: str, category: type[Warning]) -> None:
    """Issue ``warnings.warn(message, category)`` attributed to the first frame outside airhealth.

    Examples
    --------
    >>> import warnings
    >>> from airhealth.errors import DataWarning
    >>> with warnings.catch_warnings(record=True) as caught:
    ...     warnings.simplefilter("always")
    ...     warn_user("two days are missing", DataWarning)
    >>> caught[0].category.__name__
    'DataWarning'
    """
    _issued[0] += 1
    # user_stacklevel() called here counts from this function; warnings.warn is called here too.
    warnings.warn(message, category, stacklevel=user_stacklevel())
