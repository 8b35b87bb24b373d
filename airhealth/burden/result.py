"""The result of a burden calculation: totals, breakdown tables, days left out, and the caution (read-only).

Every breakdown (year, season, calendar month, year and month, city) is a sum of cells — one calendar month of
one city — evaluated at the estimate and at each Monte Carlo draw, so the intervals of every table come from
the same draws as the total.
"""

from __future__ import annotations

import html
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np
import pandas as pd

from .._choices import check_choice
from ..errors import SpecificationError
from ..model.design import EXPOSURE_REASONS
from ..model.effects import normal_quantile
from .counterfactual import Counterfactual
from .simulation import Simulation

__all__ = ["CAUTION", "Breakdown", "BurdenResult", "build_result"]

#: Shown with every burden output (tables, JSON, reports, the command line).
CAUTION = (
    "An attributable number assumes that the estimated association is causal and that the counterfactual "
    "level could actually be achieved; it is an estimate of deaths or admissions that would not have occurred "
    "under that counterfactual, not a count of identified people."
)

Breakdown = Literal["year", "season", "month", "year_month", "city"]
SEASONS = {12: "Dec-Feb", 1: "Dec-Feb", 2: "Dec-Feb", 3: "Mar-May", 4: "Mar-May", 5: "Mar-May",
           6: "Jun-Aug", 7: "Jun-Aug", 8: "Jun-Aug", 9: "Sep-Nov", 10: "Sep-Nov", 11: "Sep-Nov"}  # fmt: skip
SEASON_ORDER = ("Dec-Feb", "Mar-May", "Jun-Aug", "Sep-Nov")
MONTHS = ("Jan", "Feb", "Mar", "Apr", "May", "Jun", "Jul", "Aug", "Sep", "Oct", "Nov", "Dec")
TABLE_COLUMNS = (
    "days", "cases", "attributable", "attributable_low", "attributable_high", "fraction", "fraction_low",
    "fraction_high",
)  # fmt: skip


def _period_keys(cells: pd.DataFrame, by: Breakdown) -> pd.Series:
    if by == "year":
        return cells["year"].astype(str)
    if by == "season":
        return pd.Series(pd.Categorical(cells["month"].map(SEASONS), categories=SEASON_ORDER), index=cells.index)
    if by == "month":
        return pd.Series(
            pd.Categorical(cells["month"].map(lambda m: MONTHS[m - 1]), categories=MONTHS), index=cells.index
        )
    if by == "year_month":
        return cells["year"].astype(str) + "-" + cells["month"].map("{:02d}".format)
    return cells["city"].astype(str)


def _table(
    cells: pd.DataFrame, sim: Simulation, keys: pd.Series, level: float
) -> tuple[pd.DataFrame, tuple[float, ...]]:
    codes, labels = pd.factorize(keys, sort=True)
    ordered = bool(np.all(np.diff(codes) >= 0))  # years and months of one city: cells already in order
    order = np.arange(len(codes)) if ordered else np.argsort(codes, kind="stable")
    starts = np.flatnonzero(np.diff(codes[order], prepend=-1) != 0)
    lo_q, hi_q = 50 * (1 - level), 50 * (1 + level)
    an = np.add.reduceat(sim.point[order], starts)
    draws = sim.draws if ordered else sim.draws[order]
    ends = np.append(starts[1:], len(codes))
    an_draws = np.stack([draws[a:b].sum(axis=0) for a, b in zip(starts, ends, strict=True)])  # faster than reduceat
    low, high = np.percentile(an_draws, [lo_q, hi_q], axis=1)
    cases = np.add.reduceat(cells["cases"].to_numpy()[order], starts)
    days = np.add.reduceat(cells["days"].to_numpy()[order], starts)
    with np.errstate(invalid="ignore", divide="ignore"):
        frac = np.where(cases > 0, 1.0 / cases, np.nan)
    table = pd.DataFrame(
        {
            "period": [str(v) for v in labels],
            "days": days.astype(int),
            "cases": cases,
            "attributable": an,
            "attributable_low": low,
            "attributable_high": high,
            "fraction": an * frac,
            "fraction_low": low * frac,
            "fraction_high": high * frac,
        }
    )
    smallest = cells.groupby(codes)["smallest"].min().reindex(range(len(labels)))
    return table, tuple(float(v) for v in smallest)


