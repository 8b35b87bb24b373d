"""From a validated daily frame and a :class:`ModelSpec` to the design matrix the engine fits.

Design construction is split in two so that related fits share work: the confounder block (intercept,
time, weather, calendar and user terms) depends only on the data and the confounder options, while the
exposure block depends on the lag structure. :func:`build_confounders` is computed once per data set and
reused by every lag structure in a comparison.
"""

from __future__ import annotations

import hashlib
from collections import OrderedDict
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd

from .._warn import warn_user, warnings_issued
from ..errors import DataError, DataWarning, SpecificationError
from ..prep.align import prepare_daily
from ..prep.degenerate import check_empty, check_usable_days
from ..prep.guards import ColumnRoles, check_values, clean_values
from ..prep.validate import check_counts, check_finite, check_not_all_missing, require_columns
from .bases.copollutant import copollutant_correlations
from .bases.exposure_lag import ExposureLagBasis
from .bases.lag_structures import LagStructure, MovingAverage, SingleDay
from .bases.modifier import (
    absorbed_main_effects,
    check_group_sizes,
    group_column_names,
    interact,
    modifier_codes,
)
from .bases.strata import StrataUsed, used_strata
from .bases.terms import Categorical, TermBlock
from .engine.aliasing import aliased_columns, describe_aliased
from .spec import ModelSpec

__all__ = [
    "ConfounderBlock",
    "Design",
    "build_confounders",
    "build_design",
    "cached_confounders",
    "clear_cache",
    "column_roles",
    "lag_window_remedy",
    "model_frame",
    "usable_days",
]

INTERCEPT = "(intercept)"

#: Reasons a calendar day is left out of a fit (``Design.dropped``); confounder terms add "<term> missing".
OUTCOME_MISSING = "outcome missing"
EXPOSURE_MISSING = "exposure missing"
EXPOSURE_IN_WINDOW = "exposure missing in lag window"
LAG_BEFORE_START = "lag window starts before the first day"
EXPOSURE_REASONS = (EXPOSURE_MISSING, EXPOSURE_IN_WINDOW, LAG_BEFORE_START)

#: Shortest run of unusable days checked for confounder columns left without data (shorter runs cannot
#: hold the support of a spline column; other rank problems are named by the engine).
MIN_GAP_CHECKED = 14


@dataclass(frozen=True)
class ConfounderBlock:
    """Confounder design columns on the full calendar, and the terms' fitted bases."""

    matrix: np.ndarray
    column_names: tuple[str, ...]
    blocks: tuple[TermBlock, ...]
    complete: np.ndarray  # rows where every confounder is available
    first_missing: np.ndarray  # index into blocks of the first term missing on the row, -1 if none


@dataclass(frozen=True)
class Design:
    """Everything the engine needs for one fit, plus the bookkeeping for the result.

    ``matrix`` holds only the rows used; ``used`` marks them on the full calendar.
    """

    matrix: np.ndarray
    response: np.ndarray
    offset: np.ndarray | None
    column_names: tuple[str, ...]
    exposure_slice: slice
    calendar: pd.DatetimeIndex
    used: np.ndarray
    dropped: pd.DataFrame
    confounders: ConfounderBlock
    exposure_values: np.ndarray  # exposure columns on the full calendar
    exposure_raw: np.ndarray  # the daily exposure series on the full calendar
    lag: Any = None  # the lag structure as fitted (an exposure-lag basis bound to the exposure), if it differs
    aliased: tuple[str, ...] = ()  # confounder columns left out: no support on the days used (aliasing)
    notes: tuple[str, ...] = ()  # plain-language notes for the result (why columns were aliased)
    copollutant_correlations: tuple[float, ...] = ()  # exposure vs each co-pollutant on the days used
    groups: tuple[Any, ...] = ()  # levels of the modifier, in the order of the per-level exposure columns
    group_codes: np.ndarray | None = None  # level of each calendar day (index into groups) with a modifier
    strata: StrataUsed | None = None  # case-crossover: the stratum of each day used (no intercept column)

    @property
    def n_confounder_columns(self) -> int:
        return self.exposure_slice.start


