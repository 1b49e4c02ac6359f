"""``polarsky calibrate ring``: the filter ring's zero from one bracket of a source of known polarization.

The bracket (with the ring readings as the analyzer angles) is estimated block by block as
``advise`` does; only the region's summed Stokes vector and its noise are kept
(:class:`polarsky.advice.regions.RegionNoiseSink`), and the offset follows in closed form
(:func:`polarsky.advice.ring.ring_offset_from_sums`).  It is written as the
``angle_offset_deg`` of a ``kind = "ring"`` calibration (``DIR/calibration.nc``, read by
``--calibration DIR`` in every command) beside ``calibration.json``.
"""

from __future__ import annotations

from pathlib import Path

from ._common import collect_warnings, open_source, resolve_settings

__all__ = ["run_calibrate_ring"]


def run_calibrate_ring(frames, out_dir, settings=None, **options) -> dict:
    """Measure the ring's zero and write the calibration into ``out_dir``.

    Parameters
    ----------
    frames : sequence of path-like
        The reference bracket, with the ring readings as analyzer angles.
    out_dir : path-like
        Folder for ``calibration.nc`` and ``calibration.json`` (published whole).
    settings : polarsky.Settings, optional
    **options
        Bracket settings as for ``advise`` (``angles``, ``manifest``, ``transfer``,
        ``extinction``, ...), ``region`` (required: the reference source) and
        ``source_aolp_deg`` (the source's true AoLP, default 0 = a level reflection).
        ``calibration``, a non-zero ``angle_offset`` and ``mosaic`` are refused: they would
        move the scale being measured (a mosaic camera has no filter ring).

    Returns
    -------
    dict
        ``calibration.json`` (docs/schemas/calibrate_ring.schema.json): ``ring_offset_deg``
        (add it to a ring reading for the true axis), ``ring_offset_sigma_deg``, ...

    Raises
    ------
    InputError
        Bad input, or a reference too weakly polarized (or too noisy) to fix the zero.
    """
    import numpy as np

    from ..advice.regions import RegionNoiseSink
    from ..advice.ring import REMOUNT_NOTE, RING_MEANING, ring_calibration_result, ring_offset_from_sums
    from ..errors import InputError
    from ..estimate.calibration import FILE_NAME, Calibration
    from ..estimate.runner import run_blocks
    from ..write.calibration_file import publish_calibration
    from ..write.stage import check_out_dir

    settings = resolve_settings(settings, options)
    est = settings.estimate
    if est.calibration is not None:
        raise InputError("calibrate ring measures the ring's own zero from ring readings; drop --calibration")
    if est.angle_offset:
        raise InputError("calibrate ring measures the ring's zero itself; drop --angle-offset (give the ring readings "
                         "as they are)")
    if settings.mosaic.mosaic is not None:
        raise InputError("calibrate ring needs a bracket shot through a filter with a ring; a mosaic camera has no "
                         "filter ring: drop --mosaic")
    region = settings.advise.region
    if region is None:
        raise InputError("--region is required: a box x0,y0,x1,y1 or a mask image on the reference source")
    frames = [str(f) for f in frames]
    check_out_dir(out_dir, inputs=frames)
    with collect_warnings() as caught:
        op = open_source(frames, settings)
        sink = RegionNoiseSink(region.as_mask(op.source.shape))
        run_blocks(op.source, op.noise, [sink])
        offset = ring_offset_from_sums(sink.sums, var_s12=sink.var_s12, count=sink.count, lin_sum=sink.lin_sum,
                                       source_aolp_deg=settings.ring.source_aolp_deg)
        result = ring_calibration_result(offset, region=region.text, analyzer_angles_deg=op.facts["analyzer_angles_deg"],
                                         extinction=est.extinction, inputs=op.inputs,
                                         calibration_file=Path(out_dir) / FILE_NAME)
        cal = Calibration(kind="ring", angle_offset_deg=np.array([result["ring_offset_deg"]]),
                          uncertainty={"angle_offset_deg": np.array([result["ring_offset_sigma_deg"]])},
                          attrs={"source_aolp_deg": result["source_aolp_deg"], "region": result["region"],
                                 "region_dolp": result["region_dolp"], "region_pixels": result["region_pixels"],
                                 "channels": ["all"], "meaning": RING_MEANING, "note": REMOUNT_NOTE})
        publish_calibration(out_dir, cal, result, command="calibrate ring", inputs=frames,
                            method="filter-ring zero from a reference of known AoLP: offset = source AoLP - AoLP "
                                   "measured on the ring's scale (region Stokes sums)", warnings=caught.messages())
    return result
