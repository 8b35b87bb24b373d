r"""Exposure–lag bases: the tensor product of an exposure–response basis and a lag basis.

Following Gasparrini, Armstrong & Kenward (2010), the effect of the exposure on day :math:`t-l`
may be a smooth function of both the exposure level and the lag:

.. math::

    s(x_t) = \sum_{l \in L} \sum_{j=1}^{p} \sum_{k=1}^{K} f_j(x_{t-l})\, C_{lk}\, \theta_{jk},

where :math:`f_1..f_p` is an exposure–response basis (linear, natural spline, or linear above/below a
threshold) and :math:`C` (``len(L) × K``) a lag basis from :mod:`airhealth.model.bases.lag_structures` or
:mod:`airhealth.model.bases.distributed_lags`. The ``p·K`` design columns are the tensor (row-wise Kronecker)
product :math:`\sum_l f_j(x_{t-l}) C_{lk}`, ordered with the exposure basis outermost. The log relative
risk of exposure :math:`x` against a reference :math:`r` at lag :math:`l` is
:math:`(f(x) - f(r))^\top \Theta\, C_l^\top`, and over all lags :math:`(f(x) - f(r))^\top \Theta\, C^\top
\mathbf 1`, both linear in :math:`\theta` and so with delta-method variances :math:`b V b^\top`
(:mod:`airhealth.model.lag_predictions`).

An exposure–response basis learns what it needs (spline knots, the observed range) from the exposure's
non-missing values over the whole study period: :meth:`ExposureLagBasis.bind` returns a fitted copy, which is
what the design uses and what the fitted result keeps, so predictions use the same knots as the fit.

References
----------
Gasparrini A, Armstrong B, Kenward MG (2010). Distributed lag non-linear models. Statistics in Medicine
29:2224–2234.
Armstrong B (2006). Models for the relationship between ambient temperature and daily mortality.
Epidemiology 17:624–631.
Daniels MJ, Dominici F, Samet JM, Zeger SL (2000). Estimating particulate matter-mortality dose-response
curves and threshold levels. Am J Epidemiol 152:397–406 (threshold models).
"""

from __future__ import annotations

import dataclasses
import re
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
import pandas as pd

from ..._choices import check_choice
from ...errors import DataError, SpecificationError
from .lag_structures import LagStructure, number_text, parse_lag
from .splines import NaturalSplineBasis
from .terms import Term, TermBlock

__all__ = [
    "ExposureLagBasis",
    "ExposureLagTerm",
    "ExposureResponse",
    "ExposureSummary",
    "LinearResponse",
    "SplineResponse",
    "ThresholdResponse",
    "parse_exposure_lag",
]

Side = Literal["above", "below"]
HISTOGRAM_BINS = 40

NONLINEAR_HINT = (
    "a non-linear exposure-response term has no single effect per unit; use "
    "airhealth.model.lag_predictions.exposure_response(result, values=[...], reference=...) for the effect "
    "at chosen exposures against a reference, per lag or cumulated."
)


@dataclass(frozen=True)
class ExposureSummary:
    """What a fitted term remembers of its exposure: the observed range and a histogram (for plots)."""

    low: float
    high: float
    edges: tuple[float, ...]
    counts: tuple[int, ...]
    quantiles: tuple[float, ...]  # 0, 1, ..., 100th percentiles

    @classmethod
    def from_values(cls, x: np.ndarray, name: str) -> ExposureSummary:
        v = np.asarray(x, dtype=float)
        v = v[np.isfinite(v)]
        if v.size < 2 or v.min() == v.max():
            raise DataError(f"{name!r} needs at least two distinct non-missing values for an exposure-response term.")
        counts, edges = np.histogram(v, bins=HISTOGRAM_BINS)
        q = np.percentile(v, np.arange(101))
        return cls(float(v.min()), float(v.max()), tuple(edges.tolist()), tuple(int(c) for c in counts), tuple(q))

    def percentile_of(self, value: float) -> float:
        """Approximate percentile (0–100) of ``value`` in the observed distribution."""
        return float(np.interp(value, self.quantiles, np.arange(101)))


