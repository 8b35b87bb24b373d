"""The one place command results become JSON-ready values (``--json`` of every command)."""

from __future__ import annotations

import math
from typing import Any

import pandas as pd

__all__ = ["json_safe"]


def json_safe(value: Any) -> Any:
    """``value`` with numpy scalars as Python numbers, NaN and infinities as null and dates as ISO text.

    Dictionaries and lists are converted item by item.
    """
    if isinstance(value, dict):
        return {k: json_safe(v) for k, v in value.items()}
    if isinstance(value, list):
        return [json_safe(v) for v in value]
    if isinstance(value, pd.Timestamp):
        return value.strftime("%Y-%m-%d")
    if hasattr(value, "item"):
        value = value.item()
    if isinstance(value, float) and not math.isfinite(value):
        return None
    return value
