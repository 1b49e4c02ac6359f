"""``polarsky calibrate flat``: per-pixel bench calibration of a polarization-mosaic sensor.

Writes ``calibration.nc`` (per-pixel gain, diattenuation and angle) and ``calibration.json``
(the per-position summary) into the output folder.
"""

from __future__ import annotations

from ..errors import InputError
from ._common import collect_warnings, resolve_settings

__all__ = ["run_calibrate_flat"]


def run_calibrate_flat(frames, out_dir, settings=None, **options) -> dict:
    """Fit each pixel's gain, diattenuation and orientation from bench frames.

    Parameters
    ----------
    frames : sequence of path
        One frame per reference-polarizer angle (``angles`` in frame order).
    out_dir : path
    settings : Settings, optional
        ``angles`` (required), ``mosaic`` (required), ``mosaic_color``, ``dark``,
        ``bit_depth``, ``black_level``, ``transfer``.

    Returns
    -------
    dict
        The summary written to ``calibration.json``.
    """
    from ..mosaic.flatcal import fit_flat_files, flat_calibration, flat_summary
    from ..write.calibration_file import publish_calibration
    from ..write.stage import check_out_dir

    settings = resolve_settings(settings, options)
    frames = [str(f) for f in frames]
    rd, mo = settings.read, settings.mosaic
    if not frames:
        raise InputError("give the bench frames, one per reference-polarizer angle")
    if rd.angles is None:
        raise InputError("--angles is required: the reference polarizer's angle for each frame, e.g. 0:180:10")
    if mo.mosaic is None:
        raise InputError("--mosaic is required: the nominal micro-polarizer angles of the 2x2 cell, e.g. \"90,45;135,0\"")
    dark = [str(d) for d in settings.calibrate.dark]
    check_out_dir(out_dir, inputs=frames + dark)
    with collect_warnings() as caught:
        fit = fit_flat_files(frames, list(rd.angles), mosaic=mo.mosaic, mosaic_color=mo.mosaic_color, dark=dark,
                             bit_depth=rd.bit_depth, black_level=rd.black_level, transfer=rd.transfer)
        summary = flat_summary(fit)
        cal = flat_calibration(fit, summary)
        publish_calibration(out_dir, cal, summary, command="calibrate flat", inputs=frames + dark,
                            method="per-pixel analysis-vector fit (calibration-matrix approach, Powell & Gruev 2013, "
                                   "Opt. Express 21(18) 21039)", warnings=caught.messages())
    return summary
