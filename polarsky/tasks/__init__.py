"""The tasks: one orchestrator per user task, above every layer it uses.

Each task reads (:mod:`polarsky.read`), estimates (:mod:`polarsky.estimate`), analyses
(:mod:`polarsky.sky`, :mod:`polarsky.advice`) and writes (:mod:`polarsky.write`); none of
those layers imports a task.  The command line (:mod:`polarsky.cli`) and the batch call the
tasks.  Modules: :mod:`.stokes`, :mod:`.advise`, :mod:`.sky`, :mod:`.calibrate_sky`,
:mod:`.calibrate_flat`, :mod:`.demo`.
"""
