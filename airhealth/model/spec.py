"""The model specification: a small, immutable, validated value saying what to fit.

Every front end (``airhealth.fit``, ``airhealth.compare``, the command line) builds a :class:`ModelSpec`
and hands it to the same engine, so defaults and their documentation live here and nowhere else.
"""

from __future__ import annotations

import dataclasses
import re
from collections.abc import Iterable
from dataclasses import dataclass, field
from typing import Any, Literal

import numpy as np

from .._choices import check_choice
from ..errors import SpecificationError
from ..prep.units import parse_unit
from .bases.copollutant import CopollutantTerm, checked_copollutants
from .bases.lag_structures import LagStructure, parse_lag
from .bases.terms import Categorical, DayOfWeek, FourierSeason, Linear, PublicHolidays, Spline, Term, TimeSpline

__all__ = ["DEFAULT_UNIT", "Family", "Interval", "ModelSpec", "Seasonality", "StudyDesign", "display_unit"]

#: Unit of an exposure unless the user names another.
DEFAULT_UNIT = "µg/m³"

Family = Literal["quasipoisson", "poisson", "negbin"]
Seasonality = Literal["spline", "fourier"]
ThetaMethod = Literal["ml", "moments"]
Interval = Literal["quasi-poisson", "hac"]
StudyDesign = Literal["time-series", "case-crossover"]

#: Most lagged deviance residuals a model may add (``residual_lags``); more would mostly fit noise
#: (common practice, no source: Brumback et al. 2000 use one to a few).
MAX_RESIDUAL_LAGS = 30


#: How each concentration unit is shown, by its code in :func:`airhealth.prep.units.parse_unit` (which knows
#: the spellings ug/m3, µg/m3, ugm3, ppbv, mg/m3, ...) or, for the units it does not convert, as typed.
_SHOWN_UNITS = {"ugm3": "µg/m³", "mgm3": "mg/m³", "ppb": "ppb", "ppm": "ppm"}
_OTHER_UNITS = {"ngm3": "ng/m³", "ng/m3": "ng/m³", "ng/m³": "ng/m³", "ppt": "ppt", "pptv": "ppt"}


def display_unit(unit: str) -> str:
    """A unit in the one spelling labels use: ``ugm3``, ``ug/m3``, ``µg/m3`` → ``µg/m³``; ``mg/m3`` →
    ``mg/m³``; ``ng/m3`` → ``ng/m³``; ``PPB`` → ``ppb``. Other units are kept as written (stripped).

    >>> display_unit("ugm3"), display_unit("PPB"), display_unit("ng/m3"), display_unit("per mille")
    ('µg/m³', 'ppb', 'ng/m³', 'per mille')
    """
    key = re.sub(r"\s+", "", unit).lower()
    if key in _OTHER_UNITS:
        return _OTHER_UNITS[key]
    try:
        return _SHOWN_UNITS[parse_unit(unit)]
    except SpecificationError:
        return unit.strip()


def _checked_na_values(given: Any) -> tuple[Any, ...]:
    """``na_values`` as a tuple of numbers and texts; anything else names the bad entry."""
    if given is None:
        return ()
    if isinstance(given, str | int | float | np.number):
        given = (given,)
    if isinstance(given, dict) or not isinstance(given, Iterable):
        raise SpecificationError(
            f"na_values must be a list of values meaning 'missing', e.g. [-999, '<LOD'], got {given!r}."
        )
    values = []
    for value in given:
        if isinstance(value, str) and value.strip():
            values.append(value.strip())
        elif isinstance(value, int | float | np.number) and not isinstance(value, bool | np.bool_):
            if not np.isfinite(float(value)):
                raise SpecificationError(
                    f"na_values entry {value!r} is not a finite number; missing values (NaN) are already missing."
                )
            values.append(value.item() if isinstance(value, np.number) else value)
        else:
            raise SpecificationError(
                f"na_values entry {value!r} is neither a number nor a non-empty text; use e.g. [-999, '<LOD']."
            )
    return tuple(dict.fromkeys(values))


