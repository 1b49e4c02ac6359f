"""Fast pictures: the figure drawn once and cached, the data pasted in, the PNG written directly.

A picture's *template* (title, axis labels and ticks, colour key, notes) depends only on its
size and words, not on the data, so it is drawn once by matplotlib, kept in memory and in a
cache folder (``$XDG_CACHE_HOME/polarsky`` or ``~/.cache/polarsky``; set
``POLARSKY_CACHE=off`` to keep it in memory only), together with the pixel box the data image
fills.  Each picture then only colours its data through a lookup table, pastes it into the
box (nearest-neighbour, as matplotlib draws images with ``interpolation="nearest"``) and
encodes the PNG with OpenCV: no figure per map, and no matplotlib import once the cache is
warm.
"""

from __future__ import annotations

import functools
import hashlib
import json
import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from ..._version import __version__
from ...palette import CHECKER_GREYS

__all__ = ["Template", "template", "colour_lut", "colourize", "checker_rgb", "compose", "write_png", "DPI"]

#: Resolution of every picture (dots per inch of the matplotlib figure).
DPI = 110
_MEMORY: dict = {}


@dataclass(frozen=True)
class Template:
    """A drawn figure without its data: ``rgb`` (H, W, 3) uint8 and the data ``box``
    ``(x0, y0, x1, y1)`` in pixels (x1, y1 exclusive)."""

    rgb: np.ndarray
    box: tuple


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
    text = json.dumps({"kind": kind, "polarsky": __version__, "matplotlib": _matplotlib_version(), **params},
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
    """The cached template ``kind`` with ``params``; ``draw(params)`` returns ``(figure, axes)``
    whose axes' area receives the data."""
    def make():
        from matplotlib.backends.backend_agg import FigureCanvasAgg

        fig, ax = draw(params)
        canvas = FigureCanvasAgg(fig)
        canvas.draw()
        rgb = np.asarray(canvas.buffer_rgba())[..., :3].copy()
        bb = ax.get_window_extent(canvas.get_renderer())
        height = rgb.shape[0]
        # inside the axes frame: the spines stay visible around the data
        box = np.array([int(np.ceil(bb.x0)) + 1, int(np.ceil(height - bb.y1)) + 1,
                        int(np.floor(bb.x1)), int(np.floor(height - bb.y0))])
        return {"rgb": rgb, "box": box}

    value = _cached(_key(kind, params), make)
    return Template(rgb=value["rgb"], box=tuple(int(v) for v in value["box"]))


def colour_lut(name: str) -> np.ndarray:
    """A matplotlib colour map sampled at 256 levels, (256, 3) uint8 (cached)."""
    def make():
        import matplotlib as mpl

        return {"lut": np.round(mpl.colormaps[name](np.linspace(0, 1, 256))[:, :3] * 255).astype(np.uint8)}

    return _cached(_key("lut", {"name": name}), make)["lut"]


def checker_rgb(shape, cell: int = 6) -> np.ndarray:
    """The grey checkerboard of pixels with no data, (h, w, 3) uint8."""
    h, w = shape
    on = ((np.arange(h)[:, None] // cell + np.arange(w)[None, :] // cell) % 2).astype(bool)
    lo, hi = (int(round(g * 255)) for g in CHECKER_GREYS)
    g = np.where(on, np.uint8(hi), np.uint8(lo))
    return np.repeat(g[..., None], 3, axis=2)


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


def compose(tpl: Template, image: np.ndarray) -> np.ndarray:
    """The template with ``image`` (h, w, 3) uint8 scaled into its data box (nearest)."""
    import cv2

    x0, y0, x1, y1 = tpl.box
    out = tpl.rgb.copy()
    out[y0:y1, x0:x1] = cv2.resize(np.ascontiguousarray(image), (x1 - x0, y1 - y0), interpolation=cv2.INTER_NEAREST)
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
    """Encode ``rgb`` (H, W, 3) uint8 as PNG and write it."""
    Path(path).write_bytes(encode_png(rgb))
    return Path(path)
