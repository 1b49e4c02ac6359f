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

from ..core.noise import NoiseModel
from .block import SMOOTH_RADIUS, estimate, needs_context

__all__ = ["run_blocks", "block_rows", "use_compiled", "BLOCK_VALUES", "COMPILED_MIN_VALUES"]

#: Target number of float32 values per analyzer in one row block.
BLOCK_VALUES = 1 << 20
#: Inputs with fewer values (pixels x channels x analyzers, or sensor pixels of a mosaic) than
#: this use the numpy reference path: it is as fast there, and loading the compiled kernels
#: costs about a second.
COMPILED_MIN_VALUES = 4_000_000


def use_compiled(n_values: int) -> bool:
    """Whether an input of ``n_values`` values is large enough for the compiled kernels."""
    return int(n_values) >= COMPILED_MIN_VALUES


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
        (default all): only the products some sink needs are computed.
    rows : int, optional
        Rows per block (default :func:`block_rows`).
    compiled : bool, optional
        Force the compiled kernels on or off (default: the source's ``compiled``).
    progress : bool
        Show a progress bar on stderr when it is a terminal.

    Returns
    -------
    dict
        ``estimate_s`` and ``sinks_s`` (seconds), ``compiled`` and ``noise_source``.
    """
    h = source.shape[0]
    nc = len(source.channels)
    rows = max(1, int(rows or block_rows(source.shape, nc)))
    compiled = source.compiled if compiled is None else bool(compiled)
    noise_source = noise.resolved_source(source.n_analyzers)
    needs = _needs(sinks)
    context = SMOOTH_RADIUS if noise_source == "residual" and needs_context(needs) else 0
    t_est = t_sink = 0.0
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
            for sink in sinks:
                sink.write(r0, r1, products, frame0)
            t_est += t2 - t1
            t_sink += time.perf_counter() - t2
            if bar is not None:
                bar.update(r1 - r0)
    finally:
        if bar is not None:
            bar.close()
    return {"estimate_s": t_est, "sinks_s": t_sink, "compiled": compiled, "noise_source": noise_source}
