"""The fits behind a report: check what was asked for, fit it, and keep what failed and why.

:func:`check_request` validates the outcomes, exposures, lag structures, units and effect options of a
report before anything is fitted; :func:`fit_request` fits every outcome × exposure × lag structure through
:func:`~airhealth.studies.compare.compare_results`. An outcome × exposure whose data fail is kept as a failure
(with its message), and a lag structure that fails alone is retried alone, so the others complete.
"""

from __future__ import annotations

import warnings
from collections.abc import Mapping, Sequence
from dataclasses import dataclass
from typing import Any

import pandas as pd

from .._progress import progress
from .._warn import warn_user
from ..errors import AirhealthError, AirhealthWarning, DataError, SpecificationError
from ..model.bases.lag_structures import LagStructure, parse_lag
from ..model.spec import DEFAULT_UNIT, ModelSpec, display_unit
from ..prep.validate import require_columns
from ..studies.compare import compare_results

__all__ = ["ReportFits", "ReportRequest", "check_request", "fit_request"]


@dataclass(frozen=True)
class ReportRequest:
    """What a report is asked to hold, validated: columns, lag structures, the main lag, units, effects."""

    outcomes: list[str]
    exposures: list[str]
    lags: list[LagStructure]
    main_index: int
    units: dict[str, str]
    per: float
    level: float

    def unit_of(self, exposure: str) -> str:
        """The unit of ``exposure`` (the default, µg/m³, unless one was given)."""
        return self.units.get(exposure, DEFAULT_UNIT)


@dataclass(frozen=True)
class ReportFits:
    """The results of a request: per outcome × exposure one result (or None) per lag, failures and warnings."""

    results: dict[tuple[str, str], list[Any]]
    failures: pd.DataFrame  # outcome, exposure, lag ("all" when every lag failed alike), error
    warnings: pd.DataFrame  # outcome, exposure, warning
    main: Any  # the FitResult of the main model
    main_note: str  # empty, or why another model stands in for the main one

    @property
    def done(self) -> list[Any]:
        """Every successful result, in the order outcome, exposure, lag."""
        return [r for results in self.results.values() for r in results if r is not None]


def _names(values: Sequence[str] | str, what: str) -> list[str]:
    names = [values] if isinstance(values, str) else list(values)
    if not names or not all(isinstance(v, str) and v for v in names):
        raise SpecificationError(f"{what} must be a list of column names, got {values!r}.")
    repeated = [v for v in names if names.count(v) > 1]
    if repeated:
        raise SpecificationError(f"{what} names {repeated[0]!r} twice; give each column once.")
    return names


def _lags(lags: Sequence[Any], main_lag: Any) -> tuple[list[Any], int]:
    """The lag structures (parsed, each with a unique label) and the position of the main one."""
    given = [lags] if isinstance(lags, str) else list(lags)
    if not given:
        raise SpecificationError("lags is empty; give at least one lag structure, e.g. lags=['0-1'].")
    parsed = [parse_lag(lag) for lag in given]
    labels = [p.label for p in parsed]
    repeated = [lab for lab in labels if labels.count(lab) > 1]
    if repeated:
        raise SpecificationError(f"lag {repeated[0]!r} is given twice; give each lag structure once.")
    if main_lag is None:
        return parsed, 0
    main = parse_lag(main_lag)
    for i, (text, lag) in enumerate(zip(given, parsed, strict=True)):
        if lag == main or (isinstance(main_lag, str) and main_lag.strip().lower() == str(text).strip().lower()):
            return parsed, i
    raise SpecificationError(f"the main lag {main.label!r} is not among the lags asked for ({', '.join(labels)}).")


def _units(units: Mapping[str, str] | None, exposures: list[str]) -> dict[str, str]:
    if units is None:
        return {}
    if not isinstance(units, Mapping):
        raise SpecificationError(
            f"units must be a mapping of exposure column to unit, e.g. {{'o3': 'ppb'}}; got {units!r}."
        )
    unknown = [c for c in units if c not in exposures]
    if unknown:
        raise SpecificationError(
            f"a unit is given for {unknown[0]!r}, which is not one of the exposures ({', '.join(exposures)})."
        )
    return {column: display_unit(unit) if isinstance(unit, str) else unit for column, unit in units.items()}


def _check_arguments(per: float, level: float, threshold: int | None) -> None:
    if isinstance(per, bool) or not isinstance(per, int | float) or not per > 0:
        raise SpecificationError(f"per must be a positive number of exposure units, got {per!r}.")
    if isinstance(level, bool) or not isinstance(level, int | float) or not 0 < level < 1:
        raise SpecificationError(f"level must be a confidence level between 0 and 1 (e.g. 0.95), got {level!r}.")
    if threshold is not None and (isinstance(threshold, bool) or not isinstance(threshold, int) or threshold < 1):
        raise SpecificationError(f"small_count_threshold must be a whole number >= 1 or None, got {threshold!r}.")


def _fit_pair(data: pd.DataFrame, lags: list[Any], options: dict[str, Any]) -> tuple[list[Any], list[tuple], list]:
    """Fit every lag for one outcome and exposure; a failing lag is retried alone so the others complete.

    Returns (results or None per lag, failures as (lag label, message), warnings caught).
    """
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            return compare_results(data, lags, **options), [], list(caught)
        except AirhealthError as exc:
            if len(lags) == 1:
                return [None], [(lags[0].label, str(exc))], list(caught)
    results, failures, seen = [], [], list(caught)
    for lag in lags:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always")
            try:
                results.extend(compare_results(data, [lag], **options))
            except AirhealthError as exc:
                results.append(None)
                failures.append((lag.label, str(exc)))
        seen.extend(caught)
    return results, failures, seen


