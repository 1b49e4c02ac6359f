"""The syntax of option values: one parser per form, the same in every command.

Angle lists, number lists, pairs and times are written the same way on the command line,
in a batch settings file and in the Python API (see ``docs/glossary.md``).  Every parser
takes the value and the name to use in messages, and raises :class:`InputError` naming both.
"""

from __future__ import annotations

import datetime as _dt
import math
import re

import numpy as np

from .._shared.checks import parse_number
from ..errors import InputError

__all__ = ["parse_angle_list", "format_angle_list", "parse_number_list", "parse_when", "parse_sweep",
           "parse_time_sweep", "sweep_times", "MAX_LIST_ITEMS", "MAX_SWEEP_STEPS"]

#: Longest list an angle range may expand to.
MAX_LIST_ITEMS = 10_000
#: Most steps a sweep (``--sweep``, ``--sweep-yaw``, ``--sweep-time``) may take.
MAX_SWEEP_STEPS = 1000


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

    >>> parse_number_list("1024.5, 768", "--circle-center-px", 2)
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


def _steps(start, end, step, what, value) -> int:
    if not step > 0 or end < start:
        raise InputError(f"{what} {value!r} needs START <= END and a STEP above 0")
    n = int(math.floor((end - start) / step + 1e-9)) + 1
    if n > MAX_SWEEP_STEPS:
        raise InputError(f"{what} {value!r} makes {n} steps, more than {MAX_SWEEP_STEPS}; give a larger STEP")
    return n


def parse_sweep(value, what: str = "--sweep") -> tuple:
    """The values of a sweep ``START,END,STEP`` (END included when it falls on a step).

    Raises
    ------
    InputError
        Not three numbers, STEP <= 0, END < START, or more than :data:`MAX_SWEEP_STEPS` steps.

    Examples
    --------
    >>> parse_sweep("0,90,45", "--sweep-yaw")
    (0.0, 45.0, 90.0)
    """
    try:
        start, end, step = parse_number_list(value, what, 3)
    except InputError:
        raise InputError(f"{what} {value!r} must be START,END,STEP (three numbers separated by commas), "
                         "e.g. 0,85,5") from None
    n = _steps(start, end, step, what, value)
    return tuple(float(start + k * step) for k in range(n))


_CLOCK = re.compile(r"^\s*(\d{1,2}):(\d{2})(?::(\d{2}))?\s*$")
_STEP = re.compile(r"^\s*(\d+(?:\.\d*)?)\s*(min|h)?\s*$", re.I)


def parse_time_sweep(value, what: str = "--sweep-time") -> tuple:
    """A sweep over the day ``START,END,STEP``: ``(start, end, step)`` as written.

    START and END are clock times ``HH:MM[:SS]`` (returned as :class:`datetime.time`, to be
    put on the date and UTC offset of ``--when``) or ISO 8601 times with a UTC offset
    (aware :class:`datetime.datetime`); STEP is minutes (``30``, ``30min``) or hours
    (``1h``), returned as a :class:`datetime.timedelta`.

    Examples
    --------
    >>> a, b, step = parse_time_sweep("06:00,21:00,30min")
    >>> a.isoformat(), b.isoformat(), step.total_seconds()
    ('06:00:00', '21:00:00', 1800.0)
    """
    parts = [p.strip() for p in str(value).split(",")]
    if len(parts) != 3:
        raise InputError(f"{what} {value!r} must be START,END,STEP, e.g. 06:00,21:00,30 (minutes) or "
                         "2026-06-21T06:00+02:00,2026-06-21T21:00+02:00,1h")

    def one(text):
        m = _CLOCK.match(text)
        if m:
            hh, mm, ss = int(m.group(1)), int(m.group(2)), int(m.group(3) or 0)
            if hh > 23 or mm > 59 or ss > 59:
                raise InputError(f"{what} {value!r}: {text!r} is not a clock time HH:MM")
            return _dt.time(hh, mm, ss)
        try:
            return parse_when(text, what)
        except InputError:
            raise InputError(f"{what} {value!r}: {text!r} is neither a clock time HH:MM nor an ISO 8601 time with a "
                             "UTC offset") from None

    start, end = one(parts[0]), one(parts[1])
    if isinstance(start, _dt.time) != isinstance(end, _dt.time):
        raise InputError(f"{what} {value!r}: give START and END both as clock times or both as ISO 8601 times")
    m = _STEP.match(parts[2])
    if not m or float(m.group(1)) <= 0:
        raise InputError(f"{what} step {parts[2]!r} must be a positive number of minutes (30, 30min) or hours (1h)")
    step = _dt.timedelta(minutes=float(m.group(1)) * (60.0 if (m.group(2) or "").lower() == "h" else 1.0))
    return start, end, step


def sweep_times(spec, when: _dt.datetime, what: str = "--sweep-time") -> list:
    """The aware times of a :func:`parse_time_sweep` result; clock times on ``when``'s date and offset.

    Examples
    --------
    >>> spec = parse_time_sweep("18:00,19:00,30")
    >>> [t.strftime("%H:%M") for t in sweep_times(spec, parse_when("2026-06-21T12:00+02:00"))]
    ['18:00', '18:30', '19:00']
    """
    start, end, step = spec
    if isinstance(start, _dt.time):
        start, end = (when.replace(hour=t.hour, minute=t.minute, second=t.second, microsecond=0) for t in (start, end))
    n = _steps(0.0, (end - start).total_seconds(), step.total_seconds(), what,
               f"{start.isoformat()},{end.isoformat()},{step}")
    return [start + k * step for k in range(n)]