def column_roles(spec: ModelSpec) -> ColumnRoles:
    """The roles of the columns ``spec`` reads, for the value guards of :mod:`airhealth.prep.guards`."""
    text_columns = {c for t in spec.confounder_terms() if isinstance(t, Categorical) for c in t.inputs}
    return ColumnRoles(
        date=spec.date,
        outcome=spec.outcome,
        exposure=spec.exposure,
        unit=spec.unit,
        numeric=tuple(c for c in spec.columns_used() if c not in text_columns),
        temperature=spec.temperature,
        humidity=spec.humidity,
        no_codes=(spec.offset,) if spec.offset else (),
        copollutants=tuple(zip(spec.copollutants, spec.copollutant_units, strict=True)),
    )


def model_frame(data: pd.DataFrame, spec: ModelSpec) -> pd.DataFrame:
    """Validate ``data`` for ``spec`` and return a copy on a complete daily calendar.

    The single validation entry of every front end (``fit``, ``compare``, sweeps, reports, the command
    line). In order: the columns exist and the table has rows; dates parse (in ``spec.date_format`` if given)
    and are daily; ``spec.na_values``
    become missing in every column the model reads and text columns become numbers
    (:func:`airhealth.prep.guards.clean_values`, which also refuses common missing-value codes such as -999
    left in a series); the outcome holds whole non-negative counts; neither outcome nor exposure is entirely
    missing; no value is infinite; the exposure is plausible for its pollutant and unit, temperatures are
    in °C and humidity in %; the outcome has events and varies, and the exposure varies and is not
    measured in one season only (:func:`airhealth.prep.guards.check_values`). The caller's frame is not
    modified.
    """
    require_columns(data, [spec.date, *spec.columns_used()], "data")
    check_empty(data)
    roles = column_roles(spec)
    key = _frame_key(data, spec, roles)
    if key is not None and key in _FRAMES:  # these values passed every guard below, without a warning
        _FRAMES.move_to_end(key)
        frame = _FRAMES[key].copy()
    else:
        issued = warnings_issued()
        frame = _checked_frame(data, spec, roles)
        if key is not None and warnings_issued() == issued:  # a frame that warned is checked (and warns) again
            _remember(_FRAMES, key, frame.copy())
    max_lag = spec.lag.max_lag
    if max_lag >= len(frame) - 1:
        raise SpecificationError(
            f"lag {spec.lag.label} reaches back {max_lag} days but the series has only {len(frame)} days."
        )
    return frame


def _checked_frame(data: pd.DataFrame, spec: ModelSpec, roles: ColumnRoles) -> pd.DataFrame:
    """The guards of :func:`model_frame`, in order, on a fresh copy of the columns ``spec`` reads."""
    frame = prepare_daily(data[[spec.date, *spec.columns_used()]], spec.date, date_format=spec.date_format)
    dates = pd.DatetimeIndex(frame[spec.date])  # once, for the messages of every guard
    frame = clean_values(frame, roles, spec.na_values, dates)
    outcome, exposure = frame[spec.outcome], frame[spec.exposure]
    check_not_all_missing(outcome, spec.outcome, "outcome")
    check_counts(outcome, spec.outcome, dates)
    check_not_all_missing(exposure, spec.exposure, "exposure")
    if not pd.api.types.is_numeric_dtype(exposure):
        raise DataError(f"exposure column {spec.exposure!r} is not numeric (dtype {exposure.dtype}).")
    check_finite(frame, spec.columns_used(), dates)
    check_values(frame, roles, dates)
    return frame


#: Validated frames of recent calls (:func:`model_frame`), by a content hash of the columns read and every
#: option the guards read; only frames whose checks issued no warning are kept.
_FRAMES: OrderedDict[tuple[Any, ...], pd.DataFrame] = OrderedDict()


def _frame_key(data: pd.DataFrame, spec: ModelSpec, roles: ColumnRoles) -> tuple[Any, ...] | None:
    """Key of a validated frame, or None (no caching) when a column is not plain numbers or dates.

    Text and other object columns are hashed through their text, in which ``"True"`` and ``True`` agree
    although the guards treat them differently; such frames are always checked afresh.
    """
    columns = [spec.date, *spec.columns_used()]
    if not all(isinstance(data[c].dtype, np.dtype) and data[c].dtype.kind in "biufmM" for c in columns):
        return None
    try:
        key = (roles, spec.na_values, spec.date_format, tuple(columns), len(data), _content_digest(data, columns))
        hash(key)
    except TypeError:  # an option that cannot be hashed: no caching
        return None
    return key


