"""File names made from user text (column names, lag labels): the one place they are made safe.

A report names its files after what they show (``series_pm25.png``, ``effects_forest_deaths_all.png``), and
those words come from the user's columns. Any text can be a column name, so before it becomes part of a
path it is turned into a short, readable ASCII *stem* that

- cannot leave the output folder: no ``/``, ``\\``, ``..``, NUL or other control characters survive, and
  no stem starts with a dot;
- is valid on Windows, macOS and Linux: only ``a-z``, ``0-9``, ``_`` and ``-``; never a reserved Windows
  device name (``CON``, ``NUL``, ``COM1`` ...); at most :data:`MAX_STEM` characters;
- never collides with the stem of a different text, even on case-insensitive file systems: text that is
  already a safe stem is kept as it is; any other text gets the readable part followed by ``-`` and the
  first 8 hex digits of its SHA-256 (stable across runs and machines).

References
----------
Microsoft, "Naming Files, Paths, and Namespaces", learn.microsoft.com/windows/win32/fileio/naming-a-file
(reserved device names CON, PRN, AUX, NUL, COM1–COM9, LPT1–LPT9, also with an extension; the characters
``<>:"/\\|?*`` and codes 0–31 not allowed; no trailing dot or space).
"""

from __future__ import annotations

import hashlib
import re
import unicodedata
from pathlib import Path

from ..errors import DataError

__all__ = ["MAX_STEM", "file_in", "safe_stem"]

MAX_STEM = 80
_HASH_DIGITS = 8
_SAFE = re.compile(r"[a-z0-9](?:[a-z0-9_-]*[a-z0-9])?")
_UNSAFE_RUN = re.compile(r"[^a-z0-9]+")
_SPELLED = str.maketrans({"µ": "u", "μ": "u", "°": "deg", "ß": "ss", "æ": "ae", "ø": "o", "œ": "oe"})
# Windows device names (any case, with or without an extension); superscript-digit and ``$`` forms cannot
# occur in a safe stem. COM0/LPT0 are listed by some versions of the page; refusing them costs nothing.
_RESERVED = frozenset({"con", "prn", "aux", "nul"} | {f"{p}{i}" for p in ("com", "lpt") for i in range(10)})


def _is_safe(text: str) -> bool:
    return len(text) <= MAX_STEM and _SAFE.fullmatch(text) is not None and text not in _RESERVED


def safe_stem(text: str) -> str:
    """A file-name stem for ``text``: readable ASCII, safe on every system, distinct for distinct texts.

    Parameters
    ----------
    text : str
        Any text, typically built from user column names.

    Returns
    -------
    str
        ``text`` itself when it is already lower-case ASCII letters, digits, ``_`` and ``-`` (not at the
        ends), not a reserved device name and at most :data:`MAX_STEM` long; otherwise a slug of its
        letters and digits (accents removed, runs of anything else become ``_``) shortened to fit, then
        ``-`` and 8 hex digits of the SHA-256 of ``text`` (UTF-8).

    Examples
    --------
    >>> safe_stem("series_pm25")
    'series_pm25'
    >>> safe_stem("x/../../../escaped")
    'x_escaped-ce4956cf'
    >>> safe_stem("Ozone µg/m³")
    'ozone_ug_m3-1fba3ade'
    """
    if not isinstance(text, str):
        text = str(text)
    if _is_safe(text):
        return text
    ascii_text = unicodedata.normalize("NFKD", text.translate(_SPELLED)).encode("ascii", "ignore").decode("ascii")
    slug = _UNSAFE_RUN.sub("_", ascii_text.lower()).strip("_")
    digest = hashlib.sha256(text.encode("utf-8", "surrogatepass")).hexdigest()[:_HASH_DIGITS]
    slug = slug[: MAX_STEM - _HASH_DIGITS - 1].rstrip("_")
    return f"{slug}-{digest}" if slug else f"x-{digest}"


def file_in(folder: str | Path, name: str, suffix: str) -> Path:
    """The path ``folder / (safe_stem(name) + suffix)``, checked to lie directly inside ``folder``.

    ``suffix`` is the library's own (``".png"``, ``".csv"``). The check cannot fail for a stem made by
    :func:`safe_stem`; it is kept so that no later change can let a user's text place a file elsewhere.
    """
    base = Path(folder)
    path = base / f"{safe_stem(name)}{suffix}"
    if path.resolve().parent != base.resolve():
        raise DataError(f"refusing to write {str(path)!r}: it is not inside the output folder {str(base)!r}.")
    return path
