"""Analyzer angles written in file names: one parser for every command and the batch.

A frame's name may carry one angle token, a number followed by ``deg``:
``pier_045deg.tif`` (45), ``pier_22.5deg.png`` (22.5), ``pier_-45deg.png`` (-45; the minus
follows a separator), ``pier-45deg.png`` (45; a hyphen after a letter or digit is a
separator), ``pier_22,5deg.png`` (22.5, a decimal comma), ``pier_\u221245deg.png`` (-45, a
Unicode minus).  The rest of the name is the bracket's *stem* (``pier``), which groups the
frames of a bracket in a batch.

Names that cannot be read one way only are refused with a message naming the file: two
tokens, an exponent (``1.35e2deg``), a second decimal mark (``1.5.5deg``), a comma that could
separate thousands (``1,350deg``).  An underscore
always separates words: ``shot_2_45deg.png`` is bracket ``shot_2`` at 45 deg.
"""

from __future__ import annotations

import re
from pathlib import Path

from ..errors import InputError

__all__ = ["angle_from_name", "split_name", "ANGLE_TOKEN_HELP"]

ANGLE_TOKEN_HELP = "one '<number>deg' token in each file name (pier_045deg.tif)"

_TOKEN = re.compile(r"(?P<sign>[-\u2212]?)(?P<num>\d+(?:[.,]\d+)?)(?P<exp>[eE][-+]?\d+)?deg(?![a-z])", re.IGNORECASE)
_SEPARATORS = "_-. "


def _tokens(stem: str, name: str):
    found = []
    for m in _TOKEN.finditer(stem):
        start = m.start("num")
        sign = m.group("sign")
        before_sign = stem[m.start() - 1] if m.start() > 0 else ""
        if sign == "-" and before_sign.isalnum():
            sign = ""  # "pier-45deg": the hyphen separates words
        if m.group("exp"):
            raise InputError(f"file name {name!r} writes its angle with an exponent ({m.group(0)!r}); "
                             "write it as a plain number, e.g. 135deg")
        if start >= 1 and stem[start - 1] in ".,":
            raise InputError(f"file name {name!r} has an angle with two decimal marks ({m.group(0)!r}); "
                             "write one number, e.g. 22.5deg")
        if re.fullmatch(r"\d{1,3},\d{3}", m.group("num")):
            raise InputError(f"file name {name!r} has an angle that reads two ways ({m.group(0)!r}: a decimal comma or "
                             "a thousands separator); write it with a decimal point, e.g. 1.35deg")
        value = float(m.group("num").replace(",", "."))
        if sign in ("-", "\u2212"):
            value = -value
        found.append((m, value))
    return found


def _parse(path):
    p = Path(path)
    found = _tokens(p.stem, p.name)
    if len(found) > 1:
        raise InputError(f"file name {p.name!r} holds {len(found)} angle tokens "
                         f"({', '.join(m.group(0) for m, _ in found)}); keep one '<number>deg' token per name")
    return p, found


def angle_from_name(path) -> float | None:
    """Analyzer angle (degrees) of the one ``<number>deg`` token in a file name, or None.

    Raises
    ------
    InputError
        The name holds several tokens or a token that reads more than one way.

    Examples
    --------
    >>> angle_from_name("pier_045deg.tif"), angle_from_name("pier_-45deg.png"), angle_from_name("pier-45deg.png")
    (45.0, -45.0, 45.0)
    >>> angle_from_name("pier_22,5deg.png"), angle_from_name("plain.png") is None
    (22.5, True)
    """
    _, found = _parse(path)
    return found[0][1] if found else None


def split_name(path):
    """``(stem, angle_deg)`` of a name with an angle token, or None without one.

    The stem is the name without the token and its separators (``pier_045deg_b.tif`` ->
    ``pier_b``): frames with the same stem in one folder form a bracket.

    Examples
    --------
    >>> split_name("pier_045deg_b.tif")
    ('pier_b', 45.0)
    """
    p, found = _parse(path)
    if not found:
        return None
    m, value = found[0]
    stem = p.stem
    head = stem[: m.start()].rstrip(_SEPARATORS)
    tail = stem[m.end():].lstrip(_SEPARATORS)
    return "_".join(part for part in (head, tail) if part), value
