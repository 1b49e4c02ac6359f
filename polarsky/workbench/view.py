"""A loaded result ready to be shown: layers, tiles, colour keys, readout, preview data.

The page never receives full-resolution arrays.  It gets

* PNG tiles of ``TILE`` x ``TILE`` output pixels from a pyramid of decimated levels (level
  ``L`` takes every ``2**L``-th row and column), coloured here with the pictures' colour
  maps and with invalid pixels drawn as the pictures' grey checkerboard;
* one decimated copy of S0, S1, S2 (at most ``PREVIEW_SIDE`` pixels on the long side,
  quantized to 16 bits) from which it draws the frame behind a filter at any angle;
* the full-resolution values of one pixel at a time (the readout).
"""

from __future__ import annotations

import math

import numpy as np

from .._shared.stats import percentile
from ..core.stokes import dolp_aolp
from ..core.transfer import linear_to_srgb
from ..write.pictures.canvas import colour_lut, encode_png, hsv_rgb
from ..write.pictures.figure import checker
from ..write.pictures.maps import DOLP_FULL_SATURATION

__all__ = ["TILE", "PREVIEW_SIDE", "LAYERS", "View", "encode_png", "key_png"]

TILE = 256
PREVIEW_SIDE = 1024
#: Side of a checkerboard cell, output pixels of a tile.
CHECKER_CELL = 8
#: Pixels sampled for the display ranges (percentiles) of a view.
STATS_SAMPLES = 1 << 20
#: Sky-mask codes where the model is drawn (sky, also when left out of the fit by a feature band).
SKY_LIKE = (0, 4, 5, 6, 7, 8)

#: layer id -> (title, colour map, unit text, needs).  ``range`` is filled per view.
LAYERS = {
    "frame": ("Frame (S0)", None, "relative intensity", "stokes"),
    "dolp": ("DoLP", "viridis", "DoLP (0..1)", "stokes"), "dolp_unbiased": ("DoLP, debiased", "viridis",
                                                                            "DoLP (0..1)", "stokes"),
    "aolp": ("AoLP", "twilight", "AoLP (deg from image +x, counter-clockwise)", "stokes"),
    "combined": ("Combined", "combined", "hue = AoLP, saturation = DoLP, brightness = S0", "stokes"),
    "residual": ("Fit residual", "magma", "RMS residual / S0 (%)", "residual"),
    "sigma_dolp": ("Uncertainty of DoLP", "magma", "sigma DoLP", "stokes"),
    "sigma_aolp": ("Uncertainty of AoLP", "magma", "sigma AoLP (deg)", "stokes"),
    # a sky comparison: the model, the residuals (the sky pictures' diverging map), the geometry
    "dolp_model": ("Sky model DoLP", "viridis", "model DoLP (0..1)", "sky"),
    "aolp_model": ("Sky model AoLP", "twilight", "model AoLP (deg)", "sky"),
    "dolp_residual": ("Sky DoLP residual", "RdBu_r", "observed - model DoLP", "sky"), "aolp_residual": (
        "Sky AoLP residual", "RdBu_r", "observed - model AoLP (deg)", "sky"),
    "scattering_angle": ("Scattering angle", "magma", "angle from the sun (deg)", "sky"),
}
_FIXED_RANGES = {"dolp": (0.0, 1.0), "dolp_unbiased": (0.0, 1.0), "aolp": (0.0, 180.0), "dolp_model": (0.0, 1.0),
                 "aolp_model": (0.0, 180.0), "dolp_residual": (-0.2, 0.2), "aolp_residual": (-20.0, 20.0),
                 "scattering_angle": (0.0, 180.0)}


def _checker(shape) -> np.ndarray:
    """The pictures' grey checkerboard as uint8 (h, w); a tile starts on a whole pair of cells
    (``TILE`` is a multiple of ``2 * CHECKER_CELL``), so the pattern runs on across tiles."""
    return (checker(shape, cell=CHECKER_CELL)[..., 0] * 255 + 0.5).astype(np.uint8)


def key_png(layer: str) -> bytes:
    """The colour key of ``layer``: a strip for colour maps, a half disc for the combined layer."""
    cmap = LAYERS[layer][1]
    if cmap == "combined":
        r_px = 110
        yy, xx = np.mgrid[0:r_px + 1, -r_px:r_px + 1].astype(np.float64)
        dy = r_px - yy  # up on the page is counter-clockwise from +x
        radius = np.hypot(xx, dy) / r_px
        angle = np.degrees(np.arctan2(dy, xx))
        rgb = hsv_rgb(np.clip(angle, 0, 180) * 2.0, radius / DOLP_FULL_SATURATION, np.ones_like(radius))
        alpha = np.where(radius <= 1.0, 255, 0).astype(np.uint8)
        return encode_png(np.dstack([rgb, alpha]))
    if cmap is None:  # the frame: black to white through the display transfer
        ramp = (linear_to_srgb(np.linspace(0, 1, 256)) * 255 + 0.5).astype(np.uint8)
        lut = np.repeat(ramp[:, None], 3, axis=1)
    else:
        lut = colour_lut(cmap)
    return encode_png(np.repeat(lut[None], 14, axis=0))


