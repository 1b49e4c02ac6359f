"""Angle offsets of each micro-polarizer position (mosaic cameras) against the sky model.

References
----------
.. [1] N. Hagen, Y. Otani, Opt. Eng. 58(8), 080501 (2019) (diattenuation in the analysis
   matrix).
"""

from __future__ import annotations

import numpy as np

__all__ = ["position_samples", "fit_position_offsets"]


def position_samples(intensities, aolp_model_deg, dolp_model, used, *, max_samples: int = 20_000, seed: int = 0):
    """Random sky pixels of one bracket for :func:`fit_position_offsets`.

    Returns a dict of ``intensities`` (4, C, n), ``psi`` (n, radians), ``p`` (C, n).
    """
    from .fit import subsample

    idx = subsample(used, max_samples, seed)
    n_pos, c = intensities.shape[:2]
    return {"intensities": intensities.reshape(n_pos, c, -1)[:, :, idx].astype(np.float64),
            "psi": np.deg2rad(aolp_model_deg.reshape(-1)[idx].astype(np.float64)),
            "p": dolp_model.reshape(c, -1)[:, idx].astype(np.float64)}


def fit_position_offsets(samples: list, angles_deg, *, rounds: int = 4) -> dict:
    """Angle offset of each micro-polarizer position (mosaic cameras) against the sky model.

    For position ``k`` at nominal angle ``theta_k``,
    ``I_k / S0 = 1/2 (1 + a_k p cos(2 (theta_k + delta_k) - 2 psi))`` with the model's AoLP
    ``psi`` and DoLP ``p``; ``delta_k`` and an amplitude ``a_k`` (diattenuation times any
    error of the model's DoLP scale) are fitted per position and channel with a soft-L1
    loss, alternating with ``S0`` (which depends on the position angles).  Phase and
    amplitude separate only where ``psi`` varies over the pixels: over a narrow field
    ``a_k`` and ``delta_k`` are tied, which the returned correlation shows.

    Parameters
    ----------
    samples : list of dict
        From :func:`position_samples` (one per bracket; they are fitted together).
    angles_deg : sequence of 4 float
        Nominal micro-polarizer angles.

    Returns
    -------
    dict
        ``offsets_deg``, ``sigma_deg``, ``amplitude``, ``correlation`` (between amplitude
        and offset), each (4, C).
    """
    from scipy.optimize import least_squares

    from ..core.stokes import analysis_matrix, solve_matrix

    inten = np.concatenate([s["intensities"] for s in samples], axis=2)
    psi = np.concatenate([s["psi"] for s in samples])
    p = np.concatenate([s["p"] for s in samples], axis=1)
    n_pos, c, _ = inten.shape
    theta = np.deg2rad(np.asarray(angles_deg, dtype=np.float64))
    off = np.zeros((n_pos, c))
    amp = np.ones((n_pos, c))
    sig = np.zeros((n_pos, c))
    corr = np.zeros((n_pos, c))
    for ch in range(c):
        for _ in range(rounds):
            row0 = solve_matrix(analysis_matrix(np.rad2deg(theta) + off[:, ch]))[0]
            s0 = np.tensordot(row0, inten[:, ch], axes=1)
            good = (s0 > 0) & np.isfinite(s0) & np.isfinite(p[ch]) & np.isfinite(psi)
            for k in range(n_pos):
                g = good & np.isfinite(inten[k, ch])
                y = inten[k, ch, g] / s0[g]
                pp, ps, th = p[ch, g], psi[g], theta[k]

                def resid(x, y=y, pp=pp, ps=ps, th=th):
                    return y - 0.5 * (1 + x[0] * pp * np.cos(2 * (th + np.deg2rad(x[1])) - 2 * ps))

                res = least_squares(resid, [amp[k, ch], off[k, ch]], loss="soft_l1", f_scale=0.01, method="trf",
                                    diff_step=1e-6)
                jtj = res.jac.T @ res.jac
                var = 2.0 * res.cost / max(y.size - 2, 1)
                cov = var * np.linalg.pinv(jtj)
                amp[k, ch], off[k, ch] = res.x
                sd = np.sqrt(np.clip(np.diag(cov), 0, None))
                sig[k, ch] = sd[1]
                corr[k, ch] = cov[0, 1] / (sd[0] * sd[1]) if sd[0] > 0 and sd[1] > 0 else 1.0
    off = (off + 90.0) % 180.0 - 90.0
    return {"offsets_deg": off, "sigma_deg": sig, "amplitude": amp, "correlation": corr}
