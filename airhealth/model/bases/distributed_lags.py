r"""Distributed lag structures: the effect of one day's exposure spread over the following days.

The model term is :math:`\sum_{l=a}^{b} \beta_l x_{t-l}` over lags :math:`L = (a, \dots, b)`. Writing the
per-lag coefficients as :math:`\beta = C\theta` with a lag basis :math:`C` (``len(L) × k``), the term enters
the GLM as the ``k`` columns :math:`QC`, where :math:`Q` (``n × len(L)``) holds the lagged exposures. The
cumulative (overall) effect of a unit rise sustained over the whole window is
:math:`\mathbf 1^\top\beta = (C^\top\mathbf 1)^\top\theta`, with variance
:math:`(C^\top\mathbf 1)^\top V (C^\top\mathbf 1)`; per-lag variances are the diagonal of :math:`C V C^\top`.

* :class:`UnconstrainedLag` — :math:`C = I`, one free coefficient per lag (Schwartz 2000).
* :class:`PolynomialLag` — :math:`\beta_l` a polynomial of degree ``d`` in the lag (Almon 1965); the basis
  uses Legendre polynomials of the lag rescaled to [-1, 1], which span the same space as the powers
  ``1, l, …, l^d`` (so the fitted per-lag curve is identical) but are far better conditioned.
* :class:`SplineLag` — :math:`\beta_l` a natural cubic spline in the lag with ``df`` columns including the
  constant (so ``df`` equals the number of lag parameters). Interior knots are equally spaced over the lag
  range (``knot_spacing="even"``), or equally spaced on the scale :math:`\log(1 + l - a)`
  (``knot_spacing="log"``), which puts more knots at short lags where effects change fast and fewer where
  they fade; boundary knots are ``a`` and ``b``.

Days whose lag window reaches before the first day of the series, or contains a missing exposure, are left
out of the fit (reasons ``"lag window starts before the first day"`` and ``"exposure missing in lag
window"`` in ``FitResult.dropped``); no exposure is imputed. There is no ``min_count`` as for a moving
average: each lag has its own coefficient, so a missing day could only be filled in by imputation.

String forms (``parse_distributed_lag``): ``"dl0-5"``, ``"dl0-7:poly3"``, ``"dl0-21:spline4"``,
``"dl0-21:spline4:log"``, ``"dl0-21:spline:knots=2,5,10"``. Each object's ``label`` is its string form, and
states every option, so different structures have different labels.

References
----------
Almon S (1965). The distributed lag between capital appropriations and expenditures. Econometrica
33:178–196.
Schwartz J (2000). The distributed lag between air pollution and daily deaths. Epidemiology 11:320–326.
Zanobetti A, Wand MP, Schwartz J, Ryan LM (2000). Generalized additive distributed lag models: quantifying
mortality displacement. Biostatistics 1:279–292.
"""

from __future__ import annotations

import re
from dataclasses import dataclass
from typing import Literal

import numpy as np
from numpy.polynomial import legendre

from ..._choices import check_choice
from ...errors import SpecificationError
from .lag_structures import LagStructure, number_text
from .splines import NaturalSplineBasis

__all__ = [
    "DistributedLag",
    "KnotSpacing",
    "PolynomialLag",
    "SplineLag",
    "UnconstrainedLag",
    "parse_distributed_lag",
]

DEFAULT_SPLINE_DF = 4  # df of a spline lag when neither df nor knots are given

#: How a spline lag spaces its interior knots: evenly over the lags, or evenly on the scale log(1 + lag - first).
KnotSpacing = Literal["even", "log"]


def _whole(value: object) -> bool:
    return isinstance(value, int | np.integer) and not isinstance(value, bool)


def _check_range(kind: str, first: object, last: object) -> None:
    if not (_whole(first) and _whole(last)):
        raise SpecificationError(f"{kind} lags must be whole numbers of days, got {first!r}-{last!r}.")
    if first < 0 or last < 0:  # type: ignore[operator]
        raise SpecificationError(
            f"{kind} lags {first}-{last}: lags are days before the outcome and cannot be negative."
        )
    if last <= first:  # type: ignore[operator]
        raise SpecificationError(
            f"{kind} lags {first}-{last}: a distributed lag needs the last lag after the first "
            f"(for one day use the single lag '{first}')."
        )


class DistributedLag(LagStructure):
    """Base of the distributed lag structures: lags ``first..last``, one reported coefficient per lag."""

    first: int
    last: int

    @property
    def lags(self) -> np.ndarray:
        return np.arange(self.first, self.last + 1)

    @property
    def n_lags(self) -> int:
        return self.last - self.first + 1

    @property
    def is_distributed(self) -> bool:
        return True

    @property
    def n_columns(self) -> int:
        return self.basis().shape[1]