class ExposureResponse:
    """Base of exposure–response bases: ``bind(x)`` learns from data, ``evaluate(x)`` gives ``n × p``."""

    summary: ExposureSummary | None

    @property
    def label(self) -> str:  # pragma: no cover - abstract
        raise NotImplementedError

    @property
    def n_columns(self) -> int:  # pragma: no cover - abstract
        raise NotImplementedError

    @property
    def is_linear(self) -> bool:
        return False

    @property
    def is_bound(self) -> bool:
        return self.summary is not None

    def _learn(self, x: np.ndarray, name: str) -> dict[str, Any]:
        return {}

    def bind(self, x: np.ndarray, name: str = "exposure") -> ExposureResponse:
        """A copy fitted to the exposure ``x`` (its non-missing values over the whole study period)."""
        summary = ExposureSummary.from_values(x, name)
        return dataclasses.replace(self, summary=summary, **self._learn(np.asarray(x, dtype=float), name))  # type: ignore[type-var]

    def evaluate(self, x: np.ndarray) -> np.ndarray:  # pragma: no cover - abstract
        raise NotImplementedError

    def check_in_range(self, values: np.ndarray, what: str, name: str) -> None:
        """Raise when ``values`` fall outside the observed exposure range (needs a bound basis)."""
        if self.summary is None:
            return
        v = np.atleast_1d(np.asarray(values, dtype=float))
        lo, hi = self.summary.low, self.summary.high
        bad = v[~np.isfinite(v) | (v < lo) | (v > hi)]
        if bad.size:
            raise SpecificationError(
                f"{what} {bad[0]:g} is outside the observed range of {name!r} ({lo:g} to {hi:g}); choose a "
                "value within the data."
            )


@dataclass(frozen=True)
class LinearResponse(ExposureResponse):
    """The exposure itself: a log-linear exposure–response (``p = 1``)."""

    summary: ExposureSummary | None = field(default=None, repr=False, compare=False)

    @property
    def label(self) -> str:
        return "linear"

    @property
    def n_columns(self) -> int:
        return 1

    @property
    def is_linear(self) -> bool:
        return True

    def evaluate(self, x: np.ndarray) -> np.ndarray:
        return np.asarray(x, dtype=float).reshape(-1, 1)


@dataclass(frozen=True)
class SplineResponse(ExposureResponse):
    """A natural cubic spline of the exposure with ``df`` columns (no constant) or given interior ``knots``.

    With ``df``, ``df - 1`` interior knots sit at equally spaced quantiles of the exposure's non-missing
    values, and the boundary knots at their range (as :class:`~airhealth.model.bases.splines.NaturalSplineBasis`).
    """

    df: int | None = 3
    knots: tuple[float, ...] | None = None
    spline: NaturalSplineBasis | None = field(default=None, repr=False)
    summary: ExposureSummary | None = field(default=None, repr=False, compare=False)

    def __post_init__(self) -> None:
        if self.knots is not None:
            knots = tuple(float(k) for k in self.knots)
            if list(knots) != sorted(set(knots)) or not np.isfinite(knots).all():
                raise SpecificationError(f"spline exposure-response knots must be increasing, got {knots}.")
            object.__setattr__(self, "knots", knots)
            object.__setattr__(self, "df", None)
        elif isinstance(self.df, bool) or not isinstance(self.df, int | np.integer) or self.df < 1:
            raise SpecificationError(f"spline exposure-response df must be a whole number >= 1, got {self.df!r}.")

    @property
    def label(self) -> str:
        if self.knots is not None:
            return f"spline(knots={','.join(number_text(k) for k in self.knots)})"
        return f"spline(df={self.df})"

    @property
    def n_columns(self) -> int:
        return len(self.knots) + 1 if self.knots is not None else int(self.df)  # type: ignore[arg-type]

    def _learn(self, x: np.ndarray, name: str) -> dict[str, Any]:
        finite = x[np.isfinite(x)]
        if self.knots is None and np.unique(finite).size <= self.n_columns:
            raise DataError(
                f"{name!r} has too few distinct values for a spline with {self.df} df; lower df or use a "
                "linear exposure-response."
            )
        if self.knots is not None and any(not finite.min() < k < finite.max() for k in self.knots):
            raise DataError(
                f"spline knots {', '.join(f'{k:g}' for k in self.knots)} must lie inside the observed range of "
                f"{name!r} ({finite.min():g} to {finite.max():g})."
            )
        knots = None if self.knots is None else np.asarray(self.knots)
        return {"spline": NaturalSplineBasis.from_values(finite, df=self.df, knots=knots)}

    def evaluate(self, x: np.ndarray) -> np.ndarray:
        if self.spline is None:
            raise SpecificationError("this spline exposure-response has no knots yet; bind it to the exposure first.")
        return self.spline.evaluate(np.asarray(x, dtype=float))


