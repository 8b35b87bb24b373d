"""The one place where numbers become text: relative risks, % change, p-values, counts and coefficients.

Every table view, page and figure label of the report formats its numbers through these functions, so
one convention holds everywhere (full precision stays in the data frames and the CSV files):

- **Relative risks** get a fixed number of decimals chosen from the width of their interval
  (:func:`rr_decimals`): the first significant digit of the width, plus one more, between 2 and 6 decimals.
  ``1.008 (0.999 to 1.017)`` (width 0.018: 3 decimals), ``1.08 (0.99 to 1.17)`` (width 0.18: 2 decimals);
  a very narrow interval (width 0.00005) gets 6, so its bounds never print alike (``1.0000 (1.0000 to
  1.0000)`` would hide the interval).
  Within one table column every row gets the same number of decimals (the largest its rows need), so the
  decimal points line up. The interval style is chosen by the user (:data:`IntervalStyle`).
- **Percent change** follows the same rule on the width of its interval, between 1 and 3 decimals.
- **p-values**: two significant digits; below 0.001 written ``<0.001``. Rounding never carries a p-value
  across 0.05: a value in [0.0495, 0.05) is written ``<0.05`` (``0.050`` would read as not below 0.05),
  from 0.05 on the usual ``0.050``. A missing p (NaN) is empty; a p below 0 or above 1 is an error.
- **Counts** are whole numbers with thousands separators (``179,300``), never in scientific notation.
- **Coefficients per unit** (log relative risk per unit of exposure, about 1e-4) in a fixed form with four
  significant digits (``0.00009709``), never ``9.709e-05``.
- **Fit statistics** with fixed decimals: dispersion 2, QAIC 1 (:func:`format_decimal`).
- **Other numbers** (means, SDs, dispersion, QAIC, ...): four significant digits, trailing zeros dropped,
  thousands separators from 1,000 on, never scientific notation.

Missing values (``None``, NaN) become an empty string. These are common journal practice in
epidemiology (common practice, no source): the rules are written down here so that they can be checked.
"""

from __future__ import annotations

import math
from collections.abc import Iterable
from typing import Any, Literal

from .._choices import check_choice
from ..errors import SpecificationError

__all__ = [
    "RR_MAX_DECIMALS",
    "IntervalStyle",
    "format_coef",
    "format_count",
    "format_decimal",
    "format_interval",
    "format_number",
    "format_p",
    "format_percent_change",
    "format_rr",
    "percent_decimals",
    "rr_decimals",
]

IntervalStyle = Literal["to", "brackets", "dash"]
"""How an estimate and its interval are written: ``"to"`` → ``1.008 (0.999 to 1.017)`` (the default),
``"brackets"`` → ``1.008 [0.999, 1.017]``, ``"dash"`` → ``1.008 (0.999–1.017)`` (an en dash; written as
``to`` instead when a bound is negative, since a dash before a minus sign reads as a range of negatives)."""

_MISSING = ""
RR_MAX_DECIMALS = 6
"""The most decimals a relative risk gets (an interval narrower than 1e-5 still prints at 6)."""
_P_SLACK = 1e-9  # p-values computed as 2 * (1 - cdf) may exceed 1 by rounding error; more than this is an error


def _missing(value: Any) -> bool:
    if value is None:
        return True
    try:
        return math.isnan(float(value))
    except (TypeError, ValueError):
        return False


def _decimals_for_width(width: float, low: int, high: int) -> int:
    """First significant decimal of ``width`` plus one, kept between ``low`` and ``high``."""
    if not math.isfinite(width) or width <= 0:
        return high
    return max(low, min(high, math.ceil(-math.log10(width)) + 1))


def rr_decimals(low: float | Iterable[float], high: float | Iterable[float]) -> int:
    """Decimals for relative risks whose intervals run from ``low`` to ``high`` (scalars or one per row).

    The rule: the decimal place of the first significant digit of the interval width, plus one, between
    2 and 6 (width 0.018 → 3 decimals; 0.18 → 2; 0.0018 → 4; 0.00005 → 6, so the bounds of a very
    narrow interval still differ in print). For several rows, the largest count any
    row needs, so a column shares one number of decimals (missing rows are ignored).
    """
    lows = [low] if not isinstance(low, Iterable) else list(low)
    highs = [high] if not isinstance(high, Iterable) else list(high)
    needs = [
        _decimals_for_width(float(h) - float(lo), 2, RR_MAX_DECIMALS)
        for lo, h in zip(lows, highs, strict=True)
        if not (_missing(lo) or _missing(h))
    ]
    return max(needs, default=3)


def percent_decimals(low: float | Iterable[float], high: float | Iterable[float]) -> int:
    """Decimals for percent changes: the rule of :func:`rr_decimals` on the % interval, between 1 and 3."""
    lows = [low] if not isinstance(low, Iterable) else list(low)
    highs = [high] if not isinstance(high, Iterable) else list(high)
    needs = [
        _decimals_for_width(float(h) - float(lo), 1, 3)
        for lo, h in zip(lows, highs, strict=True)
        if not (_missing(lo) or _missing(h))
    ]
    return max(needs, default=2)