@dataclass(frozen=True)
class UnconstrainedLag(DistributedLag):
    """One free coefficient for each lag ``first..last`` (Schwartz 2000); string form ``"dl0-5"``.

    Examples
    --------
    >>> UnconstrainedLag(0, 5).basis().shape
    (6, 6)
    """

    first: int = 0
    last: int = 5

    def __post_init__(self) -> None:
        _check_range("distributed", self.first, self.last)

    @property
    def label(self) -> str:  # type: ignore[override]
        return f"dl{self.first}-{self.last}"

    def basis(self) -> np.ndarray:
        return np.eye(self.n_lags)


@dataclass(frozen=True)
class PolynomialLag(DistributedLag):
    """Per-lag coefficients on a polynomial of degree ``degree`` in the lag (Almon 1965).

    ``degree + 1`` parameters; the degree must be below the number of lags (a degree of ``n_lags - 1``
    reproduces the unconstrained lag). String form ``"dl0-7:poly3"``.

    Examples
    --------
    >>> PolynomialLag(0, 7, 3).basis().shape
    (8, 4)
    """

    first: int = 0
    last: int = 7
    degree: int = 3

    def __post_init__(self) -> None:
        _check_range("polynomial", self.first, self.last)
        if not _whole(self.degree) or self.degree < 0:
            raise SpecificationError(f"polynomial lag degree must be a whole number >= 0, got {self.degree!r}.")
        if self.degree >= self.n_lags:
            raise SpecificationError(
                f"polynomial lag of degree {self.degree} over lags {self.first}-{self.last} has more "
                f"parameters ({self.degree + 1}) than lags ({self.n_lags}); use a degree of at most "
                f"{self.n_lags - 1} or a longer lag range."
            )

    @property
    def label(self) -> str:  # type: ignore[override]
        return f"dl{self.first}-{self.last}:poly{self.degree}"

    def basis(self) -> np.ndarray:
        u = 2.0 * (self.lags - self.first) / (self.last - self.first) - 1.0
        return legendre.legvander(u, self.degree)


@dataclass(frozen=True)
class SplineLag(DistributedLag):
    """Per-lag coefficients on a natural cubic spline of the lag with ``df`` parameters.

    Parameters
    ----------
    first, last : int
        Lag range in days (``0 <= first < last``).
    df : int or None
        Number of parameters (basis columns, constant included): ``2 <= df <= number of lags``; default 4
        (when no knots are given). ``df - 2`` interior knots are placed by ``knot_spacing``.
    knot_spacing : {"even", "log"}
        ``"even"`` (default): interior knots equally spaced over ``first..last``; ``"log"``: equally spaced
        on the scale ``log(1 + lag - first)``, denser at short lags. String form ``"dl0-21:spline4:log"``.
    knots : tuple of float or None
        Interior knots given directly (strictly inside ``first..last``); then ``df = len(knots) + 2``.

    Examples
    --------
    >>> SplineLag(0, 21, 4).interior_knots
    (7.0, 14.0)
    >>> SplineLag(0, 21, 4).label
    'dl0-21:spline4'
    >>> [round(k, 2) for k in SplineLag(0, 21, 4, knot_spacing="log").interior_knots]
    [1.8, 6.85]
    """

    first: int = 0
    last: int = 21
    df: int | None = None
    knot_spacing: KnotSpacing = "even"
    knots: tuple[float, ...] | None = None

    def __post_init__(self) -> None:
        _check_range("spline", self.first, self.last)
        check_choice("knot_spacing", self.knot_spacing, KnotSpacing)
        if self.knots is not None and len(self.knots) == 0:
            object.__setattr__(self, "knots", None)
            object.__setattr__(self, "df", 2 if self.df is None else self.df)
        if self.knots is not None:
            self._check_knots()
            return
        if self.df is None:
            object.__setattr__(self, "df", DEFAULT_SPLINE_DF)
        if not _whole(self.df) or self.df < 2:  # type: ignore[operator]
            raise SpecificationError(
                f"spline lag over {self.first}-{self.last}: df must be a whole number >= 2 "
                f"(2 is a straight line in the lag), got {self.df!r}."
            )
        if self.df > self.n_lags:  # type: ignore[operator]
            raise SpecificationError(
                f"spline lag with {self.df} df over lags {self.first}-{self.last} has more df than lags "
                f"({self.n_lags}); use at most {self.n_lags} df or a longer lag range."
            )

    def _check_knots(self) -> None:
        knots = tuple(float(k) for k in self.knots)  # type: ignore[union-attr]
        object.__setattr__(self, "knots", knots)
        if self.knot_spacing != "even":
            raise SpecificationError(
                f"give spline lag knots either directly or with knot_spacing={self.knot_spacing!r}, not both."
            )
        bad = [k for k in knots if not (self.first < k < self.last)]
        if bad or list(knots) != sorted(set(knots)):
            raise SpecificationError(
                f"spline lag knots must be distinct, increasing and strictly inside lags "
                f"{self.first}-{self.last}; got {', '.join(f'{k:g}' for k in knots)}."
            )
        if self.df is not None and self.df != len(knots) + 2:
            raise SpecificationError(
                f"spline lag: {len(knots)} interior knots give {len(knots) + 2} df, not df={self.df}; "
                "leave df out when giving knots."
            )
        object.__setattr__(self, "df", len(knots) + 2)
        if self.df > self.n_lags:
            raise SpecificationError(
                f"spline lag with {len(knots)} knots ({self.df} df) over lags {self.first}-{self.last} has "
                f"more df than lags ({self.n_lags})."
            )

    @property
    def interior_knots(self) -> tuple[float, ...]:
        """The interior knots in lag days."""
        if self.knots is not None:
            return self.knots
        probs = np.linspace(0.0, 1.0, int(self.df))[1:-1]  # type: ignore[arg-type]
        if self.knot_spacing == "log":
            span = np.log1p(self.last - self.first)
            values = self.first + np.expm1(probs * span)
        else:
            values = self.first + probs * (self.last - self.first)
        return tuple(float(v) for v in values)

    @property
    def label(self) -> str:  # type: ignore[override]
        head = f"dl{self.first}-{self.last}:spline"
        if self.knots is not None:
            return f"{head}:knots={','.join(number_text(k) for k in self.knots)}"
        return f"{head}{self.df}" + (":log" if self.knot_spacing == "log" else "")

    def spline_basis(self) -> NaturalSplineBasis:
        """The natural-spline basis of the lag (with the constant column)."""
        return NaturalSplineBasis(self.interior_knots, (float(self.first), float(self.last)), intercept=True)

    def basis(self) -> np.ndarray:
        return self.spline_basis().evaluate(self.lags.astype(float))


