"""``polarsky stokes``: a bracket or mosaic frames -> Stokes maps, summary and pictures.

Both kinds of input run through the same layers: :func:`polarsky.tasks._common.open_source`
reads them, the row-block runner estimates every product, the NetCDF writer, the preview and
the statistics sinks take the blocks, and one summary builder writes ``summary.json``.
"""

from __future__ import annotations

import contextlib
import time
import warnings

from ..errors import PolarskyWarning
from ._common import check_estimate, collect_warnings, load_calibration, open_source, resolve_settings

__all__ = ["stokes_from_files", "stokes_from_mosaic_values", "run_stokes", "StokesOutputs", "output_bytes",
           "RESIDUAL_WARNING"]

#: Median relative fit residual above which the frames are said to disagree.
RESIDUAL_WARNING = 0.03


def _names(n_analyzers: int) -> list:
    from ..conventions import VARIABLES

    return [n for n in VARIABLES if n != "residual" or n_analyzers > 3]


def stokes_from_files(frames=(), settings=None, *, progress: bool = False, **options):
    """The Stokes ``xarray.Dataset`` of a bracket or of mosaic frames (the Python API).

    Parameters
    ----------
    frames : sequence of path-like
        Frame files (may be empty with a manifest).
    settings : polarsky.Settings, optional
    progress : bool
    **options
        Any setting by name (``angles``, ``manifest``, ``transfer``, ``extinction``,
        ``angle_offset``, ``align``, ``calibration``, ``mosaic``, ``demosaic``, ...; see
        ``docs/glossary.md``), mapped onto ``settings``.

    Returns
    -------
    xarray.Dataset
        Dims (channel, y, x); the variables of :data:`polarsky.conventions.VARIABLES`.

    Examples
    --------
    >>> import polarsky
    >>> ds = polarsky.stokes_from_files(["a_000deg.png", "a_045deg.png", "a_090deg.png"])  # doctest: +SKIP
    >>> ds["dolp"].sel(channel="L").plot()  # doctest: +SKIP
    """
    from ..estimate.runner import run_blocks
    from ..estimate.sinks import MemorySink
    from ..write.dataset import stokes_dataset

    settings = resolve_settings(settings, options)
    with collect_warnings():
        op = open_source(frames, settings)
        src = op.source
        mem = MemorySink(src.shape, len(src.channels), _names(src.n_analyzers))
        info = run_blocks(src, op.noise, [mem], progress=progress)
        facts = _facts_after(op, info)
        check_estimate(info, settings, src.channels)
    return stokes_dataset(mem.arrays, channels=src.channels, attrs=facts)


def _facts_after(op, info) -> dict:
    facts = dict(op.facts)
    src = op.source
    if hasattr(src, "counts"):
        facts["saturated_px"] = src.counts[:, 0].tolist()
        facts["black_px"] = src.counts[:, 1].tolist()
        bracket = op.bracket
        for k, fr in enumerate(bracket.frames):
            sat, blk = src.counts[k]
            if sat:
                warnings.warn(f"{sat} pixel values saturated (>= 98% of full scale) in {fr.path.name} were masked",
                              PolarskyWarning, stacklevel=3)
            if blk:
                warnings.warn(f"{blk} pixel values at the black level in {fr.path.name} were masked",
                              PolarskyWarning, stacklevel=3)
    facts["uncertainty_source"] = info["noise_source"]
    return facts


def run_stokes(frames=(), out_dir=None, settings=None, *, progress: bool = False, **options) -> dict:
    """``polarsky stokes``: write ``stokes.nc``, ``summary.json`` and pictures into ``out_dir``.

    Parameters
    ----------
    frames : sequence of path-like
    out_dir : path-like
        Output folder; it holds the complete result of this run or, on failure, what it held
        before.
    settings : polarsky.Settings, optional
    progress : bool
    **options
        Any setting by name, as for :func:`stokes_from_files` (``pictures=False`` skips the
        PNG maps).

    Returns
    -------
    dict
        The summary (also written to ``summary.json``; docs/schemas/summary.schema.json).
    """
    from ..estimate.runner import run_blocks
    from ..write.stage import check_destination, open_stage

    from .._shared.prefetch import prefetch_modules

    settings = resolve_settings(settings, options)
    t_start = time.perf_counter()
    check_destination(out_dir)
    prefetch_modules("h5py")  # for stokes.nc, while the frames are decoded
    with collect_warnings() as caught:
        op = open_source(frames, settings)
        with open_stage(out_dir, command="stokes", inputs=op.inputs) as stage:
            job = StokesOutputs(op, stage, settings)
            with job.writing():
                info = run_blocks(op.source, op.noise, job.sinks, rows=job.rows, progress=progress)
                job.commit(info)
            summary = job.finish(caught, t_start=t_start)
            stage.publish()
    return summary


