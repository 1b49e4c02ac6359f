"""Fast pictures: the figure drawn once and cached, the data pasted in, the PNG written directly.

A picture's *template* (title, axis labels and ticks, colour key, notes) depends only on its
size and words, not on the data, so it is drawn once by matplotlib, kept in memory and in a
cache folder (``$XDG_CACHE_HOME/polarsky`` or ``~/.cache/polarsky``; set
``POLARSKY_CACHE=off`` to keep it in memory only), together with the pixel box the data image
fills.  Each picture then only colours its data through a lookup table, pastes it into the
box (nearest-neighbour, as matplotlib draws images with ``interpolation="nearest"``) and
encodes the PNG with OpenCV: no figure per map, and no matplotlib import once the cache is
warm.

A template can also keep what is drawn *over* the data (a legend inside the axes: an RGBA
overlay), the pixel extent and data limits of each of its axes (to draw lines in data
coordinates), the extent of named artists, and *text slots*: where matplotlib would have put
a text that carries data (a number in a title or legend), with its font, so that
:mod:`.marks` writes it there without matplotlib.
"""

from __future__ import annotations

import functools
import hashlib
import json
import os
import threading
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from ..._version import __version__
from ...palette import CHECKER_GREYS

__all__ = ["Template", "template", "colour_lut", "colourize", "checker_rgb", "compose", "write_png", "DPI",
           "display_lut", "display_srgb", "encode_png", "checker_grey"]

#: Resolution of every picture (dots per inch of the matplotlib figure).
DPI = 110
_MEMORY: dict = {}
_DRAWING = threading.Lock()
#: version of what a cached template holds (part of every cache key)
_FORMAT = 2


@dataclass(frozen=True)
class Template:
    """A drawn figure without its data.

    Attributes
    ----------
    rgb : ndarray, (H, W, 3) uint8
    box : tuple
        The data box ``(x0, y0, x1, y1)`` of the first axes in pixels (x1, y1 exclusive),
        inside the axes frame.
    boxes : tuple of tuple
        The data box of every axes, in drawing order (``boxes[0] == box``).
    axes : tuple of tuple
        The extent ``(left, top, right, bottom)`` of every axes in pixels (float; pixel edges,
        top-left origin), where its data limits lie.
    limits : tuple of tuple
        The data limits ``(x at left, x at right, y at bottom, y at top)`` of every axes.
    overlay : ndarray or None
        (n, 4) uint8 RGBA (not premultiplied) of the pixels ``overlay_at`` (flat indices into
        the (H, W) picture) that the artists matplotlib draws above the data cover (a legend
        inside the axes, the frame).
    texts : dict
        Text slots, name -> ``{"x", "y", "ha", "size_pt", "bold", "colour"}``: the anchor
        ``x`` (left, centre or right edge after ``ha``) and baseline ``y`` in pixels.
    extents : dict
        Name -> ``(left, top, right, bottom)`` pixel extent of a named artist.
    """

    rgb: np.ndarray
    box: tuple
    boxes: tuple = ()
    axes: tuple = ()
    limits: tuple = ()
    overlay: np.ndarray | None = None
    overlay_at: np.ndarray | None = None
    texts: dict = field(default_factory=dict)
    extents: dict = field(default_factory=dict)


def _cache_dir() -> Path | None:
    if os.environ.get("POLARSKY_CACHE", "").lower() in ("off", "0", "no"):
        return None
    root = os.environ.get("XDG_CACHE_HOME") or os.path.join(os.path.expanduser("~"), ".cache")
    path = Path(root) / "polarsky" / "pictures"
    try:
        path.mkdir(parents=True, exist_ok=True)
    except OSError:
        return None
    return path


@functools.lru_cache(maxsize=1)
def _matplotlib_version() -> str:
    """Which matplotlib draws the templates: its package file's size and time, found without
    importing it (a different matplotlib draws, and caches, its own templates)."""
    import importlib.util

    spec = importlib.util.find_spec("matplotlib")
    if spec is None or not spec.origin:  # pragma: no cover - matplotlib is a dependency
        return "?"
    st = os.stat(spec.origin)
    return f"{st.st_size}-{st.st_mtime_ns}"


