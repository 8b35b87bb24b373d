"""Checks of the tables and arrays given to the pooling functions; every error names the city and value.

One place decides what bad input to pooling gets: a missing column, a NaN estimate, a zero, negative or
missing standard error, duplicate city names, fewer than two usable cities, unusable moderators, and (for
multivariate pooling) vectors of different lengths and covariances that are not symmetric positive definite.
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from .._warn import warn_user
from ..errors import DataError, DataWarning, SpecificationError

__all__ = ["CityEstimates", "check_covariances", "check_vectors", "read_estimates"]

#: Relative asymmetry of a covariance matrix tolerated as rounding (|S - S'| <= this * max|S|).
SYMMETRY_TOLERANCE = 1e-8


@dataclass(frozen=True)
class CityEstimates:
    """Validated univariate input: estimates ``y``, within-city variances ``v``, design ``X`` and labels."""

    y: np.ndarray
    v: np.ndarray
    X: np.ndarray
    labels: tuple[str, ...]
    terms: tuple[str, ...]


def _describe(labels: Sequence[str], rows: np.ndarray, values: np.ndarray, limit: int = 5) -> str:
    shown = [f"{labels[i]!s} ({float(values[i])!r})" for i in rows[:limit]]
    more = f" and {len(rows) - limit} more" if len(rows) > limit else ""
    return ", ".join(shown) + more


def _labels(frame: pd.DataFrame, city: str) -> tuple[str, ...]:
    if city not in frame.columns:
        return tuple(f"row {i}" for i in range(len(frame)))
    names = frame[city]
    if names.isna().any():
        rows = np.flatnonzero(names.isna().to_numpy())
        raise DataError(f"column {city!r} has no city name in rows {rows[:5].tolist()}; give every row a name.")
    text = names.astype(str)
    dup = text[text.duplicated(keep=False)]
    if len(dup):
        first = dup.iloc[0]
        rows = np.flatnonzero((text == first).to_numpy()).tolist()
        raise DataError(
            f"city {first!r} appears more than once in column {city!r} (rows {rows}); "
            "give one row per city (combine or rename the duplicates)."
        )
    return tuple(text.tolist())


def _numeric_column(frame: pd.DataFrame, column: str, what: str) -> np.ndarray:
    if column not in frame.columns:
        raise DataError(
            f"the {what} column {column!r} is not in the table; its columns are {list(map(str, frame.columns))}."
        )
    values = pd.to_numeric(frame[column], errors="coerce").to_numpy(dtype=float)
    text = frame[column].notna().to_numpy() & np.isnan(values)
    if text.any():
        rows = np.flatnonzero(text)
        raise DataError(
            f"the {what} column {column!r} holds text that is not a number in rows {rows[:5].tolist()} "
            f"(first: {frame[column].iloc[rows[0]]!r}); give numbers only."
        )
    return values


def _drop_failed(frame: pd.DataFrame, city: str) -> pd.DataFrame:
    """Leave out rows whose ``error`` column holds a message (cities whose first-stage fit failed)."""
    if "error" not in frame.columns:
        return frame
    err = frame["error"]
    failed = err.notna().to_numpy() & (err.astype(str).str.strip() != "").to_numpy()
    if failed.any():
        names = frame[city].astype(str).tolist() if city in frame.columns else [f"row {i}" for i in range(len(frame))]
        left_out = [names[i] for i in np.flatnonzero(failed)]
        warn_user(
            f"{len(left_out)} {'city' if len(left_out) == 1 else 'cities'} with a message in the 'error' column "
            f"{'is' if len(left_out) == 1 else 'are'} left out of the pooling: "
            f"{', '.join(left_out[:5])}{' ...' if len(left_out) > 5 else ''}.",
            DataWarning,
        )
    return frame.loc[~failed]


def _failed_note(estimates: pd.DataFrame, kept: pd.DataFrame, city: str) -> str:
    """Why cities are missing from a too-short table: those left out for a message in the 'error' column."""
    failed = estimates.loc[~estimates.index.isin(kept.index)]
    if failed.empty:
        return ""
    names = failed[city].astype(str).tolist() if city in failed.columns else [f"{len(failed)} rows"]
    return (
        f" Left out for a message in the 'error' column: {', '.join(names[:5])}{' ...' if len(names) > 5 else ''}"
        " (read it there: fix that city's data or model options and fit it again)."
    )


def read_estimates(
    estimates: Any, estimate: str, se: str, moderators: Sequence[str] | None, city: str = "city"
) -> CityEstimates:
    """Validate a table of city estimates and return the arrays the pooling needs.

    Raises
    ------
    DataError
        A missing column, a non-numeric or NaN estimate or moderator, a standard error that is zero,
        negative or missing, duplicate city names, or fewer than two cities.
    SpecificationError
        Moderators given as something other than column names, or moderators that are collinear.
    """
    if not isinstance(estimates, pd.DataFrame):
        raise DataError(f"estimates must be a pandas DataFrame with one row per city, got {type(estimates).__name__}.")
    frame = _drop_failed(estimates, city)
    labels = _labels(frame, city)
    y = _numeric_column(frame, estimate, "estimate")
    s = _numeric_column(frame, se, "standard error")
    bad = np.flatnonzero(~np.isfinite(y))
    if bad.size:
        raise DataError(
            f"the estimate column {estimate!r} is missing or infinite for {_describe(labels, bad, y)}; "
            "remove those cities or supply their estimates."
        )
    bad = np.flatnonzero(~(np.isfinite(s) & (s > 0)))
    if bad.size:
        raise DataError(
            f"the standard error column {se!r} must be positive and finite; it is not for "
            f"{_describe(labels, bad, s)}. A city without a valid standard error cannot be weighted: "
            "remove it or supply its standard error."
        )
    X, terms = _design(frame, labels, moderators)
    if len(y) < 2:
        raise DataError(
            f"pooling needs at least two usable cities; got {len(y)} ({', '.join(labels) or 'none'})."
            + _failed_note(estimates, frame, city)
        )
    if len(y) <= X.shape[1]:
        raise DataError(
            f"{len(y)} cities cannot estimate {X.shape[1]} coefficients ({', '.join(terms)}); "
            "use fewer moderators or more cities."
        )
    return CityEstimates(y=y, v=s**2, X=X, labels=labels, terms=terms)


def _design(
    frame: pd.DataFrame, labels: tuple[str, ...], moderators: Sequence[str] | None
) -> tuple[np.ndarray, tuple[str, ...]]:
    """The intercept and one column per moderator (numeric city-level characteristics)."""
    if moderators is None:
        moderators = ()
    if isinstance(moderators, str):
        moderators = (moderators,)
    moderators = tuple(moderators)
    if not all(isinstance(m, str) for m in moderators):
        raise SpecificationError(f"moderators must be column names (strings), got {moderators!r}.")
    if len(set(moderators)) != len(moderators):
        raise SpecificationError(f"moderators name a column twice: {moderators!r}.")
    columns = [np.ones(len(frame))]
    for name in moderators:
        values = _numeric_column(frame, name, "moderator")
        bad = np.flatnonzero(~np.isfinite(values))
        if bad.size:
            raise DataError(
                f"the moderator {name!r} is missing for {_describe(labels, bad, values)}; "
                "supply it or leave those cities out."
            )
        columns.append(values)
    X = np.column_stack(columns)
    terms = ("intercept", *moderators)
    if len(frame) and np.linalg.matrix_rank(X) < X.shape[1]:
        raise SpecificationError(
            f"the moderators {list(moderators)} are constant or collinear across the cities (with the intercept); "
            "drop one of them."
        )
    return X, terms


def _city(labels: tuple[str, ...], i: int) -> str:
    """How messages name city ``i``: its name (``city 'Athens'``), or ``city 3`` when the cities are unnamed."""
    return labels[i] if re.fullmatch(r"city \d+", labels[i]) else f"city {labels[i]!r}"


def _city_labels(coefs: Any, cities: Sequence[Any] | None, k: int) -> tuple[str, ...]:
    if cities is not None:
        names = tuple(str(c) for c in cities)
        if len(names) != k:
            raise DataError(f"got {k} coefficient vectors but {len(names)} city names in cities=; give one per city.")
        return names
    if isinstance(coefs, pd.DataFrame):
        return tuple(str(i) for i in coefs.index)
    return tuple(f"city {i}" for i in range(k))


def check_vectors(
    coefs: Any, cities: Sequence[Any] | None = None
) -> tuple[np.ndarray, tuple[str, ...], tuple[str, ...]]:
    """Validate a k×p table of coefficient vectors; return it with city labels and coefficient names.

    The cities are named by ``cities`` when given, else by a DataFrame's index labels, else ``city 0``, ...
    """
    if isinstance(coefs, pd.DataFrame):
        labels = _city_labels(coefs, cities, len(coefs))
        names = tuple(str(c) for c in coefs.columns)
        values = coefs.apply(pd.to_numeric, errors="coerce").to_numpy(dtype=float)
    else:
        try:
            rows = [np.asarray(r, dtype=float).ravel() for r in coefs]
        except (TypeError, ValueError) as exc:
            raise DataError(f"coefs must be a k×p array or DataFrame of numbers: {exc}") from None
        labels = _city_labels(coefs, cities, len(rows))
        lengths = {len(r) for r in rows}
        if len(lengths) > 1:
            first = next(i for i, r in enumerate(rows) if len(r) != len(rows[0]))
            raise DataError(
                f"the coefficient vectors have different lengths: {_city(labels, 0)} has {len(rows[0])}, "
                f"{_city(labels, first)} has {len(rows[first])}; every city must give the same coefficients (same "
                "lags or basis)."
            )
        values = np.vstack(rows) if rows else np.empty((0, 0))
        names = tuple(f"coef{j}" for j in range(values.shape[1]))
    bad = np.argwhere(~np.isfinite(values))
    if bad.size:
        i, j = bad[0]
        raise DataError(
            f"coefficient {names[j]!r} of {_city(labels, i)} is {float(values[i, j])!r}; every city needs all its "
            "coefficients (leave out cities whose fit failed)."
        )
    if len(set(labels)) != len(labels):
        raise DataError("the coefficient table has duplicate city labels in its index; give one row per city.")
    if values.shape[0] < 2:
        raise DataError(f"pooling needs at least two usable cities; got {values.shape[0]}.")
    return values, labels, names


def check_covariances(covs: Any, k: int, p: int, labels: tuple[str, ...]) -> np.ndarray:
    """Validate k within-city p×p covariances: right shape, finite, symmetric and positive definite."""
    items = list(covs.values()) if isinstance(covs, dict) else list(covs)
    if len(items) != k:
        raise DataError(f"got {k} coefficient vectors but {len(items)} covariance matrices; give one per city.")
    out = np.empty((k, p, p))
    for i, cov in enumerate(items):
        who = _city(labels, i)
        S = np.asarray(cov, dtype=float)
        if S.ndim == 0 and p == 1:
            S = S.reshape(1, 1)
        if S.shape != (p, p):
            raise DataError(f"the covariance of {who} has shape {S.shape}; it must be {p}×{p} like its vector.")
        if not np.isfinite(S).all():
            raise DataError(f"the covariance of {who} holds missing or infinite values; supply a full matrix.")
        scale = max(np.abs(S).max(), np.finfo(float).tiny)
        asym = np.abs(S - S.T).max()
        if asym > SYMMETRY_TOLERANCE * scale:
            raise DataError(
                f"the covariance of {who} is not symmetric (largest difference {asym:.3g}); "
                "check that it is the covariance of the city's coefficients."
            )
        S = (S + S.T) / 2
        smallest = float(np.linalg.eigvalsh(S).min())
        if smallest <= 0:
            raise DataError(
                f"the covariance of {who} is not positive definite (smallest eigenvalue {smallest:.3g}); "
                "a city with a singular covariance cannot be weighted: leave it out or fix its first-stage fit."
            )
        out[i] = S
    return out
