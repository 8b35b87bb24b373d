r"""Effect modification: the exposure term repeated for each level of a categorical column.

With a modifier :math:`g_t \in \{1, \dots, G\}` (a season, an age group) the exposure term becomes one
term per level,

.. math::

    \log E[Y_t] = \alpha_{g_t} + \sum_{g=1}^{G} 1[g_t = g]\, \beta_g^\top (Q_x C)_t + \text{confounders},

so :math:`\beta_g` is the exposure effect in level :math:`g` (for a distributed lag, its lag coefficients in
that level); the level's own mean :math:`\alpha_{g}` enters as indicator columns of the modifier (a
categorical confounder, first sorted level as reference). This is the model R fits with
``y ~ ... + g + x:g``. Level order is the sorted order of the levels as text, as for
:class:`~airhealth.model.bases.terms.Categorical`.

References
----------
Katsouyanni K, et al. (2001). Confounding and effect modification in the short-term effects of ambient
particles on total mortality. Epidemiology 12:521–531.
Bhaskaran K, Gasparrini A, Hajat S, Smeeth L, Armstrong B (2013). Time series regression studies in
environmental epidemiology. Int J Epidemiol 42:1187–1195.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ...errors import DataError, SpecificationError

__all__ = [
    "MAX_NUMERIC_LEVELS",
    "MIN_GROUP_DAYS",
    "MIN_GROUP_EVENTS",
    "check_group_sizes",
    "group_column_names",
    "interact",
    "modifier_codes",
]

#: A numeric modifier with more distinct values than this is refused as not categorical (our own limit).
MAX_NUMERIC_LEVELS = 12
#: Least days used and events per level for a per-level exposure effect (our own floor, common practice,
#: no source: below it the level's estimate rests on too little data to compare).
MIN_GROUP_DAYS = 30
MIN_GROUP_EVENTS = 20


def _first_dates(dates: pd.DatetimeIndex, rows: np.ndarray, k: int = 3) -> str:
    shown = ", ".join(f"{d:%Y-%m-%d}" for d in dates[rows[:k]])
    return shown + (", ..." if rows.size > k else "")


def modifier_codes(
    frame: pd.DataFrame, column: str, dates: pd.DatetimeIndex, needed: np.ndarray
) -> tuple[np.ndarray, tuple]:
    """Level index of each day (0..G-1; -1 where missing) and the levels in order, after the modifier's checks.

    ``needed`` marks the days that have an outcome: the modifier may be missing only on other days (such as
    the days a calendar gap added), which no fit can use anyway.

    Raises
    ------
    DataError
        When the modifier is missing on days with an outcome (naming them) or has a single level.
    SpecificationError
        When a numeric modifier has more than :data:`MAX_NUMERIC_LEVELS` distinct values (bin it first).
    """
    values = frame[column]
    absent = values.isna().to_numpy()
    missing = np.flatnonzero(absent & needed)
    if missing.size:
        raise DataError(
            f"modifier column {column!r} is missing on {missing.size} days with an outcome "
            f"({_first_dates(dates, missing)}); "
            "give every day a level (e.g. airhealth.season_column(dates) for seasons), or drop those days "
            "from the data before fitting."
        )
    levels = sorted(pd.unique(values[~absent].to_numpy(dtype=object)).tolist(), key=str)
    if pd.api.types.is_numeric_dtype(values) and len(levels) > MAX_NUMERIC_LEVELS:
        raise SpecificationError(
            f"modifier {column!r} is numeric with {len(levels)} distinct values; an effect modifier needs a few "
            "categories: bin it first, e.g. pandas.cut(data[column], bins=[0, 65, 75, 120]), or use a "
            "categorical column."
        )
    if len(levels) < 2:
        raise DataError(
            f"modifier column {column!r} has a single level ({levels[0]!r}) on every day; effect modification "
            "needs at least two groups."
        )
    lookup = {level: i for i, level in enumerate(levels)}
    codes = np.full(len(values), -1)
    codes[~absent] = [lookup[v] for v in values[~absent].to_numpy(dtype=object)]
    return codes, tuple(levels)


def interact(exposure: np.ndarray, codes: np.ndarray, n_levels: int) -> np.ndarray:
    """The exposure columns repeated per level, zero outside the level (level-major: level 1's columns
    first). Missing exposure stays missing in every level's columns, so the day is dropped as before."""
    n, m = exposure.shape
    out = np.zeros((n, m * n_levels))
    for g in range(n_levels):
        out[:, g * m : (g + 1) * m] = exposure * (codes == g)[:, None]
    out[~np.isfinite(exposure).all(axis=1) | (codes < 0)] = np.nan
    return out


