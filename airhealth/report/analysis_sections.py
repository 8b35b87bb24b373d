"""The further analyses a one-city report can hold, each built from its main model by the existing builders.

:func:`write_report <airhealth.report.city_report.write_report>` takes the keywords of :data:`ANALYSES`
(``diagnostics=True``, ``robustness=True``, ``sensitivity=True``, ``copollutant_check=["no2"]``,
``effect_modifier="season"``, ``burden="who-guideline:pm2.5:24h"``, ``compare_designs=True``);
:func:`split_analyses` takes them out of the model options in the order the user gave them,
:func:`check_analyses` refuses bad values before any fitting, and :func:`analysis_sections` runs each on the
report's main model (its outcome, exposure, lag and confounder options) and returns one section per analysis,
in that order. The statistics and figures are those of :func:`airhealth.diagnose`, :func:`airhealth.compare`,
:func:`airhealth.sensitivity`, :func:`airhealth.copollutant_table`, :func:`airhealth.fit` with a modifier,
:func:`airhealth.attributable_burden` and :func:`airhealth.compare_designs`; nothing is recomputed here.

References
----------
Bhaskaran K, Gasparrini A, Hajat S, Smeeth L, Armstrong B (2013). Time series regression studies in
environmental epidemiology. Int J Epidemiol 42:1187–1195 (sensitivity, co-pollutant and design checks).
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import pandas as pd

from .._warn import warn_user
from ..errors import DataError, DataWarning, FitError, SpecificationError
from .document import Figure, Section, Table, Text

__all__ = ["ANALYSES", "Analyses", "analysis_sections", "check_analyses", "methods_text", "split_analyses"]

#: The analysis keywords of ``write_report``, and what each adds.
ANALYSES = {
    "diagnostics": "diagnostics of the main model (residual autocorrelation, influential days, verdict)",
    "robustness": "the main outcome and exposure over every lag structure and several df per year of the time "
    "trend, on common days, with QAIC",
    "sensitivity": "the main model refitted with one setting changed at a time (the control of season and trend, "
    "of temperature, humidity and holidays; the most polluted days left out)",
    "copollutant_check": "the main model adjusted for each co-pollutant in turn, on common days",
    "effect_modifier": "the main model's effect in each level of a categorical column, with a test of equal effects",
    "burden": "the cases attributable to exposure above a counterfactual level",
    "compare_designs": "the main model as a time series and as a time-stratified case-crossover",
}
_SWITCHES = ("diagnostics", "robustness", "compare_designs")


@dataclass(frozen=True)
class Analyses:
    """The analyses asked for, in the order given: ``(keyword, value)`` pairs of :data:`ANALYSES`."""

    asked: tuple[tuple[str, Any], ...] = ()

    def __bool__(self) -> bool:
        return bool(self.asked)

    def value(self, name: str) -> Any:
        """The value given for ``name`` (None when not asked)."""
        return dict(self.asked).get(name)


def split_analyses(options: Mapping[str, Any]) -> tuple[Analyses, dict[str, Any]]:
    """The analysis keywords of ``options`` (in their order; ``False``/``None``/empty ones dropped) and the rest."""
    asked = tuple((k, v) for k, v in options.items() if k in ANALYSES and _asked(v))
    return Analyses(asked), {k: v for k, v in options.items() if k not in ANALYSES}


def _asked(value: Any) -> bool:
    if value is None or value is False:
        return False
    return not (isinstance(value, Sequence) and not isinstance(value, str) and len(value) == 0)


def _columns(value: Any, name: str) -> tuple[str, ...]:
    columns = (value,) if isinstance(value, str) else value
    if not isinstance(columns, Sequence) or not all(isinstance(c, str) and c for c in columns):
        raise SpecificationError(f"{name} takes a column name or a list of column names, got {value!r}.")
    return tuple(columns)


def _check_column(data: pd.DataFrame, column: str, name: str) -> None:
    if column not in data.columns:
        raise SpecificationError(
            f"{name} {column!r}: the data have no column {column!r}; its columns are {[str(c) for c in data.columns]}."
        )


def _check_burden(value: Any, name: str) -> None:
    from ..burden.presets import find_preset

    if isinstance(value, str) and value != "minimum-risk":
        try:
            find_preset(value)
        except SpecificationError as exc:
            raise SpecificationError(f"{name} {value!r}: {exc}") from None
    elif isinstance(value, bool) or not isinstance(value, int | float | str):
        raise SpecificationError(
            f"{name} takes a counterfactual level in the exposure's unit or a preset name such as "
            f"'who-guideline:pm2.5:24h' (see airhealth.preset_table()), got {value!r}."
        )


def check_analyses(analyses: Analyses, data: pd.DataFrame, names: Mapping[str, str] | None = None) -> None:
    """Refuse a bad analysis value before any fitting; the message names the keyword and the value.

    ``names``: how each keyword is spelled to the user (the command line's ``--burden``), default the keyword.
    """
    for key, value in analyses.asked:
        name = (names or {}).get(key, key)
        if key in _SWITCHES and value is not True and not (key == "robustness" and _df_values(value)):
            raise SpecificationError(f"{name} takes True (or False), got {value!r}.")
        if key == "sensitivity" and value is not True and not isinstance(value, Mapping):
            raise SpecificationError(
                f"{name} takes True (the default checks) or a mapping of checks such as "
                f"{{'trend_df_per_year': [4, 10]}} (see airhealth.sensitivity), got {value!r}."
            )
        if key == "copollutant_check":
            for column in _columns(value, name):
                _check_column(data, column, name)
        if key == "effect_modifier":
            if not isinstance(value, str):
                raise SpecificationError(f"{name} takes one column name, got {value!r}.")
            _check_column(data, value, name)
        if key == "burden":
            _check_burden(value, name)


def _df_values(value: Any) -> list[float] | None:
    """``robustness=[4, 7, 10]``: the df per year of the time trend to compare (None when not such a list)."""
    if isinstance(value, Sequence) and not isinstance(value, str) and value:
        if all(isinstance(v, int | float) and not isinstance(v, bool) and v > 0 for v in value):
            return [float(v) for v in value]
    return None


def _value_text(name: str, value: Any) -> str:
    """What was given for an analysis, in words for the methods paragraph ("" for a plain switch)."""
    if name == "copollutant_check":
        return f" ({', '.join(_columns(value, name))})"
    if name == "effect_modifier":
        return f" ({value})"
    if name == "burden":
        return f" ({value:g} in the exposure's unit)" if isinstance(value, int | float) else f" ({value})"
    if name == "robustness" and _df_values(value):
        return f" (df per year {', '.join(f'{v:g}' for v in _df_values(value) or [])})"
    if name == "sensitivity" and isinstance(value, Mapping):
        return f", checks {', '.join(map(str, value))}"
    return ""


def methods_text(analyses: Analyses) -> str:
    """One sentence for the methods paragraph naming every further analysis run."""
    if not analyses:
        return ""
    done = [ANALYSES[name] + _value_text(name, value) for name, value in analyses.asked]
    return "Further analyses of the main model, in the order shown: " + "; ".join(done) + "."


@dataclass(frozen=True)
class MainModel:
    """What every analysis needs of the report: the data, the main fit, the options and the effect scale."""

    data: pd.DataFrame
    main: Any  # FitResult
    options: dict[str, Any]  # the model options of the report's fits (units included)
    lags: tuple[Any, ...]  # every lag structure of the report
    per: float
    level: float
    threshold: int | None

    def call_options(self) -> dict[str, Any]:
        spec = self.main.spec
        return {"outcome": spec.outcome, "exposure": spec.exposure, "per": self.per, "level": self.level,
                **self.options}  # fmt: skip


def _diagnostics(m: MainModel, _: Any) -> Section:
    from ..studies.diagnostics import diagnose
    from .diagnostic_plots import plot_residual_autocorrelation, plot_residuals_against, plot_residuals_over_time

    checks = diagnose(m.main)
    spec = m.main.spec
    blocks: list[Any] = [
        Text(
            f"Checks of the main model ({spec.outcome}, {spec.exposure}, lag {spec.lag.label}): residual "
            f"autocorrelation, dispersion ({checks.dispersion:.2f}), influential days and the variance inflation "
            f"of the exposure ({checks.exposure_vif:.2f}). 'check' marks a finding worth a look, with what to try."
        ),
        Table("Verdict of the diagnostics", checks.verdict, "diagnostics_verdict"),
        Figure("Residual autocorrelation", plot_residual_autocorrelation(checks).figure, "residual_autocorrelation"),
        Figure("Residuals over time", plot_residuals_over_time(m.main).figure, "residuals_over_time"),
    ]
    influential = checks.influential_days.head(20)
    blocks.append(
        Table(
            "Most influential days (Cook's distance above 4/n, up to 20)", influential, "influential_days",
            count_columns=tuple(c for c in ("observed", "fitted") if c in influential.columns),
        )
    )  # fmt: skip
    if spec.temperature and spec.temperature in m.data.columns:
        series = m.data.set_index(pd.to_datetime(m.data[m.options.get("date", "date")]))[spec.temperature]
        ax = plot_residuals_against(m.main, pd.to_numeric(series, errors="coerce"), label=f"{spec.temperature} (°C)")
        blocks.append(Figure(f"Residuals against {spec.temperature}", ax.figure, "residuals_against_temperature"))
    return Section("Diagnostics of the main model", blocks)


_ROBUST_COLUMNS = ["outcome", "exposure", "lag", "trend_df_per_year", "rr", "rr_low", "rr_high", "p_value", "qaic",
                   "qaic_common", "delta_qaic_common", "n_days"]  # fmt: skip


def _robustness(m: MainModel, value: Any) -> Section:
    from ..studies.compare import compare

    spec = m.main.spec
    df = _df_values(value)
    if df is None:
        own = float(spec.trend_df_per_year)
        df = sorted({max(1.0, own - 3), own, own + 3}) if spec.seasonality == "spline" else [own]
    options = {k: v for k, v in m.call_options().items() if k != "trend_df_per_year"}
    table = compare(m.data, list(m.lags), trend_df_per_year=df, **options)
    values, days = ", ".join(f"{d:g}" for d in df), int(table["n_days"].iloc[0])
    text = (
        f"The main outcome and exposure fitted with every lag structure of the report and {len(df)} value(s) of the "
        f"df per year of the time trend ({values}), all on the same {days} "
        "days so that their QAIC values can be compared. An estimate that changes little across these choices "
        "does not hinge on them."
    )
    return Section(
        "Robustness to the lag structure and the time trend",
        [
            Text(text),
            Table("Estimates by lag structure and df per year", table[_ROBUST_COLUMNS], "robustness"),
            Table("Robustness comparison, all statistics", table, "robustness_full", display=False),
        ],
    )


def _sensitivity(m: MainModel, value: Any) -> Section:
    from ..studies.sensitivity import sensitivity
    from .sensitivity_plots import sensitivity_section

    options = m.call_options()
    outcome, exposure = options.pop("outcome"), options.pop("exposure")
    checks = None if value is True else dict(value)
    table = sensitivity(m.data, outcome, exposure, lag=m.main.spec.lag, checks=checks, **options)
    return sensitivity_section(table, level=m.level)


def _copollutants(m: MainModel, value: Any) -> Section:
    from ..studies.copollutants import copollutant_table
    from .modification_section import copollutant_section

    options = m.call_options()
    outcome, exposure = options.pop("outcome"), options.pop("exposure")
    options.pop("lag", None)
    columns = list(_columns(value, "copollutant_check"))
    table = copollutant_table(m.data, exposure, columns, outcome, lag=m.main.spec.lag, **options)
    return copollutant_section(table, unit=m.main.spec.unit)


def _modifier(m: MainModel, value: Any) -> Section:
    from ..model.fitting import fit
    from .modification_section import group_effects_section

    options = {k: v for k, v in m.options.items() if k not in ("modifier", "lag")}
    spec = m.main.spec
    grouped = fit(m.data, spec.outcome, spec.exposure, lag=spec.lag, modifier=value, **options)
    return group_effects_section(grouped, per=m.per, level=m.level)


def _burden(m: MainModel, value: Any) -> Section:
    from ..burden.attributable import burden
    from .burden_section import burden_section

    result = burden(m.main, value, data=m.data, level=m.level)
    return burden_section(result, suppress_below=m.threshold)


def _designs(m: MainModel, _: Any) -> Section:
    from ..studies.design_comparison import compare_designs
    from .design_section import design_section

    options = m.call_options()
    table = compare_designs(m.data, lags=[m.main.spec.lag], **options)
    return design_section(table)


_BUILDERS = {
    "diagnostics": _diagnostics,
    "robustness": _robustness,
    "sensitivity": _sensitivity,
    "copollutant_check": _copollutants,
    "effect_modifier": _modifier,
    "burden": _burden,
    "compare_designs": _designs,
}


def analysis_sections(analyses: Analyses, main_model: MainModel) -> list[Section]:
    """One section per analysis asked for, in the order given (see the module's documentation).

    An analysis that fails on the data (DataError or FitError, e.g. a robustness lag with too few days) gets a
    section saying why, with a DataWarning, and the rest of the report completes; bad options were refused
    earlier by :func:`check_analyses`.
    """
    return [_one_section(name, value, main_model) for name, value in analyses.asked]


def _one_section(name: str, value: Any, main_model: MainModel) -> Section:
    try:
        return _BUILDERS[name](main_model, value)
    except (DataError, FitError) as error:
        spec = main_model.main.spec
        what = f"{ANALYSES[name]} ({spec.outcome}, {spec.exposure}, lag {spec.lag.label})"
        message = f"The analysis '{name}' could not be completed: {error}"
        warn_user(f"{message} The rest of the report was written.", DataWarning)
        return Section(f"Not completed: {name.replace('_', ' ')}", [Text(f"Asked for: {what}."), Text(message)])
