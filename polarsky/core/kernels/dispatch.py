"""Entry points of the compiled Stokes kernels (flat pixel arrays, float32)."""

from __future__ import annotations

import numpy as np

from ._generated import SOLVE_PASS
from .compiled import finish_pass, masked_sums, smooth_pass, uncertainty_pass

__all__ = ["MAX_FRAMES", "solve_pass", "finish_pass", "uncertainty_pass", "smooth_pass", "masked_sums", "warm"]

#: Largest frame count with a compiled solve pass; more frames use the numpy reference.
MAX_FRAMES = max(SOLVE_PASS)


def solve_pass(frames, invalid, solve, w, mode, inv_full_well, q_var, srgb, s_out, dolp_out, aolp_out, res_out,
               var_out):
    """Least-squares Stokes vector, DoLP, AoLP, residual and noise variance of every pixel.

    Parameters
    ----------
    frames : float32 (N, P), 3 <= N <= :data:`MAX_FRAMES`
    invalid : bool (P,)
    solve : float32 (3, N)
        Least-squares solve matrix.
    w : float32 (N, 3)
        Analysis matrix.
    mode : int
        0 noise model, 1 residual variance.
    inv_full_well, q_var : float32
        Noise-model parameters (:meth:`polarsky.core.noise.NoiseModel.parameters`).
    srgb : bool
    s_out : float32 (3, P); dolp_out, aolp_out, res_out, var_out : float32 (P,)
        Outputs (``res_out`` is not written when N == 3).
    """
    SOLVE_PASS[frames.shape[0]](frames, invalid, solve, w, np.int64(mode), np.float32(inv_full_well),
                                np.float32(q_var), bool(srgb), s_out, dolp_out, aolp_out, res_out, var_out)


def warm(n_frames: int) -> None:
    """Load the compiled code of the bracket passes for ``n_frames`` frames (from numba's
    cache) by running them on one pixel, with the argument types of the real calls."""
    n = int(n_frames)
    f32 = np.float32
    s = np.zeros((3, 1), f32)
    dolp, aolp, res, var = (np.zeros(1, f32) for _ in range(4))
    if n in SOLVE_PASS:
        solve_pass(np.ones((n, 1), f32), np.zeros(1, bool), np.zeros((3, n), f32), np.zeros((n, 3), f32), 1, 0.0, 0.0,
                   False, s, dolp, aolp, res, var)
    out = [np.zeros(1, f32) for _ in range(3)]
    uncertainty_pass(s, dolp, var, np.zeros(6, f32), *out)
    smooth_pass(np.zeros((1, 1), f32), 2, np.zeros((1, 1), f32))
    masked_sums(np.zeros(1, bool), (dolp,) * 6, np.zeros(6))
