"""Mosaic frames -> Stokes Dataset (the mosaic counterpart of the bracket pipeline)."""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from .decode import decode_mosaic
from .methods import validate_method
from .io import read_mosaic_stack
from .layout import check_frame_shape, parse_mosaic

__all__ = ["stokes_from_mosaic_files", "stokes_from_mosaic_values", "run_mosaic_stokes"]


def _load_calibration(calibration):
    if calibration is None:
        return None
    from ..calibration import Calibration, read_calibration

    return calibration if isinstance(calibration, Calibration) else read_calibration(calibration)


#: Sensor values per row block of the estimate (bounds memory, as in the bracket pipeline).
BLOCK_VALUES = 1 << 21


def _margin(layout) -> int:
    """Rows of overlap a block needs so that its interior equals whole-frame processing:
    the Newton method looks 6 px away (7 with a flat calibration's bilinear pre-correction),
    the residual-based noise estimate is smoothed over 5x5 pixels; on colour sensors the 7 px
    are in the packed polarization mosaic (14 sensor rows), plus one cell of colour
    interpolation."""
    return 12 if layout.colour is None else 24


def _window_calibration(cal, s0, s1):
    if cal is None or not cal.pixel:
        return cal
    import dataclasses

    pixel = {k: np.asarray(v)[:, s0:s1] for k, v in cal.pixel.items()}
    shape = [s1 - s0, int(np.asarray(cal.pixel["pixel_gain"]).shape[-1])]
    return dataclasses.replace(cal, pixel=pixel, attrs={**cal.attrs, "sensor_shape": shape})


