"""The one row-block runner: brackets and mosaics, any frame size, bounded memory.

For each block of output rows the runner asks the source for those rows plus the context the
5x5 smoothing of the residual-based variance needs (two rows above and below, clipped at the
frame's edges), estimates every product, keeps the block's own rows and hands them to the
sinks.  Every product is therefore the same for any block size, and peak memory is the
native frames plus a few blocks.
"""

from __future__ import annotations

import sys
import time

import numpy as np

from ..core.noise import NoiseModel
from .block import SMOOTH_RADIUS, estimate, needs_context

__all__ = ["run_blocks", "block_rows", "use_compiled", "use_compiled_mosaic", "mask_impossible", "BLOCK_VALUES", "COMPILED_MIN_VALUES",
           "IMPOSSIBLE_SIGMAS"]

#: Target number of float32 values per analyzer in one row block.
BLOCK_VALUES = 1 << 20
#: Inputs with fewer values (pixels x channels x analyzers, or sensor pixels of a mosaic) than
#: this use the numpy reference path.  Loading the compiled kernels costs about 0.6 s in a new
#: process (numba's import and its cache); measured by benchmarks/bench_speed.py (kernel
#: choice), numpy in row blocks is as fast up to about 30 million values.
COMPILED_MIN_VALUES = 30_000_000


#: Mosaic frames of at least this many sensor pixels use the compiled (fused) passes: a
#: polarization camera's frames come in sequences, and from about 5 MP on those passes are
#: faster per frame even in a new process (the newton method) and several times faster once
#: loaded (superpixel: about 55 ms instead of about 0.3 s of estimate per 5 MP frame).
MOSAIC_COMPILED_MIN_PIXELS = 4_000_000


def use_compiled(n_values: int) -> bool:
    """Whether a bracket of ``n_values`` values (pixels x channels x frames) uses the compiled
    kernels.  The choice depends on the input's size alone, so a bracket gives the same
    numbers in every command and in a batch, whatever ran before it in the process."""
    return int(n_values) >= COMPILED_MIN_VALUES


def use_compiled_mosaic(n_pixels: int) -> bool:
    """Whether a mosaic frame of ``n_pixels`` sensor pixels uses the compiled passes (by size
    alone, as :func:`use_compiled`)."""
    return int(n_pixels) >= MOSAIC_COMPILED_MIN_PIXELS


#: A DoLP above 1 by more than this many of its standard uncertainties is impossible (no light
#: is more than fully polarized), not noise.
IMPOSSIBLE_SIGMAS = 3.0


def mask_impossible(products: dict):
    """Mark valid pixels whose DoLP exceeds 1 beyond their uncertainty as not valid (in place).

    Where the sinks did not ask for DoLP and its uncertainty (a region's Stokes sums), only the
    valid pixels are counted; the advice checks the region's DoLP instead.

    Returns
    -------
    valid : ndarray (C,), int
        Valid pixels per channel after masking.
    impossible : ndarray (C,), int
        Pixels masked per channel.
    largest : float
        The largest DoLP among them (0 when none).
    """
    valid = products["valid"]
    c = valid.shape[0]
    impossible = np.zeros(c, np.int64)
    largest = 0.0
    if "dolp" not in products or "sigma_dolp" not in products:  # sinks that read Stokes sums only
        return valid.reshape(c, -1).sum(axis=1), impossible, largest
    dolp = products["dolp"]
    over = dolp > 1.0  # NaN compares False: invalid pixels are never counted
    if over.any():
        bad = over & valid & ~(dolp <= 1.0 + np.float32(IMPOSSIBLE_SIGMAS) * products["sigma_dolp"])
        if bad.any():
            impossible = bad.reshape(c, -1).sum(axis=1)
            largest = float(dolp[bad].max())
            valid &= ~bad
            for name, arr in products.items():
                if name != "valid" and arr.dtype.kind == "f":
                    arr[bad] = np.nan
    return valid.reshape(c, -1).sum(axis=1), impossible, largest


