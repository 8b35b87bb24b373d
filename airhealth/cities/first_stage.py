r"""First stage of a multi-city study: the same time-series model in every city, ``airhealth.fit_cities``.

Each city is fitted by :func:`airhealth.model.fitting.fit_spec`, the path of :func:`airhealth.fit`, so a
city's estimates and its error message are exactly those of a single-city fit. The cities run on an
executor (:mod:`airhealth.cities.executors`): a local process pool by default, any
``concurrent.futures.Executor`` (dask: ``client.get_executor()``), or ``"serial"``. Workers receive one
city's data (or where to read it) and send back only the row below.

Output: one row per city, in input order — ``city``, ``coef`` and ``se`` (log relative risk per exposure
unit; for distributed lags the cumulative sum over lags), ``rr``, ``rr_low``, ``rr_high`` (per ``per``
units), ``n_days``, ``dispersion``, ``error`` (empty when the fit succeeded) and ``warnings``. For a
distributed lag, also ``lag_coefs`` (the city's coefficients :math:`\theta` of the lag basis, an array)
and ``lag_cov`` (their covariance :math:`V`, a matrix): :func:`lag_vectors` gives them in the form
:func:`airhealth.pool_multivariate` takes, and the per-lag curve is :math:`C\theta` with covariance
:math:`CVC^\top`, :math:`C` = ``estimates.attrs["lag_basis"]`` (rows = ``attrs["lags"]``).
"""

from __future__ import annotations

import contextlib
import functools
import os
import threading
import warnings
from collections.abc import Iterator, Sequence
from concurrent.futures import Executor
from typing import Any

import numpy as np
import pandas as pd

from .._warn import warn_user
from ..errors import AirhealthError, DataError, DataWarning
from ..model.effects import relative_risk
from ..model.fitting import fit_spec
from ..model.group_effects import require_one_effect
from ..model.spec import ModelSpec
from .executors import run_tasks
from .inputs import CityTask, city_tasks

__all__ = ["ESTIMATE_COLUMNS", "fit_cities", "fit_city", "lag_vectors"]

#: The columns of every first-stage table, in order (``lag_coefs``/``lag_cov`` follow for distributed lags).
ESTIMATE_COLUMNS = ("city", "coef", "se", "rr", "rr_low", "rr_high", "n_days", "dispersion", "error", "warnings")


def _row(name: str, error: str = "", notes: Sequence[str] = ()) -> dict[str, Any]:
    row: dict[str, Any] = dict.fromkeys(ESTIMATE_COLUMNS, np.nan)
    row.update(city=name, n_days=0, error=error, warnings=" | ".join(dict.fromkeys(notes)))
    return row


@contextlib.contextmanager
def _capturing(caller_pid: int) -> Iterator[list]:
    """Record warnings into a list, except in a non-main thread of the calling process.

    ``warnings.catch_warnings`` changes process-wide state, so threads of the caller's own process (a
    ``ThreadPoolExecutor``) would undo each other's (and the caller's) warning filters: there the warnings
    are left to the caller's process and the ``warnings`` column stays empty.
    """
    if os.getpid() == caller_pid and threading.current_thread() is not threading.main_thread():
        yield []
        return
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        yield caught


def fit_city(task: CityTask, spec: ModelSpec, per: float, level: float, caller_pid: int = -1) -> dict[str, Any]:
    """Fit one city (in a worker); return its row. Never raises for the city's data: errors go in ``error``."""
    with _capturing(caller_pid) as caught:
        try:
            data = task.source.load([spec.date, *spec.columns_used()])
            result = fit_spec(data, spec)
            effect = relative_risk(result.exposure_coef, result.exposure_se, per=per, level=level)
        except AirhealthError as exc:  # the message a single-city fit gives
            return _row(task.name, str(exc), [str(w.message) for w in caught])
        except Exception as exc:  # not a data problem the model names: report it, keep the run going
            return _row(task.name, f"unexpected {type(exc).__name__}: {exc}", [str(w.message) for w in caught])
    row = _row(task.name, "", [str(w.message) for w in caught])
    row.update(
        coef=effect.coef,
        se=effect.se,
        rr=effect.rr,
        rr_low=effect.rr_low,
        rr_high=effect.rr_high,
        n_days=int(result.n_days),
        dispersion=float(result.dispersion),
    )
    if spec.lag.is_distributed:
        names = list(result.exposure_columns)
        row["lag_coefs"] = result.coef[names].to_numpy(dtype=float)
        row["lag_cov"] = result.cov.loc[names, names].to_numpy(dtype=float)
    return row


