"""From frames to Stokes maps, block by block.

Data flows one way: :func:`polarsky.ingest.load_bracket` -> (optional
:func:`polarsky.align.align_bracket`) -> :func:`estimate_block` over row blocks -> sinks
(in-memory arrays for the Python API, a NetCDF writer, decimated previews for pictures,
running statistics, region sums for advice).  Peak memory is the native frames plus a
few row blocks, whatever the frame size.
"""

from __future__ import annotations

import json
import os
import shutil
import sys
import time
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from . import stokes as sk
from .calibration import Calibration, read_calibration
from .dataset import VARIABLES, NetCDFBlockWriter, dataset_attrs, stokes_dataset
from .errors import InputError, PolarskyWarning
from .ingest import Bracket, load_bracket

__all__ = [
    "NoiseModel",
    "Settings",
    "estimate_block",
    "analysis_matrices",
    "process_bracket",
    "stokes_from_files",
    "stokes_from_bracket",
    "run_stokes",
    "OutputStage",
    "DEFAULT_FULL_WELL_E",
]

#: Full-well capacity assumed when no gain is given (electrons at full scale).
DEFAULT_FULL_WELL_E = 20000.0
#: Median relative fit residual above which the frames are said to disagree.
RESIDUAL_WARNING = 0.03
#: Target number of float32 values per frame in one row block.
BLOCK_VALUES = 1 << 20


@dataclass
class NoiseModel:
    """Per-pixel intensity noise: shot noise plus read noise (plus quantization).

    Parameters
    ----------
    gain_e_per_dn : float, optional
        Electrons per digital number of the files; default assumes a full well of
        :data:`DEFAULT_FULL_WELL_E` electrons at full scale.
    read_noise_dn : float
        Read noise in digital numbers of the files.
    source : {"auto", "model", "residual"}
        ``auto`` uses the fit residual when there are more than 3 frames and no gain was
        given, the noise model otherwise.
    """

    gain_e_per_dn: float | None = None
    read_noise_dn: float = 1.0
    source: str = "auto"

    def resolved_source(self, n_frames: int) -> str:
        if self.source == "auto":
            return "residual" if (n_frames > 3 and self.gain_e_per_dn is None) else "model"
        if self.source == "residual" and n_frames <= 3:
            raise InputError("--noise residual needs more than 3 frames; use --noise model (give --gain-e-per-dn)")
        return self.source

    def variance(self, mean_intensity, full_scale: float, srgb: bool):
        """Variance (normalized linear units squared) at a mean linear intensity."""
        x = np.maximum(mean_intensity, 0)
        fw = DEFAULT_FULL_WELL_E if self.gain_e_per_dn is None else self.gain_e_per_dn * full_scale
        var = x / np.float32(fw)
        q = np.float32((self.read_noise_dn ** 2 + 1.0 / 12.0) / full_scale ** 2)
        if srgb:  # quantization/read noise happens on encoded values: scale by (dL/dV)^2
            slope2 = np.float32((2.4 / 1.055) ** 2) * np.power(x, np.float32(2 * 1.4 / 2.4))
            slope2 = np.maximum(slope2, np.float32(1 / 12.92 ** 2))
            var += q * slope2
        else:
            var += q
        return var


@dataclass
class Settings:
    """Options of the Stokes estimate (mirrors the command-line options)."""

    extinction: float | None = None
    angle_offset_deg: float = 0.0
    align: bool = False
    calibration: Calibration | None = None
    noise: NoiseModel = field(default_factory=NoiseModel)


