r"""Co-pollutants: other pollutants entered at the exposure's own lag structure, and their collinearity.

A two-pollutant model adds, for each co-pollutant :math:`z`, the same lag term as the exposure :math:`x`:

.. math::

    \log E[Y_t] = \alpha + \beta^\top (Q_x C)_t + \gamma^\top (Q_z C)_t + \text{confounders},

with :math:`Q` the lag matrix of a series (one column per lag day) and :math:`C` the lag basis of the lag
structure (a single day, a moving average or a distributed lag). The co-pollutant's columns are a
confounder term (:class:`CopollutantTerm`) built by the lag structure's own ``columns`` (the same
missing-day rule as the exposure), so days without the co-pollutant are dropped with the reason
"co-pollutant NAME (lag L) missing".

The correlation of the exposure and each co-pollutant is computed on the days used, between the series as
entered for a single day or a moving average and between their means over the lag window for a distributed
lag (:func:`exposure_correlations`). Above :data:`CORRELATION_WARN` in absolute value a
:class:`~airhealth.errors.DataWarning` says that the two estimates are hard to separate; above
:data:`CORRELATION_ERROR` the model is refused (:class:`~airhealth.errors.SpecificationError` naming both).

References
----------
Bhaskaran K, Gasparrini A, Hajat S, Smeeth L, Armstrong B (2013). Time series regression studies in
environmental epidemiology. Int J Epidemiol 42:1187–1195 (two-pollutant models as a sensitivity analysis).
Dormann CF, et al. (2013). Collinearity: a review of methods to deal with it and a simulation study
evaluating their performance. Ecography 36:27–46 (|r| > 0.7 as the threshold above which collinearity
begins to distort estimates; from memory: the paper was found, the passage not re-read).
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from ..._warn import warn_user
from ...errors import DataError, DataWarning, SpecificationError
from ...prep.lags import lag_matrix
from .lag_structures import LagStructure
from .terms import Term, TermBlock

__all__ = [
    "CORRELATION_ERROR",
    "CORRELATION_WARN",
    "CopollutantTerm",
    "copollutant_correlations",
    "exposure_correlations",
    "window_mean",
]

#: |r| above which a two-pollutant model warns (common practice; Dormann et al. 2013 give |r| > 0.7 as
#: where collinearity starts to distort estimates, from memory).
CORRELATION_WARN = 0.7
#: |r| above which a two-pollutant model is refused: the two effects cannot be separated (common practice,
#: no source: the value is our own line between "collinear" and "the same series").
CORRELATION_ERROR = 0.95


@dataclass(frozen=True)
class CopollutantTerm(Term):
    """A co-pollutant's columns at the exposure's lag structure (``lag.columns`` of its daily series)."""

    column: str
    lag: LagStructure

    @property
    def name(self) -> str:
        return f"co-pollutant {self.column} (lag {self.lag.label})"

    @property
    def inputs(self) -> tuple[str, ...]:
        return (self.column,)

    def build(self, frame: pd.DataFrame, date: str) -> TermBlock:
        values = frame[self.column]
        if not pd.api.types.is_numeric_dtype(values):
            raise DataError(f"co-pollutant column {self.column!r} is not numeric (dtype {values.dtype}).")
        x = values.to_numpy(dtype=float, na_value=np.nan)
        cols = self.lag.columns(x)
        return TermBlock(self.name, cols, tuple(self.lag.column_names(self.column)), None, self.inputs)


def checked_copollutants(
    given: Any, units: Any, exposure: str, outcome: str
) -> tuple[tuple[str, ...], tuple[str, ...]]:
    """The co-pollutant names and units as tuples, refusing repeats and the exposure or outcome itself."""
    names = (given,) if isinstance(given, str) else tuple(given or ())
    unit_list = (units,) if isinstance(units, str) else tuple(units or ())
    for name in names:
        if not isinstance(name, str) or not name:
            raise SpecificationError(f"copollutants must be column names, e.g. ['no2'], got {name!r}.")
        if name == exposure:
            raise SpecificationError(
                f"co-pollutant {name!r} is the exposure itself; name another pollutant column such as 'no2'."
            )
        if name == outcome:
            raise SpecificationError(f"co-pollutant {name!r} is the outcome column; name a pollutant column.")
    repeated = sorted({n for n in names if names.count(n) > 1})
    if repeated:
        raise SpecificationError(f"co-pollutant {repeated[0]!r} is named twice; give each column once.")
    if unit_list and len(unit_list) != len(names):
        raise SpecificationError(
            f"copollutant_units gives {len(unit_list)} units for {len(names)} co-pollutants {list(names)}; "
            "give one unit per co-pollutant, or units={'no2': 'ppb'}."
        )
    for unit in unit_list:
        if not isinstance(unit, str) or not unit.strip():
            raise SpecificationError(f"a co-pollutant unit must be a text such as 'ppb', got {unit!r}.")
    return names, unit_list


def window_mean(x: np.ndarray, lag: LagStructure) -> np.ndarray:
    """The series as it enters the model for a single day or moving average (``lag.columns``); for a
    distributed lag, its mean over the lag window (missing when a day of the window is missing)."""
    if lag.is_distributed:
        return lag_matrix(x, lag.lags).mean(axis=1)
    return lag.columns(x)[:, 0]


def exposure_correlations(
    exposure: str, exposure_values: np.ndarray, copollutants: Iterable[tuple[str, np.ndarray]], lag: LagStructure,
    used: np.ndarray, dates: pd.DatetimeIndex,
) -> tuple[float, ...]:  # fmt: skip
    """Pearson correlation of the exposure and each co-pollutant on the days used (see the module text).

    Raises
    ------
    SpecificationError
        When ``|r| > CORRELATION_ERROR`` or a series is constant on the days used: the two effects cannot
        be separated (names both columns, r and the days).
    """
    x = window_mean(exposure_values, lag)[used]
    out = []
    for name, values in copollutants:
        z = window_mean(values, lag)[used]
        r = float(np.corrcoef(x, z)[0, 1]) if x.size > 2 and np.std(x) > 0 and np.std(z) > 0 else np.nan
        if not np.isfinite(r) or abs(r) > CORRELATION_ERROR:
            shown = "undefined (a constant series)" if not np.isfinite(r) else f"{r:.3f}"
            raise SpecificationError(
                f"exposure {exposure!r} and co-pollutant {name!r} (lag {lag.label}) are nearly collinear on the "
                f"{int(used.sum())} days used ({dates[used][0]:%Y-%m-%d} to {dates[used][-1]:%Y-%m-%d}): "
                f"correlation {shown}, above {CORRELATION_ERROR}; their effects cannot be separated. Fit them "
                "in separate models, or adjust for a pollutant that is not a near copy of the exposure."
            )
        out.append(r)
    return tuple(out)


def copollutant_correlations(
    exposure: str, exposure_values: np.ndarray, copollutants: Iterable[tuple[str, np.ndarray]], lag: LagStructure,
    used: np.ndarray, dates: pd.DatetimeIndex,
) -> tuple[float, ...]:  # fmt: skip
    """:func:`exposure_correlations`, warning when any exceeds :data:`CORRELATION_WARN` in absolute value.

    Warns
    -----
    DataWarning
        Naming the exposure, each strongly correlated co-pollutant and its r.
    """
    series = list(copollutants)
    correlations = exposure_correlations(exposure, exposure_values, series, lag, used, dates)
    high = [(name, r) for (name, _), r in zip(series, correlations, strict=True) if abs(r) > CORRELATION_WARN]
    if high:
        shown = ", ".join(f"{name!r} (r = {r:.2f})" for name, r in high)
        warn_user(
            f"exposure {exposure!r} is strongly correlated with co-pollutant {shown} on the days used "
            f"(|r| > {CORRELATION_WARN}); the two-pollutant estimates are unstable and their intervals wide. "
            "Read them as a sensitivity analysis beside the single-pollutant estimate.",
            DataWarning,
        )
    return correlations