def _key(kind: str, params: dict) -> str:
    text = json.dumps({"kind": kind, "polarsky": __version__, "matplotlib": _matplotlib_version(),
                       "format": _FORMAT, **params},
                      sort_keys=True)
    return kind + "-" + hashlib.sha256(text.encode()).hexdigest()[:24]


def _cached(key: str, make):
    """``make()`` -> dict of arrays, kept in memory and in the cache folder under ``key``."""
    if key in _MEMORY:
        return _MEMORY[key]
    folder = _cache_dir()
    path = None if folder is None else folder / f"{key}.npz"
    if path is not None and path.is_file():
        try:
            with np.load(path) as z:
                value = {k: z[k] for k in z.files}
            _MEMORY[key] = value
            return value
        except (OSError, ValueError):
            pass
    with _DRAWING:  # matplotlib is not thread-safe: one template at a time
        if key in _MEMORY:
            return _MEMORY[key]
        value = make()
        _MEMORY[key] = value
    if path is not None:
        tmp = path.with_name(f".{path.name}.{os.getpid()}.tmp.npz")
        try:
            np.savez(tmp, **value)
            os.replace(tmp, path)
        except OSError:
            if tmp.exists():
                tmp.unlink()
    return value


def template(kind: str, params: dict, draw) -> Template:
    """The cached template ``kind`` with ``params``.

    ``draw(params)`` returns ``(figure, axes)``, whose axes' area receives the data, or a dict
    with ``"figure"``, ``"axes"`` (a list: one data box each), and optionally ``"overlay"``
    (artists drawn over the data, kept apart as RGBA; with all the spines of an axes among
    them, its data box is the whole axes, framed as matplotlib frames it), ``"texts"`` (name
    -> a text artist whose place and font become a slot; the artist itself is not drawn) and
    ``"extents"`` (name -> an artist whose pixel extent is kept).
    """
    def make():
        from matplotlib.backends.backend_agg import FigureCanvasAgg
        from matplotlib.colors import to_hex

        spec = draw(params)
        if isinstance(spec, tuple):
            spec = {"figure": spec[0], "axes": [spec[1]]}
        fig, axes = spec["figure"], list(spec["axes"])
        over, texts = list(spec.get("overlay", ())), dict(spec.get("texts", {}))
        canvas = FigureCanvasAgg(fig)
        canvas.draw()  # lays the figure out once; then frozen, so what is hidden below moves nothing
        fig.set_layout_engine("none")
        renderer = canvas.get_renderer()
        height = int(renderer.height)

        def extent(artist):
            bb = artist.get_window_extent(renderer)
            return [float(bb.x0), height - float(bb.y1), float(bb.x1), height - float(bb.y0)]

        slots = {}
        for name, t in texts.items():
            bb = t.get_window_extent(renderer)
            _, _, descent = renderer.get_text_width_height_descent("lp", t.get_fontproperties(), ismath=False)
            ha = t.get_horizontalalignment()
            x = {"left": bb.x0, "center": 0.5 * (bb.x0 + bb.x1), "right": bb.x1}[ha]
            weight = t.get_fontweight()
            slots[name] = {"x": float(x), "y": height - float(bb.y0 + descent), "ha": ha, "size_pt": float(t.get_fontsize()),
                           "bold": weight == "bold" or (not isinstance(weight, str) and weight >= 600),
                           "colour": to_hex(t.get_color())}
            t.set_color((0, 0, 0, 0))  # keeps its room (in a legend, say) but draws nothing
        meta = {"texts": slots, "extents": {n: extent(a) for n, a in spec.get("extents", {}).items()},
                "axes": [extent(ax) for ax in axes],
                "limits": [[*ax.get_xlim(), *ax.get_ylim()] for ax in axes]}
        for a in over:
            a.set_visible(False)
        canvas.draw()
        rgb = np.asarray(canvas.buffer_rgba())[..., :3].copy()
        boxes = np.array([_box(e, all(sp in over for sp in ax.spines.values())) for e, ax in zip(meta["axes"], axes)])
        value = {"rgb": rgb, "box": boxes[0], "boxes": boxes, "meta": np.array(json.dumps(meta))}
        if over:
            value.update(_overlay(fig, canvas, over))
        return value

    value = _cached(_key(kind, params), make)
    meta = json.loads(str(value["meta"]))
    return Template(rgb=value["rgb"], box=tuple(int(v) for v in value["box"]),
                    boxes=tuple(tuple(int(v) for v in b) for b in value["boxes"]),
                    axes=tuple(tuple(a) for a in meta["axes"]), limits=tuple(tuple(lim) for lim in meta["limits"]),
                    overlay=value.get("overlay"), overlay_at=value.get("overlay_at"),
                    texts=meta["texts"], extents={k: tuple(v) for k, v in meta["extents"].items()})