def _fit_all(
    data: pd.DataFrame, outcomes: list[str], exposures: list[str], lags: list[Any], options: dict[str, Any], show: bool
) -> tuple[dict[tuple[str, str], list[Any]], pd.DataFrame, pd.DataFrame]:
    """Fit every outcome × exposure; returns results per pair, the failures and the warnings (as tables)."""
    fits, failed, warned = {}, [], []
    pairs = [(o, e) for o in outcomes for e in exposures]
    for outcome, exposure in progress(pairs, label="outcome × exposure", enabled=show):
        results, failures, caught = _fit_pair(data, lags, {**options, "outcome": outcome, "exposure": exposure})
        fits[(outcome, exposure)] = results
        if len(failures) == len(lags) and len({m for _, m in failures}) == 1:
            failures = [("all", failures[0][1])]
        failed += [{"outcome": outcome, "exposure": exposure, "lag": lag, "error": msg} for lag, msg in failures]
        for w in caught:
            record = {"outcome": outcome, "exposure": exposure, "warning": str(w.message)}
            if record not in warned:
                if issubclass(w.category, AirhealthWarning):  # the report lists airhealth's own warnings
                    warned.append(record)
                warn_user(f"{outcome} and {exposure}: {w.message}", w.category)
    return (
        fits,
        pd.DataFrame(failed, columns=["outcome", "exposure", "lag", "error"]),
        pd.DataFrame(warned, columns=["outcome", "exposure", "warning"]),
    )


def _main_result(
    fits: dict[tuple[str, str], list[Any]], pair: tuple[str, str], index: int, label: str
) -> tuple[Any, str]:
    """The main model (first outcome and exposure at the main lag), or else the first fit that worked."""
    if fits[pair][index] is not None:
        return fits[pair][index], ""
    at_lag = [results[index] for results in fits.values() if results[index] is not None]
    found = (at_lag or [r for results in fits.values() for r in results if r is not None])[0]
    spec = found.spec
    return found, (
        f"The main model asked for ({pair[0]}, {pair[1]}, lag {label}) could not be fitted (see 'Analyses that "
        f"could not be completed'); the model checks below show {spec.outcome}, {spec.exposure}, lag "
        f"{spec.lag.label} instead."
    )


def check_request(
    data: pd.DataFrame,
    outcomes: Sequence[str] | str,
    exposures: Sequence[str] | str,
    lags: Sequence[Any],
    main_lag: Any = None,
    units: Mapping[str, str] | None = None,
    per: float = 10.0,
    level: float = 0.95,
    small_count_threshold: int | None = None,
    columns: Sequence[str | None] = (),
    model_options: Mapping[str, Any] | None = None,
) -> ReportRequest:
    """Validate a report's request before any fit; ``columns`` are further columns the model reads.

    The model of every outcome × exposure × lag is specified once (:class:`~airhealth.model.spec.ModelSpec`),
    so a bad model option (a misspelt name, a column in two roles) stops the report before any fit instead
    of failing every analysis.

    Raises
    ------
    SpecificationError
        Naming the bad argument (a lag not understood or given twice, a main lag not among the lags, a unit
        for a column that is not an exposure, a column given as outcome and exposure, ...).
    DataError
        For a column that does not exist in ``data``.
    """
    outcomes, exposures = _names(outcomes, "outcomes"), _names(exposures, "exposures")
    both = [c for c in outcomes if c in exposures]
    if both:
        raise SpecificationError(f"column {both[0]!r} is given both as an outcome and as an exposure.")
    if model_options and "unit" in model_options:  # one unit for several exposures would mislabel all but one
        raise SpecificationError(
            f"a report takes each exposure's unit in units={{column: unit}}, not unit={model_options['unit']!r}; "
            f"e.g. units={{{exposures[0]!r}: {model_options['unit']!r}}} (command line: --unit COL=UNIT)."
        )
    parsed, main_index = _lags(lags, main_lag)
    checked_units = _units(units, exposures)
    _check_arguments(per, level, small_count_threshold)
    require_columns(data, [*columns, *outcomes, *exposures], "data")
    for outcome in outcomes:
        for exposure in exposures:
            for lag in parsed:
                options = {**(model_options or {}), "units": checked_units}
                ModelSpec.from_options(outcome=outcome, exposure=exposure, lag=lag, **options)
    return ReportRequest(outcomes, exposures, parsed, main_index, checked_units, float(per), float(level))


def fit_request(
    data: pd.DataFrame, request: ReportRequest, show_progress: bool = False, **model_options: Any
) -> ReportFits:
    """Fit every outcome × exposure × lag of ``request``; failures are kept, not raised, unless all fail.

    Raises
    ------
    DataError
        When no analysis at all could be completed (the message lists each failure).
    """
    options = {**model_options, "units": request.units}
    fits, failures, caught = _fit_all(data, request.outcomes, request.exposures, request.lags, options, show_progress)
    if not any(r is not None for results in fits.values() for r in results):
        listing = "; ".join(f"{r.outcome} and {r.exposure}: {r.error}" for r in failures.itertuples())
        raise DataError(f"no analysis could be completed, so no report was written. {listing}")
    pair = (request.outcomes[0], request.exposures[0])
    main, note = _main_result(fits, pair, request.main_index, request.lags[request.main_index].label)
    return ReportFits(fits, failures, caught, main, note)