def _fixed(value: float, decimals: int) -> str:
    text = f"{value:,.{decimals}f}"
    if text.startswith("-") and float(text.replace(",", "")) == 0:
        text = text[1:]  # -0.00 reads as 0.00
    return text


def format_interval(estimate: float, low: float, high: float, decimals: int, style: IntervalStyle = "to") -> str:
    """``estimate (low to high)`` in the chosen :data:`IntervalStyle` with ``decimals`` fixed decimals."""
    check_choice("style", style, IntervalStyle)
    if _missing(estimate):
        return _MISSING
    e = _fixed(float(estimate), decimals)
    if _missing(low) or _missing(high):
        return e
    lo, hi = _fixed(float(low), decimals), _fixed(float(high), decimals)
    if style == "brackets":
        return f"{e} [{lo}, {hi}]"
    if style == "dash" and not (lo.startswith("-") or hi.startswith("-")):
        return f"{e} ({lo}\u2013{hi})"
    return f"{e} ({lo} to {hi})"


def format_rr(rr: float, low: float, high: float, decimals: int | None = None, style: IntervalStyle = "to") -> str:
    """A relative risk with its interval, e.g. ``1.008 (0.999 to 1.017)``.

    Examples
    --------
    >>> format_rr(1.00834, 0.99912, 1.01721)
    '1.008 (0.999 to 1.017)'
    >>> format_rr(1.00834, 0.99912, 1.01721, style="brackets")
    '1.008 [0.999, 1.017]'
    """
    places = rr_decimals(low, high) if decimals is None else decimals
    return format_interval(rr, low, high, places, style)


def format_percent_change(
    change: float, low: float, high: float, decimals: int | None = None, style: IntervalStyle = "to"
) -> str:
    """A percent change with its interval, without the % sign (the column heading carries it).

    Examples
    --------
    >>> format_percent_change(0.834, -0.088, 1.721)
    '0.8 (-0.1 to 1.7)'
    """
    places = percent_decimals(low, high) if decimals is None else decimals
    return format_interval(change, low, high, places, style)


def format_p(p: float) -> str:
    """A p-value: ``<0.001`` below 0.001, ``<0.05`` in [0.0495, 0.05), else two significant digits.

    Rounding to two significant digits must not carry a value below 0.05 up to ``0.050``, so the few
    values that would are written ``<0.05`` instead. Missing (``None``, NaN) gives an empty string.

    Raises
    ------
    SpecificationError
        If ``p`` is below 0 or above 1 (it is not a p-value).

    Examples
    --------
    >>> [format_p(v) for v in (0.0004, 0.0123, 0.0499999, 0.05, 0.0999, 0.431, 1.0)]
    ['<0.001', '0.012', '<0.05', '0.050', '0.10', '0.43', '1.0']
    """
    if _missing(p):
        return _MISSING
    p = float(p)
    if not -_P_SLACK <= p <= 1 + _P_SLACK:
        raise SpecificationError(
            f"format_p got {p!r}, which is not a p-value (it must lie between 0 and 1); "
            "pass the p_value column of a result table."
        )
    p = min(max(p, 0.0), 1.0)
    if p < 0.001:
        return "<0.001"
    rounded = float(f"{p:.2g}")
    if p < 0.05 <= rounded:
        return "<0.05"
    decimals = max(1, 1 - math.floor(math.log10(rounded)))
    return f"{rounded:.{decimals}f}"


def format_count(value: float) -> str:
    """A count as a whole number with thousands separators (``179,300``); never scientific notation."""
    if _missing(value):
        return _MISSING
    return _fixed(float(round(float(value))), 0)


def format_decimal(value: float, decimals: int) -> str:
    """A number with a fixed count of decimals and thousands separators (``1.43``, ``24,012.4``)."""
    if _missing(value):
        return _MISSING
    return _fixed(float(value), decimals)


def _significant(value: float, digits: int) -> str:
    if value == 0:
        return "0"
    decimals = max(0, digits - 1 - math.floor(math.log10(abs(value))))
    text = _fixed(value, decimals)
    if "." in text:
        text = text.rstrip("0").rstrip(".")
    return text


def format_coef(value: float, digits: int = 4) -> str:
    """A per-unit coefficient in fixed form with ``digits`` significant digits (``0.00009709``)."""
    if _missing(value):
        return _MISSING
    return _significant(float(value), digits)


def format_number(value: Any) -> str:
    """Any other table number: four significant digits, trailing zeros dropped, never scientific notation.

    Whole numbers are written in full with thousands separators (``179,300``); text passes through.

    Examples
    --------
    >>> [format_number(v) for v in (179300.0, 1.0084, 12.5, 9.709e-05, 3)]
    ['179,300', '1.008', '12.5', '0.00009709', '3']
    """
    if isinstance(value, bool) or isinstance(value, str):
        return str(value)
    if _missing(value):
        return _MISSING
    number = float(value)
    if math.isinf(number):
        return "infinite" if number > 0 else "minus infinite"
    if number == round(number) or abs(number) >= 1e4:
        return format_count(number)
    return _significant(number, 4)