def fit_cities(
    cities: Any,
    executor: Executor | str | None = None,
    *,
    city: str | None = None,
    show_progress: bool = True,
    retries: int = 1,
    workers: int | None = None,
    per: float = 10.0,
    level: float = 0.95,
    **model_options: Any,
) -> pd.DataFrame:
    """Fit the same time-series model in every city (the first stage of a multi-city study).

    Parameters
    ----------
    cities : mapping, DataFrame, path or CsvFolder
        ``{name: daily DataFrame}``; one long DataFrame with a city column (give ``city``); the path of a
        folder of CSV files (one city per file, named by the file stem; :class:`~airhealth.cities.inputs.
        CsvFolder` for other separators or encodings); the path of a CSV file with a city column; or the path
        of a Parquet file or dataset with a city column (each worker reads only its city's rows).
    executor : None, "serial" or concurrent.futures.Executor
        ``None``: a local process pool with one worker per core (at most one per city), each using one BLAS
        thread. ``"serial"``: one city after the other in this process. Any executor, e.g. dask's
        ``client.get_executor()`` (the caller keeps it open and closes it).
    city : str, optional
        The city column of a long table or Parquet data.
    show_progress : bool
        A progress bar (tqdm: terminal or notebook) on standard error.
    retries : int
        Times a city is rerun after its worker crashed (died, was killed); then it is reported in ``error``.
    workers : int, optional
        Processes of the local pool (default: the machine's cores, at most one per city). With another
        executor, how many cities it runs at once (twice as many are kept in flight; default: a dask client's
        total worker threads, a pool's workers, else the machine's cores).
    per, level : float
        Exposure increase of ``rr`` (default 10 units) and confidence level of its interval.
    **model_options
        The model, as for :func:`airhealth.fit`: ``outcome``, ``exposure``, ``lag``, ``temperature``, ``interval``
        and every other :class:`~airhealth.ModelSpec` option. Checked once, before any city is fitted.

    Returns
    -------
    DataFrame
        One row per city (see :mod:`airhealth.cities.first_stage`); ``attrs`` holds ``per``, ``level``,
        ``lag``, ``lags`` and ``lag_basis``. Pass it to :func:`airhealth.pool` (rows with an ``error`` are
        left out there, with a warning) and, for distributed lags, :func:`lag_vectors` to
        :func:`airhealth.pool_multivariate`. Results are associations, not proof of causation.

    Examples
    --------
    >>> import airhealth
    >>> from airhealth.cities.simulate_cities import simulate_cities
    >>> cities = simulate_cities(n_cities=3, years=2, seed=1).frames
    >>> table = airhealth.fit_cities(cities, "serial", show_progress=False, outcome="deaths", exposure="pm25",
    ...                              temperature="temperature")
    >>> list(table.city)
    ['Alderwick', 'Brackenmoor', 'Caddon Ferry']

    References
    ----------
    Dominici F, Samet JM, Zeger SL (2000). Combining evidence on air pollution and daily mortality from the
    20 largest US cities: a hierarchical modelling strategy. J R Stat Soc A 163:263–302 (the two-stage design).
    """
    spec = ModelSpec.from_options(**model_options)
    require_one_effect(spec.modifier, "fit_cities")
    relative_risk(0.0, 0.0, per=per, level=level)  # per and level checked before any city runs
    tasks = city_tasks(cities, city)
    rows: list[dict[str, Any] | None] = [None] * len(tasks)
    from tqdm.auto import tqdm

    with tqdm(total=len(tasks), disable=not show_progress, desc="fitting cities", unit="city") as bar:

        def done(task: CityTask, row: dict[str, Any] | None, crash: str | None) -> None:
            rows[task.index] = row if row is not None else _row(task.name, crash or "")
            bar.update(1)

        work = functools.partial(fit_city, spec=spec, per=float(per), level=float(level), caller_pid=os.getpid())
        run_tasks(tasks, work, executor, workers=workers, retries=retries, on_done=done)
    return _table(rows, spec, per, level)