class StokesOutputs:
    """What ``polarsky stokes`` makes of an opened input: its sinks, then its files.

    The one implementation of the Stokes step, for the command and for a batch bracket (which
    feeds the same row blocks to the sinks of other steps too).  Use::

        job = StokesOutputs(op, stage, settings)
        with job.writing():                 # removes the partial stokes.nc on any error
            info = run_blocks(op.source, op.noise, job.sinks, rows=job.rows)
            job.commit(info)                # stokes.nc complete
        summary = job.finish(caught, t_start=t0)   # pictures and summary.json

    Parameters
    ----------
    op : polarsky.tasks._common.Opened
    stage : OutputStage or Into
        Where the files go (``summary.json`` lists the files this step adds to it).
    settings : polarsky.Settings
    write_threads : int, optional
        Threads that compress ``stokes.nc`` chunks (default: the writer's; 0 = in the
        calling thread, for a worker process that has one core to itself).
    """

    def __init__(self, op, stage, settings, *, write_threads: int | None = None):
        from ..estimate.runner import block_rows
        from ..estimate.sinks import PreviewSink, StatsSink
        from ..write.netcdf import StokesWriter
        from ..write.quantize import precision_for

        self.op, self.stage, self.settings = op, stage, settings
        src = op.source
        out = settings.output
        names = [n for n in _names(src.n_analyzers) if out.keep is None or n in out.keep]
        stage.reserve(output_bytes(src.shape, len(src.channels), len(names), pictures=out.pictures,
                                   compressed=out.precision != "full"))
        self.before = set(stage.outputs())
        self.rows = block_rows(src.shape, len(src.channels))
        self.writer = StokesWriter(stage.path("stokes.nc"), shape=src.shape, channels=src.channels, rows=self.rows,
                                   names=names, attrs={}, precision=precision_for(out.precision),
                                   full_scale=src.value_full_scale, threads=write_threads)
        #: decimated products for the pictures (None with pictures off)
        self.preview = PreviewSink(src.shape) if out.pictures else None
        self.stats = StatsSink(src.shape, len(src.channels), compiled=src.compiled)
        #: the sinks to feed the row blocks to
        self.sinks = [_Timed(self.writer)] + ([self.preview] if self.preview is not None else []) + [self.stats]
        #: RGB arrays of the pictures drawn (name -> (h, w, 3) uint8), after :meth:`finish`
        self.pictures: dict = {}
        self.facts: dict = {}
        self._info: dict = {}
        self._t_nc = 0.0

    @contextlib.contextmanager
    def writing(self):
        """Abort ``stokes.nc`` (no partial file) if the block stays unfinished."""
        try:
            yield self
        except BaseException:
            self.writer.abort()
            raise

    def commit(self, info: dict) -> dict:
        """Check the estimate, complete ``stokes.nc`` after the runner's ``info``; return the
        facts of the estimate."""
        self._info = info
        self.facts = _facts_after(self.op, info)
        check_estimate(info, self.settings, self.op.source.channels)
        t1 = time.perf_counter()
        self.writer.set_attrs({**self.facts, "precision": self.settings.output.precision})
        self.writer.commit()
        self._t_nc = time.perf_counter() - t1 + self.writer.seconds
        return self.facts

    def finish(self, caught, *, t_start: float) -> dict:
        """Draw the pictures, warn about a large residual, write ``summary.json``; return the summary.

        ``caught`` holds the run's warnings (:func:`polarsky.tasks._common.collect_warnings`).
        """
        from ..write.jsonio import write_json
        from ..write.summary import build_summary

        op, settings, stage, facts, info = self.op, self.settings, self.stage, self.facts, self._info
        src = op.source
        t2 = time.perf_counter()
        if self.preview is not None:
            from ..write.pictures.maps import stokes_pictures

            stokes_pictures(self.preview.finish(), stage.dir, channels=src.channels, step=self.preview.step,
                            polarizer=facts["polarizer"], keep=self.pictures)
        t_pics = time.perf_counter() - t2
        stat = self.stats.summary(src.channels)
        med = stat.get("median_relative_residual")
        if med is not None and med > RESIDUAL_WARNING:
            hint = "" if settings.estimate.align or facts["source_kind"] != "bracket" else ", or try --align"
            warnings.warn(f"the analyzer intensities disagree with the filter model: median fit residual "
                          f"{med * 100:.1f}% of S0 (99th percentile {stat['p99_relative_residual'] * 100:.1f}%); "
                          f"see {'residual.png' if settings.output.pictures else 'residual in stokes.nc'} for "
                          f"motion, a passing cloud or exposure drift{hint}",
                          PolarskyWarning, stacklevel=3)
        timing = {"read": op.timing.get("read"), "align": op.timing.get("align"), "estimate": info["estimate_s"],
                  "write_netcdf": self._t_nc, "write_pictures": t_pics}
        timing = {k: (None if v is None else round(v, 4)) for k, v in timing.items()}
        timing["total"] = round(time.perf_counter() - t_start, 4)
        summary = build_summary(**facts, **stat, warnings=caught.messages(), timing_s=timing,
                                outputs=sorted(set(stage.outputs()) - self.before | {"summary.json"}))
        write_json(stage.path("summary.json"), summary)
        return summary