def _estimate_blocks(values, invalid, layout, method, cal, *, full_scale=65535.0, srgb=False, noise=None,
                     block_rows=None):
    """Decode and estimate in row blocks; yields ``(o0, o1, products, decoded)`` where
    ``o0:o1`` are rows of the output grid and ``products`` the estimate of those rows."""
    from ..pipeline import estimate_block
    from .decode import check_calibration

    values = np.asarray(values, dtype=np.float32)
    invalid = np.zeros(values.shape, bool) if invalid is None else np.asarray(invalid, bool)
    if cal is not None and cal.pixel:
        check_calibration(cal, layout, values.shape)
    h, w = values.shape
    rows = block_rows or max(16, (BLOCK_VALUES // max(w, 1)) // 4 * 4)
    margin = _margin(layout)
    k = method.scale
    level = float(np.mean(np.abs(values)))
    for r0 in range(0, h, rows):
        r1 = min(h, r0 + rows)
        s0, s1 = max(0, r0 - margin), min(h, r1 + margin)
        dec = decode_mosaic(values[s0:s1], invalid[s0:s1], layout, method.name, _window_calibration(cal, s0, s1),
                            scale=level)
        products = estimate_block(dec["intensities"], dec["valid"], dec["w"], solve=dec["solve"], noise=noise,
                                  full_scale=float(full_scale), srgb=bool(srgb))
        a, b = (r0 - s0) // k, (r1 - s0) // k
        yield r0 // k, r1 // k, {n: arr[:, a:b] for n, arr in products.items()}, dec


def _attrs(layout, method, cal, dec) -> dict:
    cal_attr = "none"
    if cal is not None:
        applied = []
        if cal.pixel:
            applied.append("per-pixel analysis vectors (gain, diattenuation, angle)")
        if cal.angle_offset_deg is not None or cal.diattenuation is not None:
            applied.append("angle offset / diattenuation per micro-polarizer position")
        cal_attr = {"file": cal.source, "kind": cal.kind, "created": cal.attrs.get("created"),
                    "applied": applied, "per_pixel": bool(dec["per_pixel"])}
    attrs = {
        "source_kind": "polarization mosaic",
        "mosaic": layout.text,
        "mosaic_colour": layout.colour or "none",
        "demosaic": method.name,
        "demosaic_reference": method.reference,
        "output_pixel_size_px": method.scale,
        "analyzer_angles_deg": list(layout.angles_deg),
        "analyzer_positions": "micro-polarizer angles of the 2x2 cell positions 0..3, row-major",
        "polarizer": "sensor",
        "calibration": cal_attr,
        "calibration_per_pixel": int(bool(dec["per_pixel"])),
        "analysis": dec["w"].tolist(),
    }
    if method.scale == 2:
        attrs["grid"] = ("superpixel: output pixel (y, x) covers sensor rows 2y..2y+1 and columns 2x..2x+1 "
                         "(centre at sensor 2x+0.5, 2y+0.5)")
    return attrs


def _decoded(values, invalid, *, mosaic, mosaic_colour=None, demosaic="bilinear", calibration=None,
             full_scale=65535.0, srgb=False, noise=None, block_rows=None):
    """Decode and estimate the whole frame (block by block): returns (products, channels, attrs)."""
    layout = parse_mosaic(mosaic, mosaic_colour)
    method = validate_method(demosaic)
    values = np.asarray(values, dtype=np.float32)
    check_frame_shape(values.shape, layout)
    cal = _load_calibration(calibration)
    h, w = values.shape
    k = method.scale
    full = None
    dec0 = None
    for o0, o1, products, dec in _estimate_blocks(values, invalid, layout, method, cal, full_scale=full_scale,
                                                  srgb=srgb, noise=noise, block_rows=block_rows):
        if full is None:
            dec0 = dec
            c = products["S0"].shape[0]
            full = {n: np.empty((c, h // k, w // k), a.dtype) for n, a in products.items()}
        for n, arr in products.items():
            full[n][:, o0:o1] = arr
    return full, dec0["channels"], _attrs(layout, method, cal, dec0)


def stokes_from_mosaic_values(values, invalid=None, *, mosaic, mosaic_colour=None, demosaic="bilinear",
                              calibration=None, attrs=None):
    """Stokes Dataset from linear mosaic values already in memory (see :func:`stokes_from_mosaic_files`).

    Parameters
    ----------
    values : ndarray, shape (H, W)
        Linear mosaic values (e.g. [0, 1] of full scale).
    invalid : ndarray, shape (H, W), bool, optional
        Raw pixels not to use.
    """
    from ..dataset import dataset_attrs, stokes_dataset

    products, channels, a = _decoded(values, invalid, mosaic=mosaic, mosaic_colour=mosaic_colour,
                                     demosaic=demosaic, calibration=calibration)
    a.update(attrs or {})
    return stokes_dataset(products, channels=channels, attrs=dataset_attrs(**a))


def _read(frames, layout, bit_depth, black_level, transfer, max_pixels):
    stack = read_mosaic_stack(frames, bit_depth=bit_depth, black_level=black_level, transfer=transfer)
    check_frame_shape(stack.values.shape, layout, source=str(stack.info["files"][0]))
    if max_pixels is not None and stack.values.size > int(max_pixels):
        h, w = stack.values.shape
        raise InputError(f"mosaic frames are {w}x{h} = {stack.values.size} pixels, above --max-pixels "
                         f"{int(max_pixels)}; raise --max-pixels")
    info = stack.info
    attrs = {
        "inputs": info["files"],
        "n_frames_averaged": info["n_frames"],
        "transfer": info["transfer"],
        "bit_depth": info["bit_depth"],
        "black_level": info["black_level"],
        "white_level": info["white_level"],
        "masked_raw_pixels": info["masked_pixels"],
    }
    return stack, attrs


def stokes_from_mosaic_files(frames, *, mosaic, mosaic_colour=None, demosaic="bilinear", bit_depth=None,
                             black_level=None, calibration=None, transfer="auto", max_pixels=None):
    """Stokes maps from one or several raw frames of a polarization-mosaic camera.

    Parameters
    ----------
    frames : sequence of path
        Mosaic frames of one scene (8/16-bit mono PNG/TIFF, or DNG); several are averaged
        before decoding.
    mosaic : str
        2x2 cell of micro-polarizer angles, rows separated by ``;``, e.g. ``"90,45;135,0"``
        (degrees, image convention).
    mosaic_colour : str, optional
        Bayer order of the polarizer cells on colour sensors (RGGB, BGGR, GRBG, GBRG).
    demosaic : str
        ``superpixel``, ``bilinear`` or ``newton`` (see ``DEMOSAIC_METHODS``).
    bit_depth : int, optional
        Significant bits of the data in 16-bit containers (10, 12, ...).
    black_level : float, optional
        Black level in sensor counts.
    calibration : path or Calibration, optional
        A flat (per-pixel) and/or sky (per-position) calibration.
    transfer : {"auto", "linear", "srgb"}
    max_pixels : int, optional
        Refuse frames with more sensor pixels than this (memory guard).

    Returns
    -------
    xarray.Dataset
        Dims (channel, y, x) with S0, S1, S2, dolp, dolp_unbiased, aolp, sigma_dolp,
        sigma_aolp, residual, valid; attrs record the mosaic, method and calibration.

    Raises
    ------
    InputError
        Bad mosaic string, frame size not a multiple of the cell, unreadable frames,
        calibration for another sensor or layout.
    """
    from ..dataset import dataset_attrs, stokes_dataset

    layout = parse_mosaic(mosaic, mosaic_colour)
    validate_method(demosaic)
    stack, attrs = _read(frames, layout, bit_depth, black_level, transfer, max_pixels)
    products, channels, a = _decoded(stack.values, stack.invalid, mosaic=layout, demosaic=demosaic,
                                     calibration=calibration, full_scale=stack.info["white_level"],
                                     srgb=stack.info["transfer"] == "srgb")
    a.update(attrs)
    return stokes_dataset(products, channels=channels, attrs=dataset_attrs(**a))


def run_mosaic_stokes(frames, out_dir, *, mosaic, mosaic_colour=None, demosaic="bilinear", bit_depth=None,
                      black_level=None, calibration=None, transfer="auto", max_pixels=None, noise=None,
                      pictures=True) -> dict:
    """Write ``stokes.nc``, ``summary.json`` and the PNG maps of mosaic frames into ``out_dir``.

    The files are the same as for a bracket (:func:`polarsky.pipeline.run_stokes`) and appear
    only once all are complete.  Options as for :func:`stokes_from_mosaic_files`.

    Returns
    -------
    dict
        The summary (also written to ``summary.json``).
    """
    import time

    from .. import render
    from ..dataset import VARIABLES, NetCDFBlockWriter, dataset_attrs
    from ..pipeline import OutputStage, PreviewSink, StatsSink, write_json

    if out_dir is None:
        raise InputError("--out DIR is required: the folder for stokes.nc, summary.json and the pictures")
    t0 = time.perf_counter()
    layout = parse_mosaic(mosaic, mosaic_colour)
    method = validate_method(demosaic)
    stack, attrs = _read(frames, layout, bit_depth, black_level, transfer, max_pixels)
    t_read = time.perf_counter() - t0
    cal = _load_calibration(calibration)
    hs, ws = stack.values.shape
    k = method.scale
    h, w = hs // k, ws // k
    channels = layout.channels
    c = len(channels)
    names = None
    t_est = t_nc = 0.0
    with OutputStage(out_dir) as stage:
        preview = PreviewSink((h, w))
        stats = StatsSink(c)
        writer = None
        a = None
        try:
            t1 = time.perf_counter()
            for o0, o1, products, dec in _estimate_blocks(
                    stack.values, stack.invalid, layout, method, cal, full_scale=stack.info["white_level"],
                    srgb=stack.info["transfer"] == "srgb", noise=noise):
                t_est += time.perf_counter() - t1
                t2 = time.perf_counter()
                if writer is None:
                    a = _attrs(layout, method, cal, dec)
                    a.update(attrs)
                    names = [n for n in VARIABLES if n in products]
                    writer = NetCDFBlockWriter(stage.path("stokes.nc"), shape=(h, w), channels=channels,
                                               names=names, attrs=dataset_attrs(**a))
                writer.write(o0, o1, products)
                frame0 = products["S0"][None] * np.float32(0.5)
                preview.write(o0, o1, products, frame0)
                stats.write(o0, o1, products, frame0)
                t_nc += time.perf_counter() - t2
                t1 = time.perf_counter()
            writer.commit()
        except BaseException:
            if writer is not None:
                writer.abort()
            raise
        t3 = time.perf_counter()
        pics = render.stokes_pictures(preview.finish(), stage.dir, channels=channels, step=preview.step, polarizer="sensor") if pictures else []
        t_pics = time.perf_counter() - t3
        summary = {
            "inputs": attrs["inputs"],
            "frames": stack.info["n_frames"],
            "source_kind": "polarization mosaic",
            "mosaic": layout.text,
            "mosaic_colour": layout.colour,
            "demosaic": method.name,
            "demosaic_reference": method.reference,
            "analyzer_angles_deg": list(layout.angles_deg),
            "angle_source": "mosaic layout",
            "width": int(w),
            "height": int(h),
            "sensor_width": int(stack.values.shape[1]),
            "sensor_height": int(stack.values.shape[0]),
            "channels": channels,
            "transfer": stack.info["transfer"],
            "bit_depth": stack.info["bit_depth"],
            "black_level": stack.info["black_level"],
            "polarizer": "sensor",
            "calibration": a["calibration"] if a["calibration"] != "none" else None,
            "calibration_per_pixel": bool(a["calibration_per_pixel"]),
            "masked_raw_pixels": stack.info["masked_pixels"],
            "uncertainty_source": (noise.resolved_source(4) if noise is not None else "residual"),
            **stats.summary(channels),
            "outputs": ["stokes.nc", "summary.json"] + [p.name for p in pics],
        }
        summary["timing_s"] = {"read": round(t_read, 4), "decode_estimate": round(t_est, 4),
                               "write_blocks": round(t_nc, 4), "write_pictures": round(t_pics, 4),
                               "total": round(time.perf_counter() - t0, 4)}
        write_json(stage.path("summary.json"), summary)
        stage.publish()
    return summary
