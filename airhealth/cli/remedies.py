"""The command-line spelling of the remedies that messages name in Python terms.

Errors and warnings come from the layers below, which speak Python (``MovingAverage(min_count=...)``,
``trend_df_per_year``). When a command prints one, it appends the option that does the same thing on the
command line, so every remedy a message names can be followed from the command line.
"""

from __future__ import annotations

__all__ = ["REMEDIES", "with_command_line_remedy"]

#: Text in a message → the command-line option that applies that remedy (in ``fit`` and ``report``).
REMEDIES: dict[str, str] = {
    "min_count": "--min-count N",
    "Restrict the data to the period": "--start DATE / --end DATE",
    "restrict the period": "--start DATE / --end DATE",
    "trend_df_per_year": "--trend-df-per-year",
    "temperature_df": "--temperature-df",
    "temperature_lag_df": "--temperature-lag-df",
    "theta_method=": "--theta-method moments",
    ".dt.month": "--months FIRST-LAST",
    "na_values": "--na-values LIST",
    "units=": "--unit COL=UNIT",
    "unit=": "--unit COL=UNIT",
    "date_format=": "--date-format FMT",
    "temperature=None": "leave out --temperature",
    "family=": "--family",
    "residual_lags": "--residual-lags K",
}


def with_command_line_remedy(message: str) -> str:
    """``message`` with the command-line spelling of each Python remedy it names, if not already given."""
    options = [option for phrase, option in REMEDIES.items() if phrase in message]
    options = [o for o in dict.fromkeys(options) if o.split()[0] not in message]
    if not options:
        return message
    return f"{message} [on the command line: {'; '.join(options)}]"