def estimate_block(intensities, valid, w, *, weights=None, noise=None, solve=None,
                   full_scale: float = 65535.0, srgb: bool = False, smooth_residual: bool = True) -> dict:
    """Stokes products for one block of pixels.

    Parameters
    ----------
    intensities : ndarray, shape (N, C, h, w), float32
        Linear intensities of N frames.
    valid : ndarray, shape (C, h, w), bool
        Pixels usable in every frame.
    w : ndarray, shape (N, 3) or (C, N, 3)
        Analysis matrix (per channel if 3-D).
    weights : array_like, shape (N,), optional
        Relative inverse variances of the frames.
    noise : NoiseModel, optional
        Noise model; default :class:`NoiseModel`.
    solve : ndarray, shape (C, 3, N, h, w), optional
        Per-pixel solve matrices (per-pixel calibration) used instead of ``w`` for S.
    full_scale : float
        Native full scale of the frames (for the noise model).
    srgb : bool
        Frames were sRGB-encoded (noise model).

    Returns
    -------
    dict
        ``S0, S1, S2, dolp, dolp_unbiased, aolp, sigma_dolp, sigma_aolp`` (and
        ``residual`` when N > 3) as float32 (C, h, w) with NaN where not valid, and bool
        ``valid``.
    """
    noise = noise or NoiseModel()
    data = np.asarray(intensities, dtype=np.float32)
    n, c = data.shape[:2]
    wm = np.asarray(w, dtype=np.float64)
    if wm.ndim == 2:
        wm = np.broadcast_to(wm, (c,) + wm.shape)
    source = noise.resolved_source(n)
    shape = data.shape[1:]
    out = {name: np.empty(shape, np.float32) for name in
           ("S0", "S1", "S2", "dolp", "dolp_unbiased", "aolp", "sigma_dolp", "sigma_aolp")}
    out["residual"] = np.empty(shape, np.float32) if n > 3 else None
    valid = np.broadcast_to(np.asarray(valid, dtype=bool), shape)
    fw = DEFAULT_FULL_WELL_E if noise.gain_e_per_dn is None else noise.gain_e_per_dn * full_scale
    q_var = (noise.read_noise_dn ** 2 + 1.0 / 12.0) / full_scale ** 2
    for ci in range(c):
        frames = data[:, ci]
        s = np.empty((3,) + frames.shape[1:], np.float32)
        cov = sk.stokes_covariance(wm[ci], weights)
        var = np.empty(frames.shape[1:], np.float32)
        res = out["residual"][ci] if n > 3 else np.empty((1,) * (frames.ndim - 1), np.float32)
        if solve is not None:
            sk.fit_stokes_per_pixel(frames, solve[ci], out=s)
            _numpy_block(frames, s, ~valid[ci], wm[ci], out, ci, res, var, source, noise, full_scale, srgb)
        else:
            from . import _kernels

            npx = int(np.prod(frames.shape[1:]))
            _kernels.pass_stokes(
                frames.reshape(n, npx), (~valid[ci]).reshape(npx),
                sk.solve_matrix(wm[ci], weights).astype(np.float32), wm[ci].astype(np.float32),
                s.reshape(3, npx), out["dolp"][ci].reshape(npx), out["aolp"][ci].reshape(npx),
                res.reshape(-1), var.reshape(npx),
                1 if source == "residual" else 0, np.float32(1.0 / fw), np.float32(q_var), bool(srgb))
        if source == "residual" and smooth_residual and var.ndim == 2 and min(var.shape) >= 5:
            import cv2

            finite = np.isfinite(var)
            v0 = np.where(finite, var, 0).astype(np.float32)
            num = cv2.blur(v0, (5, 5), borderType=cv2.BORDER_REFLECT)
            den = cv2.blur(finite.astype(np.float32), (5, 5), borderType=cv2.BORDER_REFLECT)
            with np.errstate(invalid="ignore", divide="ignore"):
                var = np.where(finite, num / den, np.nan).astype(np.float32)
        from . import _kernels

        c6 = np.array([cov[0, 0], cov[1, 1], cov[2, 2], cov[0, 1], cov[0, 2], cov[1, 2]], np.float32)
        npx = int(np.prod(frames.shape[1:]))
        _kernels.pass_uncertainty(s.reshape(3, npx), out["dolp"][ci].reshape(npx), var.reshape(npx), c6,
                                  out["sigma_dolp"][ci].reshape(npx), out["sigma_aolp"][ci].reshape(npx),
                                  out["dolp_unbiased"][ci].reshape(npx))
        out["S0"][ci], out["S1"][ci], out["S2"][ci] = s
    if out["residual"] is None:
        del out["residual"]
    out["valid"] = valid & np.isfinite(out["S0"])
    return out


