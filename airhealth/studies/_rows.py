"""What the study tables share: a design on fewer days and the rows of a table.

(A design built here is fitted by :func:`airhealth.model.fitting.fitted_result`, the single fit's sequence.)
:func:`restrict_to_days` puts a design on a subset of its days, recording why the other days were left out;
:func:`effect_fields` and :func:`pick` make the tidy rows of :mod:`~airhealth.studies.compare`,
:mod:`~airhealth.studies.copollutants`, :mod:`~airhealth.studies.outcomes`,
:mod:`~airhealth.studies.design_comparison` and :mod:`~airhealth.studies.sweep`.
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterable, Mapping
from typing import Any

import numpy as np
import pandas as pd

from ..model.design import Design

#: The fields of one relative risk (an :class:`~airhealth.model.effects.Effect`) that a table row carries.
EFFECT_FIELDS = ("per", "coef", "se", "rr", "rr_low", "rr_high", "p_value")


def outcome_only_on(frame: pd.DataFrame, outcome: str, keep: np.ndarray) -> pd.DataFrame:
    """A copy of a validated frame whose outcome is missing outside the days ``keep``.

    The exposure, its lags and the confounder bases still see every day; only the days fitted change.
    """
    out = frame.copy()
    values = out[outcome].astype(float)
    values[~np.asarray(keep, dtype=bool)] = np.nan
    out[outcome] = values
    return out


def restrict_to_days(design: Design, keep: np.ndarray, reason: str, matrix: bool = True) -> Design:
    """The design restricted to the calendar days ``keep`` (a subset of ``design.used``).

    The days newly left out are added to ``dropped`` with ``reason``. ``matrix=False``: the matrix is left
    unrestricted and ``dropped`` unchanged (what :func:`warn_if_suspicious` counts there are the exposure
    reasons alone): the cheap bookkeeping copy of the shared-work path of
    :mod:`~airhealth.studies.compare`, never fitted.
    """
    inside = keep[design.used]
    offset = None if design.offset is None else design.offset[inside]
    if not matrix:
        return dataclasses.replace(design, response=design.response[inside], offset=offset, used=keep)
    newly = design.used & ~keep
    extra = pd.DataFrame({"date": design.calendar[newly], "reason": reason})
    dropped = pd.concat([design.dropped, extra], ignore_index=True).sort_values("date", kind="stable")
    return dataclasses.replace(
        design, matrix=design.matrix[inside], response=design.response[inside], offset=offset, used=keep,
        dropped=dropped.reset_index(drop=True),
    )  # fmt: skip


def effect_fields(effect: Any, fields: Iterable[str] = EFFECT_FIELDS) -> dict[str, Any]:
    """The ``fields`` of one relative risk (an object with those attributes) as a row's entries."""
    return {k: getattr(effect, k) for k in fields}


def pick(record: Mapping[str, Any], columns: Iterable[str]) -> dict[str, Any]:
    """The entries of ``record`` named in ``columns``, in that order."""
    return {c: record[c] for c in columns}