@dataclass(frozen=True)
class ThresholdResponse(ExposureResponse):
    """No effect on one side of ``threshold`` and log-linear on the other: ``max(x - threshold, 0)``
    (``side="above"``, e.g. high pollution or heat) or ``max(threshold - x, 0)`` (``side="below"``, cold)."""

    threshold: float = 0.0
    side: Side = "above"
    summary: ExposureSummary | None = field(default=None, repr=False, compare=False)

    def __post_init__(self) -> None:
        check_choice("side", self.side, Side)
        if isinstance(self.threshold, bool) or not np.isfinite(self.threshold):
            raise SpecificationError(f"threshold must be a finite number, got {self.threshold!r}.")
        object.__setattr__(self, "threshold", float(self.threshold))

    @property
    def label(self) -> str:
        return f"{self.side}({number_text(self.threshold)})"

    @property
    def n_columns(self) -> int:
        return 1

    def _learn(self, x: np.ndarray, name: str) -> dict[str, Any]:
        finite = x[np.isfinite(x)]
        if not finite.min() < self.threshold < finite.max():
            raise DataError(
                f"threshold {self.threshold:g} is outside the observed range of {name!r} "
                f"({finite.min():g} to {finite.max():g}); choose a threshold within the data."
            )
        return {}

    def evaluate(self, x: np.ndarray) -> np.ndarray:
        v = np.asarray(x, dtype=float).reshape(-1, 1)
        return np.maximum(v - self.threshold, 0.0) if self.side == "above" else np.maximum(self.threshold - v, 0.0)


@dataclass(frozen=True)
class ExposureLagBasis(LagStructure):
    """The tensor product of an exposure–response basis and a lag structure; pass it as ``lag=`` to
    :func:`airhealth.fit`.

    Parameters
    ----------
    response : ExposureResponse
        :class:`LinearResponse`, :class:`SplineResponse` or :class:`ThresholdResponse`.
    lag : str or LagStructure
        Any lag structure or its string (``"0"``, ``"0-3"``, ``"0-3 min 1"``, ``"dl0-5"``,
        ``"dl0-21:spline4"``, ...). With a moving average the response is applied to each day of the window,
        then averaged, by the moving average's own missing-day rule (``min_count``): the same rule, applied by
        the same code (:meth:`LagStructure.columns`), as for the plain lag structure.

    The label is ``"<response> x <lag>"`` (e.g. ``"spline(df=3) x dl0-21:spline4"``) and reads back with
    :func:`~airhealth.model.bases.lag_structures.parse_lag`; it describes the specification, so a copy bound to
    data (with its knots learnt) keeps the label of the unbound basis.

    Examples
    --------
    >>> basis = ExposureLagBasis(SplineResponse(df=3), "dl0-21:spline4")
    >>> basis.n_columns, basis.max_lag, basis.label
    (12, 21, 'spline(df=3) x dl0-21:spline4')
    """

    response: ExposureResponse = field(default_factory=LinearResponse)
    lag: Any = "dl0-5"

    def __post_init__(self) -> None:
        if not isinstance(self.response, ExposureResponse):
            raise SpecificationError(
                f"response must be LinearResponse(), SplineResponse(df) or ThresholdResponse(threshold); "
                f"got {self.response!r}."
            )
        lag = parse_lag(self.lag)
        if isinstance(lag, ExposureLagBasis):
            raise SpecificationError(
                "the lag of an exposure-lag basis must be a lag structure, not another exposure-lag basis."
            )
        object.__setattr__(self, "lag", lag)

    # -- the lag-structure interface -----------------------------------------------------------------
    @property
    def label(self) -> str:  # type: ignore[override]
        return f"{self.response.label} x {self.lag.label}"

    @property
    def lags(self) -> np.ndarray:
        return self.lag.lags

    @property
    def n_columns(self) -> int:
        return self.response.n_columns * self.lag.n_columns

    @property
    def is_distributed(self) -> bool:
        return bool(self.lag.is_distributed)

    @property
    def is_nonlinear(self) -> bool:
        """True unless the exposure–response is linear (then the term is an ordinary lag structure)."""
        return not self.response.is_linear

    @property
    def is_bound(self) -> bool:
        return self.response.is_bound

    def basis(self) -> np.ndarray:
        """The lag basis ``C``, for a linear exposure–response only (otherwise there is no per-unit effect)."""
        if self.is_nonlinear:
            raise SpecificationError(NONLINEAR_HINT)
        return self.lag.basis()

    def bind(self, x: np.ndarray, name: str = "exposure") -> ExposureLagBasis:
        """A copy whose exposure–response basis is fitted to the daily exposure ``x``."""
        return ExposureLagBasis(self.response.bind(x, name), self.lag)

    def columns(self, x: np.ndarray) -> np.ndarray:
        """The ``n × (p·K)`` tensor-product columns for a daily series on a complete calendar.

        Each exposure-response column ``f_j(x)`` goes through the lag structure's own ``columns``, so the
        term follows the lag structure's missing-day rule (e.g. a moving average's ``min_count``).
        """
        fitted = self if self.is_bound else self.bind(x)
        f = fitted.response.evaluate(np.asarray(x, dtype=float))
        return np.hstack([self.lag.columns(f[:, j]) for j in range(f.shape[1])])

    def column_names(self, exposure: str) -> list[str]:
        p, k = self.response.n_columns, self.lag.n_columns
        return [f"{exposure}[{self.label}]x{j + 1}:lagbasis{m + 1}" for j in range(p) for m in range(k)]

    # -- prediction rows -----------------------------------------------------------------------------
    def contrast_rows(self, values: np.ndarray, reference: float, cumulative: bool) -> np.ndarray:
        """Rows ``b`` with ``b θ`` the log RR of each value against ``reference``.

        Shape ``(len(values), len(lags), p·K)`` per lag, or ``(len(values), p·K)`` cumulated over lags.
        """
        v = np.atleast_1d(np.asarray(values, dtype=float))
        diff = self.response.evaluate(v) - self.response.evaluate(np.array([float(reference)]))
        c = self.lag.basis()
        if cumulative:
            return np.einsum("vj,k->vjk", diff, c.sum(axis=0)).reshape(len(v), -1)
        return np.einsum("vj,lk->vljk", diff, c).reshape(len(v), c.shape[0], -1)