def absorbed_main_effects(
    matrix: np.ndarray, names: tuple[str, ...], main_effects: tuple[str, ...], strata: np.ndarray
) -> tuple[np.ndarray, str | None]:
    """Columns of the modifier's main effects that the case-crossover strata absorb, and a note (None if none).

    ``matrix`` holds the design columns ``names`` on the days used and ``strata`` the stratum of each such day.
    A main-effect column constant within every stratum (a season of calendar months in year × month × day of
    week strata) is a combination of the stratum intercepts: it is left out, as R's ``glm`` reports such a
    coefficient NA; the exposure × modifier columns stay. The criterion is that of the engine's check
    (:func:`airhealth.model.engine.strata.within_strata`): within-stratum sum of squares below ``RANK_TOL`` of
    the total.
    """
    from ..engine.checks import RANK_TOL

    index = [j for j, name in enumerate(names) if name in main_effects]
    if not index:
        return np.array([], dtype=int), None
    counts = np.bincount(strata).astype(float)
    safe = np.where(counts > 0, counts, 1.0)
    absorbed = []
    for j in index:
        x = matrix[:, j]
        within = x - (np.bincount(strata, weights=x) / safe)[strata]
        if float(within @ within) <= RANK_TOL * float(x @ x):
            absorbed.append(j)
    if not absorbed:
        return np.array([], dtype=int), None
    shown = ", ".join(repr(names[j]) for j in absorbed)
    note = (
        f"the modifier's main effect {shown} is constant within every case-crossover stratum, so the stratum "
        "intercepts hold it: it is left out (aliased, as R's glm reports NA); the exposure effect per group stays."
    )
    return np.asarray(absorbed, dtype=int), note


def group_column_names(names: list[str], modifier: str, levels: tuple) -> list[str]:
    """Coefficient names of the per-level exposure columns, e.g. ``pm25[0-1]:season=warm``."""
    return [f"{name}:{modifier}={level}" for level in levels for name in names]


def check_group_sizes(
    y: np.ndarray, used: np.ndarray, codes: np.ndarray, levels: tuple, modifier: str, outcome: str
) -> None:
    """Each level needs :data:`MIN_GROUP_DAYS` days used and :data:`MIN_GROUP_EVENTS` events.

    Raises
    ------
    DataError
        Naming the level, its days used and its events, and the counts of every level.
    """
    days = np.bincount(codes[used], minlength=len(levels))  # (days used always have a level)
    events = np.bincount(codes[used], weights=y[used], minlength=len(levels))
    counts = "; ".join(f"{lev}: {d} days, {e:.0f} events" for lev, d, e in zip(levels, days, events, strict=True))
    for level, d, e in zip(levels, days, events, strict=True):
        if d < MIN_GROUP_DAYS or e < MIN_GROUP_EVENTS:
            raise DataError(
                f"level {level!r} of modifier {modifier!r} has too few days or events of {outcome!r} for its own "
                f"exposure effect: {d} days used and {e:.0f} events (needs at least {MIN_GROUP_DAYS} days and "
                f"{MIN_GROUP_EVENTS} events). Per level — {counts}. Merge small levels into a neighbour, or use "
                "a longer series."
            )
