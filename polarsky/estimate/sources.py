"""Where a block's analyzer intensities come from: a bracket of frames, or a mosaic frame.

A *source* gives the row-block runner what the estimate needs for any range of output rows,
exactly as the whole frame would give it (``block(r0, r1)`` depends only on the rows asked
for): a bracket reads and linearises those rows of every frame; a mosaic decodes a window
around them (with the context its method needs, aligned to the cell) and keeps the rows asked
for.  Mono mosaics without per-pixel calibration decode and fit in one compiled pass.
"""

from __future__ import annotations

import numpy as np

from ..core.stokes import analysis_matrix
from .block import BlockInput

__all__ = ["BracketSource", "MosaicSource"]


class BracketSource:
    """Row blocks of a :class:`polarsky.read.bracket.Bracket`.

    Parameters
    ----------
    bracket : Bracket
    w : ndarray (C, N, 3)
        Analysis matrices (:func:`polarsky.estimate.calibration.analysis_matrices`).
    compiled : bool, optional
        Use the compiled kernels (default: for inputs of at least
        :data:`polarsky.estimate.runner.COMPILED_MIN_VALUES` values).
    """

    def __init__(self, bracket, w, *, compiled=None):
        self.bracket = bracket
        self.w = np.asarray(w, dtype=np.float64)
        self.shape = bracket.shape
        self.channels = bracket.channels
        self.n_analyzers = bracket.n
        self.counts = np.zeros((bracket.n, 2), dtype=np.int64)
        scale = bracket.exposure_scale
        self.weights = None if np.allclose(scale, 1.0) else np.asarray(scale, dtype=np.float64)
        #: full scale of the Stokes values (1 / the largest relative exposure): the unit of
        #: the stored precision
        self.value_full_scale = float(np.min(1.0 / np.asarray(scale, dtype=np.float64)))
        from .runner import use_compiled

        #: use the compiled kernels (large inputs)
        n_values = int(np.prod(self.shape)) * len(self.channels) * bracket.n
        self.compiled = use_compiled(n_values) if compiled is None else bool(compiled)

    def block(self, r0: int, r1: int, own=None):
        """``(BlockInput, first analyzer's intensities (C, h, w))`` of rows ``r0:r1``.

        Saturated and black pixels of the rows ``own`` (default all) are added to
        :attr:`counts`.
        """
        values, invalid, counts = self.bracket.linear_block(r0, r1, count_rows=own)
        self.counts += counts
        return (BlockInput(invalid=invalid, w=self.w, n_analyzers=self.n_analyzers,
                           full_scale=self.bracket.full_scale, srgb=self.bracket.srgb, intensities=values,
                           weights=self.weights), values[0])


class MosaicSource:
    """Row blocks of a linearised polarization-mosaic frame (output grid of the method).

    Parameters
    ----------
    values, invalid : ndarray (H, W)
        Linear mosaic values and invalid raw pixels.
    layout : MosaicLayout
    method : DemosaicMethod
    calibration : Calibration or None
    full_scale : float
        Native full scale (DN), for the noise model.
    srgb : bool
    compiled : bool, optional
        Use the compiled kernels (default: for sensors of at least
        :data:`polarsky.estimate.runner.COMPILED_MIN_VALUES` pixels); the fused pass is used for
        mono sensors without per-pixel calibration.
    """

    def __init__(self, values, invalid, layout, method, calibration=None, *, full_scale=65535.0, srgb=False,
                 compiled=None):
        from ..mosaic.decode import check_calibration, decode_margin, position_matrix
        from ..mosaic.fast import FAST_METHODS
        from ..mosaic.newton import newton_eps

        self.values = np.asarray(values, dtype=np.float32)
        self.invalid = np.zeros(self.values.shape, bool) if invalid is None else np.asarray(invalid, bool)
        self.layout = layout
        self.method = method
        self.cal = calibration
        if calibration is not None and calibration.pixel:
            check_calibration(calibration, layout, self.values.shape)
        self.per_pixel = bool(calibration is not None and calibration.pixel)
        self.full_scale = float(full_scale)
        self.srgb = bool(srgb)
        k = method.scale
        hs, ws = self.values.shape
        self.shape = (hs // k, ws // k)
        #: full scale of the Stokes values (the values are scaled to 1 = full scale)
        self.value_full_scale = 1.0
        self.channels = layout.channels
        self.n_analyzers = 4
        self.w = np.stack([position_matrix(layout, calibration, c) for c in range(len(self.channels))])
        self.margin = decode_margin(layout, method)
        self.level = float(np.mean(np.abs(self.values)))
        self.eps = newton_eps(self.level)
        from .runner import use_compiled_mosaic

        self.compiled = use_compiled_mosaic(self.values.size) if compiled is None else bool(compiled)
        self.fast = bool(self.compiled and layout.colour is None and not self.per_pixel and method.name in FAST_METHODS)

    def _window(self, r0: int, r1: int):
        k, cell = self.method.scale, self.layout.cell
        hs = self.values.shape[0]
        s0 = max(0, (r0 * k - self.margin) // cell * cell)
        s1 = min(hs, -(-(r1 * k + self.margin) // cell) * cell)
        return s0, s1

    def block(self, r0: int, r1: int, own=None):
        """``(BlockInput, None)`` of output rows ``r0:r1`` (a mosaic has no first frame)."""
        s0, s1 = self._window(r0, r1)
        k = self.method.scale
        a, b = r0 - s0 // k, r1 - s0 // k
        vals, inv = self.values[s0:s1], self.invalid[s0:s1]
        if self.fast:
            from ..mosaic.fast import fast_fit
            from ..mosaic.methods import invalid_after

            s, mean, rss = fast_fit(vals, self.w[0], self.method, eps=self.eps)
            invalid = invalid_after(self.method, inv)[None, a:b]
            inp = BlockInput(invalid=np.ascontiguousarray(invalid), w=self.w, n_analyzers=4, full_scale=self.full_scale,
                             srgb=self.srgb, s=s[None, :, a:b], mean=mean[None, a:b], rss=rss[None, a:b])
            return inp, None
        from ..mosaic.decode import decode_mosaic

        dec = decode_mosaic(vals, inv, self.layout, self.method.name, _window_calibration(self.cal, s0, s1),
                            scale=self.level)
        inten = dec["intensities"][:, :, a:b]
        solve = None if dec["solve"] is None else dec["solve"][..., a:b, :]
        inp = BlockInput(invalid=~dec["valid"][:, a:b], w=dec["w"], n_analyzers=4, full_scale=self.full_scale,
                         srgb=self.srgb, intensities=np.ascontiguousarray(inten), solve=solve)
        return inp, None

    def nominal_matrix(self):
        return analysis_matrix(self.layout.angles_deg)


def _window_calibration(cal, s0, s1):
    """A flat calibration cut to sensor rows ``s0:s1`` (other calibrations unchanged)."""
    if cal is None or not cal.pixel:
        return cal
    import dataclasses

    pixel = {k: np.asarray(v)[:, s0:s1] for k, v in cal.pixel.items()}
    shape = [s1 - s0, int(np.asarray(cal.pixel["pixel_gain"]).shape[-1])]
    return dataclasses.replace(cal, pixel=pixel, attrs={**cal.attrs, "sensor_shape": shape})
