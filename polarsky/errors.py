"""Exceptions and warnings shared by the whole library.

Every problem a user can fix (a missing file, a bad angle list, frames of different
sizes, ...) raises :class:`InputError`, whose message is one line that names the file or
value and says how to fix it.  The command line turns it into ``error: <message>`` on
stderr and exit status 2.
"""

from __future__ import annotations

__all__ = ["InputError", "PolarskyWarning", "one_line"]


def one_line(text: str) -> str:
    """Collapse ``text`` to a single line (messages must never span lines)."""
    return " ".join(str(text).split())


class InputError(ValueError):
    """Bad input that the user can correct; the message is one line."""

    def __init__(self, message: str):
        super().__init__(one_line(message))


class PolarskyWarning(UserWarning):
    """A result was produced, but something about the input deserves attention."""
