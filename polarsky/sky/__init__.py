"""The clear sky as a model and as a calibration target (physics and fitting; no files).

:mod:`.sun` (time, place, NREL SPA sun position), :mod:`.rayleigh` and :mod:`.models` (the
single-scattering model and the neutral-point model), :mod:`.features` (halos, rainbows),
:mod:`.skymap` (per-pixel geometry and model maps), :mod:`.fit` (sky mask, DoLP scale,
residuals), :mod:`.orient` (orientation and angle offsets from the AoLP pattern),
:mod:`.position_fit` (per micro-polarizer offsets).  ``polarsky.tasks.sky`` and
``polarsky.tasks.calibrate_sky`` run them.
"""
