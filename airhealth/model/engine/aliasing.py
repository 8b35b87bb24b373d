"""Confounder columns the days used cannot estimate (aliased), found as R's ``glm.fit`` finds them.

A long run of unusable days (a year without exposure data, say) leaves the natural-spline columns of time
whose support lies inside it zero on every day used. Base R's ``glm`` fits such a model: its QR
decomposition (LINPACK ``dqrdc2`` with "limited column pivoting", called by ``glm.fit`` with tolerance
``min(1e-7, epsilon / 1000) = 1e-11`` at the default ``epsilon = 1e-8``) moves every column whose norm,
after removing its projection on the columns before it, falls below ``tol`` times its original norm to
the end and reports its coefficient as ``NA`` (aliased). The remaining coefficients are those of the model
without the aliased columns. :func:`aliased_columns` applies the same rule, in the same left-to-right
order, to the confounder block on the days used; the design builder drops those columns and says so.

Only confounder columns are dropped this way: an exposure column without support or in the span of the
confounders stays an error of the engine naming it (its effect is what the user asked for).

References
----------
R Core Team. ``glm.fit`` in package stats and ``dqrdc2.f`` (R's modification of LINPACK ``dqrdc``: limited
column pivoting with a relative tolerance on the column norms). Dongarra JJ, Bunch JR, Moler CB, Stewart
GW (1979). *LINPACK Users' Guide*. SIAM, chapter 9 (the QR decomposition with column pivoting).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.linalg import qr

__all__ = ["ALIAS_TOL", "aliased_columns", "describe_aliased"]

#: Relative norm left after projecting out the earlier columns below which a column is aliased: the value
#: ``glm.fit`` passes to its QR with R's default ``glm.control(epsilon = 1e-8)``, ``min(1e-7, 1e-8/1000)``.
ALIAS_TOL = 1e-11


def aliased_columns(matrix: np.ndarray, tol: float = ALIAS_TOL) -> np.ndarray:
    """Indices of the columns of ``matrix`` in the span of the (kept) columns before them.

    A zero column is always aliased. Otherwise column ``j`` is aliased when the norm of its part
    orthogonal to the kept columns before it is below ``tol`` times its own norm (R's ``dqrdc2`` rule);
    aliased columns are skipped when later columns are tested, as ``dqrdc2`` moves them to the end.
    """
    norms = np.sqrt(np.einsum("ij,ij->j", matrix, matrix))
    aliased = [int(j) for j in np.flatnonzero(norms == 0)]
    keep = [int(j) for j in np.flatnonzero(norms > 0)]
    while keep:
        r = qr(matrix[:, keep], mode="r", check_finite=False)[0]
        ratio = np.abs(np.diag(r)) / norms[keep]
        bad = np.flatnonzero(ratio < tol)
        if not bad.size:
            break
        aliased.append(keep.pop(int(bad[0])))  # the columns before it are unaffected; retest the rest
    return np.array(sorted(aliased), dtype=int)


def _runs(mask: np.ndarray) -> list[tuple[int, int]]:
    """``(start, stop)`` of each run of True in ``mask``."""
    edges = np.diff(np.r_[0, mask.astype(np.int8), 0])
    return list(zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1), strict=True))


def _shown(names: list[str]) -> str:
    return ", ".join(repr(n) for n in names[:6]) + (f" and {len(names) - 6} more" if len(names) > 6 else "")


def describe_aliased(
    names: list[str], full_columns: np.ndarray, calendar: pd.DatetimeIndex, used: np.ndarray, reasons: np.ndarray
) -> str:
    """The warning (and note) text for aliased confounder columns: which, and the unusable days holding them.

    ``full_columns`` are those columns on the whole calendar; ``reasons`` the drop reason of every day.
    Columns zero on every day used are described by the runs of unusable days where they are non-zero
    (longest first); the others are exact combinations of earlier columns on the days used.
    """
    full = np.nan_to_num(full_columns)
    empty = ~np.any(full[used] != 0, axis=0)
    parts = []
    if empty.any():
        support = np.any(full[:, empty] != 0, axis=1)
        spans = sorted(
            ((stop - start, start, stop) for start, stop in _runs(~used) if support[start:stop].any()), reverse=True
        )
        text = []
        for length, start, stop in spans[:3]:
            counts = pd.Series(reasons[start:stop]).value_counts()
            why = ", ".join(f"{r}: {c}" for r, c in counts.head(3).items())
            text.append(f"the {length} days from {calendar[start]:%Y-%m-%d} to {calendar[stop - 1]:%Y-%m-%d} ({why})")
        where = "; ".join(text) + (f" and {len(spans) - 3} shorter runs" if len(spans) > 3 else "")
        parts.append(
            f"{_shown([n for n, e in zip(names, empty, strict=True) if e])} are zero on every day used: they are "
            f"non-zero only on days that cannot be used ({where or 'nowhere on the calendar'})"
        )
    if not empty.all():
        others = [n for n, e in zip(names, empty, strict=True) if not e]
        verb = "is an exact linear combination" if len(others) == 1 else "are exact linear combinations"
        parts.append(f"{_shown(others)} {verb} of earlier confounder columns on the days used")
    return (
        f"{len(names)} confounder column(s) cannot be estimated from the days used and were left out of the fit "
        f"(aliased, as R's glm reports them): {'; '.join(parts)}. Leaving them out does not change the fit on "
        "the days used (they add nothing to the model there)."
    )