def _box(extent, frame_over: bool) -> list:
    """The data box of an axes extent: inside its frame (the spines stay visible around the
    data), or, when the frame is drawn over the data (in the overlay), every pixel whose centre
    lies in the axes."""
    x0, y0, x1, y1 = extent
    if frame_over:
        return [int(np.ceil(x0 - 0.5)), int(np.ceil(y0 - 0.5)), int(np.ceil(x1 - 0.5)), int(np.ceil(y1 - 0.5))]
    return [int(np.ceil(x0)) + 1, int(np.ceil(y0)) + 1, int(np.floor(x1)), int(np.floor(y1))]


def _overlay(fig, canvas, keep) -> dict:
    """The artists ``keep`` alone on a transparent figure: the pixels they cover (flat
    indices) and their RGBA."""
    fig.patch.set_visible(False)
    for child in fig.get_children():
        if child is fig.patch or child in keep:
            continue
        if any(getattr(a, "axes", None) is child for a in keep):
            for c in child.get_children():
                c.set_visible(c in keep)
        else:
            child.set_visible(False)
    for a in keep:
        a.set_visible(True)
    canvas.draw()
    rgba = np.asarray(canvas.buffer_rgba()).reshape(-1, 4)
    at = np.flatnonzero(rgba[:, 3])
    return {"overlay": rgba[at].copy(), "overlay_at": at.astype(np.int64)}


def colour_lut(name: str) -> np.ndarray:
    """A matplotlib colour map sampled at 256 levels, (256, 3) uint8 (cached)."""
    def make():
        import matplotlib as mpl

        return {"lut": np.round(mpl.colormaps[name](np.linspace(0, 1, 256))[:, :3] * 255).astype(np.uint8)}

    return _cached(_key("lut", {"name": name}), make)["lut"]


@functools.lru_cache(maxsize=1)
def display_lut() -> np.ndarray:
    """Linear light in [0, 1] at 65536 levels -> 8-bit sRGB (IEC 61966-2-1), (65536,) uint8,
    truncated as matplotlib quantizes a float image."""
    from ...core.transfer import linear_to_srgb

    lut = (linear_to_srgb(np.linspace(0, 1, 65536)) * 255).astype(np.uint8)
    lut.flags.writeable = False
    return lut


def display_srgb(lin, scale: float = 1.0) -> np.ndarray:
    """``lin * scale`` (linear light, any shape; clipped to [0, 1], NaN as 0) -> 8-bit sRGB
    through :func:`display_lut`."""
    a = np.asarray(lin, np.float32) * np.float32(65535.0 * scale)
    idx = np.clip(np.nan_to_num(a, nan=0.0, posinf=65535.0, neginf=0.0) + np.float32(0.5), 0, 65535).astype(np.uint16)
    return display_lut()[idx]