def _remember(cache: OrderedDict, key: tuple[Any, ...], value: Any) -> None:
    cache[key] = value
    while len(cache) > _CACHE_SIZE:
        cache.popitem(last=False)


_CACHE: OrderedDict[tuple[Any, ...], ConfounderBlock] = OrderedDict()
_CACHE_SIZE = 2


def _content_digest(frame: pd.DataFrame, columns: list[str]) -> str:
    """A BLAKE2 digest of the columns' dtypes and values (numbers and dates as raw bytes: a fraction of a
    millisecond for 14 years of days; other dtypes through pandas' row hashes)."""
    digest = hashlib.blake2b(digest_size=16)
    for name in columns:
        column = frame[name]
        values = column.to_numpy() if column.dtype.kind in "biufcmM" else None
        if values is None or values.dtype == object:
            values = pd.util.hash_pandas_object(column, index=False).to_numpy()
        digest.update(f"{name}|{column.dtype}|".encode())
        digest.update(np.ascontiguousarray(values).view(np.uint8))
    return digest.hexdigest()


def _cache_key(frame: pd.DataFrame, spec: ModelSpec) -> tuple[Any, ...] | None:
    """Key of a confounder block: the terms and a content hash of the columns they read."""
    terms = spec.confounder_terms()
    columns = [spec.date, *dict.fromkeys(c for t in terms for c in t.inputs)]
    try:
        key = (terms, tuple(columns), len(frame), _content_digest(frame, columns))
        hash(key)
    except TypeError:  # a term that cannot be hashed: no caching
        return None
    return key


def cached_confounders(frame: pd.DataFrame, spec: ModelSpec) -> ConfounderBlock:
    """:func:`build_confounders`, reusing the block of a recent call on the same data and terms.

    Repeated fits on one data set (other exposures, lags or outcomes) share the confounder block. The key
    includes a content hash of every column the terms read, so changed data never reuse a stale block; a
    few recent blocks are kept (read-only; :func:`clear_cache` frees them).
    """
    key = _cache_key(frame, spec)
    if key is not None and key in _CACHE:
        _CACHE.move_to_end(key)
        return _CACHE[key]
    block = build_confounders(frame, spec)
    if key is not None:
        block.matrix.flags.writeable = False
        _remember(_CACHE, key, block)
    return block


def clear_cache() -> None:
    """Forget the cached confounder blocks (each holds a days × columns matrix) and validated frames."""
    _CACHE.clear()
    _FRAMES.clear()


def _hashable(value: Any) -> bool:
    try:
        hash(value)
    except TypeError:
        return False
    return True


def build_confounders(
    frame: pd.DataFrame, spec: ModelSpec, built: dict[Any, TermBlock] | None = None
) -> ConfounderBlock:
    """Intercept plus every confounder term of ``spec`` on the full calendar of ``frame``.

    ``built`` (optional, for many specs on the same ``frame``, e.g. a sweep of one option) maps terms to
    their blocks: a term found there is not built again, and the terms built are added to it.
    """
    n = len(frame)
    blocks = [TermBlock(INTERCEPT, np.ones((n, 1)), (INTERCEPT,))]
    for term in spec.confounder_terms():
        reusable = built is not None and _hashable(term)
        block = built.get(term) if reusable else None
        if block is None:
            block = term.build(frame, spec.date)
            if reusable:
                built[term] = block
        blocks.append(block)
    widths = np.cumsum([0] + [b.columns.shape[1] for b in blocks])
    matrix = np.empty((n, int(widths[-1])), order="F")  # column-major: designs gather it fast; one copy
    for block, start, end in zip(blocks, widths[:-1], widths[1:], strict=True):
        matrix[:, start:end] = block.columns
    first_missing = np.full(n, -1)
    incomplete = np.flatnonzero(~np.isfinite(matrix).all(axis=1))
    if incomplete.size:  # name the first term missing on each incomplete row (few rows)
        for i in range(len(blocks) - 1, -1, -1):
            bad = ~np.isfinite(blocks[i].columns[incomplete]).all(axis=1)
            first_missing[incomplete[bad]] = i
    names = tuple(name for b in blocks for name in b.column_names)
    if len(set(names)) != len(names):
        dup = next(n for n in names if names.count(n) > 1)
        raise SpecificationError(f"two model terms produce the column {dup!r}; remove the repeated term.")
    return ConfounderBlock(matrix, names, tuple(blocks), first_missing < 0, first_missing)