def _numpy_block(frames, s, invalid, w, out, ci, res, var, source, noise, full_scale, srgb):
    """Reference numpy path (used with per-pixel solve matrices): fills dolp, aolp, residual, var."""
    n = frames.shape[0]
    bad = invalid | ~(s[0] > 0)
    s[:, bad] = np.nan
    sk.dolp_aolp(s, out_dolp=out["dolp"][ci], out_aolp=out["aolp"][ci])
    if n > 3:
        res[...] = sk.residual_rms(frames, w, s)
    if source == "residual":
        var[...] = res * res
    else:
        var[...] = noise.variance(frames.mean(axis=0), full_scale, srgb)
    var[bad] = np.nan


def analysis_matrices(bracket: Bracket, settings: Settings) -> tuple[np.ndarray, dict]:
    """Per-channel analysis matrices (C, N, 3) from angles, extinction and calibration."""
    c = bracket.n_channels
    cal = settings.calibration
    d_opt = None if settings.extinction is None else sk.diattenuation_from_extinction(settings.extinction)
    mats = []
    used = {"angle_offset_deg": [], "diattenuation": []}
    if cal is not None and cal.pixel:
        raise InputError(f"calibration {cal.source} holds per-pixel (mosaic sensor) corrections; use it with --mosaic frames")
    if cal is not None and cal.angle_offset_deg is not None:
        n_cal = np.asarray(cal.angle_offset_deg).shape[-1]
        if n_cal not in (1, c):
            raise InputError(f"calibration {cal.source} has {n_cal} channel(s) but the frames have {c}; use a calibration made with the same kind of frames")
    for ci in range(c):
        off, d_cal = (0.0, None) if cal is None else cal.channel_params(ci)
        d = d_opt if d_opt is not None else (d_cal if d_cal is not None else 1.0)
        offset = settings.angle_offset_deg + off
        mats.append(sk.analysis_matrix(bracket.angles_deg, diattenuation=d, angle_offset_deg=offset))
        used["angle_offset_deg"].append(offset)
        used["diattenuation"].append(d)
    return np.stack(mats), used