@dataclass(frozen=True, eq=False)
class BurdenResult:
    """Deaths or admissions attributable to exposure beyond a counterfactual, with intervals (read-only).

    Build it with :func:`airhealth.burden.burden`, :func:`~airhealth.burden.burden_from_estimate` or
    :func:`~airhealth.burden.burden_pooled`. ``attributable`` (AN) and ``fraction`` (AF = AN / cases) are the
    estimates at the coefficients; ``*_low``/``*_high`` the Monte Carlo percentile interval and
    ``delta_low``/``delta_high`` the delta-method interval of AN. ``table(by)`` breaks AN down by ``"year"``,
    ``"season"``, ``"month"`` (calendar month over all years), ``"year_month"`` or ``"city"``. ``left_out`` lists
    the days not counted (exposure or outcome missing), never counted as days without excess.
    """

    outcome: str
    exposure: str
    lag: str
    unit: str
    counterfactual: Counterfactual
    side: str
    perspective: str
    source: str
    draws: int
    seed: int
    level: float
    attributable: float
    attributable_low: float
    attributable_high: float
    delta_low: float
    delta_high: float
    cases: float
    n_days: int
    notes: tuple[str, ...]
    _tables: dict[str, pd.DataFrame] = field(repr=False)
    _smallest: dict[str, tuple[float, ...]] = field(repr=False)
    _left_out: pd.DataFrame = field(repr=False)

    # -- the numbers ------------------------------------------------------------------------------
    @property
    def fraction(self) -> float:
        return self.attributable / self.cases if self.cases > 0 else float("nan")

    @property
    def fraction_low(self) -> float:
        return self.attributable_low / self.cases if self.cases > 0 else float("nan")

    @property
    def fraction_high(self) -> float:
        return self.attributable_high / self.cases if self.cases > 0 else float("nan")

    @property
    def caution(self) -> str:
        return CAUTION

    @property
    def left_out(self) -> pd.DataFrame:
        """Days not counted, with the reason (``date``, ``reason``; a copy)."""
        return self._left_out.copy()

    def missing_exposure_days(self) -> dict[str, Any]:
        """How many days were left out for a missing exposure, and the first and last of them."""
        days = self._left_out.loc[self._left_out["reason"].isin(EXPOSURE_REASONS), "date"]
        if days.empty:
            return {"n": 0, "first": None, "last": None}
        return {"n": len(days), "first": str(days.min().date()), "last": str(days.max().date())}

    def breakdowns(self) -> tuple[str, ...]:
        """The breakdowns available (``"city"`` only for pooled estimates applied to several cities)."""
        return tuple(self._tables)

    def table(self, by: Breakdown = "year") -> pd.DataFrame:
        """AN and AF with intervals by period (``period, days, cases, attributable, ..., fraction_high``)."""
        check_choice("by", by, Breakdown)
        if by not in self._tables:
            raise SpecificationError(f"no {by!r} breakdown here; available: {', '.join(self._tables)}.")
        out = self._tables[by].copy()
        out.attrs["caution"] = CAUTION
        return out

    def smallest_counts(self, by: Breakdown) -> tuple[float, ...]:
        """Per row of ``table(by)``, the smallest positive daily count behind it (for small-count suppression)."""
        return self._smallest[by]

    def summary(self) -> pd.DataFrame:
        """One tidy row: the JSON record's main values."""
        d = self.to_dict()
        keys = ("outcome", "exposure", "lag", "counterfactual", "unit", "attributable", "attributable_low",
                "attributable_high", "fraction", "fraction_low", "fraction_high", "n_days")  # fmt: skip
        return pd.DataFrame([{k: d[k] for k in keys}])

    def to_dict(self) -> dict[str, Any]:
        """The JSON record (the command line's ``--json``)."""
        c = self.counterfactual
        return {
            "attributable": self.attributable,
            "attributable_low": self.attributable_low,
            "attributable_high": self.attributable_high,
            "fraction": self.fraction,
            "fraction_low": self.fraction_low,
            "fraction_high": self.fraction_high,
            "n_days": self.n_days,
            "cases": self.cases,
            "attributable_delta_low": self.delta_low,
            "attributable_delta_high": self.delta_high,
            "outcome": self.outcome,
            "exposure": self.exposure,
            "lag": self.lag,
            "unit": self.unit,
            "counterfactual": c.value,
            "counterfactual_name": c.name,
            "counterfactual_source": c.source,
            "counterfactual_note": c.note,
            "side": self.side,
            "perspective": self.perspective,
            "coefficients_from": self.source,
            "method": "monte carlo (multivariate normal of the coefficients); delta method alongside",
            "draws": self.draws,
            "seed": self.seed,
            "level": self.level,
            "missing_exposure_days": self.missing_exposure_days(),
            "days_left_out": len(self._left_out),
            "notes": list(self.notes),
            "caution": CAUTION,
        }

    def __repr__(self) -> str:
        return (
            f"<BurdenResult {self.outcome} ~ {self.exposure} [{self.lag}] above {self.counterfactual.describe()}: "
            f"AN {self.attributable:.1f} [{self.attributable_low:.1f}, {self.attributable_high:.1f}], "
            f"AF {self.fraction:.2%}, {self.n_days} days>"
        )

    def _repr_html_(self) -> str:
        e = html.escape
        c = self.counterfactual
        an = f"{self.attributable:.1f} ({self.attributable_low:.1f} to {self.attributable_high:.1f})"
        af = f"{self.fraction:.2%} ({self.fraction_low:.2%} to {self.fraction_high:.2%})"
        rows = [
            ("attributable number", an),
            ("attributable fraction", af),
            ("delta-method interval", f"{self.delta_low:.1f} to {self.delta_high:.1f}"),
            ("counterfactual", c.describe()),
            ("days counted", f"{self.n_days} ({len(self._left_out)} left out)"),
            ("intervals", f"{self.level:.0%}, {self.draws} draws, seed {self.seed}"),
        ]  # fmt: skip
        body = "".join(f"<tr><th>{e(k)}</th><td>{e(v)}</td></tr>" for k, v in rows)
        notes = "".join(f"<p>{e(n)}</p>" for n in self.notes)
        title = f"Burden: {self.outcome} attributable to {self.exposure} (lag {self.lag})"
        return f"<div><strong>{e(title)}</strong><table>{body}</table>{notes}<p><em>{e(CAUTION)}</em></p></div>"