def checker_grey(shape, cell: int = 6) -> np.ndarray:
    """The grey checkerboard of pixels with no data, (h, w) uint8 grey levels."""
    h, w = shape
    on = ((np.arange(h)[:, None] // cell + np.arange(w)[None, :] // cell) % 2).astype(bool)
    lo, hi = (int(round(g * 255)) for g in CHECKER_GREYS)
    return np.where(on, np.uint8(hi), np.uint8(lo))


def checker_rgb(shape, cell: int = 6) -> np.ndarray:
    """The grey checkerboard of pixels with no data, (h, w, 3) uint8."""
    return np.repeat(checker_grey(shape, cell)[..., None], 3, axis=2)


def colourize(values, vmin: float, vmax: float, lut: np.ndarray, valid=None) -> np.ndarray:
    """Values -> (h, w, 3) uint8 through ``lut``; pixels not valid (or NaN) checkered."""
    a = np.asarray(values, dtype=np.float32)
    ok = np.isfinite(a) if valid is None else (np.asarray(valid, bool) & np.isfinite(a))
    scale = np.float32(255.0 / (vmax - vmin)) if vmax > vmin else np.float32(0)
    idx = np.clip(np.nan_to_num((a - np.float32(vmin)) * scale, nan=0.0) + np.float32(0.5), 0, 255).astype(np.uint8)
    rgb = lut[idx]
    if not ok.all():
        rgb[~ok] = checker_rgb(a.shape)[~ok]
    return rgb


def compose(tpl: Template, image: np.ndarray, *more: np.ndarray) -> np.ndarray:
    """The template with ``image`` (h, w, 3) uint8, or (h, w) grey, scaled into its data box
    (nearest, sampled at the box pixels' centres), and each of ``more`` into the boxes of the
    next axes."""
    import cv2

    out = tpl.rgb.copy()
    for (x0, y0, x1, y1), img in zip(tpl.boxes or (tpl.box,), (image, *more)):
        shown = cv2.resize(np.ascontiguousarray(img), (x1 - x0, y1 - y0), interpolation=cv2.INTER_NEAREST_EXACT)
        out[y0:y1, x0:x1] = cv2.cvtColor(shown, cv2.COLOR_GRAY2RGB) if shown.ndim == 2 else shown
    return out


def hsv_rgb(hue_deg, saturation, value) -> np.ndarray:
    """(h, w, 3) uint8 RGB of hue (degrees, any range: taken modulo 360), saturation and value
    (0..1, clipped)."""
    import cv2

    hue = np.mod(np.nan_to_num(np.asarray(hue_deg, np.float32)), np.float32(360.0))
    sat = np.clip(np.nan_to_num(np.asarray(saturation, np.float32)), 0, 1)
    val = np.clip(np.nan_to_num(np.asarray(value, np.float32)), 0, 1)
    rgb = cv2.cvtColor(np.ascontiguousarray(np.stack([hue, sat, val], axis=-1)), cv2.COLOR_HSV2RGB)
    return np.round(np.clip(rgb, 0, 1) * 255).astype(np.uint8)


def _chunk(kind: bytes, data: bytes) -> bytes:
    import struct
    import zlib

    return struct.pack(">I", len(data)) + kind + data + struct.pack(">I", zlib.crc32(kind + data))


def encode_png(rgb: np.ndarray) -> bytes:
    """PNG bytes of an (h, w, 3) RGB or (h, w, 4) RGBA uint8 image.

    Written directly (PNG specification, W3C 2003/ISO 15948, sections 5 and 11): every row
    with the *Up* filter (the difference to the row above, computed by numpy), one IDAT
    chunk compressed with ISA-L's deflate at level 1 (the zlib format every PNG reader
    decodes).  About five times faster than libpng at its fastest setting on these
    pictures, and about as small.
    """
    import struct

    from ..._shared.deflate import deflate

    a = np.ascontiguousarray(rgb, dtype=np.uint8)
    h, w, c = a.shape
    if c not in (3, 4):
        raise ValueError(f"a PNG picture needs 3 or 4 channels, got {c}")
    rows = np.empty((h, 1 + w * c), np.uint8)
    rows[:, 0] = 2  # filter type 2: Up
    flat = a.reshape(h, w * c)
    rows[0, 1:] = flat[0]
    np.subtract(flat[1:], flat[:-1], out=rows[1:, 1:])  # modulo 256, as the filter defines
    header = struct.pack(">IIBBBBB", w, h, 8, 2 if c == 3 else 6, 0, 0, 0)
    return (b"\x89PNG\r\n\x1a\n" + _chunk(b"IHDR", header) + _chunk(b"IDAT", deflate(rows.tobytes()))
            + _chunk(b"IEND", b""))


def write_png(path, rgb: np.ndarray) -> Path:
    """Encode ``rgb`` (H, W, 3) RGB or (H, W, 4) RGBA uint8 as PNG and write it."""
    Path(path).write_bytes(encode_png(rgb))
    return Path(path)