_DL = re.compile(
    r"^dl(?P<first>-?\d+)-(?P<last>-?\d+)"
    r"(?::(?:(?P<poly>poly)(?P<degree>\d+)"
    r"|(?P<spline>spline)(?P<df>\d+)?(?::(?P<log>log)|:knots=(?P<knots>[-+\de.,\s]+))?))?$"
)

_FORMS = "'dl0-5', 'dl0-7:poly3', 'dl0-21:spline4', 'dl0-21:spline4:log' or 'dl0-21:spline:knots=2,5,10'"


def parse_distributed_lag(text: str) -> DistributedLag:
    """Turn a distributed-lag string into its lag structure.

    Examples
    --------
    >>> parse_distributed_lag("dl0-5")
    UnconstrainedLag(first=0, last=5)
    >>> parse_distributed_lag("dl0-7:poly3")
    PolynomialLag(first=0, last=7, degree=3)
    >>> [round(k, 3) for k in parse_distributed_lag("dl0-21:spline4:log").interior_knots]
    [1.802, 6.851]
    """
    if not isinstance(text, str):
        raise SpecificationError(f"a distributed lag must be a string such as {_FORMS}; got {text!r}.")
    clean = re.sub(r"\s+", "", text.lower())
    m = _DL.match(clean)
    if m is None:
        if re.match(r"^dl\s*-", clean) or re.match(r"^dl\d+--", clean):
            raise SpecificationError(f"lag {text!r}: lags are days before the outcome and cannot be negative.")
        if "min" in clean:
            raise SpecificationError(
                f"distributed lag {text!r}: a distributed lag has one coefficient per lag and needs every day "
                "of its window ('min' applies to moving averages only, e.g. '0-3 min 1')."
            )
        raise SpecificationError(f"distributed lag {text!r} is not understood; use {_FORMS}.")
    first, last = int(m["first"]), int(m["last"])
    if m["poly"]:
        return PolynomialLag(first, last, int(m["degree"]))
    if m["spline"]:
        if m["knots"] is not None:
            try:
                knots = tuple(float(k) for k in m["knots"].split(",") if k)
            except ValueError as exc:
                raise SpecificationError(f"distributed lag {text!r}: knots must be numbers.") from exc
            df = None if m["df"] is None else int(m["df"])
            return SplineLag(first, last, df=df, knots=knots)
        if m["df"] is None:
            raise SpecificationError(f"distributed lag {text!r}: give the spline df, e.g. 'dl0-21:spline4'.")
        return SplineLag(first, last, int(m["df"]), knot_spacing="log" if m["log"] else "even")
    return UnconstrainedLag(first, last)