def output_bytes(shape, n_channels: int, n_maps: int, *, pictures: bool = True, compressed: bool = True) -> int:
    """About how many bytes ``polarsky stokes`` writes: the maps plus the pictures.

    The float32 maps deflate to about 0.4 of their size at the default precision and 0.7 at
    full precision on noisy scenes (measured here; smooth scenes compress more).
    """
    from ..estimate.sinks import preview_step

    h, w = shape
    nbytes = 50_000 + int(n_maps * n_channels * h * w * 4 * (0.4 if compressed else 0.7))  # headers and maps
    if pictures:  # 4 PNG figures: axes and labels, and about 1.5 bytes per preview pixel
        step = preview_step(shape)
        nbytes += 4 * (60_000 + int(1.5 * (h // step + 1) * (w // step + 1)))
    return nbytes


class _Timed:
    """A sink that writes blocks to a :class:`~polarsky.write.netcdf.StokesWriter` and times it."""

    def __init__(self, writer):
        self.writer = writer
        writer.seconds = 0.0

    def write(self, r0, r1, products, frame0):
        t = time.perf_counter()
        self.writer.write(r0, r1, products)
        self.writer.seconds += time.perf_counter() - t


def stokes_from_mosaic_values(values, invalid=None, settings=None, *, full_scale: float = 65535.0, srgb: bool = False,
                              **options):
    """The Stokes Dataset of a polarization-mosaic frame already in memory (linear values).

    Parameters
    ----------
    values : ndarray, shape (H, W)
        Linear mosaic values ([0, 1] of full scale).
    invalid : ndarray, shape (H, W), bool, optional
        Raw pixels not to use.
    settings : polarsky.Settings, optional
    full_scale : float
        Native full scale (DN) of the sensor, for the noise model.
    srgb : bool
        The values were sRGB-encoded before linearisation (noise model).
    **options
        Settings by name; ``mosaic`` (the cell) is required, ``mosaic_color``,
        ``demosaic``, ``calibration``, the noise options apply.

    Returns
    -------
    xarray.Dataset
    """
    import numpy as np

    from ..core.noise import NoiseModel
    from ..errors import InputError
    from ..estimate.runner import run_blocks
    from ..estimate.sinks import MemorySink
    from ..estimate.sources import MosaicSource
    from ..mosaic.layout import check_frame_shape, parse_mosaic
    from ..mosaic.methods import validate_method
    from ..write.dataset import stokes_dataset
    from ..write.summary import calibration_facts

    settings = resolve_settings(settings, options)
    mo, est = settings.mosaic, settings.estimate
    if mo.mosaic is None:
        raise InputError("give mosaic=\"a,b;c,d\": the micro-polarizer angles of the 2x2 cell")
    layout = parse_mosaic(mo.mosaic, mo.mosaic_color)
    method = validate_method(mo.demosaic)
    values = np.asarray(values, dtype=np.float32)
    check_frame_shape(values.shape, layout)
    cal = load_calibration(est.calibration)
    k = method.scale
    src = MosaicSource(values, invalid, layout, method, cal, full_scale=full_scale, srgb=srgb)
    noise = NoiseModel(gain_e_per_dn=est.gain_e_per_dn, read_noise_dn=est.read_noise_dn, source=est.noise)
    mem = MemorySink(src.shape, len(src.channels), _names(4))
    with collect_warnings():
        info = run_blocks(src, noise, [mem])
        check_estimate(info, settings, src.channels)
    attrs = {"source_kind": "polarization mosaic", "mosaic": layout.text, "mosaic_color": layout.colour,
             "demosaic": method.name, "demosaic_reference": method.reference, "polarizer": "sensor",
             "analyzer_angles_deg": list(layout.angles_deg), "analysis_matrix": np.round(src.w, 8).tolist(),
             "calibration": calibration_facts(cal, per_pixel=src.per_pixel), "output_pixel_size_px": k,
             "uncertainty_source": info["noise_source"]}
    return stokes_dataset(mem.arrays, channels=src.channels, attrs=attrs)