@dataclass(frozen=True)
class ExposureLagTerm(Term):
    """An exposure–lag basis of a column as a confounder term, e.g. temperature over lags 0–21.

    Examples
    --------
    >>> term = ExposureLagTerm("temperature", SplineResponse(df=4), "dl0-21:spline4")
    >>> term.name
    'temperature[spline(df=4) x dl0-21:spline4]'
    """

    column: str
    response: ExposureResponse = field(default_factory=LinearResponse)
    lag: Any = "dl0-5"

    def __post_init__(self) -> None:
        object.__setattr__(self, "lag", ExposureLagBasis(self.response, self.lag).lag)

    @property
    def exposure_lag_basis(self) -> ExposureLagBasis:
        return ExposureLagBasis(self.response, self.lag)

    @property
    def name(self) -> str:
        return f"{self.column}[{self.exposure_lag_basis.label}]"

    @property
    def inputs(self) -> tuple[str, ...]:
        return (self.column,)

    def build(self, frame: pd.DataFrame, date: str) -> TermBlock:
        if not pd.api.types.is_numeric_dtype(frame[self.column]):
            dtype = frame[self.column].dtype
            raise DataError(f"column {self.column!r} must be numeric to enter the model (dtype {dtype}).")
        x = frame[self.column].to_numpy(dtype=float, na_value=np.nan)
        basis = self.exposure_lag_basis.bind(x, self.column)
        return TermBlock(self.name, basis.columns(x), tuple(basis.column_names(self.column)), basis, self.inputs)


_RESPONSE_FORMS = "'linear', 'spline(df=3)', 'spline(knots=10,20)', 'above(25)' or 'below(18)'"


def _number(text: str, whole: str) -> float:
    try:
        return float(text)
    except ValueError as exc:
        raise SpecificationError(f"exposure-lag basis {whole!r}: {text!r} is not a number.") from exc


def _parse_response(text: str, whole: str) -> ExposureResponse:
    if text == "linear":
        return LinearResponse()
    if m := re.fullmatch(r"spline\(df=(\d+)\)", text):
        return SplineResponse(df=int(m[1]))
    if m := re.fullmatch(r"spline\(knots=([^)]*)\)", text):
        return SplineResponse(knots=tuple(_number(k, whole) for k in m[1].split(",") if k))
    if m := re.fullmatch(r"(above|below)\(([^)]+)\)", text):
        return ThresholdResponse(_number(m[2], whole), side=m[1])  # type: ignore[arg-type]
    raise SpecificationError(
        f"exposure-lag basis {whole!r}: exposure-response {text!r} is not understood; use {_RESPONSE_FORMS}, "
        "then ' x ' and a lag, e.g. 'spline(df=3) x dl0-21:spline4'."
    )


def parse_exposure_lag(text: str) -> ExposureLagBasis:
    """Turn an exposure-lag label ``"<response> x <lag>"`` back into its basis (unbound).

    Examples
    --------
    >>> parse_exposure_lag("above(25) x 0-3 min 2").lag
    MovingAverage(first=0, last=3, min_count=2)
    """
    parts = re.split(r"\s+x\s+", str(text).strip().lower())
    if len(parts) != 2 or not all(parts):
        raise SpecificationError(
            f"exposure-lag basis {text!r} is not understood; write one exposure-response, ' x ', and one lag, "
            "e.g. 'spline(df=3) x dl0-21:spline4'."
        )
    return ExposureLagBasis(_parse_response(re.sub(r"\s+", "", parts[0]), text), parts[1])
