"""``polarsky sky``: compare a sky bracket with the clear-sky model and write the results.

Writes into ``out_dir``: ``sky.json`` (the returned dict, docs/schemas/sky.schema.json),
``sky.nc`` (model, residual and geometry maps) and the PNG pictures.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ..errors import InputError
from ._common import collect_warnings, resolve_settings

__all__ = ["run_sky", "prepare_sky", "stokes_products", "products_in_memory", "SKY_PRODUCTS", "lens_of",
           "check_daylight", "check_sky_settings", "SUN_BELOW_HORIZON_DEG"]

#: Sun elevations (apparent, degrees) below which a clear-sky comparison is refused: the
#: single-scattering model describes the daylit sky (civil twilight ends at -6 deg).
SUN_BELOW_HORIZON_DEG = -6.0


#: The products a sky comparison reads.
SKY_PRODUCTS = ("S0", "S1", "S2", "dolp", "aolp", "valid")


def stokes_products(frames, settings) -> dict:
    """numpy Stokes products of the input: one ``stokes.nc``, a bracket, or mosaic frames."""
    from ..read.stokes_file import read_stokes

    frames = [Path(f) for f in frames]
    if len(frames) == 1 and frames[0].suffix.lower() == ".nc":
        return read_stokes(frames[0])
    from ..estimate.runner import run_blocks
    from ..estimate.sinks import MemorySink
    from ._common import check_estimate, open_source

    op = open_source(frames, settings)
    src = op.source
    mem = MemorySink(src.shape, len(src.channels), SKY_PRODUCTS)
    info = run_blocks(src, op.noise, [mem])
    check_estimate(info, settings, src.channels)
    return products_in_memory(mem, op)


def products_in_memory(mem, op) -> dict:
    """The products :func:`stokes_products` gives, from a memory sink of :data:`SKY_PRODUCTS`
    that the row-block runner fed with the blocks of ``op`` (an opened input)."""
    a = mem.arrays
    return {"S": np.stack([a["S0"], a["S1"], a["S2"]]), "dolp": a["dolp"], "aolp": a["aolp"], "valid": a["valid"],
            "channels": op.source.channels, "inputs": op.inputs,
            "attrs": {k: op.facts.get(k) for k in ("polarizer", "analysis_matrix", "analyzer_angles_deg", "orientation")}}


def _turned_quarter(products) -> bool:
    """Whether the maps are shown turned by a quarter turn (Orientation 5..8) from the sensor."""
    try:
        return int(products.get("attrs", {}).get("orientation") or 1) in (5, 6, 7, 8)
    except (TypeError, ValueError):
        return False


def check_daylight(sun: dict, tp: dict) -> None:
    """Refuse a sun below :data:`SUN_BELOW_HORIZON_DEG` (``sun``: :func:`~polarsky.sky.sun.sun_position`,
    ``tp``: :func:`~polarsky.sky.sun.resolve_time_place`)."""
    if sun["elevation_deg"] < SUN_BELOW_HORIZON_DEG:
        raise InputError(f"the sun is {-sun['elevation_deg']:.1f} deg below the horizon at {tp['when'].isoformat()} "
                         f"({tp['latitude_deg']:.4f}, {tp['longitude_deg']:.4f}); the clear-sky model needs a daylit "
                         "sky: check --when (and its UTC offset), --lat and --lon")


def check_sky_settings(settings) -> None:
    """What can be checked of a sky comparison before any frame is read: the lens settings
    (unless the focal length is left to EXIF) and, when the time and place are given, that
    the sun is up.  The batch calls this before its first bracket.

    Raises
    ------
    InputError
    """
    from ..geometry.camera import make_lens
    from ..sky.sun import resolve_time_place, sun_position

    g = settings.geometry
    if g.lens != "pinhole" or g.hfov_deg is not None or g.focal_px is not None or \
            (g.focal_mm is not None and g.sensor_width_mm is not None):
        make_lens(g.lens, 4000, 3000, hfov_deg=g.hfov_deg, focal_px=g.focal_px, focal_mm=g.focal_mm,
                  sensor_width_mm=g.sensor_width_mm, distortion=g.distortion, fov_deg=g.fov_deg)
    if g.when is not None and g.lat is not None and g.lon is not None:
        tp = resolve_time_place(when=g.when, lat=g.lat, lon=g.lon, altitude_m=g.altitude_m)
        sun = sun_position(tp["when"], tp["latitude_deg"], tp["longitude_deg"], altitude_m=tp["altitude_m"],
                           pressure_hpa=g.pressure_hpa, temperature_c=g.temperature_c, delta_t_s=g.delta_t_s)
        check_daylight(sun, tp)


def lens_of(g, width: int, height: int, *, focal_px=None, focal_mm=None):
    """The lens of the geometry settings ``g`` for a ``width`` x ``height`` frame (the focal
    length in pixels or mm may come from elsewhere, e.g. EXIF)."""
    from ..geometry.camera import make_lens

    return make_lens(g.lens, width, height, hfov_deg=g.hfov_deg, focal_px=g.focal_px if focal_px is None else focal_px,
                     focal_mm=g.focal_mm if focal_mm is None else focal_mm, sensor_width_mm=g.sensor_width_mm,
                     distortion=g.distortion, fov_deg=g.fov_deg, circle_center_px=g.circle_center_px,
                     circle_radius_px=g.circle_radius_px)


def prepare_sky(frames, settings, *, stokes=None):
    """Stokes products, the sky geometry and the facts of time, place and lens.

    Returns
    -------
    products : dict
    geom : SkyGeometry
    info : dict
    """
    from ..read.exif import read_metadata
    from ..sky.skymap import SkyGeometry
    from ..sky.sun import resolve_time_place, sun_position

    g = settings.geometry
    products = stokes if stokes is not None else stokes_products(frames, settings)
    first = Path(frames[0]) if frames else None
    if first is None and settings.read.manifest is not None:
        from ..read.manifest import read_manifest

        first = read_manifest(settings.read.manifest).files[0]
    exif = read_metadata(first) if first is not None and first.suffix.lower() != ".nc" else {}
    tp = resolve_time_place(when=g.when, lat=g.lat, lon=g.lon, altitude_m=g.altitude_m, exif=exif)
    sun = sun_position(tp["when"], tp["latitude_deg"], tp["longitude_deg"], altitude_m=tp["altitude_m"],
                       pressure_hpa=g.pressure_hpa, temperature_c=g.temperature_c, delta_t_s=g.delta_t_s)
    check_daylight(sun, tp)
    c, h, w = products["dolp"].shape
    focal_px, focal_mm, focal_source = g.focal_px, g.focal_mm, "option"
    if g.lens == "pinhole" and g.hfov_deg is None and focal_px is None and focal_mm is None:
        if "focal_mm" in exif and g.sensor_width_mm is not None:
            focal_mm, focal_source = exif["focal_mm"], "exif FocalLength"
        elif "focal_35mm" in exif:
            # 35 mm equivalent focal length refers to the 43.27 mm diagonal (CIPA DC-008)
            focal_px, focal_source = exif["focal_35mm"] * np.hypot(w, h) / 43.2666, "exif FocalLengthIn35mmFilm"
    if focal_px is None and focal_mm is not None and g.sensor_width_mm is not None and g.hfov_deg is None \
            and _turned_quarter(products):
        # the sensor's width spans the stored width, which a portrait display shows as its height
        focal_px = float(focal_mm) * h / float(g.sensor_width_mm)
    lens = lens_of(g, w, h, focal_px=focal_px, focal_mm=focal_mm)
    polarizer = g.polarizer or str(products.get("attrs", {}).get("polarizer") or "front")
    if polarizer not in ("front", "sensor"):
        polarizer = "front"
    geom = SkyGeometry(lens, g.yaw_deg, g.pitch_deg, g.roll_deg, sun["azimuth_deg"], sun["elevation_deg"], polarizer)
    info = {"when": tp["when"].isoformat(), "time_source": tp["time_source"], "latitude_deg": tp["latitude_deg"],
            "longitude_deg": tp["longitude_deg"], "altitude_m": tp["altitude_m"], "place_source": tp["place_source"],
            "sun": sun, "lens": lens.describe(), "focal_source": focal_source}
    return products, geom, info


def run_sky(frames=(), out_dir=None, settings=None, *, stokes=None, max_fit_samples: int = 20_000, seed: int = 0,
            warnings=(), **options) -> dict:
    """Compare a sky bracket (or a ``stokes.nc``, or mosaic frames) with the clear-sky model.

    Parameters
    ----------
    frames : list of path
    out_dir : path
        Output folder (published whole).
    settings : polarsky.Settings, optional
    stokes : dict, optional
        Products already in memory (see :func:`stokes_products`).
    warnings : sequence of str
        Warnings raised while ``stokes`` was made (listed first under ``warnings``, as when
        the products are made here).
    **options
        Any setting by name: time, place, lens and orientation (``when``, ``lat``, ``lon``,
        ``hfov_deg``, ``yaw_deg``, ...), the sky comparison (``model``, ``sky_mask``,
        ``solve``, ...) and the bracket options.

    Returns
    -------
    dict
        The ``sky.json`` content.
    """
    from ..sky.models import get_model
    from ..write.jsonio import jsonable, write_json
    from ..write.stage import check_destination, open_stage
    from .sky_compare import compare

    settings = resolve_settings(settings, options)
    check_destination(out_dir)
    sk = settings.sky
    model = get_model(sk.model, **({"neutral_point_deg": sk.neutral_point_deg} if sk.model == "neutral-points" else {}))
    with collect_warnings() as caught:
        products, geom, info = prepare_sky(frames, settings, stokes=stokes)
        inputs = products.get("inputs") or [str(f) for f in frames]
        with open_stage(out_dir, command="sky", inputs=inputs) as stage:
            c, h, w = products["dolp"].shape  # sky.nc's maps; 7 PNG figures of about 60 kB + 1.5 bytes per pixel
            stage.reserve(30_000 + (3 * c + 6) * h * w * 4 + (7 * (60_000 + int(1.5 * min(h * w, 1 << 20)))
                                                              if settings.output.pictures else 0))
            before = set(stage.outputs())
            result = compare(products, geom, info, stage.dir, settings=settings, model=model,
                             max_fit_samples=max_fit_samples, seed=seed, inputs=inputs)
            result["warnings"] = list(dict.fromkeys([*warnings, *caught.messages()]))
            result["outputs"] = sorted(set(stage.outputs()) - before | {"sky.json"})
            result = jsonable(result)
            write_json(stage.path("sky.json"), result)
            stage.publish()
    return result
