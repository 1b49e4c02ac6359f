"""``polarsky workbench``: a local page to look at a bracket, point at the glare and get the angle.

A user task above every layer.  Modules: :mod:`.launch` (start and stop: what ``polarsky
workbench`` runs), :mod:`.sources` (what the PATH arguments mean), :mod:`.loaders` (a Stokes
result estimated or read through the library's own layers, and its advice),
:mod:`.session` (entries, loading, advice, saving), :mod:`.view` (layers, tiles, colour
keys, readout, preview data), :mod:`.watch` (``--watch``), :mod:`.commandline` (the
equivalent ``polarsky advise`` command) and :mod:`.server` (Starlette on uvicorn, the token,
the security rules).  The page is plain HTML, CSS and JavaScript in ``static/`` and loads
nothing from anywhere else.
"""

from __future__ import annotations

from .launch import LOOPBACK_HOSTS, prepare_workbench, run_workbench

__all__ = ["run_workbench", "prepare_workbench", "LOOPBACK_HOSTS"]
