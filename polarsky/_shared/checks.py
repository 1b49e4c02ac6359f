"""Shared checks: numbers read strictly, values checked once, messages that name the value.

Python's ``float()`` accepts ``"4_5"`` (45), ``"nan"``, ``"inf"`` and ``"1e3"``; user input
goes through :func:`parse_number` instead, which accepts plain decimal numbers only (an
optional sign, ASCII or Unicode minus) and says what it refused.
"""

from __future__ import annotations

import math
import re

from ..errors import InputError

__all__ = ["parse_number", "check_finite", "check_positive", "check_range", "check_at_least", "number_text",
           "path_problem", "check_distinct_files", "dolp_above_one_cause"]

_NUMBER = re.compile(r"[+-]?(\d+(\.\d*)?|\.\d+)")
_NOT_FINITE = re.compile(r"[+-]?(nan|inf|infinity)", re.IGNORECASE)


def number_text(value) -> str:
    """How a message shows a value: numbers as numbers (``1``, ``-0.5``, ``nan``), text as written.

    >>> number_text(1.0), number_text("-1"), number_text(float("nan")), number_text("abc")
    ('1', '-1', 'nan', "'abc'")
    """
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, (int, float)) or hasattr(value, "dtype"):
        return f"{float(value):g}"
    s = str(value).strip().replace("\u2212", "-")
    try:
        return f"{float(s):g}" if _NUMBER.fullmatch(s) or _NOT_FINITE.fullmatch(s) else repr(s)
    except ValueError:
        return repr(s)


def parse_number(text, what: str, *, allow_exponent: bool = False, decimal_comma: bool = False) -> float:
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
    decimal_comma : bool
        Also accept one decimal comma (``22,5``) where the text is one field of its own (a
        manifest cell), unless it could be a thousands separator (``1,350``).

    Raises
    ------
    InputError
        Not a plain decimal number (underscores, ``nan``, ``inf`` and, unless allowed,
        exponents are refused), or not finite.

    Examples
    --------
    >>> parse_number(" -22.5 ", "--angles"), parse_number("\u221245", "--angles")
    (-22.5, -45.0)
    >>> parse_number("22,5", "angle_deg", decimal_comma=True)
    22.5
    """
    if isinstance(text, bool):
        raise InputError(f"{what} must be a number, got {str(text).lower()}")
    if isinstance(text, (int, float)):
        return check_finite(float(text), what)
    s = str(text).strip().replace("\u2212", "-")
    if not s:
        raise InputError(f"{what} is empty; give a number, e.g. 22.5")
    if _NOT_FINITE.fullmatch(s):
        raise InputError(f"{what} must be a finite number, got {s.lower()}")
    if decimal_comma and re.fullmatch(r"[+-]?\d+,\d+", s):
        if re.fullmatch(r"[+-]?\d{1,3},\d{3}", s):
            raise InputError(f"{what} {s!r} reads two ways (a decimal comma or a thousands separator); write it with "
                             "a decimal point, e.g. 1.35 or 1350")
        s = s.replace(",", ".")
    body = s
    if allow_exponent:
        m = re.fullmatch(r"(.*?)([eE][+-]?\d+)", s)
        if m:
            body = m.group(1)
    if not _NUMBER.fullmatch(body):
        extra = ""
        if "_" in s:
            extra = " (no underscores between digits)"
        elif "," in s:
            extra = " (a decimal point, not a comma)"
        elif not allow_exponent and re.search(r"\d[eE][+-]?\d", s):
            extra = " (no exponent)"
        raise InputError(f"{what} {str(text).strip()!r} is not a plain number; write digits with an optional sign "
                         f"and a decimal point{extra}, e.g. 22.5")
    v = float(s)
    if not math.isfinite(v):
        raise InputError(f"{what} {s} is too large to be a number here; give a finite number")
    return v


def check_finite(value: float, what: str) -> float:
    """``value`` as a float; InputError naming ``what`` when it is NaN or infinite."""
    v = float(value)
    if not math.isfinite(v):
        raise InputError(f"{what} must be a finite number, got {number_text(value)}")
    return v


def check_positive(value: float, what: str) -> float:
    """A finite number > 0."""
    v = check_finite(value, what)
    if not v > 0:
        raise InputError(f"{what} must be positive, got {number_text(value)}")
    return v


def check_at_least(value: float, low: float, what: str, *, strict: bool = False) -> float:
    """A finite number >= ``low`` (> with ``strict``)."""
    v = check_finite(value, what)
    if v < low or (strict and v == low):
        raise InputError(f"{what} must be {'above' if strict else 'at least'} {low:g}, got {number_text(value)}")
    return v


def check_range(value: float, low: float, high: float, what: str, *, unit: str = "") -> float:
    """A finite number in the closed interval [low, high]."""
    v = check_finite(value, what)
    if not low <= v <= high:
        raise InputError(f"{what} {number_text(value)} must lie in [{low:g}, {high:g}]{' ' + unit if unit else ''}")
    return v


def path_problem(path) -> str | None:
    """Why ``path`` cannot be opened, said right (None when it exists).

    A symbolic link that loops exists but leads nowhere; a link to a missing file is not a
    missing file.  Messages read ``f"{path} {path_problem(path)}"``.

    Examples
    --------
    >>> path_problem("/no/such/file")
    'does not exist'
    """
    import errno
    import os

    try:
        os.stat(path)
        return None
    except OSError as exc:
        code = exc.errno
    if code == errno.ELOOP:
        if os.path.islink(path):
            return f"is a symbolic link that loops (it points to {os.readlink(path)!r}, which leads back to it)"
        return "lies below a symbolic link that loops"
    if code == errno.EACCES:
        return "cannot be reached (permission denied)"
    if code == errno.ENAMETOOLONG:
        return "is a name too long for the file system"
    if os.path.islink(path):
        return f"is a symbolic link to {os.readlink(path)!r}, which does not exist"
    return "does not exist"


def check_distinct_files(files, angles_deg, *, what: str = "frame") -> None:
    """Refuse a file listed twice (by any name: links count as the same file): one picture
    cannot have been taken at two analyzer angles.

    Raises
    ------
    InputError
        Naming the file and both angles.
    """
    import os
    from pathlib import Path

    seen: dict = {}
    for f, a in zip(files, angles_deg):
        try:
            st = os.stat(f)
            key = (st.st_dev, st.st_ino)
        except OSError:  # missing or a looping link: the reader says so
            key = os.path.realpath(f)
        if key in seen:
            g, b = seen[key]
            same = "" if Path(g) == Path(f) else f" (as {Path(g).name} and {Path(f).name})"
            raise InputError(f"{what} {f} is listed twice{same}, at {float(b):g} and {float(a):g} deg; each angle "
                             "needs a picture of its own: check the frame list, --angles or the manifest")
        seen[key] = (f, a)


def dolp_above_one_cause(extinction=None, calibration=None) -> str:
    """What most likely made a DoLP above 1, and the fix, for a message.

    >>> dolp_above_one_cause(1.0001)[:41]
    '--extinction 1.0001 (diattenuation 5e-05)'
    """
    if extinction is not None:
        d = (float(extinction) - 1.0) / (float(extinction) + 1.0)
        return (f"--extinction {float(extinction):g} (diattenuation {d:.3g}) is lower than the filter's: measure it "
                "('polarsky calibrate') or leave it out")
    if calibration:
        return "the calibration does not fit this camera and filter: check --calibration"
    return ("check the analyzer angles (--angles, the manifest or the file names) and that every frame shows the same "
            "scene at the same exposure")

