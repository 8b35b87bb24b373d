"""Exceptions and warnings raised by airhealth.

Every error a user can trigger with bad input is one of these classes, with a message that names the
column, row or date at fault and says what to do. They subclass ``ValueError`` so generic handlers work.
"""

from __future__ import annotations

__all__ = [
    "AirhealthError",
    "AirhealthWarning",
    "ConvergenceWarning",
    "DataError",
    "DataWarning",
    "DispersionWarning",
    "FitError",
    "SpecificationError",
]


class AirhealthError(ValueError):
    """Base class of every error raised deliberately by airhealth."""


class DataError(AirhealthError):
    """The input data cannot be used as given (bad dates, missing columns, invalid counts, ...)."""


class SpecificationError(AirhealthError):
    """A model, lag or option specification is invalid."""


class FitError(AirhealthError):
    """The model cannot be fitted (singular design, no usable days, ...)."""


class AirhealthWarning(UserWarning):
    """Base class of airhealth's warnings: legal but suspicious input or results."""


class DataWarning(AirhealthWarning):
    """Suspicious data: gaps in the calendar, few events, many missing exposure days."""


class ConvergenceWarning(AirhealthWarning):
    """The iterative fit stopped before meeting its convergence criterion."""


class DispersionWarning(AirhealthWarning):
    """The estimated dispersion is implausibly large (or small) for daily counts."""