def _block_rows(shape, n, c) -> int:
    h, w = shape
    return int(max(8, min(h, BLOCK_VALUES // max(1, w * c))))


def process_bracket(bracket: Bracket, settings: Settings, sinks, *, progress: bool = False) -> dict:
    """Run the estimate over ``bracket`` in row blocks, feeding each block to ``sinks``.

    Each sink has ``write(r0, r1, products, values)``; returns run information.
    """
    from .align import align_bracket

    info: dict = {"timing_s": {}}
    t0 = time.perf_counter()
    if settings.align:
        shifts = align_bracket(bracket)
        info["shifts_px"] = shifts.round(3).tolist()
    info["timing_s"]["align"] = time.perf_counter() - t0
    w, used = analysis_matrices(bracket, settings)
    info["analysis"] = used
    weights = None if np.allclose(bracket.exposure_scale, 1.0) else bracket.exposure_scale
    full_scale = max(fr.full_scale for fr in bracket.frames)
    srgb = any(e == "srgb" for e in bracket.encodings)
    h, width = bracket.shape
    rows = _block_rows(bracket.shape, bracket.n, bracket.n_channels)
    counts = np.zeros((bracket.n, 2), dtype=np.int64)
    t_est = 0.0
    t_sink = 0.0
    bar = None
    if progress and sys.stderr.isatty():
        from tqdm import tqdm

        bar = tqdm(total=h, unit="row", desc="stokes", leave=False, file=sys.stderr)
    buf = None
    try:
        for r0 in range(0, h, rows):
            r1 = min(h, r0 + rows)
            t1 = time.perf_counter()
            if buf is None or buf.shape[2] != r1 - r0:
                buf = np.empty((bracket.n, bracket.n_channels, r1 - r0, width), np.float32)
            values, invalid, cnt = bracket.linear_block(r0, r1, out=buf)
            counts += cnt
            products = estimate_block(values, ~invalid, w, weights=weights, noise=settings.noise,
                                      full_scale=full_scale, srgb=srgb)
            t2 = time.perf_counter()
            for sink in sinks:
                sink.write(r0, r1, products, values)
            t_est += t2 - t1
            t_sink += time.perf_counter() - t2
            if bar is not None:
                bar.update(r1 - r0)
    finally:
        if bar is not None:
            bar.close()
    info["timing_s"]["estimate"] = t_est
    info["timing_s"]["sinks"] = t_sink
    info["saturated_px"] = counts[:, 0].tolist()
    info["black_px"] = counts[:, 1].tolist()
    info["noise_source"] = settings.noise.resolved_source(bracket.n)
    for k, fr in enumerate(bracket.frames):
        if counts[k, 0]:
            warnings.warn(f"{counts[k, 0]} pixel values saturated (>= 98% of full scale) in {fr.path.name} were masked",
                          PolarskyWarning, stacklevel=2)
        if counts[k, 1]:
            warnings.warn(f"{counts[k, 1]} pixel values at the black level in {fr.path.name} were masked",
                          PolarskyWarning, stacklevel=2)
    return info


class MemorySink:
    """Collect full-resolution products in memory (for the Python API)."""

    def __init__(self, shape, n_channels, names):
        h, w = shape
        self.arrays = {n: np.empty((n_channels, h, w), bool if n == "valid" else np.float32) for n in names}

    def write(self, r0, r1, products, values):
        for name, arr in self.arrays.items():
            arr[:, r0:r1] = products[name]


class NetCDFSink:
    """Stream blocks to a :class:`~polarsky.dataset.NetCDFBlockWriter`; times itself."""

    def __init__(self, writer: NetCDFBlockWriter):
        self.writer = writer
        self.seconds = 0.0

    def write(self, r0, r1, products, values):
        t = time.perf_counter()
        self.writer.write(r0, r1, products)
        self.seconds += time.perf_counter() - t


class PreviewSink:
    """Decimated copies (every ``step``-th row and column) for pictures, plus frame 0."""

    def __init__(self, shape, max_side: int = 1024):
        h, w = shape
        self.step = max(1, int(np.ceil(max(h, w) / max_side)))
        self.arrays: dict = {}
        self._parts: dict = {}

    def write(self, r0, r1, products, values):
        s = self.step
        first = (-r0) % s
        sel = slice(first, r1 - r0, s)
        for name in ("S0", "S1", "S2", "dolp", "dolp_unbiased", "aolp", "valid", "residual", "sigma_aolp"):
            if name in products:
                self._parts.setdefault(name, []).append(products[name][:, sel, ::s].copy())
        self._parts.setdefault("frame0", []).append(values[0][:, sel, ::s].copy())

    def finish(self) -> dict:
        self.arrays = {k: np.concatenate(v, axis=1) for k, v in self._parts.items()}
        return self.arrays


class StatsSink:
    """Running statistics of the result over valid pixels (for summary.json)."""

    def __init__(self, n_channels, max_samples: int = 200_000, seed: int = 0):
        c = n_channels
        self.valid = np.zeros(c, np.int64)
        self.total = 0
        self.sum_dolp = np.zeros(c)
        self.sum_dolp_unb = np.zeros(c)
        self.sum_s = np.zeros((c, 3))
        self.sum_sigma_aolp = np.zeros(c)
        self._res: list = []
        self._rng = np.random.default_rng(seed)
        self._max = max_samples

    def write(self, r0, r1, products, values):
        v = products["valid"]
        self.total += v[0].size
        for ci in range(v.shape[0]):
            m = v[ci]
            self.valid[ci] += int(m.sum())
            self.sum_dolp[ci] += float(np.sum(products["dolp"][ci][m], dtype=np.float64))
            self.sum_dolp_unb[ci] += float(np.sum(products["dolp_unbiased"][ci][m], dtype=np.float64))
            self.sum_sigma_aolp[ci] += float(np.sum(products["sigma_aolp"][ci][m], dtype=np.float64))
            for j, name in enumerate(("S0", "S1", "S2")):
                self.sum_s[ci, j] += float(np.sum(products[name][ci][m], dtype=np.float64))
        if "residual" in products:
            rel = (products["residual"] / products["S0"])[v]
            if rel.size:
                take = min(rel.size, max(1, self._max // 64))
                self._res.append(self._rng.choice(rel, size=take, replace=False) if rel.size > take else rel)

    def summary(self, channels) -> dict:
        n = np.maximum(self.valid, 1)
        out = {
            "pixels": int(self.total),
            "valid_pixels": {ch: int(self.valid[i]) for i, ch in enumerate(channels)},
            "mean_dolp": {ch: _r(self.sum_dolp[i] / n[i]) if self.valid[i] else None for i, ch in enumerate(channels)},
            "mean_dolp_unbiased": {ch: _r(self.sum_dolp_unb[i] / n[i]) if self.valid[i] else None for i, ch in enumerate(channels)},
            "mean_sigma_aolp_deg": {ch: _r(self.sum_sigma_aolp[i] / n[i]) if self.valid[i] else None for i, ch in enumerate(channels)},
        }
        tot = self.sum_s.sum(axis=0)
        if tot[0] > 0:
            dolp, aolp = sk.dolp_aolp(tot.reshape(3, 1))
            out["scene_dolp"] = _r(float(dolp[0]))
            out["scene_aolp_deg"] = _r(float(aolp[0]))
        if self._res:
            rel = np.concatenate(self._res)
            out["residual_relative_median"] = _r(float(np.median(rel)))
            out["residual_relative_p99"] = _r(float(np.percentile(rel, 99)))
        return out


def _r(x, nd: int = 6):
    return None if x is None or not np.isfinite(x) else round(float(x), nd)


def _settings_from_kwargs(extinction=None, angle_offset_deg=0.0, align=False, calibration=None,
                          gain_e_per_dn=None, read_noise_dn=1.0, noise="auto") -> Settings:
    if isinstance(calibration, (str, os.PathLike)):
        calibration = read_calibration(calibration)
    if noise not in ("auto", "model", "residual"):
        raise InputError(f"--noise {noise!r} is not one of auto, model, residual")
    if gain_e_per_dn is not None and not gain_e_per_dn > 0:
        raise InputError(f"--gain-e-per-dn must be positive, got {gain_e_per_dn}")
    if extinction is not None:
        sk.diattenuation_from_extinction(extinction)
    return Settings(extinction=extinction, angle_offset_deg=float(angle_offset_deg or 0.0), align=bool(align),
                    calibration=calibration,
                    noise=NoiseModel(gain_e_per_dn=gain_e_per_dn, read_noise_dn=float(read_noise_dn), source=noise))


_BRACKET_KEYS = ("angles_deg", "manifest", "transfer", "max_pixels", "exposures_s")
_SETTING_KEYS = ("extinction", "angle_offset_deg", "align", "calibration", "gain_e_per_dn", "read_noise_dn", "noise")


def _split_kwargs(kwargs):
    unknown = set(kwargs) - set(_BRACKET_KEYS) - set(_SETTING_KEYS) - {"progress"}
    if unknown:
        raise TypeError(f"unknown option(s): {', '.join(sorted(unknown))}")
    b = {k: kwargs[k] for k in _BRACKET_KEYS if k in kwargs}
    s = {k: kwargs[k] for k in _SETTING_KEYS if k in kwargs}
    return b, s


def _attrs(bracket: Bracket, settings: Settings, info: dict, **extra) -> dict:
    cal = settings.calibration
    return dataset_attrs(
        inputs=[str(p) for p in bracket.paths],
        analyzer_angles_deg=bracket.angles_deg.tolist(),
        angle_source=bracket.angle_source,
        transfer=sorted(set(bracket.encodings)) if len(set(bracket.encodings)) > 1 else bracket.encodings[0],
        polarizer="front",
        exposure_scale=bracket.exposure_scale.tolist(),
        exposure_source=bracket.exposure_source,
        extinction_ratio=settings.extinction if settings.extinction is not None else "ideal",
        analysis=info.get("analysis"),
        calibration=("none" if cal is None else {"file": cal.source, "kind": cal.kind,
                                                  "created": cal.attrs.get("created")}),
        aligned=int(bool(settings.align)),
        shifts_px=info.get("shifts_px"),
        uncertainty_source=info.get("noise_source"),
        **extra,
    )


def stokes_from_bracket(bracket: Bracket, settings: Settings | None = None, *, progress: bool = False):
    """Stokes Dataset (in memory) of an already loaded :class:`~polarsky.ingest.Bracket`."""
    settings = settings or Settings()
    names = [n for n in VARIABLES if n != "residual" or bracket.n > 3]
    mem = MemorySink(bracket.shape, bracket.n_channels, names)
    info = process_bracket(bracket, settings, [mem], progress=progress)
    return stokes_dataset(mem.arrays, channels=bracket.channels, attrs=_attrs(bracket, settings, info))


def stokes_from_files(frames=(), **options):
    """Load a bracket and return its Stokes ``xarray.Dataset`` (the Python API).

    Parameters
    ----------
    frames : sequence of path-like
        Frame files (may be empty with ``manifest``).
    **options
        ``angles_deg``, ``manifest``, ``transfer`` ("auto"|"linear"|"srgb"), ``max_pixels``,
        ``exposures_s``, ``extinction`` (ER = Tmax/Tmin), ``angle_offset_deg``, ``align``,
        ``calibration`` (path or :class:`~polarsky.calibration.Calibration`),
        ``gain_e_per_dn``, ``read_noise_dn``, ``noise`` ("auto"|"model"|"residual"),
        ``progress``.

    Returns
    -------
    xarray.Dataset
        Dims (channel, y, x); variables per :data:`polarsky.dataset.VARIABLES`.

    Examples
    --------
    >>> import polarsky
    >>> ds = polarsky.stokes_from_files(["a_000deg.png", "a_045deg.png", "a_090deg.png"])  # doctest: +SKIP
    >>> ds["dolp"].sel(channel="L").plot()  # doctest: +SKIP
    """
    b_kw, s_kw = _split_kwargs(options)
    bracket = load_bracket(frames, **b_kw)
    settings = _settings_from_kwargs(**s_kw)
    return stokes_from_bracket(bracket, settings, progress=bool(options.get("progress", False)))


class OutputStage:
    """Write outputs into a hidden staging folder inside ``out_dir``; publish all at once.

    Nothing appears under its final name until :meth:`publish`; on failure
    :meth:`discard` removes the staging folder, so a failed run leaves no partial files.
    """

    def __init__(self, out_dir):
        self.out_dir = Path(out_dir)
        if self.out_dir.exists() and not self.out_dir.is_dir():
            raise InputError(f"--out {self.out_dir} exists and is not a folder; give a folder path")
        self.out_dir.mkdir(parents=True, exist_ok=True)
        self.dir = self.out_dir / f".polarsky-staging-{os.getpid()}-{time.time_ns()}"
        self.dir.mkdir()

    def path(self, name: str) -> Path:
        return self.dir / name

    def publish(self) -> list[Path]:
        done = []
        for p in sorted(self.dir.iterdir()):
            if p.name.startswith("."):
                continue
            dest = self.out_dir / p.name
            os.replace(p, dest)
            done.append(dest)
        shutil.rmtree(self.dir, ignore_errors=True)
        return done

    def discard(self) -> None:
        shutil.rmtree(self.dir, ignore_errors=True)

    def __enter__(self):
        return self

    def __exit__(self, exc_type, exc, tb):
        if exc_type is not None:
            self.discard()
        return False


def write_json(path, obj) -> None:
    tmp = Path(path).with_name(f".{Path(path).name}.partial")
    tmp.write_text(json.dumps(obj, indent=2, allow_nan=False, default=_json_default) + "\n")
    os.replace(tmp, path)


def _json_default(o):
    if isinstance(o, np.generic):
        return o.item()
    if isinstance(o, np.ndarray):
        return o.tolist()
    if isinstance(o, Path):
        return str(o)
    raise TypeError(type(o).__name__)


def run_stokes(frames=(), out_dir=None, *, pictures: bool = True, **options) -> dict:
    """``polarsky stokes``: write ``stokes.nc``, ``summary.json`` and pictures into ``out_dir``.

    Parameters
    ----------
    frames : sequence of path-like
    out_dir : path-like
        Output folder (created if needed).  Files appear only when all are complete.
    pictures : bool
        Write the PNG maps.
    **options
        As for :func:`stokes_from_files`.

    Returns
    -------
    dict
        The summary (also written to ``summary.json``).
    """
    from . import render

    if out_dir is None:
        raise InputError("--out DIR is required: the folder for stokes.nc, summary.json and the pictures")
    t_start = time.perf_counter()
    progress = bool(options.pop("progress", False))
    b_kw, s_kw = _split_kwargs(options)
    t0 = time.perf_counter()
    bracket = load_bracket(frames, **b_kw)
    settings = _settings_from_kwargs(**s_kw)
    t_decode = time.perf_counter() - t0
    names = [n for n in VARIABLES if n != "residual" or bracket.n > 3]
    with OutputStage(out_dir) as stage:
        writer = NetCDFBlockWriter(stage.path("stokes.nc"), shape=bracket.shape, channels=bracket.channels,
                                   names=names, attrs={})
        preview = PreviewSink(bracket.shape)
        stats = StatsSink(bracket.n_channels)
        nc_sink = NetCDFSink(writer)
        try:
            info = process_bracket(bracket, settings, [nc_sink, preview, stats], progress=progress)
            t1 = time.perf_counter()
            writer.set_attrs(_attrs(bracket, settings, info))
            writer.commit()
            t_nc = time.perf_counter() - t1 + nc_sink.seconds
        except BaseException:
            writer.abort()
            raise
        t2 = time.perf_counter()
        prev = preview.finish()
        pics = render.stokes_pictures(prev, stage.dir, channels=bracket.channels, step=preview.step) if pictures else []
        t_pics = time.perf_counter() - t2
        summary = {
            "inputs": [str(p) for p in bracket.paths],
            "frames": bracket.n,
            "analyzer_angles_deg": bracket.angles_deg.tolist(),
            "angle_source": bracket.angle_source,
            "width": bracket.shape[1],
            "height": bracket.shape[0],
            "channels": bracket.channels,
            "transfer": bracket.encodings,
            "polarizer": "front",
            "exposure_scale": bracket.exposure_scale.tolist(),
            "exposure_source": bracket.exposure_source,
            "condition_number": round(sk.check_angles(bracket.angles_deg, warn_condition=np.inf), 4),
            "extinction_ratio": settings.extinction,
            "analysis": info["analysis"],
            "calibration": None if settings.calibration is None else settings.calibration.source,
            "aligned": settings.align,
            "shifts_px": info.get("shifts_px"),
            "saturated_px": info["saturated_px"],
            "black_px": info["black_px"],
            "uncertainty_source": info["noise_source"],
            **stats.summary(bracket.channels),
            "outputs": ["stokes.nc", "summary.json"] + [p.name for p in pics],
        }
        med = summary.get("residual_relative_median")
        if med is not None and med > RESIDUAL_WARNING:
            warnings.warn(f"frames disagree with the polarizer model: median fit residual {med * 100:.1f}% of S0 "
                          f"(99th percentile {summary['residual_relative_p99'] * 100:.1f}%); see residual.png for "
                          "motion, a passing cloud or exposure drift" + ("" if settings.align else ", or try --align"),
                          PolarskyWarning, stacklevel=2)
        summary["timing_s"] = {
            "decode": round(t_decode, 4),
            "align": round(info["timing_s"]["align"], 4),
            "estimate": round(info["timing_s"]["estimate"], 4),
            "write_netcdf": round(t_nc, 4),
            "write_pictures": round(t_pics, 4),
        }
        summary["timing_s"]["total"] = round(time.perf_counter() - t_start, 4)
        write_json(stage.path("summary.json"), summary)
        stage.publish()
    return summary