def _drop_reasons(
    frame: pd.DataFrame,
    spec: ModelSpec,
    y: np.ndarray,
    exposure: np.ndarray,
    conf: ConfounderBlock,
    offset: np.ndarray | None,
    rows: np.ndarray | None = None,
    raw: np.ndarray | None = None,
) -> np.ndarray:
    """Why each day is left out ("" for a usable day), on every day or only on ``rows`` (indices).

    :func:`build_design` asks only about the days :func:`usable_days` leaves out (a few hundred of
    thousands); the answer for a day does not depend on which other days are asked about. ``raw`` is the
    daily exposure on the full calendar (read from ``frame`` when not given).
    """
    rows = np.arange(len(frame)) if rows is None else rows
    reasons = np.full(rows.size, "", dtype=object)
    if raw is None:
        raw = frame[spec.exposure].to_numpy(dtype=float, na_value=np.nan)
    raw = raw[rows]
    missing_x = ~np.isfinite(exposure[rows]).all(axis=1)
    early = rows < spec.lag.max_lag
    first_missing = conf.first_missing[rows]
    for i, block in enumerate(conf.blocks):
        reasons[(first_missing == i) & (reasons == "")] = f"{block.name} missing"
    if offset is not None:
        reasons[~np.isfinite(offset[rows])] = "offset missing"
    reasons[missing_x & early & ~np.isnan(raw)] = LAG_BEFORE_START
    reasons[missing_x & ~early] = EXPOSURE_IN_WINDOW
    reasons[missing_x & np.isnan(raw)] = EXPOSURE_MISSING
    reasons[~np.isfinite(y[rows])] = OUTCOME_MISSING
    return reasons


def usable_days(
    y: np.ndarray, exposure: np.ndarray, conf: ConfounderBlock, offset: np.ndarray | None = None
) -> np.ndarray:
    """Days a fit can use: outcome, every exposure column, every confounder (and the offset) present.

    The fast form of the drop rules: ``usable_days(...)`` equals ``_drop_reasons(...) == ""``.
    """
    used = np.isfinite(y) & conf.complete & np.isfinite(exposure).all(axis=1)
    if offset is not None:
        used &= np.isfinite(offset)
    return used


