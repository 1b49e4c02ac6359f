"""Where the runner's blocks go: memory, decimated previews for pictures, running statistics.

Every sink has ``write(r0, r1, products, frame0)``: rows ``r0:r1`` of the output grid, the
block's products (C, h, w) and the first analyzer's intensities (or None).  Nothing a sink
keeps depends on the block size.
"""

from __future__ import annotations

import numpy as np

from ..core import stokes as sk
from .._shared.stats import percentile

__all__ = ["MemorySink", "PreviewSink", "StatsSink", "preview_step"]


class MemorySink:
    """Full-resolution products in memory (the Python API's Dataset)."""

    def __init__(self, shape, n_channels, names):
        h, w = shape
        self.needs = frozenset(names)
        self.arrays = {n: np.empty((n_channels, h, w), bool if n == "valid" else np.float32) for n in names}

    def write(self, r0, r1, products, frame0):
        for name, arr in self.arrays.items():
            arr[:, r0:r1] = products[name]


def preview_step(shape, max_side: int = 1024) -> int:
    """Decimation of the previews pictures are drawn from (at most ``max_side`` a side)."""
    return max(1, int(np.ceil(max(shape) / max_side)))


class PreviewSink:
    """Every ``step``-th row and column of the products and of the first frame, for pictures."""

    NAMES = ("S0", "S1", "S2", "dolp", "dolp_unbiased", "aolp", "valid", "residual", "sigma_dolp", "sigma_aolp")
    #: fed the blocks before the runner's checks (:func:`polarsky.estimate.runner.run_blocks`)
    before_checks = False

    def __init__(self, shape, max_side: int = 1024, names=None):
        self.step = preview_step(shape, max_side)
        #: the products kept (default :data:`NAMES`)
        self.needs = frozenset(self.NAMES if names is None else names)
        self._parts: dict = {}
        self.arrays: dict = {}

    def write(self, r0, r1, products, frame0):
        s = self.step
        sel = slice((-r0) % s, r1 - r0, s)
        # a decimated copy frees the block; at full resolution the block's own arrays are kept
        # (the runner makes new ones for every block and never writes them again), unless this
        # sink is fed before the runner's checks, which mask the block in place afterwards
        keep = (lambda a: a[:, sel, ::s].copy()) if s > 1 or self.before_checks else (lambda a: a)
        for name in self.NAMES:
            if name in products and name in self.needs:
                self._parts.setdefault(name, []).append(keep(products[name]))
        f0 = products["S0"] * np.float32(0.5) if frame0 is None else frame0
        self._parts.setdefault("frame0", []).append(keep(f0))

    def finish(self) -> dict:
        self.arrays = {k: v[0] if len(v) == 1 else np.concatenate(v, axis=1) for k, v in self._parts.items()}
        return self.arrays


def _r(x, nd: int = 6):
    return None if x is None or not np.isfinite(x) else round(float(x), nd)


class StatsSink:
    """Running statistics over valid pixels (for ``summary.json``).

    The relative residual is sampled at every ``stride``-th pixel of the frame (row-major), so
    its quantiles do not depend on the block size.
    """

    #: products summed over the valid pixels of each channel
    SUMMED = ("dolp", "dolp_unbiased", "sigma_aolp", "S0", "S1", "S2")

    def __init__(self, shape, n_channels, max_samples: int = 200_000, *, compiled: bool = False):
        c = n_channels
        self.compiled = bool(compiled)
        self.width = shape[1]
        self.stride = max(1, int(np.prod(shape)) // max_samples)
        self.valid = np.zeros(c, np.int64)
        self.total = 0
        self.sum_dolp = np.zeros(c)
        self.sum_dolp_unb = np.zeros(c)
        self.sum_s = np.zeros((c, 3))
        self.sum_sigma_aolp = np.zeros(c)
        self._res: list = []

    def write(self, r0, r1, products, frame0):
        v = products["valid"]
        self.total += v[0].size
        for ci in range(v.shape[0]):
            m = v[ci]
            n = int(np.count_nonzero(m))
            self.valid[ci] += n
            if self.compiled:  # one parallel pass instead of a copy per product
                from ..core.kernels.dispatch import masked_sums

                sums = np.zeros(len(self.SUMMED))
                masked_sums(np.ascontiguousarray(m).reshape(-1),
                            tuple(np.ascontiguousarray(products[k][ci]).reshape(-1) for k in self.SUMMED), sums)
            elif n == m.size:  # every pixel valid: a[m] would hold all of a, in the same (row-major) order
                sums = [float(np.sum(products[k][ci].ravel(), dtype=np.float64)) for k in self.SUMMED]
            else:
                sums = [float(np.sum(products[k][ci][m], dtype=np.float64)) for k in self.SUMMED]
            self.sum_dolp[ci] += sums[0]
            self.sum_dolp_unb[ci] += sums[1]
            self.sum_sigma_aolp[ci] += sums[2]
            self.sum_s[ci] += sums[3:6]
        if "residual" in products:
            c = v.shape[0]
            take = slice((-r0 * self.width) % self.stride, None, self.stride)  # pixel index % stride == 0
            res = products["residual"].reshape(c, -1)[:, take]
            s0 = products["S0"].reshape(c, -1)[:, take]
            ok = v.reshape(c, -1)[:, take]
            with np.errstate(invalid="ignore", divide="ignore"):
                self._res.append(res[ok] / s0[ok])

    def summary(self, channels) -> dict:
        n = np.maximum(self.valid, 1)

        def per_channel(sums):
            return {ch: _r(sums[i] / n[i]) if self.valid[i] else None for i, ch in enumerate(channels)}

        out = {
            "pixels": int(self.total),
            "valid_pixels": {ch: int(self.valid[i]) for i, ch in enumerate(channels)},
            "mean_dolp": per_channel(self.sum_dolp),
            "mean_dolp_unbiased": per_channel(self.sum_dolp_unb),
            "mean_sigma_aolp_deg": per_channel(self.sum_sigma_aolp),
            "scene_dolp": None,
            "scene_aolp_deg": None,
            "median_relative_residual": None,
            "p99_relative_residual": None,
        }
        tot = self.sum_s.sum(axis=0)
        if tot[0] > 0:
            dolp, aolp = sk.dolp_aolp(tot.reshape(3, 1))
            out["scene_dolp"] = _r(float(dolp[0]))
            out["scene_aolp_deg"] = _r(float(aolp[0]))
        rel = np.concatenate(self._res) if self._res else np.zeros(0)
        if rel.size:
            out["median_relative_residual"] = _r(percentile(rel, 50))
            out["p99_relative_residual"] = _r(percentile(rel, 99))
        return out