def _table(rows: list[dict[str, Any] | None], spec: ModelSpec, per: float, level: float) -> pd.DataFrame:
    columns = list(ESTIMATE_COLUMNS) + (["lag_coefs", "lag_cov"] if spec.lag.is_distributed else [])
    table = pd.DataFrame([r for r in rows if r is not None], columns=columns)
    table["n_days"] = table["n_days"].astype(int)
    table.attrs.update(
        per=float(per),
        level=float(level),
        outcome=spec.outcome,
        exposure=spec.exposure,
        lag=spec.lag.label,
        unit=spec.unit,
        lags=[int(x) for x in spec.lag.lags],
        lag_basis=np.asarray(spec.lag.basis(), dtype=float),
    )
    failed = table.loc[table["error"] != "", "city"].tolist()
    warned = table.loc[table["warnings"] != "", "city"].tolist()
    if warned:
        warn_user(
            f"{len(warned)} cities gave warnings while fitted ({', '.join(warned[:5])}"
            f"{' ...' if len(warned) > 5 else ''}); read them in the 'warnings' column.",
            DataWarning,
        )
    if failed:
        warn_user(
            f"{len(failed)} of {len(table)} cities could not be fitted ({', '.join(failed[:5])}"
            f"{' ...' if len(failed) > 5 else ''}); their messages are in the 'error' column.",
            DataWarning,
        )
    return table


def lag_vectors(estimates: pd.DataFrame) -> tuple[pd.DataFrame, np.ndarray]:
    """The cities' lag-basis coefficients and covariances, as :func:`airhealth.pool_multivariate` takes them.

    Cities with an ``error`` are left out with a :class:`~airhealth.DataWarning` naming them.

    Returns
    -------
    coefs : DataFrame
        One row per fitted city (index: city), one column per lag-basis coefficient.
    covs : ndarray (k, p, p)
        Their within-city covariances, in the same order.
    """
    if not isinstance(estimates, pd.DataFrame) or "lag_coefs" not in estimates.columns:
        raise DataError(
            "the estimates hold no lag vectors (columns 'lag_coefs' and 'lag_cov'); fit the cities with a "
            "distributed lag, e.g. lag='dl0-5'."
        )
    ok = estimates["error"].fillna("").astype(str).str.strip() == ""
    if not ok.all():
        left = estimates.loc[~ok, "city"].astype(str).tolist()
        warn_user(
            f"{len(left)} cities whose fit failed are left out of the lag vectors: {', '.join(left[:5])}"
            f"{' ...' if len(left) > 5 else ''}.",
            DataWarning,
        )
    kept = estimates.loc[ok]
    vectors = [np.asarray(v, dtype=float) for v in kept["lag_coefs"]]
    p = len(vectors[0]) if vectors else 0
    coefs = pd.DataFrame(
        np.vstack(vectors) if vectors else np.empty((0, p)),
        index=kept["city"].astype(str).to_numpy(),
        columns=[f"lag_basis{j}" for j in range(p)],
    )
    coefs.attrs.update({k: estimates.attrs[k] for k in ("lag", "unit") if k in estimates.attrs})
    covs = np.stack([np.asarray(c, dtype=float) for c in kept["lag_cov"]]) if vectors else np.empty((0, p, p))
    return coefs, covs