def _used_runs(used: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Starts and ends (exclusive) of the runs of consecutive used days."""
    edges = np.diff(np.r_[0, used.astype(np.int8), 0])
    return np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)


def _gather_rows(block: np.ndarray, used: np.ndarray, out: np.ndarray) -> None:
    """``out[:] = block[used]`` for a column-major ``block``, by the cheaper of two exact copies.

    A daily series has few gaps, so the days used form a few long runs: copying run by run moves whole
    column segments (78 runs: ~3x faster than gathering rows on 5,000 days x 117 columns). With many short runs
    (intermittent monitoring) the rows are gathered column by column instead (``np.take`` on each
    column of the column-major block is ~2x faster than ``block[used]``). Both give the same array.
    """
    starts, ends = _used_runs(used)
    if starts.size <= block.shape[1]:  # ~2 µs per run against ~4 µs per column (measured)
        at = 0
        for start, end in zip(starts, ends, strict=True):
            out[at : at + end - start] = block[start:end]
            at += end - start
        return
    rows = np.flatnonzero(used)
    for j in range(block.shape[1]):
        np.take(block[:, j], rows, out=out[:, j])


def _longest_unused_run(used: np.ndarray) -> int:
    edges = np.diff(np.r_[0, (~used).astype(np.int8), 0])
    return int(np.max(np.flatnonzero(edges == -1) - np.flatnonzero(edges == 1), initial=0))


def _alias_confounders(
    block: np.ndarray,
    conf: ConfounderBlock,
    calendar: pd.DatetimeIndex,
    used: np.ndarray,
    reasons: np.ndarray,
    first: int = 0,
) -> tuple[np.ndarray, str | None]:
    """Indices of confounder columns the days used cannot estimate, and the warning text (None if none).

    ``block`` is the confounder block on the days used. When a run of at least ``MIN_GAP_CHECKED``
    unusable days leaves some column zero on every day used, the R ``glm.fit`` rule of
    :func:`~airhealth.model.engine.aliasing.aliased_columns` finds those columns and any other column the days
    used make an exact combination of earlier ones. Other rank problems are named by the engine.
    ``block`` holds the confounder columns from ``first`` on (1 for a case-crossover, which has no intercept
    column); the indices returned are into ``block``.
    """
    none = np.array([], dtype=int)
    if used.all() or _longest_unused_run(used) < MIN_GAP_CHECKED or np.all(np.any(block != 0, axis=0)):
        return none, None
    aliased = aliased_columns(block)
    names = [conf.column_names[first + j] for j in aliased]
    return aliased, describe_aliased(names, conf.matrix[:, first + aliased], calendar, used, reasons)


def lag_window_remedy(lag: LagStructure) -> str:
    """What to do when days of a lag window lack the exposure, for this kind of lag (one sentence).

    Only a moving average can use the days present (``min_count``); a distributed lag or a single day
    needs every day it reads, so the remedies are a shorter window or a completed exposure series.
    """
    inner = lag.lag if isinstance(lag, ExposureLagBasis) else lag
    if isinstance(inner, MovingAverage):
        return (
            "Use a shorter lag window, or let the moving average use the days present: "
            "MovingAverage(first, last, min_count=1) (or a larger min_count)."
        )
    fill = "fill the gaps in the exposure series (e.g. from a nearby monitor) before fitting"
    if isinstance(inner, SingleDay):
        return f"Days without an exposure value cannot be used at lag {inner.label}: {fill}."
    return f"Lag {inner.label} needs the exposure on every day it reads: use a shorter lag window, or {fill}."


def _too_few_days_message(n_used: int, p: int, dropped: pd.DataFrame, lag: LagStructure) -> str:
    counts = dropped["reason"].value_counts()
    detail = "; ".join(f"{k}: {v}" for k, v in counts.head(3).items())
    return (
        f"too few usable days ({n_used}) for a model with {p} parameters"
        + (f" (days dropped — {detail})" if detail else "")
        + "; use a longer series, fewer df per year or fewer terms."
        + (
            " Lags over several days need consecutive exposure days (with intermittent monitoring, e.g. every "
            f"third day, single-day lags fit). {lag_window_remedy(lag)}"
            if (dropped["reason"] == EXPOSURE_IN_WINDOW).any()
            else ""
        )
    )


def build_design(frame: pd.DataFrame, spec: ModelSpec, confounders: ConfounderBlock | None = None) -> Design:
    """Assemble the design for ``spec`` on a frame from :func:`model_frame`.

    Rows missing the outcome, any exposure lag or any confounder are left out and listed in ``dropped``
    with the reason (the outcome first, then the exposure, then the first confounder term missing).
    Confounder columns that the days used leave without support (a long gap) are left out as aliased,
    as R's ``glm`` does (:mod:`airhealth.model.engine.aliasing`), listed in ``aliased`` and warned about.

    Warns
    -----
    DataWarning
        When confounder columns are aliased: which, and the unusable days that hold them.
    """
    calendar = pd.DatetimeIndex(frame[spec.date])
    y = frame[spec.outcome].to_numpy(dtype=float, na_value=np.nan)
    codes, groups = modifier_codes(frame, spec.modifier, calendar, np.isfinite(y)) if spec.modifier else (None, ())
    if confounders is not None and _term_names(confounders) != tuple(t.name for t in spec.confounder_terms()):
        confounders = None  # a block shared by specs with other terms (a co-pollutant at another lag): rebuild
    conf = confounders if confounders is not None else cached_confounders(frame, spec)
    raw = frame[spec.exposure].to_numpy(dtype=float, na_value=np.nan)
    # an exposure-response term (exposure_lag.ExposureLagBasis) learns its knots from the whole exposure series
    lag = spec.lag.bind(raw, spec.exposure) if hasattr(spec.lag, "bind") else spec.lag
    exposure = lag.columns(raw)
    exposure_names = list(lag.column_names(spec.exposure))
    if groups:
        exposure = interact(exposure, codes, len(groups))
        exposure_names = group_column_names(exposure_names, spec.modifier, groups)
    offset = None if spec.offset is None else frame[spec.offset].to_numpy(dtype=float, na_value=np.nan)
    used = usable_days(y, exposure, conf, offset)
    unused = np.flatnonzero(~used)
    reasons = np.full(len(frame), "", dtype=object)
    reasons[unused] = _drop_reasons(frame, spec, y, exposure, conf, offset, unused, raw)
    strata, first = None, 0  # a case-crossover: strata instead of the intercept column
    if spec.design == "case-crossover":  # strata without events or with one usable day are left out
        used, more, strata = used_strata(calendar, y, used, spec.outcome)
        reasons = np.where(more != "", more, reasons)
        unused, first = np.flatnonzero(~used), 1
    dropped = pd.DataFrame({"date": calendar[unused], "reason": reasons[unused].astype(str)})
    names = conf.column_names[first:] + tuple(exposure_names)
    p = len(names)
    n_used = int(used.sum())
    check_usable_days(
        y,
        raw,
        used,
        p,
        calendar,
        spec.outcome,
        spec.exposure,
        too_few=lambda: _too_few_days_message(n_used, p, dropped, spec.lag),
        window_remedy=lag_window_remedy(spec.lag) if (reasons == EXPOSURE_IN_WINDOW).any() else "",
    )
    correlations = _copollutant_checks(frame, spec, raw, used, calendar, y, codes, groups)
    matrix = np.empty((n_used, p), order="F")  # column-major: the engine's syrk is fastest on it
    k = conf.matrix.shape[1] - first
    _gather_rows(conf.matrix[:, first:], used, matrix[:, :k])
    matrix[:, k:] = exposure[used]
    aliased, why = _alias_confounders(matrix[:, :k], conf, calendar, used, reasons, first)
    if aliased.size:
        warn_user(why, DataWarning)
    notes = () if why is None else (why,)
    if strata is not None and groups:  # the strata hold a modifier's main effect that is constant within them
        absorbed, note = absorbed_main_effects(matrix[:, :k], names[:k], conf.blocks[-1].column_names, strata.codes)
        aliased, notes = np.union1d(aliased, absorbed).astype(int), notes + ((note,) if note else ())
    if aliased.size:
        keep = np.setdiff1d(np.arange(p), aliased)
        matrix, names = np.asfortranarray(matrix[:, keep]), tuple(names[j] for j in keep)
        k, p = k - aliased.size, keep.size
    return Design(
        matrix=matrix,
        response=y[used],
        offset=None if offset is None else offset[used],
        column_names=names,
        exposure_slice=slice(k, p),
        calendar=calendar,
        used=used,
        dropped=dropped,
        confounders=conf,
        exposure_values=exposure,
        exposure_raw=raw,
        lag=None if lag is spec.lag else lag,
        aliased=tuple(conf.column_names[first + j] for j in aliased),
        notes=notes,
        copollutant_correlations=correlations,
        groups=groups,
        group_codes=codes,
        strata=strata,
    )


def _term_names(block: ConfounderBlock) -> tuple[str, ...]:
    return tuple(b.name for b in block.blocks[1:])


def _copollutant_checks(
    frame: pd.DataFrame, spec: ModelSpec, raw: np.ndarray, used: np.ndarray, calendar: pd.DatetimeIndex,
    y: np.ndarray, codes: np.ndarray | None, groups: tuple[Any, ...],
) -> tuple[float, ...]:  # fmt: skip
    """Checks on the days used: the modifier's levels (days and events per level) and the co-pollutants'
    collinearity with the exposure (:func:`~.bases.copollutant.copollutant_correlations`)."""
    if groups:
        check_group_sizes(y, used, codes, groups, spec.modifier, spec.outcome)
    if not spec.copollutants:
        return ()
    series = [(c, frame[c].to_numpy(dtype=float, na_value=np.nan)) for c in spec.copollutants]
    return copollutant_correlations(spec.exposure, raw, series, spec.lag, used, calendar)
