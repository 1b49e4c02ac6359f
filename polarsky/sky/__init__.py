"""The clear sky as a model and as a calibration target.

Modules: :mod:`~polarsky.sky.sun` (time, place, NREL SPA sun position),
:mod:`~polarsky.sky.rayleigh` and :mod:`~polarsky.sky.models` (single-scattering model and
the model registry), :mod:`~polarsky.sky.features` (refractive indices, halos, rainbows),
:mod:`~polarsky.sky.skymap` (per-pixel geometry and model maps), :mod:`~polarsky.sky.fit`
(sky mask, robust DoLP scale, residuals), :mod:`~polarsky.sky.orient` (orientation and
angle offsets from the AoLP pattern), :mod:`~polarsky.sky.calibrate` (sky calibration
files), :mod:`~polarsky.sky.pictures`, :mod:`~polarsky.sky.synth` (invented test skies)
and :mod:`~polarsky.sky.run` (``run_sky``, the ``polarsky sky`` command's work).
"""


def run_sky(frames, out_dir, **options):
    """Compare a sky bracket with the clear-sky model (see :func:`polarsky.sky.run.run_sky`)."""
    from .run import run_sky as _run_sky

    return _run_sky(frames, out_dir, **options)


def run_sky_calibration(brackets, out_path, **options):
    """Calibrate the analyzer against the clear sky (see :func:`polarsky.sky.calibrate.run_sky_calibration`)."""
    from .calibrate import run_sky_calibration as _run

    return _run(brackets, out_path, **options)


__all__ = ["run_sky", "run_sky_calibration"]
