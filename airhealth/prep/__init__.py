"""Data preparation: validate daily tables and align them on a complete calendar; lags; calendar terms;
hourly monitoring data to daily series; units; description of exposures."""

from .align import align_daily, merge_duplicate_days, prepare_daily, restrict_months, restrict_period
from .calendar import complete_calendar, day_of_week, holiday_indicator
from .describe import correlation_matrix, table_one
from .hourly import aggregate_daily, daily_statistic, validity_rule
from .hourly_input import clean_hourly
from .lags import lag_matrix, lagged, moving_average
from .monitors import combine_monitors, monitor_agreement, screen_monitor_years
from .units import conversion_factor, convert_units

__all__ = [
    "aggregate_daily",
    "align_daily",
    "clean_hourly",
    "combine_monitors",
    "complete_calendar",
    "conversion_factor",
    "convert_units",
    "correlation_matrix",
    "daily_statistic",
    "day_of_week",
    "holiday_indicator",
    "lag_matrix",
    "lagged",
    "merge_duplicate_days",
    "monitor_agreement",
    "moving_average",
    "prepare_daily",
    "restrict_months",
    "restrict_period",
    "screen_monitor_years",
    "table_one",
    "validity_rule",
]
