"""``polarsky advise``: the filter angle that darkens a region (and keeps a protected one).

The bracket is estimated block by block (as ``polarsky stokes`` does); only the summed Stokes
vectors of the regions and decimated previews are kept, and the advice follows in closed
form (:mod:`polarsky.advice`).
"""

from __future__ import annotations

from ._common import check_estimate, collect_warnings, open_source, resolve_settings

__all__ = ["run_advise", "advice_from_sums", "advise_surface"]


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
        ``"x0,y0,x1,y1"`` or mask images); ``surface`` or ``index`` (with ``pitch_deg``)
        add the angle of incidence estimated from the region's DoLP; a ring calibration
        (``calibration``) adds the recommendation as a ring reading.

    Returns
    -------
    dict
        The advice (docs/schemas/advice.schema.json): ``best_angle_deg``,
        ``reduction_stops``, ``reduction_stops_ideal``, ``region_dolp``, ``region_aolp_deg``
        and, with a protected region, ``contrast_gain``, ``protect_intensity``,
        ``region_intensity`` and ``minimum_angle_deg`` (the angle that only darkens the region),
        ``best_ring_reading_deg`` with a ring calibration, ``surface_estimate`` with a surface.
    """
    from ..advice.regions import RegionSink
    from ..advice.ring import is_ring, ring_of_calibration
    from ..core.stokes import diattenuation_from_extinction
    from ..errors import InputError
    from ..estimate.runner import run_blocks
    from ..estimate.sinks import PreviewSink
    from ..write.jsonio import write_json

    settings = resolve_settings(settings, options)
    adv = settings.advise
    if adv.region is None:
        raise InputError("--region is required: the region to darken, a box x0,y0,x1,y1 or a mask image")
    surface, pitch = advise_surface(settings)
    if out_dir is not None:
        from ..write.stage import check_destination, open_stage

        check_destination(out_dir)
    with collect_warnings() as caught:
        op = open_source(frames, settings)
        src = op.source
        masks = {"region": adv.region.as_mask(src.shape)}
        if adv.protect is not None:
            masks["protect"] = adv.protect.as_mask(src.shape)
        sink = RegionSink(masks)
        preview = PreviewSink(src.shape, max_side=1200, names=("S0", "S1", "S2", "valid"))
        info = run_blocks(src, op.noise, [sink, preview] if out_dir is not None else [sink], progress=progress)
        check_estimate(info, settings, src.channels)
        extinction = settings.estimate.extinction
        result = advice_from_sums(sink.sums, sink.counts, op.facts, len(src.channels), region=adv.region,
                                  protect=adv.protect, extinction=extinction,
                                  ring=ring_of_calibration(op.calibration) if is_ring(op.calibration) else None,
                                  surface=surface, pitch_deg=pitch, warnings=caught.messages())
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


def advice_from_sums(sums: dict, counts: dict, facts: dict, n_channels: int, *, region, protect=None, extinction=None,
                     ring=None, surface=None, pitch_deg=None, warnings=()) -> dict:
    """The advice of ``polarsky advise`` from region sums and the facts of the Stokes estimate.

    What :func:`run_advise` returns for the same sums (it calls this); the workbench calls it
    with the sums of products it holds in memory (:func:`polarsky.advice.regions.region_sums_in_blocks`).

    Parameters
    ----------
    sums, counts : dict
        Summed Stokes vectors and valid pixel counts under ``"region"`` (and ``"protect"``).
    facts : dict
        Facts of the estimate (:func:`polarsky.tasks._common.open_source`, or the attributes
        of a ``stokes.nc``): ``analyzer_angles_deg``, ``inputs``, ``polarizer``,
        ``analysis_matrix`` and ``shifts_px``.
    n_channels : int
    region, protect : Region
    extinction : float, optional
        Filter extinction ratio (None = ideal).
    ring : dict, optional
        :func:`polarsky.advice.ring.ring_of_calibration` of a ring calibration: the
        recommendation is also given as a ring reading.
    surface : dict, optional
        The reflecting medium (``--surface``/``--index``): adds the incidence estimated from
        the region's DoLP (:func:`polarsky.advice.surface.resolve_surface`);
        ``pitch_deg`` the camera pitch it is compared with.
    pitch_deg : float, optional
    warnings : sequence of str
        The run's warnings, echoed under ``warnings``.
    """
    from ..advice.result import advice_result
    from ..estimate.calibration import applied_analysis

    offsets, _ = applied_analysis(facts, n_channels)
    result = advice_result(sums, counts, region=region, protect=protect, extinction=extinction,
                           analyzer_angles_deg=facts["analyzer_angles_deg"], inputs=facts["inputs"],
                           shifts_px=facts.get("shifts_px"), polarizer=facts.get("polarizer", "front"),
                           angle_offset_deg=float(offsets.mean()), calibration=facts.get("calibration"),
                           ring=ring, surface=surface, pitch_deg=pitch_deg)
    result["warnings"] = list(warnings)
    return result


def advise_surface(settings):
    """The reflecting medium and camera pitch of ``advise --surface`` (checked before any frame is read).

    Returns
    -------
    (surface, pitch_deg)
        :func:`polarsky.advice.surface.resolve_surface` or None; the pitch if given, else None.
    """
    from ..advice.surface import resolve_surface
    from ..errors import InputError

    gl = settings.glare
    pitch = settings.geometry.pitch_deg if "pitch_deg" in settings.given else None
    if gl.surface is None and gl.index is None:
        if pitch is not None:
            raise InputError("--pitch-deg is used with --surface or --index (the incidence estimate); add one or drop it")
        return None, None
    return resolve_surface(gl.surface, gl.index), pitch
