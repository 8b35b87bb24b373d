"""Confounder terms: each turns columns of a daily frame into design columns.

A term states only its own maths: :meth:`Term.build` learns whatever it needs from the whole study period
(spline knots from all non-missing values, before any row is dropped; the number of time-trend df from the
calendar length) and returns a :class:`TermBlock`: the design columns on the full calendar, missing where
its inputs are missing. Adding a kind of term means adding one class here.

References
----------
Bhaskaran K, Gasparrini A, Hajat S, Smeeth L, Armstrong B (2013). Time series regression studies in
environmental epidemiology. Int J Epidemiol 42:1187–1195 (time splines and Fourier terms for season).
Peng RD, Dominici F, Louis TA (2006). Model choice in time series studies of air pollution and mortality.
J R Stat Soc A 169:179–203 (degrees of freedom per year for the time trend).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import numpy as np
import pandas as pd

from ...errors import DataError, SpecificationError
from ...prep.calendar import WEEKDAY_NAMES, holiday_indicator
from ...prep.lags import lagged, moving_average
from .splines import NaturalSplineBasis

__all__ = [
    "Categorical",
    "DayOfWeek",
    "FourierSeason",
    "Linear",
    "PublicHolidays",
    "Spline",
    "Term",
    "TermBlock",
    "TimeSpline",
]

DAYS_PER_YEAR = 365.25


@dataclass(frozen=True)
class TermBlock:
    """Design columns of one term on the full calendar, with what is needed to describe and predict."""

    name: str
    columns: np.ndarray
    column_names: tuple[str, ...]
    basis: Any = None
    inputs: tuple[str, ...] = ()


class Term:
    """Base class of model terms; subclasses implement ``name``, ``inputs`` and ``build``."""

    @property
    def name(self) -> str:  # pragma: no cover - abstract
        raise NotImplementedError

    @property
    def inputs(self) -> tuple[str, ...]:
        """Data columns the term reads."""
        return ()

    def build(self, frame: pd.DataFrame, date: str) -> TermBlock:  # pragma: no cover - abstract
        raise NotImplementedError


def _series(frame: pd.DataFrame, column: str, lags: int | tuple[int, int] | None) -> np.ndarray:
    if not pd.api.types.is_numeric_dtype(frame[column]):
        raise DataError(f"column {column!r} must be numeric to enter the model (dtype {frame[column].dtype}).")
    x = frame[column].to_numpy(dtype=float, na_value=np.nan)
    if lags is None:
        return x
    if isinstance(lags, int):
        return lagged(x, lags)
    return moving_average(x, lags[0], lags[1])


def _lag_label(column: str, lags: int | tuple[int, int] | None) -> str:
    if lags is None:
        return column
    if isinstance(lags, int):
        return f"{column}[lag {lags}]"
    return f"{column}[mean lags {lags[0]}-{lags[1]}]"


def _check_lags(lags: int | tuple[int, int] | None) -> None:
    if lags is None:
        return
    ok = (isinstance(lags, int) and lags >= 0) or (
        isinstance(lags, tuple) and len(lags) == 2 and all(isinstance(v, int) for v in lags) and 0 <= lags[0] <= lags[1]
    )
    if not ok:
        raise SpecificationError(f"term lags must be a day >= 0 or a pair (first, last), got {lags!r}.")


@dataclass(frozen=True)
class Spline(Term):
    """Natural cubic spline of a column (optionally lagged, or averaged over lags ``(first, last)``).

    Knots come from the non-missing values over the whole study period (as ``splines::ns`` does inside
    base R's ``glm``), so they do not change when rows are dropped for missing values elsewhere.
    """

    column: str
    df: int = 3
    lags: int | tuple[int, int] | None = None
    knots: tuple[float, ...] | None = None

    def __post_init__(self) -> None:
        if self.knots is None and (not isinstance(self.df, int | np.integer) or self.df < 1):
            raise SpecificationError(f"spline of {self.column!r}: df must be a whole number >= 1, got {self.df!r}.")
        _check_lags(self.lags)

    @property
    def name(self) -> str:
        return f"spline({_lag_label(self.column, self.lags)})"

    @property
    def inputs(self) -> tuple[str, ...]:
        return (self.column,)

    def build(self, frame: pd.DataFrame, date: str) -> TermBlock:
        x = _series(frame, self.column, self.lags)
        if not np.isfinite(x).any():
            raise DataError(f"column {self.column!r} is entirely missing; it cannot enter the model as a spline.")
        if np.unique(x[np.isfinite(x)]).size <= self.df and self.knots is None:
            raise DataError(
                f"column {self.column!r} has too few distinct values for a spline with {self.df} df; "
                "lower df or enter it as a linear term."
            )
        knots = None if self.knots is None else np.asarray(self.knots)
        basis = NaturalSplineBasis.from_values(x, df=self.df, knots=knots)
        names = tuple(f"{self.name}{j + 1}" for j in range(basis.df))
        return TermBlock(self.name, basis.evaluate(x), names, basis, self.inputs)


@dataclass(frozen=True)
class Linear(Term):
    """A column entered linearly (optionally lagged or averaged over lags), e.g. an epidemic indicator."""

    column: str
    lags: int | tuple[int, int] | None = None

    def __post_init__(self) -> None:
        _check_lags(self.lags)

    @property
    def name(self) -> str:
        return _lag_label(self.column, self.lags)

    @property
    def inputs(self) -> tuple[str, ...]:
        return (self.column,)

    def build(self, frame: pd.DataFrame, date: str) -> TermBlock:
        x = _series(frame, self.column, self.lags)
        return TermBlock(self.name, x[:, None], (self.name,), None, self.inputs)


@dataclass(frozen=True)
class Categorical(Term):
    """Indicator columns for the levels of a column, the first (sorted) level as reference."""

    column: str

    @property
    def name(self) -> str:
        return self.column

    @property
    def inputs(self) -> tuple[str, ...]:
        return (self.column,)

    def build(self, frame: pd.DataFrame, date: str) -> TermBlock:
        values = frame[self.column]
        levels = sorted(values.dropna().unique().tolist(), key=str)
        if len(levels) < 2:
            raise DataError(f"categorical column {self.column!r} needs at least two levels, found {levels}.")
        codes = values.map({lev: i for i, lev in enumerate(levels)}).to_numpy(dtype=float, na_value=np.nan)
        cols = np.column_stack([(codes == i).astype(float) for i in range(1, len(levels))])
        cols[np.isnan(codes)] = np.nan
        names = tuple(f"{self.column}[{lev}]" for lev in levels[1:])
        return TermBlock(self.name, cols, names, tuple(levels), self.inputs)


@dataclass(frozen=True)
class TimeSpline(Term):
    """Natural spline of time with ``round(df_per_year × years)`` df (at least 1) over the calendar."""

    df_per_year: float = 7.0

    def __post_init__(self) -> None:
        if isinstance(self.df_per_year, bool) or not isinstance(self.df_per_year, int | float | np.number):
            raise SpecificationError(f"trend_df_per_year must be a number > 0, got {self.df_per_year!r}.")
        if not np.isfinite(self.df_per_year) or self.df_per_year <= 0:
            raise SpecificationError(f"trend_df_per_year must be > 0, got {self.df_per_year!r}.")

    @property
    def name(self) -> str:
        return "spline(time)"

    def df_for(self, n_days: int) -> int:
        """Degrees of freedom for a calendar of ``n_days`` days."""
        return max(1, int(np.floor(self.df_per_year * n_days / DAYS_PER_YEAR + 0.5)))

    def build(self, frame: pd.DataFrame, date: str) -> TermBlock:
        time = np.arange(len(frame), dtype=float)
        df = self.df_for(len(frame))
        if df >= len(frame) - 1:
            raise DataError(f"too few days ({len(frame)}) for a time trend with {df} df; lower trend_df_per_year.")
        basis = NaturalSplineBasis.from_values(time, df=df)
        names = tuple(f"spline(time){j + 1}" for j in range(df))
        return TermBlock(self.name, basis.evaluate(time), names, basis)


@dataclass(frozen=True)
class FourierSeason(Term):
    """Seasonal sine/cosine pairs with period one year, plus a linear long-term trend.

    Column pairs ``sin(2πkt/365.25)``, ``cos(2πkt/365.25)`` for ``k = 1..pairs`` (Bhaskaran et al. 2013).
    """

    pairs: int = 4
    linear_trend: bool = True

    def __post_init__(self) -> None:
        if not isinstance(self.pairs, int | np.integer) or self.pairs < 1:
            raise SpecificationError(f"fourier_pairs must be a whole number >= 1, got {self.pairs!r}.")

    @property
    def name(self) -> str:
        return "fourier(season)"

    def build(self, frame: pd.DataFrame, date: str) -> TermBlock:
        dates = pd.DatetimeIndex(frame[date])
        t = (dates - dates[0]).days.to_numpy(dtype=float)
        cols, names = [], []
        for k in range(1, self.pairs + 1):
            angle = 2 * np.pi * k * t / DAYS_PER_YEAR
            cols += [np.sin(angle), np.cos(angle)]
            names += [f"sin{k}", f"cos{k}"]
        if self.linear_trend:
            cols.append(t / DAYS_PER_YEAR)
            names.append("trend(years)")
        return TermBlock(self.name, np.column_stack(cols), tuple(names))


@dataclass(frozen=True)
class DayOfWeek(Term):
    """Indicators for Tuesday..Sunday (Monday is the reference)."""

    @property
    def name(self) -> str:
        return "day of week"

    def build(self, frame: pd.DataFrame, date: str) -> TermBlock:
        dow = pd.DatetimeIndex(frame[date]).day_of_week.to_numpy()
        cols = (dow[:, None] == np.arange(1, 7)[None, :]).astype(float)
        return TermBlock(self.name, cols, tuple(f"dow[{d}]" for d in WEEKDAY_NAMES[1:]))


@dataclass(frozen=True)
class PublicHolidays(Term):
    """An indicator of public holidays for a country (ISO 3166 code), from the ``holidays`` package."""

    country: str
    subdivision: str | None = field(default=None)

    @property
    def name(self) -> str:
        return f"holiday[{self.country}]"

    def build(self, frame: pd.DataFrame, date: str) -> TermBlock:
        flag = holiday_indicator(pd.DatetimeIndex(frame[date]), self.country, self.subdivision)
        if flag.sum() == 0:
            raise DataError(f"no public holidays of {self.country!r} fall in the study period.")
        return TermBlock(self.name, flag[:, None], (self.name,))
