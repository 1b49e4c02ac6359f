"""Batch processing of many brackets on dask (``polarsky batch``).

Modules: :mod:`.discover` (finding brackets), :mod:`.config` (the TOML settings),
:mod:`.state` (hashes, completion markers, atomic publishing), :mod:`.runner` (the dask
driver and the per-bracket task), :mod:`.report` (thumbnails and report.html),
:mod:`.synthetic` (invented test brackets).
"""

from .config import load_config, merge_settings
from .discover import Bracket, discover_brackets
from .runner import list_brackets, run_batch

__all__ = ["Bracket", "discover_brackets", "load_config", "merge_settings", "list_brackets", "run_batch"]
