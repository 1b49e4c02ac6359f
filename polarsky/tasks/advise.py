"""``polarsky advise``: the filter angle that darkens a region (and keeps a protected one).

The bracket is estimated block by block (as ``polarsky stokes`` does); only the summed Stokes
vectors of the regions and decimated previews are kept, and the advice follows in closed
form (:mod:`polarsky.advice`).
"""

from __future__ import annotations

from ._common import check_estimate, collect_warnings, open_source, resolve_settings

__all__ = ["run_advise"]


def run_advise(frames=(), out_dir=None, settings=None, *, progress: bool = False, **options) -> dict:
    """Best filter angle for a region (optionally protecting another).

    Parameters
    ----------
    frames : sequence of path-like
    out_dir : path-like, optional
        When given, ``advice.json`` and the pictures are written there.
    settings : polarsky.Settings, optional
    progress : bool
    **options
        Any setting by name; ``region`` is required, ``protect`` optional (boxes
        ``"x0,y0,x1,y1"`` or mask images).

    Returns
    -------
    dict
        The advice (docs/schemas/advice.schema.json): ``best_angle_deg``,
        ``reduction_stops``, ``reduction_stops_ideal``, ``region_dolp``, ``region_aolp_deg``
        and, with a protected region, ``contrast_gain``, ``protect_intensity``,
        ``region_intensity`` and ``minimum_angle_deg`` (the angle that only darkens the region).
    """
    from ..advice.regions import RegionSink
    from ..advice.result import advice_result
    from ..core.stokes import diattenuation_from_extinction
    from ..errors import InputError
    from ..estimate.calibration import applied_analysis
    from ..estimate.runner import run_blocks
    from ..estimate.sinks import PreviewSink
    from ..write.jsonio import write_json
    from ..write.stage import check_destination, open_stage

    settings = resolve_settings(settings, options)
    adv = settings.advise
    if adv.region is None:
        raise InputError("--region is required: the region to darken, a box x0,y0,x1,y1 or a mask image")
    if out_dir is not None:
        check_destination(out_dir)
    with collect_warnings() as caught:
        op = open_source(frames, settings)
        src = op.source
        masks = {"region": adv.region.as_mask(src.shape)}
        if adv.protect is not None:
            masks["protect"] = adv.protect.as_mask(src.shape)
        sink = RegionSink(masks)
        preview = PreviewSink(src.shape, max_side=1200)
        info = run_blocks(src, op.noise, [sink, preview] if out_dir is not None else [sink], progress=progress)
        check_estimate(info, settings, src.channels)
        extinction = settings.estimate.extinction
        offsets, _ = applied_analysis(op.facts, len(src.channels))
        result = advice_result(sink.sums, sink.counts, region=adv.region, protect=adv.protect, extinction=extinction,
                               analyzer_angles_deg=op.facts["analyzer_angles_deg"], inputs=op.inputs,
                               shifts_px=op.facts.get("shifts_px"), polarizer=op.facts["polarizer"],
                               angle_offset_deg=float(offsets.mean()))
        result["warnings"] = caught.messages()
        if out_dir is not None:
            d = 1.0 if extinction is None else diattenuation_from_extinction(extinction)
            with open_stage(out_dir, command="advise", inputs=op.inputs) as stage:
                before = set(stage.outputs())
                if settings.output.pictures:
                    from ..write.pictures.advice import advice_pictures

                    advice_pictures(preview.finish(), masks, result, stage.dir, step=preview.step, diattenuation=d)
                result["outputs"] = sorted(set(stage.outputs()) - before | {"advice.json"})
                write_json(stage.path("advice.json"), result)
                stage.publish()
    return result