def block_rows(shape, n_channels: int) -> int:
    """Rows per block for a frame of ``shape`` (at least 8, at most the frame)."""
    h, w = shape
    return int(max(8, min(h, BLOCK_VALUES // max(1, w * n_channels))))


def _needs(sinks):
    """The products the sinks read (None: all of them)."""
    out = set()
    for sink in sinks:
        n = getattr(sink, "needs", None)
        if n is None:
            return None
        out |= set(n)
    return out


def run_blocks(source, noise: NoiseModel, sinks, *, rows: int | None = None, compiled: bool | None = None,
               progress: bool = False) -> dict:
    """Estimate every block of ``source`` and feed it to ``sinks``.

    Parameters
    ----------
    source : BracketSource or MosaicSource
    noise : NoiseModel
    sinks : sequence
        Objects with ``write(r0, r1, products, frame0)`` (``frame0``: first analyzer's
        intensities of the block, or None) and optionally ``needs``, the products they read
        (default all): only the products some sink needs are computed.  A sink with
        ``before_checks = True`` gets each block as estimated, before :func:`mask_impossible`
        (what it would get in a pass of its own that computes no DoLP: the advice's region
        sums), and must not keep the arrays (they are masked in place afterwards).
    rows : int, optional
        Rows per block (default :func:`block_rows`).
    compiled : bool, optional
        Force the compiled kernels on or off (default: the source's ``compiled``).
    progress : bool
        Show a progress bar on stderr when it is a terminal.

    Returns
    -------
    dict
        ``estimate_s`` and ``sinks_s`` (seconds), ``compiled``, ``noise_source``, and per
        channel ``valid_px`` (valid pixels) and ``impossible_px`` (pixels whose DoLP was above
        1 beyond its uncertainty: masked, see :func:`mask_impossible`) with ``largest_dolp``.
    """
    h = source.shape[0]
    nc = len(source.channels)
    rows = max(1, int(rows or block_rows(source.shape, nc)))
    compiled = source.compiled if compiled is None else bool(compiled)
    noise_source = noise.resolved_source(source.n_analyzers)
    needs = _needs(sinks)
    if needs is not None and {"dolp", "aolp"} & needs:
        needs = needs | {"dolp", "sigma_dolp"}  # a DoLP handed on is first checked against 1 (mask_impossible)
    context = SMOOTH_RADIUS if noise_source == "residual" and needs_context(needs) else 0
    early = [s for s in sinks if getattr(s, "before_checks", False)]
    late = [s for s in sinks if not getattr(s, "before_checks", False)]
    t_est = t_sink = 0.0
    valid_px = np.zeros(nc, np.int64)
    impossible_px = np.zeros(nc, np.int64)
    largest = 0.0
    bar = None
    if progress and sys.stderr.isatty():
        from tqdm import tqdm

        bar = tqdm(total=h, unit="row", desc="stokes", leave=False, file=sys.stderr)
    try:
        for r0 in range(0, h, rows):
            r1 = min(h, r0 + rows)
            t1 = time.perf_counter()
            e0, e1 = max(0, r0 - context), min(h, r1 + context)
            inp, frame0 = source.block(e0, e1, own=(r0, r1))
            products = estimate(inp, noise, compiled=compiled, needs=needs)
            a, b = r0 - e0, r1 - e0
            if (a, b) != (0, e1 - e0):
                products = {k: v[:, a:b] for k, v in products.items()}
                frame0 = None if frame0 is None else frame0[:, a:b]
            t2 = time.perf_counter()
            for sink in early:
                sink.write(r0, r1, products, frame0)
            t3 = time.perf_counter()
            n_valid, n_bad, top = mask_impossible(products)
            valid_px += n_valid
            impossible_px += n_bad
            largest = max(largest, top)
            t4 = time.perf_counter()
            for sink in late:
                sink.write(r0, r1, products, frame0)
            t_est += (t2 - t1) + (t4 - t3)
            t_sink += (t3 - t2) + (time.perf_counter() - t4)
            if bar is not None:
                bar.update(r1 - r0)
    finally:
        if bar is not None:
            bar.close()
    return {"estimate_s": t_est, "sinks_s": t_sink, "compiled": compiled, "noise_source": noise_source,
            "valid_px": valid_px.tolist(), "impossible_px": impossible_px.tolist(), "largest_dolp": largest,
            "pixels": int(source.shape[0] * source.shape[1])}