def build_result(
    cells: pd.DataFrame,
    sim: Simulation,
    left_out: pd.DataFrame,
    *,
    level: float,
    **fields: Any,
) -> BurdenResult:
    """Assemble a :class:`BurdenResult` from the cells (``city, year, month, days, cases, smallest``)."""
    z = normal_quantile(level)
    lo_q, hi_q = 50 * (1 - level), 50 * (1 + level)
    total = float(sim.point.sum())
    totals = sim.draws.sum(axis=0)
    low, high = (float(v) for v in np.percentile(totals, [lo_q, hi_q])) if totals.size else (total, total)
    wanted: tuple[Breakdown, ...] = ("year", "season", "month", "year_month")
    if cells["city"].nunique() > 1:
        wanted += ("city",)
    tables, smallest = {}, {}
    for by in wanted:
        tables[by], smallest[by] = _table(cells, sim, _period_keys(cells, by), level)
    return BurdenResult(
        attributable=total,
        attributable_low=low,
        attributable_high=high,
        delta_low=total - z * sim.delta_se,
        delta_high=total + z * sim.delta_se,
        cases=float(cells["cases"].sum()),
        n_days=int(cells["days"].sum()),
        level=level,
        _tables=tables,
        _smallest=smallest,
        _left_out=left_out.reset_index(drop=True),
        **fields,
    )