@dataclass(frozen=True)
class ModelSpec:
    r"""What to fit: outcome, exposure and lag, and the confounder model.

    The default model is the standard time-series model of daily counts

    .. math::

        \log E[Y_t] = \alpha + \beta\,x_t^{(\mathrm{lag})} + s(t) + s(T_t) + s(\bar T_{t-1..t-3})
        + \mathrm{dow}_t\ [+\ \mathrm{holiday}_t]\ [+\ s(H_t)]

    fitted as a quasi-Poisson GLM, where the smooths are natural cubic splines with
    ``round(trend_df_per_year × years)`` df for time and ``temperature_df`` / ``temperature_lag_df`` df for
    temperature and its mean over lags 1–3.

    Parameters
    ----------
    outcome : str
        Column of daily counts.
    exposure : str
        Column of the daily pollutant level (e.g. µg/m³).
    lag : str or LagStructure
        ``"0"``, ``"2"`` (single day), ``"0-1"`` (moving average), ``"dl0-5"``, ``"dl0-7:poly3"``,
        ``"dl0-21:spline4"`` (distributed lags) or a lag-structure object.
    date : str
        Date column.
    temperature : str or None
        Daily mean temperature column; ``None`` for no temperature control.
    temperature_df, temperature_lag_df : int
        df of the splines of same-day temperature and of mean temperature over ``temperature_lags``.
    temperature_lags : tuple of int or None
        Lags averaged for the second temperature term (default ``(1, 3)``); ``None`` drops that term.
    humidity : str or None
        Relative humidity column, entered as a spline with ``humidity_df`` df.
    seasonality : {"spline", "fourier"}
        Seasonal and long-term control: a natural spline of time, or Fourier pairs plus a linear trend.
    trend_df_per_year : float
        df per year of the time spline (default 7).
    fourier_pairs : int
        Number of sine/cosine pairs per year when ``seasonality="fourier"``.
    day_of_week : bool
        Include day-of-week indicators.
    holidays : str or None
        ISO 3166 country code for a public-holiday indicator (e.g. ``"GB"``).
    holiday_subdivision : str or None
        Optional subdivision code for the holiday calendar.
    confounders : sequence of str or Term
        Further terms; a string is a column entered linearly, or use ``Spline(column, df)``,
        ``Linear(column)``, ``Categorical(column)``.
    family : {"quasipoisson", "poisson", "negbin"}
        Error model; quasi-Poisson estimates the dispersion as Pearson χ² / residual df.
    theta_method : {"ml", "moments"}
        How the negative binomial θ is estimated.
    offset : str or None
        Column added to the linear predictor with coefficient 1 (e.g. log population).
    unit : str
        Unit of the exposure (default ``"µg/m³"``); carried into every effect label, table, figure and the
        JSON (``"unit"``) so that a relative risk reads "per 10 ppb". Common spellings are shown one way
        (``ugm3``, ``ug/m3`` → ``µg/m³``; ``mg/m3`` → ``mg/m³``; ``ng/m3`` → ``ng/m³``; see
        :func:`display_unit`). :meth:`from_options` also accepts
        ``units={"o3": "ppb"}``, a mapping of column → unit, and takes the exposure's entry.
    date_format : str or None
        Format of text dates that are not ISO 8601, e.g. ``"%d/%m/%Y"`` (a ``strftime`` format every value
        must follow), or ``"excel"`` for spreadsheet serial day numbers; ``None`` (default) reads ISO dates
        and refuses dates whose order of day and month is in doubt (see
        :func:`airhealth.prep.validate.parse_dates`). The command line's ``--date-format``.
    na_values : tuple
        Values that mean "missing" in the data columns the model reads: numbers (e.g. ``-999``, matched by
        value) and texts (e.g. ``"<LOD"``, matched after stripping spaces; a text that reads as a number
        also matches that number). They become missing, on a copy, before any check or fit. The texts
        ``pandas.read_csv`` reads as missing by default (``"NA"``, ``"n/a"``, ``""``, ...) are missing
        without being listed; common codes such as -999 or 9999 left in a series far outside its other
        values are an error that names them (see :mod:`airhealth.prep.missing_codes`).
    interval : {"quasi-poisson", "hac"}
        How standard errors and intervals are computed: ``"quasi-poisson"`` (default) from the model
        covariance scaled by the dispersion (or the family's own covariance for Poisson and negative
        binomial); ``"hac"`` from the Newey–West (1987) sandwich on the GLM scores, robust to residual
        autocorrelation (:mod:`airhealth.model.engine.variance`; gaps are handled on the calendar).
    copollutants : tuple of str
        Other pollutant columns adjusted for, each at the same lag structure as the exposure (built with the
        same lag basis, through the same guards: missing codes, plausibility for their unit). Their units
        come from ``copollutant_units`` (one per co-pollutant; empty: µg/m³ for each) or, with
        :meth:`from_options`, from ``units={"no2": "ppb"}``. See :mod:`airhealth.model.bases.copollutant`.
    copollutant_units : tuple of str
        Units of the co-pollutants, in their order (default: µg/m³ for each).
    modifier : str or None
        A categorical column (e.g. a warm/cold season from :func:`airhealth.season_column`, or an age
        group) modifying the exposure effect: the model then has one exposure term per level of the
        column (the exposure × stratum interaction) and the level's main effects as confounders
        (:mod:`airhealth.model.group_effects`).
    hac_lags : int or None
        Truncation lag of the ``"hac"`` interval; ``None`` (default) uses ``floor(4 (n/100)^(2/9))`` for
        ``n`` days used (Newey & West 1994), about 9 for 14 years. Must be shorter than the series.
    design : {"time-series", "case-crossover"}
        ``"time-series"`` (default): the model above. ``"case-crossover"``: the time-stratified
        case-crossover fitted as the equivalent conditional Poisson model, one free intercept per stratum of
        year × month × day of week (eliminated, not estimated; :mod:`airhealth.model.bases.strata`). The
        strata absorb trend, season and day of week, so the time spline (or Fourier terms) and the
        day-of-week indicators are not used; giving ``seasonality``, ``trend_df_per_year``,
        ``fourier_pairs`` or ``day_of_week=False`` with it is an error. Temperature, humidity, holidays,
        confounders, offset and every lag structure apply as in the time-series model. Poisson and
        quasi-Poisson only; model-based intervals only. See ``docs/case-crossover.md``.
    overdispersion : bool
        Correct the standard errors for over-dispersion (default ``True``: quasi-Poisson, dispersion =
        Pearson χ² / (days used − coefficients − strata used)). ``False`` is the same as
        ``family="poisson"`` (dispersion 1); not with ``family="negbin"``, which models over-dispersion itself.
    residual_lags : int
        Lagged deviance residuals entered as covariates (Brumback et al. 2000): ``0`` (default) for none;
        ``k`` fits the model, takes its deviance residuals on the calendar, adds their lags ``1..k`` as
        covariates and fits again (:func:`airhealth.model.fitting.fit_spec`). Days whose lagged residual is
        missing (the first ``k`` days used and the ``k`` days after each gap) are dropped with that reason.
    tol : float
        Convergence tolerance on the relative change in deviance (default 1e-10; strict, see Dominici
        et al. 2002).
    max_iter : int
        Maximum IRLS iterations.

    References
    ----------
    Bhaskaran K, et al. (2013). Time series regression studies in environmental epidemiology.
    Int J Epidemiol 42:1187–1195.
    Peng RD, Dominici F, Louis TA (2006). Model choice in time series studies of air pollution and
    mortality. J R Stat Soc A 169:179–203.
    Dominici F, McDermott A, Zeger SL, Samet JM (2002). On the use of generalized additive models in
    time-series studies of air pollution and health. Am J Epidemiol 156:193–203.
    Newey WK, West KD (1987). A simple, positive semi-definite, heteroskedasticity and autocorrelation
    consistent covariance matrix. Econometrica 55:703–708.
    Newey WK, West KD (1994). Automatic lag selection in covariance matrix estimation. Rev Econ Stud
    61:631–653.
    Armstrong BG, Gasparrini A, Tobias A (2014). Conditional Poisson models: a flexible alternative to
    conditional logistic case cross-over analysis. BMC Med Res Methodol 14:122.
    Janes H, Sheppard L, Lumley T (2005). Case-crossover analyses of air pollution exposure data: referent
    selection strategies and their implications for bias. Epidemiology 16:717–726.
    Brumback BA, Ryan LM, Schwartz JD, Neas LM, Gold DR (2000). Transitional regression models,
    with application to environmental time series. J Am Stat Assoc 95:16–27.
    """

    outcome: str
    exposure: str
    lag: Any = "0-1"
    date: str = "date"
    temperature: str | None = None
    temperature_df: int = 6
    temperature_lags: tuple[int, int] | None = (1, 3)
    temperature_lag_df: int = 6
    humidity: str | None = None
    humidity_df: int = 3
    seasonality: Seasonality = "spline"
    trend_df_per_year: float = 7.0
    fourier_pairs: int = 4
    day_of_week: bool = True
    holidays: str | None = None
    holiday_subdivision: str | None = None
    confounders: tuple[Any, ...] = field(default_factory=tuple)
    family: Family = "quasipoisson"
    theta_method: ThetaMethod = "ml"
    offset: str | None = None
    tol: float = 1e-10
    max_iter: int = 100
    unit: str = DEFAULT_UNIT
    na_values: tuple[Any, ...] = ()
    interval: Interval = "quasi-poisson"
    hac_lags: int | None = None
    date_format: str | None = None
    copollutants: tuple[str, ...] = ()
    copollutant_units: tuple[str, ...] = ()
    modifier: str | None = None
    design: StudyDesign = "time-series"
    overdispersion: bool = True
    residual_lags: int = 0

    @property
    def interval_used(self) -> str:
        """The interval actually computed, for records and JSON: ``"hac"`` (Newey–West), ``"quasi-poisson"``
        (covariance scaled by the dispersion), ``"poisson"`` (model-based, dispersion 1: ``family="poisson"`` or
        ``overdispersion=False``) or ``"negative-binomial"`` (the negative binomial's model-based covariance)."""
        if self.interval == "hac":
            return "hac"
        return {"poisson": "poisson", "negbin": "negative-binomial"}.get(self.family, "quasi-poisson")

    def __post_init__(self) -> None:
        for name in ("outcome", "exposure", "date"):
            if not isinstance(getattr(self, name), str) or not getattr(self, name):
                raise SpecificationError(f"{name} must be a column name, got {getattr(self, name)!r}.")
        object.__setattr__(self, "lag", parse_lag(self.lag))
        check_choice("seasonality", self.seasonality, Seasonality)
        check_choice("family", self.family, Family)
        check_choice("theta_method", self.theta_method, ThetaMethod)
        check_choice("interval", self.interval, Interval)
        if self.hac_lags is not None:
            lags = self.hac_lags
            if isinstance(lags, bool) or not isinstance(lags, int | np.integer) or lags < 0:
                raise SpecificationError(
                    f"hac_lags must be a whole number >= 0 or None (the default rule), got {lags!r}."
                )
            if self.interval != "hac":
                raise SpecificationError(f"hac_lags={lags} applies only with interval='hac'; add interval='hac'.")
            object.__setattr__(self, "hac_lags", int(lags))
        for name in ("temperature_df", "temperature_lag_df", "humidity_df", "max_iter"):
            value = getattr(self, name)
            if isinstance(value, bool) or not isinstance(value, int) or value < 1:
                raise SpecificationError(f"{name} must be a whole number >= 1, got {value!r}.")
        if self.temperature_lags is not None:
            lags = self.temperature_lags
            if isinstance(lags, str) or not hasattr(lags, "__len__") or len(lags) != 2:
                raise SpecificationError(
                    f"temperature_lags must be a pair (first, last) such as (1, 3), or None; got {lags!r}."
                )
            object.__setattr__(self, "temperature_lags", tuple(lags))
        lags = self.residual_lags
        if isinstance(lags, bool) or not isinstance(lags, int | np.integer) or not 0 <= lags <= MAX_RESIDUAL_LAGS:
            raise SpecificationError(
                f"residual_lags must be a whole number from 0 (none) to {MAX_RESIDUAL_LAGS}, got {lags!r}; "
                "one or two lags usually remove short-term residual autocorrelation."
            )
        object.__setattr__(self, "residual_lags", int(lags))
        if not (0 < self.tol < 1e-3):
            raise SpecificationError(f"tol must be between 0 and 1e-3, got {self.tol!r}.")
        given = (self.confounders,) if isinstance(self.confounders, str | Term) else self.confounders
        terms = tuple(Linear(c) if isinstance(c, str) else c for c in given)
        for term in terms:
            if not isinstance(term, Term):
                raise SpecificationError(
                    f"confounder {term!r} is not a column name or a term (Spline, Linear, Categorical)."
                )
        object.__setattr__(self, "confounders", terms)
        TimeSpline(self.trend_df_per_year)  # validates the value
        if not isinstance(self.unit, str) or not self.unit.strip():
            raise SpecificationError(f"unit must be a non-empty text such as 'µg/m³' or 'ppb', got {self.unit!r}.")
        object.__setattr__(self, "unit", display_unit(self.unit))
        object.__setattr__(self, "na_values", _checked_na_values(self.na_values))
        if self.date_format is not None and (not isinstance(self.date_format, str) or not self.date_format.strip()):
            raise SpecificationError(
                f"date_format must be a date format such as '%d/%m/%Y' (or 'excel'), got {self.date_format!r}."
            )
        if self.exposure == self.outcome:
            raise SpecificationError(f"outcome and exposure are the same column, {self.outcome!r}.")
        self._check_roles()
        self._check_copollutants_and_modifier()
        self._check_design()

    def _check_copollutants_and_modifier(self) -> None:
        """Co-pollutants: distinct columns other than the outcome and exposure; a linear lag structure."""
        names, units = checked_copollutants(self.copollutants, self.copollutant_units, self.exposure, self.outcome)
        object.__setattr__(self, "copollutants", names)
        shown = tuple(display_unit(u) for u in units) if units else (DEFAULT_UNIT,) * len(names)
        object.__setattr__(self, "copollutant_units", shown)
        if names and getattr(self.lag, "is_nonlinear", False):
            raise SpecificationError(
                f"co-pollutants {list(names)} need a linear lag structure such as '0-1' or 'dl0-5'; the "
                f"non-linear exposure-response term {self.lag.label!r} cannot be shared with them."
            )
        if self.modifier is not None:
            if not isinstance(self.modifier, str) or not self.modifier:
                raise SpecificationError(f"modifier must be a column name, got {self.modifier!r}.")
            taken = {self.outcome: "outcome", self.exposure: "exposure", self.date: "date"}
            taken.update({c: "a co-pollutant" for c in names})
            if self.modifier in taken:
                raise SpecificationError(
                    f"modifier {self.modifier!r} is also the {taken[self.modifier]}; use a categorical column "
                    "such as a season or an age group."
                )
            if getattr(self.lag, "is_nonlinear", False):
                raise SpecificationError(
                    f"a modifier needs a linear lag structure such as '0-1' or 'dl0-5', not {self.lag.label!r}."
                )

    def _check_design(self) -> None:
        """``design`` and ``overdispersion`` and the options they exclude (see the class docstring)."""
        check_choice("design", self.design, StudyDesign)
        if not isinstance(self.overdispersion, bool | np.bool_):
            raise SpecificationError(f"overdispersion must be True or False, got {self.overdispersion!r}.")
        if not self.overdispersion:
            if self.family == "negbin":
                raise SpecificationError(
                    "overdispersion=False asks for plain Poisson but family='negbin' models over-dispersion; "
                    "choose one."
                )
            object.__setattr__(self, "family", "poisson")
        if self.design != "case-crossover":
            return
        defaults = {"seasonality": "spline", "trend_df_per_year": 7.0, "fourier_pairs": 4, "day_of_week": True}
        given = [f"{k}={getattr(self, k)!r}" for k, v in defaults.items() if getattr(self, k) != v]
        if given:
            raise SpecificationError(
                f"{', '.join(given)} does not apply to design='case-crossover': its strata (year × month × day "
                "of week) already control trend, season and day of week. Remove the option, or use "
                "design='time-series'."
            )
        if self.family == "negbin":
            raise SpecificationError(
                "design='case-crossover' is fitted as a conditional Poisson model: use the default "
                "(quasi-Poisson) or overdispersion=False (Poisson), not family='negbin'."
            )
        if self.interval != "quasi-poisson":
            raise SpecificationError(
                f"interval={self.interval!r} is not available with design='case-crossover'; use the default "
                "interval='quasi-poisson'."
            )
        if self.residual_lags:
            raise SpecificationError(
                f"residual_lags={self.residual_lags} is not available with design='case-crossover'; leave it at 0 "
                "(none), or use design='time-series' to adjust for lagged residuals."
            )

    def _check_roles(self) -> None:
        """The exposure and outcome must not also enter the model as confounders."""
        roles = {"temperature": self.temperature, "humidity": self.humidity, "offset": self.offset}
        roles.update({f"confounder {t.name}": c for t in self.confounders for c in t.inputs})
        for role, column in roles.items():
            for name, what in ((self.exposure, "exposure"), (self.outcome, "outcome")):
                if column == name:
                    hint = " (for temperature as the exposure, set temperature=None)" if role == "temperature" else ""
                    raise SpecificationError(
                        f"column {name!r} is both the {what} and the {role}; a column can enter the model once{hint}."
                    )

    @classmethod
    def from_options(cls, **options: Any) -> ModelSpec:
        """Build a spec from keyword options, naming any unknown option and listing the valid ones.

        ``units`` (a mapping of column → unit) is accepted besides the fields: the exposure's entry becomes
        ``unit`` (columns not named keep the default, µg/m³).
        """
        options = dict(options)
        units = options.pop("units", None)
        if units is not None:
            if not hasattr(units, "get"):
                raise SpecificationError(
                    f"units must be a mapping of column to unit, e.g. {{'o3': 'ppb'}}; got {units!r}."
                )
            if "unit" in options and options.get("exposure") in units:
                raise SpecificationError("give the exposure's unit either as unit=... or in units=..., not both.")
            if options.get("exposure") in units:
                options["unit"] = units[options["exposure"]]
            given = options.get("copollutants") or ()
            given = (given,) if isinstance(given, str) else tuple(given)
            if any(c in units for c in given) and "copollutant_units" not in options:
                options["copollutant_units"] = tuple(units.get(c, DEFAULT_UNIT) for c in given)
        valid = {f.name for f in dataclasses.fields(cls)}
        unknown = sorted(set(options) - valid)
        if unknown:
            raise SpecificationError(
                f"unknown model option {unknown[0]!r}; valid options are: {', '.join(sorted(valid | {'units'}))}."
            )
        return cls(**options)

    def replace(self, **changes: Any) -> ModelSpec:
        """A copy with some fields changed (validated again)."""
        return dataclasses.replace(self, **changes)

    @property
    def lag_structure(self) -> LagStructure:
        return self.lag

    def confounder_terms(self) -> tuple[Term, ...]:
        """The confounder terms in design order (the intercept is added by the design builder)."""
        terms: list[Term] = []
        time_series = self.design != "case-crossover"  # a case-crossover's strata hold time and day of week
        if time_series and self.seasonality == "spline":
            terms.append(TimeSpline(self.trend_df_per_year))
        elif time_series:
            terms.append(FourierSeason(self.fourier_pairs))
        if self.temperature is not None:
            terms.append(Spline(self.temperature, self.temperature_df))
            if self.temperature_lags is not None:
                terms.append(Spline(self.temperature, self.temperature_lag_df, lags=self.temperature_lags))
        if self.humidity is not None:
            terms.append(Spline(self.humidity, self.humidity_df))
        if self.day_of_week and time_series:
            terms.append(DayOfWeek())
        if self.holidays is not None:
            terms.append(PublicHolidays(self.holidays, self.holiday_subdivision))
        terms.extend(self.confounders)
        terms.extend(CopollutantTerm(c, self.lag) for c in self.copollutants)
        if self.modifier is not None:
            terms.append(Categorical(self.modifier))
        return tuple(terms)

    def columns_used(self) -> tuple[str, ...]:
        """Every data column the model reads (outcome, exposure, confounders, offset)."""
        cols = [self.outcome, self.exposure]
        for term in self.confounder_terms():
            cols.extend(term.inputs)
        if self.offset:
            cols.append(self.offset)
        return tuple(dict.fromkeys(cols))
