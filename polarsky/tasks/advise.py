"""``polarsky advise``: the filter angle that darkens a region (and keeps a protected one).

The bracket is estimated block by block (as ``polarsky stokes`` does); only the summed Stokes
vectors of the regions and decimated previews are kept, and the advice follows in closed
form (:mod:`polarsky.advice`).
"""

from __future__ import annotations

from ._common import check_estimate, collect_warnings, open_source, resolve_settings

__all__ = ["run_advise", "AdviceOutputs", "advice_from_sums", "advise_surface"]


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
    from ..estimate.runner import run_blocks

    settings = resolve_settings(settings, options)
    AdviceOutputs.check(settings)  # before any frame is read
    if out_dir is not None:
        from ..write.stage import check_destination

        check_destination(out_dir)
    with collect_warnings() as caught:
        op = open_source(frames, settings)
        job = AdviceOutputs(op, settings, pictures=out_dir is not None and settings.output.pictures)
        job.check_estimate(run_blocks(op.source, op.noise, job.sinks, progress=progress))
        result = job.result(caught.messages())
        if out_dir is not None:
            from ..write.stage import open_stage

            with open_stage(out_dir, command="advise", inputs=op.inputs) as stage:
                job.write(stage, result)
                stage.publish()
    return result


class AdviceOutputs:
    """What ``polarsky advise`` makes of an opened input: its sinks, the advice, its files.

    The one implementation of the advice step, for the command and for a batch bracket (which
    feeds the same row blocks to the Stokes step's sinks too).  The sinks read the blocks as
    estimated (``before_checks``): the same Stokes sums whether or not the pass also computes
    DoLP, which masks pixels whose DoLP is above 1 (:func:`polarsky.estimate.runner.mask_impossible`).

    Parameters
    ----------
    op : polarsky.tasks._common.Opened
    settings : polarsky.Settings
        ``settings.advise.region`` is required (:meth:`check`).
    pictures : bool
        Keep the previews the pictures are drawn from (the advice is written to a folder with
        pictures on).
    """

    #: longest side of the preview the pictures are drawn from
    PREVIEW_MAX_SIDE = 1200

    def __init__(self, op, settings, *, pictures: bool = True):
        from ..advice.regions import RegionSink
        from ..estimate.sinks import PreviewSink

        self.op, self.settings = op, settings
        self.surface, self.pitch_deg = self.check(settings)
        adv = settings.advise
        src = op.source
        self.masks = {"region": adv.region.as_mask(src.shape)}
        if adv.protect is not None:
            self.masks["protect"] = adv.protect.as_mask(src.shape)
        self.regions = RegionSink(self.masks)
        self.preview = None
        if pictures:
            self.preview = PreviewSink(src.shape, max_side=self.PREVIEW_MAX_SIDE, names=("S0", "S1", "S2", "valid"))
        #: the sinks to feed the row blocks to
        self.sinks = [self.regions] + ([self.preview] if self.preview is not None else [])
        for sink in self.sinks:
            sink.before_checks = True

    @staticmethod
    def check(settings):
        """Refuse settings without a region; return :func:`advise_surface` (before any frame is read)."""
        from ..errors import InputError

        if settings.advise.region is None:
            raise InputError("--region is required: the region to darken, a box x0,y0,x1,y1 or a mask image")
        return advise_surface(settings)

    def check_estimate(self, info: dict) -> None:
        """:func:`polarsky.tasks._common.check_estimate` on the counts the advice's sinks saw.

        ``info`` is what the runner returned; pixels masked for a DoLP above 1 (only in a pass
        that also computes DoLP) count as valid here, as in a pass of the advice alone."""
        bad = [int(b) for b in info["impossible_px"]]
        seen = {**info, "valid_px": [int(v) + b for v, b in zip(info["valid_px"], bad)],
                "impossible_px": [0] * len(bad), "largest_dolp": 0.0}
        check_estimate(seen, self.settings, self.op.source.channels)

    def result(self, warnings) -> dict:
        """The advice from the region sums (after the runner), with the run's ``warnings``."""
        from ..advice.ring import is_ring, ring_of_calibration

        op, adv = self.op, self.settings.advise
        return advice_from_sums(self.regions.sums, self.regions.counts, op.facts, len(op.source.channels),
                                region=adv.region, protect=adv.protect, extinction=self.settings.estimate.extinction,
                                ring=ring_of_calibration(op.calibration) if is_ring(op.calibration) else None,
                                surface=self.surface, pitch_deg=self.pitch_deg, warnings=warnings)

    def write(self, stage, result: dict) -> dict:
        """Draw the pictures (if kept) and write ``advice.json`` into ``stage``; ``result["outputs"]``
        lists the files this step added."""
        from ..core.stokes import diattenuation_from_extinction
        from ..write.jsonio import write_json

        extinction = self.settings.estimate.extinction
        d = 1.0 if extinction is None else diattenuation_from_extinction(extinction)
        before = set(stage.outputs())
        if self.preview is not None:
            from ..write.pictures.advice import advice_pictures

            advice_pictures(self.preview.finish(), self.masks, result, stage.dir, step=self.preview.step,
                            diattenuation=d)
        result["outputs"] = sorted(set(stage.outputs()) - before | {"advice.json"})
        write_json(stage.path("advice.json"), result)
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
