"""Shared checks: numbers read strictly, values checked once, messages that name the value.

Python's ``float()`` accepts ``"4_5"`` (45), ``"nan"``, ``"inf"`` and ``"1e3"``; user input
goes through :func:`parse_number` instead, which accepts plain decimal numbers only (an
optional sign, ASCII or Unicode minus) and says what it refused.
"""

from __future__ import annotations

import math
import re

from ..errors import InputError

__all__ = ["parse_number", "check_finite", "check_positive", "check_range", "check_at_least"]

_NUMBER = re.compile(r"[+-]?(\d+(\.\d*)?|\.\d+)")


def parse_number(text, what: str, *, allow_exponent: bool = False) -> float:
    """A finite number from text, strictly.

    Parameters
    ----------
    text : str or number
        ``"22.5"``, ``"-45"``, ``"\u221245"`` (Unicode minus); numbers pass through (checked
        finite).
    what : str
        How to name the value in the message (an option, a file and line, a key).
    allow_exponent : bool
        Also accept ``1.5e3`` (for quantities that are not angles).

    Raises
    ------
    InputError
        Not a plain decimal number, or not finite.

    Examples
    --------
    >>> parse_number(" -22.5 ", "--angles"), parse_number("\u221245", "--angles")
    (-22.5, -45.0)
    """
    if isinstance(text, bool):
        raise InputError(f"{what} must be a number, got {text!r}")
    if isinstance(text, (int, float)):
        return check_finite(float(text), what)
    s = str(text).strip().replace("\u2212", "-")
    body = s
    if allow_exponent:
        m = re.fullmatch(r"(.*?)([eE][+-]?\d+)", s)
        if m:
            body = m.group(1)
    if not _NUMBER.fullmatch(body):
        raise InputError(f"{what} {str(text).strip()!r} is not a plain number; write digits with an optional sign "
                         "and a decimal point, e.g. 22.5")
    return check_finite(float(s), what)


def check_finite(value: float, what: str) -> float:
    """``value`` as a float; InputError naming ``what`` when it is NaN or infinite."""
    v = float(value)
    if not math.isfinite(v):
        raise InputError(f"{what} must be a finite number, got {value!r}")
    return v


def check_positive(value: float, what: str) -> float:
    """A finite number > 0."""
    v = check_finite(value, what)
    if not v > 0:
        raise InputError(f"{what} must be positive, got {value!r}")
    return v


def check_at_least(value: float, low: float, what: str, *, strict: bool = False) -> float:
    """A finite number >= ``low`` (> with ``strict``)."""
    v = check_finite(value, what)
    if v < low or (strict and v == low):
        raise InputError(f"{what} must be {'above' if strict else 'at least'} {low:g}, got {value!r}")
    return v


def check_range(value: float, low: float, high: float, what: str, *, unit: str = "") -> float:
    """A finite number in the closed interval [low, high]."""
    v = check_finite(value, what)
    if not low <= v <= high:
        raise InputError(f"{what} {value!r} must lie in [{low:g}, {high:g}]{' ' + unit if unit else ''}")
    return v
