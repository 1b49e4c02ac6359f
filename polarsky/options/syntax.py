"""The syntax of option values: one parser per form, the same in every command.

Angle lists, number lists, pairs and times are written the same way on the command line,
in a batch settings file and in the Python API (see ``docs/glossary.md``).  Every parser
takes the value and the name to use in messages, and raises :class:`InputError` naming both.
"""

from __future__ import annotations

import datetime as _dt
import math

import numpy as np

from .._shared.checks import parse_number
from ..errors import InputError

__all__ = ["parse_angle_list", "format_angle_list", "parse_number_list", "parse_when", "MAX_LIST_ITEMS"]

#: Longest list an angle range may expand to.
MAX_LIST_ITEMS = 10_000


def parse_angle_list(value, what: str = "--angles") -> tuple:
    """Angles in degrees from ``"0,45,90,135"``, ranges ``"0:180:45"`` or a sequence.

    Items are separated by commas; an item ``start:stop:step`` expands to ``start``,
    ``start + step``, ... below ``stop`` (``step`` > 0).

    Raises
    ------
    InputError
        An item that is not a plain number or a range, a range with a step <= 0 or of more
        than :data:`MAX_LIST_ITEMS` angles, an empty list.

    Examples
    --------
    >>> parse_angle_list("0,45,90,135")
    (0.0, 45.0, 90.0, 135.0)
    >>> parse_angle_list("0:180:45"), parse_angle_list("0:90:30, 135")
    ((0.0, 45.0, 90.0, 135.0), (0.0, 30.0, 60.0, 135.0))
    """
    if isinstance(value, (list, tuple, np.ndarray)):
        items = list(value)
    else:
        items = [t.strip() for t in str(value).split(",")]
        if any(t == "" for t in items):
            raise InputError(f"{what} {value!r} has an empty item; write angles in degrees separated by commas, "
                             "e.g. 0,45,90,135 or 0:180:45")
    out: list = []
    for item in items:
        if isinstance(item, str) and ":" in item:
            parts = item.split(":")
            if len(parts) != 3:
                raise InputError(f"{what} item {item!r} is not a range start:stop:step, e.g. 0:180:15")
            a, b, step = (parse_number(p, f"{what} item {item!r}") for p in parts)
            if not step > 0:
                raise InputError(f"{what} range {item!r} needs a step above 0")
            span = (b - a) / step
            count = math.ceil(span - 1e-9) if math.isfinite(span) else math.inf
            if count > MAX_LIST_ITEMS:
                many = f"{count}" if count < 1e15 else "too many"
                raise InputError(f"{what} range {item!r} expands to {many} angles, more than {MAX_LIST_ITEMS}; "
                                 "give a larger step")
            out.extend(float(a + k * step) for k in range(max(count, 0)))
        else:
            out.append(parse_number(item, what))
    if not out:
        raise InputError(f"{what} {value!r} holds no angle; give e.g. 0,45,90,135")
    return tuple(out)


def format_angle_list(angles) -> str:
    """The ``--angles`` text of a list of angles (what ``summary.csv`` writes).

    >>> format_angle_list([0, 45.0, 22.5])
    '0,45,22.5'
    """
    return ",".join(f"{float(a):g}" for a in angles)


def parse_number_list(value, what: str, count: int | None = None) -> tuple:
    """Numbers separated by commas (``"1024.5,768"``) or a sequence; ``count`` of them if given.

    >>> parse_number_list("1024.5, 768", "--circle-centre-px", 2)
    (1024.5, 768.0)
    """
    if isinstance(value, (list, tuple, np.ndarray)):
        items = list(value)
    else:
        items = [t.strip() for t in str(value).split(",")]
    vals = tuple(parse_number(t, what, allow_exponent=True) for t in items)
    if count is not None and len(vals) != count:
        raise InputError(f"{what} {value!r} must hold {count} numbers separated by commas")
    return vals


def parse_when(value, what: str = "--when") -> _dt.datetime:
    """An aware date-time from ISO 8601 text with a UTC offset (or ``Z``).

    Raises
    ------
    InputError
        Not ISO 8601, or no UTC offset (a naive time is never taken as UTC silently).

    Examples
    --------
    >>> parse_when("2003-10-17T12:30:30-07:00").utcoffset().total_seconds() / 3600
    -7.0
    """
    if isinstance(value, _dt.datetime):
        t = value
    else:
        s = str(value).strip()
        try:
            t = _dt.datetime.fromisoformat(s[:-1] + "+00:00" if s.endswith("Z") else s)
        except ValueError:
            raise InputError(f"{what} {value!r} is not an ISO 8601 date-time; write e.g. "
                             "2024-06-21T14:05:00+02:00") from None
    if t.tzinfo is None or t.utcoffset() is None:
        raise InputError(f"{what} {value!s} has no UTC offset; add one, e.g. {value!s}+02:00 or {value!s}Z "
                         "(a time without offset is not taken as UTC)")
    return t
