"""One helper for string options declared as ``Literal`` types."""

from __future__ import annotations

from collections.abc import Iterable
from typing import Any, get_args

from .errors import SpecificationError


def check_choice(name: str, value: Any, allowed: Iterable[str] | Any) -> str:
    """Return ``value`` if it is one of ``allowed``, else raise a clear error.

    Parameters
    ----------
    name : str
        The option's name, used in the message.
    value : object
        The value given by the user.
    allowed : iterable of str or a ``typing.Literal`` type
        The valid values.

    Raises
    ------
    SpecificationError
        Naming the bad value and listing the valid ones.
    """
    options = get_args(allowed) or tuple(allowed)
    if value not in options:
        valid = ", ".join(repr(o) for o in options)
        raise SpecificationError(f"{name}={value!r} is not a valid choice; use one of {valid}.")
    return value
