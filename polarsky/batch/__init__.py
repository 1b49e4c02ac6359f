"""Batch processing of many brackets on dask (``polarsky batch``).

:mod:`.discover` (finding brackets, with the readers every command uses), :mod:`.config` (the
TOML settings, on the settings table), :mod:`.state` (hashes, completion markers),
:mod:`.task` (one bracket on a worker: the same tasks as the commands), :mod:`.runner` (the
dask driver), :mod:`.report` (thumbnails and report.html).
"""
