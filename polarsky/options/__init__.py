"""The options layer: typed settings, one table of options, one syntax per form of value.

:mod:`.settings` (the groups of settings and :class:`~.settings.Settings`), :mod:`.parsers`
(value parsers of the table), :mod:`.syntax` (angle lists, number lists, times).
"""
