"""Filter advice: which way to set the filter, and what it removes.

:mod:`.angle` (closed-form best angles, Malus's law in Stokes form), :mod:`.regions` (region
sums), :mod:`.result` (the result and its words).  ``polarsky.tasks.advise`` runs it on a
bracket.
"""
