"""One registry type for every family of methods (demosaicing, lens models, sky models, ...).

A :class:`Registry` maps case-insensitive names to entries given as ``"module:attribute"``
strings, loaded on first use: the command line lists the choices without importing the
numerical code behind them, and one dispatcher (:meth:`Registry.get`) validates a name and
returns its entry, with a message that lists the choices.
"""

from __future__ import annotations

import importlib
from collections.abc import Mapping

from ..errors import InputError

__all__ = ["Registry"]


class Registry(Mapping):
    """Case-insensitive, lazily loaded name -> entry mapping.

    Parameters
    ----------
    what : str
        What an entry is, for messages (``"demosaic method"``).
    option : str
        The option that chooses an entry (``"--demosaic"``).
    entries : dict of str -> str
        Name -> ``"package.module:attribute"``.

    Examples
    --------
    >>> r = Registry("colour", "--colour", {"grey": "polarsky.palette:CHECKER_GREYS"})
    >>> r.key("GREY"), r["grey"]
    ('grey', (0.55, 0.75))
    """

    def __init__(self, what: str, option: str, entries: dict):
        self.what = what
        self.option = option
        self._targets = {str(k).lower(): v for k, v in entries.items()}
        self._loaded: dict = {}

    def names(self) -> tuple:
        """The names, in registration order (the command line's choices)."""
        return tuple(self._targets)

    def key(self, name) -> str:
        """The canonical name of ``name``; InputError listing the choices when unknown."""
        k = str(name).strip().lower()
        if k not in self._targets:
            raise InputError(f"{self.option} {name!r} is not a known {self.what}; choose one of {', '.join(self._targets)}")
        return k

    def get(self, name):
        """The entry registered as ``name`` (imported on first use)."""
        k = self.key(name)
        if k not in self._loaded:
            target = self._targets[k]
            if isinstance(target, str):
                module, attr = target.split(":")
                target = getattr(importlib.import_module(module), attr)
            self._loaded[k] = target
        return self._loaded[k]

    def __getitem__(self, name):
        return self.get(name)

    def __iter__(self):
        return iter(self._targets)

    def __len__(self):
        return len(self._targets)
