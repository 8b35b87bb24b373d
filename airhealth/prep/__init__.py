"""Data preparation: validate daily tables and align them on a complete calendar; lags; calendar terms."""

from .align import align_daily, prepare_daily
from .calendar import complete_calendar, day_of_week, holiday_indicator
from .lags import lag_matrix, lagged, moving_average

__all__ = [
    "align_daily",
    "complete_calendar",
    "day_of_week",
    "holiday_indicator",
    "lag_matrix",
    "lagged",
    "moving_average",
    "prepare_daily",
]