class View:
    """A Stokes result (and optional sky comparison) held in memory for the page.

    Parameters
    ----------
    result : Result
        From :func:`polarsky.workbench.loaders.load_frames` or ``load_stokes`` (with its sky
        comparison, if any).
    """

    def __init__(self, result):
        import time

        t0 = time.perf_counter()
        self.result = result
        self.arrays = result.arrays
        self.channels = list(result.channels)
        self.facts = result.facts
        self.warnings = list(result.warnings)
        sky = result.sky
        c, h, w = self.arrays["S0"].shape
        self.n_channels, self.shape = c, (h, w)
        self.display_channel = next((self.channels.index(n) for n in ("G", "L") if n in self.channels), 0)
        self.valid_all = self.arrays["valid"][0] if c == 1 else self.arrays["valid"].all(axis=0)
        self.levels = max(0, math.ceil(math.log2(max(h, w) / TILE))) if max(h, w) > TILE else 0
        self.sky = None
        if sky is not None:
            maps = sky["maps"]
            if maps.get("aolp_model") is not None and tuple(np.shape(maps["aolp_model"])) == (h, w):
                self.sky = sky
            else:
                self.warnings.append("the sky result does not match the frame size; its layers are not shown")
        self._stats()
        self._preview = None
        self.build_s = time.perf_counter() - t0

    # -------------------------------------------------------------- display ranges
    def _sample(self, a):
        h, w = self.shape
        step = max(1, int(math.ceil(math.sqrt(h * w / STATS_SAMPLES))))
        return a[..., ::step, ::step]

    def _stats(self):
        s0 = self._sample(self.arrays["S0"])
        ok = self._sample(self.valid_all)
        top = percentile(np.max(s0, axis=0)[ok], 99.5) if ok.any() else 1.0
        top_sum = percentile(np.sum(s0, axis=0)[ok], 99.5) if ok.any() else 1.0
        self.top = top if top > 0 else 1.0
        self.top_sum = top_sum if top_sum > 0 else 1.0
        self.ranges = dict(_FIXED_RANGES)
        for name in ("sigma_dolp", "sigma_aolp", "residual"):
            if name not in self.arrays:
                continue
            if name == "residual":
                with np.errstate(invalid="ignore", divide="ignore"):
                    a = np.max(self._sample(self.arrays["residual"]) / s0, axis=0) * 100.0
            else:
                a = self._sample(self.arrays[name])[self.display_channel]
            vals = a[ok & np.isfinite(a)]
            hi = percentile(vals, 99) if vals.size else 1.0
            self.ranges[name] = (0.0, hi if hi > 0 else 1.0)

    # -------------------------------------------------------------- what the page is told
    def layer_list(self) -> list[dict]:
        out = []
        for lid, (title, cmap, unit, needs) in LAYERS.items():
            if needs == "residual" and "residual" not in self.arrays:
                continue
            if needs == "sky" and self.sky is None:
                continue
            per_channel = lid in ("dolp_unbiased", "sigma_dolp", "sigma_aolp", "dolp_model", "dolp_residual",
                                  "aolp_residual")
            note = ""
            if self.n_channels > 1:
                if per_channel:
                    note = f"all channels: shows {self.channels[self.display_channel]}"
                elif lid == "residual":
                    note = "all channels: largest of the channels"
                elif lid in ("dolp", "aolp", "combined"):
                    note = "all channels: from the summed Stokes vector"
            rng = self.ranges.get(lid)
            out.append({"id": lid, "title": title, "color_map": cmap or "gray", "unit": unit, "note": note,
                        "range": list(rng) if rng else None, "group": needs})
        return out

    def meta(self) -> dict:
        h, w = self.shape
        f = self.facts
        sky_info = None
        if self.sky is not None:
            info = self.sky["info"]
            sky_info = {k: info.get(k) for k in ("sun_pixel", "sun_in_frame", "antisun_in_frame", "dolp_max",
                                                  "dolp_max_sigma", "rms_aolp_residual_deg",
                                                  "rms_dolp_residual", "yaw_deg", "pitch_deg", "roll_deg", "model",
                                                  "model_title", "sun_azimuth_deg",
                                                  "sun_elevation_deg", "caution")}
        ph, pw, pstep = self.preview_shape()
        return {
            "width": w, "height": h, "channels": self.channels, "display_channel": self.display_channel,
            "tile": TILE, "levels": self.levels, "layers": self.layer_list(), "top": self.top,
            "preview": {"width": pw, "height": ph, "step": pstep},
            "analyzer_angles_deg": f["analyzer_angles_deg"], "extinction_ratio": self.result.extinction,
            "inputs": f["inputs"], "polarizer": f.get("polarizer"), "warnings": self.warnings, "sky": sky_info,
        }

    # -------------------------------------------------------------- tiles
    def _channel_data(self, layer, sl, channel):
        """Values (h, w) and validity of ``layer`` on the strided slice ``sl`` of the frame."""
        a = self.arrays
        k = self.display_channel if channel is None else channel
        valid = (self.valid_all[sl] if channel is None else a["valid"][channel][sl])
        if layer in ("dolp", "aolp") and channel is None and self.n_channels > 1:
            s = np.stack([np.sum(a[n][(slice(None),) + sl], axis=0) for n in ("S0", "S1", "S2")])
            dolp, aolp = dolp_aolp(s)
            return (dolp if layer == "dolp" else aolp), valid
        if layer == "residual":
            chans = slice(None) if channel is None else slice(channel, channel + 1)
            with np.errstate(invalid="ignore", divide="ignore"):
                v = np.max(a["residual"][(chans,) + sl] / a["S0"][(chans,) + sl], axis=0) * 100.0
            return v, valid
        if layer in a:
            return a[layer][(k,) + sl], valid
        maps = self.sky["maps"]
        reason = maps["sky_mask_reason"][sl] if "sky_mask_reason" in maps else None
        m = maps[layer]
        v = m[(k,) + sl] if m.ndim == 3 else m[sl]
        if reason is not None:
            show = (reason == 0) if layer in ("dolp_residual", "aolp_residual") else np.isin(reason, SKY_LIKE)
            if layer == "scattering_angle":
                show = np.ones_like(valid)
            valid = show if layer in ("aolp_model", "dolp_model", "scattering_angle") else (valid & show)
        return v, valid

    def tile_png(self, layer: str, channel, level: int, tx: int, ty: int) -> bytes:
        """One PNG tile: ``TILE`` x ``TILE`` output pixels of pyramid ``level`` (fewer at the edges).

        Raises
        ------
        KeyError
            For a layer, channel or tile that does not exist.
        """
        if layer not in {d["id"] for d in self.layer_list()}:
            raise KeyError(layer)
        if channel is not None and not 0 <= channel < self.n_channels:
            raise KeyError(channel)
        if not 0 <= level <= self.levels:
            raise KeyError(level)
        step = 1 << level
        h, w = self.shape
        x0, y0 = tx * TILE * step, ty * TILE * step
        if tx < 0 or ty < 0 or x0 >= w or y0 >= h:
            raise KeyError((tx, ty))
        sl = (slice(y0, min(h, y0 + TILE * step), step), slice(x0, min(w, x0 + TILE * step), step))
        rgb = self._colour(layer, channel, sl)
        invalid_grey = _checker(rgb.shape[:2])
        return encode_png(np.where(rgb[..., 3:4] > 0, rgb[..., :3], invalid_grey[..., None]))

    def _colour(self, layer, channel, sl) -> np.ndarray:
        """RGBA uint8 of a strided slice; alpha 0 marks invalid pixels."""
        a = self.arrays
        if layer == "frame":
            if channel is None and self.n_channels == 3:
                lin = a["S0"][(slice(None),) + sl]
            else:
                lin = a["S0"][(self.display_channel if channel is None else channel,) + sl][None]
            v = linear_to_srgb(np.clip(np.nan_to_num(lin / np.float32(self.top)), 0, 1))
            rgb = (np.moveaxis(np.broadcast_to(v, (3,) + v.shape[1:]), 0, -1) * 255 + 0.5).astype(np.uint8)
            valid = self.valid_all[sl] if channel is None else a["valid"][channel][sl]
        elif layer == "combined":
            if channel is None:
                s = np.stack([np.sum(a[n][(slice(None),) + sl], axis=0) for n in ("S0", "S1", "S2")])
                top, valid = self.top_sum, self.valid_all[sl]
            else:
                s = np.stack([a[n][(channel,) + sl] for n in ("S0", "S1", "S2")])
                top, valid = self.top, a["valid"][channel][sl]
            dolp, aolp = dolp_aolp(s)
            rgb = hsv_rgb(aolp * 2.0, dolp / DOLP_FULL_SATURATION,
                          linear_to_srgb(np.clip(np.nan_to_num(s[0] / np.float32(top)), 0, 1)))
        else:
            v, valid = self._channel_data(layer, sl, channel)
            lo, hi = self.ranges[layer]
            idx = np.clip((np.nan_to_num(v, nan=lo) - lo) * (255.0 / (hi - lo)) + 0.5, 0, 255).astype(np.uint8)
            rgb = colour_lut(LAYERS[layer][1])[idx]
            valid = valid & np.isfinite(v)
        alpha = np.where(valid, 255, 0).astype(np.uint8)
        return np.dstack([rgb, alpha])

    # -------------------------------------------------------------- readout
    def pixel(self, x: int, y: int) -> dict:
        """Full-resolution values at pixel (x, y) (None where not defined)."""
        h, w = self.shape
        if not (0 <= x < w and 0 <= y < h):
            raise KeyError((x, y))
        a = self.arrays

        def num(arr):
            v = float(arr)
            return v if math.isfinite(v) else None

        chans = []
        for k, name in enumerate(self.channels):
            row = {"channel": name, "valid": bool(a["valid"][k, y, x])}
            for key, var in (("S0", "S0"), ("S1", "S1"), ("S2", "S2"), ("dolp", "dolp"),
                             ("sigma_dolp", "sigma_dolp"), ("dolp_unbiased", "dolp_unbiased"),
                             ("aolp_deg", "aolp"), ("sigma_aolp_deg", "sigma_aolp"), ("residual", "residual")):
                row[key] = num(a[var][k, y, x]) if var in a else None
            chans.append(row)
        out = {"x": x, "y": y, "channels": chans, "sky": None}
        if self.sky is not None:
            maps = self.sky["maps"]
            k = self.display_channel
            sky = {"channel": self.channels[k]}
            for key, var in (("dolp_model", "dolp_model"), ("aolp_model_deg", "aolp_model"),
                             ("dolp_residual", "dolp_residual"), ("aolp_residual_deg", "aolp_residual"),
                             ("scattering_angle_deg", "scattering_angle"), ("elevation_deg", "elevation"),
                             ("azimuth_deg", "azimuth")):
                if var in maps:
                    m = maps[var]
                    sky[key] = num(m[k, y, x] if m.ndim == 3 else m[y, x])
            if "sky_mask_reason" in maps:
                from ..sky.fit import MASK_REASONS

                sky["sky_mask"] = MASK_REASONS.get(int(maps["sky_mask_reason"][y, x]), "unknown")
            out["sky"] = sky
        return out

    # -------------------------------------------------------------- preview for the virtual filter
    def preview_shape(self):
        h, w = self.shape
        step = max(1, int(math.ceil(max(h, w) / PREVIEW_SIDE)))
        return (h + step - 1) // step, (w + step - 1) // step, step

    def preview(self) -> tuple[bytes, dict]:
        """Decimated S0, S1, S2 as little-endian uint16 (C, 3, ph, pw) and how to decode them.

        ``S0 = q / 65534 * scale``; ``S1, S2 = (2 q / 65534 - 1) * scale``; ``q = 65535`` in the
        S0 plane marks an invalid pixel.
        """
        if self._preview is None:
            ph, pw, step = self.preview_shape()
            s = np.stack([self.arrays[n][:, ::step, ::step] for n in ("S0", "S1", "S2")], axis=1)  # (C, 3, ph, pw)
            valid = self.valid_all[::step, ::step]
            finite = s[:, 0][:, valid]
            scale = float(np.max(finite)) if finite.size else 1.0
            scale = scale if scale > 0 else 1.0
            q = np.empty(s.shape, np.uint16)
            q[:, 0] = np.clip(np.round(np.nan_to_num(s[:, 0]) / scale * 65534), 0, 65534)
            q[:, 1:] = np.clip(np.round((np.nan_to_num(s[:, 1:]) / scale * 0.5 + 0.5) * 65534), 0, 65534)
            q[:, 0][:, ~valid] = 65535
            self._preview = (q.astype("<u2").tobytes(), {"scale": scale, "step": step, "width": pw, "height": ph,
                                                         "channels": self.n_channels})
        return self._preview

    def nbytes(self) -> int:
        n = sum(a.nbytes for a in self.arrays.values())
        if self.sky is not None:
            n += sum(np.asarray(m).nbytes for m in self.sky["maps"].values())
        return n
