"""Lag structures: how past days of exposure enter the model.

A lag structure covers lag days ``L = (l_0, ..., l_m)`` and has a lag basis ``C`` (``len(L) × k``). The
model term is ``Σ_l β_l x_{t-l}`` with per-lag coefficients ``β = C θ``; its ``k`` design columns are
``Q C``, where ``Q`` holds the lagged exposures. The cumulative (overall) effect is ``1ᵀ C θ``. A single
day is ``L = (l,)``, ``C = [[1]]``; a moving average of lags ``a..b`` is ``C = 1 / (b - a + 1)``, so its one
coefficient is the effect of a unit rise sustained over the whole window. Distributed lags (in
:mod:`airhealth.model.bases.distributed_lags`) use richer bases.

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

from ...errors import SpecificationError
from ...prep.lags import lag_matrix, moving_average

__all__ = ["LagStructure", "MovingAverage", "SingleDay", "number_text", "parse_lag"]


def number_text(value: float) -> str:
    """A number as label text that reads back to exactly the same float (``7``, ``2.5``, ``1e-05``).

    Labels are keys in comparison tables and reports and are parsed back by :func:`parse_lag`, so they
    must not round (``f"{v:g}"`` would give 30.00001 and 30.000012 the same text).
    """
    v = float(value)
    if v.is_integer() and abs(v) < 1e15:
        return str(int(v))
    return repr(v)


def _whole_number(value: object) -> bool:
    return isinstance(value, int | np.integer) and not isinstance(value, bool)


class LagStructure:
    """Base class: subclasses define ``label``, ``lags`` and ``basis()``; the rest follows.

    ``label`` states every option of the structure (``"0-3"``, ``"0-3 min 1"``, ``"dl0-21:spline4:log"``):
    two different structures never share a label, and :func:`parse_lag` turns a label back into an equal
    structure. ``columns(x)`` applies the structure's missing-day rule; every term built from a lag
    structure (including :class:`~airhealth.model.bases.exposure_lag.ExposureLagBasis`) goes through it.
    """

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
        """Design columns ``Q C`` for a daily series on a complete calendar (missing if any lag is missing).

        The one place a lag structure's missing-day rule is applied; subclasses with another rule (a moving
        average with ``min_count``) override it.
        """
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
        if not _whole_number(self.lag) or self.lag < 0:
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
    then the mean of the available days when at least ``min_count`` are present. A ``min_count`` equal to
    the window's width is the usual rule and is stored as ``None``. The label states the rule: ``"0-3"``
    (every day needed) or ``"0-3 min 1"`` (at least one day).

    Examples
    --------
    >>> MovingAverage(0, 3, min_count=1).label
    '0-3 min 1'
    >>> MovingAverage(0, 3, min_count=4) == MovingAverage(0, 3)
    True
    """

    first: int = 0
    last: int = 1
    min_count: int | None = None

    def __post_init__(self) -> None:
        if not (_whole_number(self.first) and _whole_number(self.last)):
            raise SpecificationError(f"moving-average lags must be whole days, got {self.first!r}-{self.last!r}.")
        if self.first < 0 or self.last < self.first:
            raise SpecificationError(f"a moving average needs 0 <= first <= last lag, got {self.first}-{self.last}.")
        width = self.last - self.first + 1
        if self.min_count is None:
            return
        if not _whole_number(self.min_count) or not 1 <= self.min_count <= width:
            raise SpecificationError(
                f"min_count must be a whole number of days between 1 and {width} for lags "
                f"{self.first}-{self.last}, got {self.min_count!r}."
            )
        if self.min_count == width:  # every day needed: the usual rule, one spelling
            object.__setattr__(self, "min_count", None)

    @property
    def label(self) -> str:  # type: ignore[override]
        rule = "" if self.min_count is None else f" min {self.min_count}"
        return f"{self.first}-{self.last}{rule}"

    @property
    def lags(self) -> np.ndarray:
        return np.arange(self.first, self.last + 1)

    def basis(self) -> np.ndarray:
        width = self.last - self.first + 1
        return np.full((width, 1), 1.0 / width)

    def columns(self, x: np.ndarray) -> np.ndarray:
        """The mean over the window, by the structure's missing-day rule (``min_count``)."""
        return moving_average(x, self.first, self.last, self.min_count)[:, None]


_SINGLE = re.compile(r"^\s*(\d+)\s*$")
_MEAN = re.compile(r"^\s*(\d+)\s*-\s*(\d+)\s*(?:min\s*(\d+)\s*)?$")
_FORMS = (
    "a day such as '0' or '2', a moving average such as '0-1' or '0-3 min 1' (at least 1 day of the window "
    "present), a distributed lag such as 'dl0-5', 'dl0-7:poly3' or 'dl0-21:spline4', or an exposure-lag "
    "basis such as 'spline(df=3) x dl0-21:spline4'"
)


def parse_lag(spec: str | int | LagStructure) -> LagStructure:
    """Turn a lag string (any structure's ``label``) into a lag structure.

    ``"0"``, ``"2"``: a single day; ``"0-1"``, ``"0-3"``: a moving average, ``"0-3 min 1"`` one that needs
    at least 1 day of its window; ``"dl0-5"``, ``"dl0-7:poly3"``, ``"dl0-21:spline4"``,
    ``"dl0-21:spline4:log"``, ``"dl0-21:spline:knots=2,5,10"``: distributed lags; ``"<response> x <lag>"``
    (e.g. ``"spline(df=3) x dl0-21:spline4"``, ``"above(25) x 0-3"``): an exposure-lag basis. Lag-structure
    objects pass through. For every structure ``s``, ``parse_lag(s.label) == s`` (so ``"2-2"`` is the one-day
    moving average, with the same numbers as the single day ``"2"`` but its own label).

    Examples
    --------
    >>> parse_lag("0-3")
    MovingAverage(first=0, last=3, min_count=None)
    >>> parse_lag("0-3 min 1")
    MovingAverage(first=0, last=3, min_count=1)
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
    if re.search(r"\sx\s", text):
        from .exposure_lag import parse_exposure_lag  # the exposure-lag module builds on this one

        return parse_exposure_lag(text)
    if m := _SINGLE.match(text):
        return SingleDay(int(m.group(1)))
    if m := _MEAN.match(text):
        first, last = int(m.group(1)), int(m.group(2))
        if last < first:
            raise SpecificationError(f"lag {spec!r}: the last lag must not be before the first.")
        return MovingAverage(first, last, None if m.group(3) is None else int(m.group(3)))
    if text.startswith("dl"):
        from .distributed_lags import parse_distributed_lag  # the distributed-lag module builds on this one

        return parse_distributed_lag(text)
    if text.startswith("-") or re.match(r"^\s*-?\d+\s*-\s*-\d+", text):
        raise SpecificationError(f"lag {spec!r}: lags are days before the outcome and cannot be negative.")
    if re.match(r"^\s*\d+\s*min\b", text):
        raise SpecificationError(
            f"lag {spec!r}: a single day has no minimum count of days; 'min' belongs to a moving average "
            "such as '0-3 min 1'."
        )
    raise SpecificationError(f"lag {spec!r} is not understood; use {_FORMS}.")
