"""Lag structures: how past days of exposure enter the model.

A lag structure covers lag days ``L = (l_0, ..., l_m)`` and has a lag basis ``C`` (``len(L) × k``). The
model term is ``Σ_l β_l x_{t-l}`` with per-lag coefficients ``β = C θ``; its ``k`` design columns are
``Q C``, where ``Q`` holds the lagged exposures. The cumulative (overall) effect is ``1ᵀ C θ``. A single
day is ``L = (l,)``, ``C = [[1]]``; a moving average of lags ``a..b`` is ``C = 1 / (b - a + 1)``, so its one
coefficient is the effect of a unit rise sustained over the whole window. Distributed lags (in
:mod:`airhealth.model.distributed_lags`) use richer bases.

References
----------
Schwartz J (2000). The distributed lag between air pollution and daily deaths. Epidemiology 11:320–326.
Bhaskaran K, Gasparrini A, Hajat S, Smeeth L, Armstrong B (2013). Time series regression studies in
environmental epidemiology. Int J Epidemiol 42:1187–1195.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

from ..errors import SpecificationError
from ..prep.lags import lag_matrix, moving_average

__all__ = ["LagStructure", "MovingAverage", "SingleDay", "parse_lag"]


class LagStructure:
    """Base class: subclasses define ``label``, ``lags`` and ``basis()``; the rest follows."""

    label: str

    @property
    def lags(self) -> np.ndarray:  # pragma: no cover - abstract
        raise NotImplementedError

    def basis(self) -> np.ndarray:  # pragma: no cover - abstract
        """The ``len(lags) × k`` lag basis ``C``."""
        raise NotImplementedError

    @property
    def max_lag(self) -> int:
        return int(self.lags.max())

    @property
    def n_columns(self) -> int:
        return self.basis().shape[1]

    @property
    def is_distributed(self) -> bool:
        """True when the model reports one coefficient per lag (distributed lag structures)."""
        return False

    def columns(self, x: np.ndarray) -> np.ndarray:
        """Design columns ``Q C`` for a daily series on a complete calendar (missing if any lag is missing)."""
        return lag_matrix(x, self.lags) @ self.basis()

    def column_names(self, exposure: str) -> list[str]:
        k = self.n_columns
        return [f"{exposure}[{self.label}]"] if k == 1 else [f"{exposure}[{self.label}]{j + 1}" for j in range(k)]

    def __str__(self) -> str:
        return self.label


@dataclass(frozen=True)
class SingleDay(LagStructure):
    """The exposure on one day, ``lag`` days before the outcome (lag 0 = the same day)."""

    lag: int = 0

    def __post_init__(self) -> None:
        if not isinstance(self.lag, int | np.integer) or self.lag < 0:
            raise SpecificationError(f"a lag must be a whole number of days >= 0, got {self.lag!r}.")

    @property
    def label(self) -> str:  # type: ignore[override]
        return str(self.lag)

    @property
    def lags(self) -> np.ndarray:
        return np.array([self.lag])

    def basis(self) -> np.ndarray:
        return np.ones((1, 1))


@dataclass(frozen=True)
class MovingAverage(LagStructure):
    """Mean exposure over lags ``first..last``.

    Missing when any day of the window is missing (the usual convention), unless ``min_count`` is set:
    then the mean of the available days when at least ``min_count`` are present.
    """

    first: int = 0
    last: int = 1
    min_count: int | None = None

    def __post_init__(self) -> None:
        if not (isinstance(self.first, int | np.integer) and isinstance(self.last, int | np.integer)):
            raise SpecificationError(f"moving-average lags must be whole days, got {self.first!r}-{self.last!r}.")
        if self.first < 0 or self.last < self.first:
            raise SpecificationError(f"a moving average needs 0 <= first <= last lag, got {self.first}-{self.last}.")
        width = self.last - self.first + 1
        if self.min_count is not None and not 1 <= self.min_count <= width:
            raise SpecificationError(f"min_count must be between 1 and {width} for lags {self.label}.")

    @property
    def label(self) -> str:  # type: ignore[override]
        return f"{self.first}-{self.last}"

    @property
    def lags(self) -> np.ndarray:
        return np.arange(self.first, self.last + 1)

    def basis(self) -> np.ndarray:
        width = self.last - self.first + 1
        return np.full((width, 1), 1.0 / width)

    def columns(self, x: np.ndarray) -> np.ndarray:
        return moving_average(x, self.first, self.last, self.min_count)[:, None]


_SINGLE = re.compile(r"^\s*(\d+)\s*$")
_MEAN = re.compile(r"^\s*(\d+)\s*-\s*(\d+)\s*$")


def parse_lag(spec: str | int | LagStructure) -> LagStructure:
    """Turn a lag string into a lag structure.

    ``"0"``, ``"2"``: a single day; ``"0-1"``, ``"0-3"``: a moving average; ``"dl0-5"``,
    ``"dl0-7:poly3"``, ``"dl0-21:spline4"``: distributed lags. Lag-structure objects pass through.

    Examples
    --------
    >>> parse_lag("0-3")
    MovingAverage(first=0, last=3, min_count=None)
    >>> parse_lag(2)
    SingleDay(lag=2)
    """
    if isinstance(spec, LagStructure):
        return spec
    if isinstance(spec, int | np.integer) and not isinstance(spec, bool):
        return SingleDay(int(spec))
    if not isinstance(spec, str):
        raise SpecificationError(f"a lag must be a string such as '0', '0-1' or 'dl0-5', got {spec!r}.")
    text = spec.strip().lower()
    if m := _SINGLE.match(text):
        return SingleDay(int(m.group(1)))
    if m := _MEAN.match(text):
        first, last = int(m.group(1)), int(m.group(2))
        if last < first:
            raise SpecificationError(f"lag {spec!r}: the last lag must not be before the first.")
        return SingleDay(first) if first == last else MovingAverage(first, last)
    if text.startswith("dl"):
        try:
            from .distributed_lags import parse_distributed_lag
        except ModuleNotFoundError as exc:  # pragma: no cover - during development only
            raise SpecificationError("distributed lags are not available in this build.") from exc
        return parse_distributed_lag(text)
    if text.startswith("-") or re.match(r"^\s*-?\d+\s*-\s*-\d+", text):
        raise SpecificationError(f"lag {spec!r}: lags are days before the outcome and cannot be negative.")
    raise SpecificationError(
        f"lag {spec!r} is not understood; use a day such as '0' or '2', a moving average such as '0-1', "
        "or a distributed lag such as 'dl0-5', 'dl0-7:poly3' or 'dl0-21:spline4'."
    )
