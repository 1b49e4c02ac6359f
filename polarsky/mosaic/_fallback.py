"""Stand-ins for ``polarsky.pipeline.estimate_block`` and ``polarsky.dataset.stokes_dataset``.

Used only while the core modules are not importable (they follow the same contract); the
mosaic code always prefers the core implementations.
"""

from __future__ import annotations

import numpy as np

from .. import stokes as st


def estimate_block(intensities, valid, w, *, weights=None, noise=None, solve=None):
    """Contract-compatible subset of the core's ``estimate_block``."""
    inten = np.asarray(intensities, dtype=np.float32)
    n, c = inten.shape[:2]
    w = np.asarray(w, dtype=np.float64)
    if w.ndim == 2:
        w = np.broadcast_to(w, (c,) + w.shape)
    out = {k: np.empty((c,) + inten.shape[2:], np.float32) for k in
           ("S0", "S1", "S2", "dolp", "dolp_unbiased", "aolp", "sigma_dolp", "sigma_aolp", "residual")}
    for ch in range(c):
        if solve is None:
            s = st.fit_stokes(inten[:, ch], w[ch], weights=weights)
        else:
            s = st.fit_stokes_per_pixel(inten[:, ch], solve[ch])
        res = st.residual_rms(inten[:, ch], w[ch], s)
        var = (res * res) if noise is None else np.float32(noise) ** 2
        dolp, aolp = st.dolp_aolp(s)
        sp, sa, sr = st.sigma_dolp_aolp(s, var, st.stokes_covariance(w[ch], weights))
        out["S0"][ch], out["S1"][ch], out["S2"][ch] = s
        out["dolp"][ch], out["aolp"][ch] = dolp, aolp
        out["sigma_dolp"][ch], out["sigma_aolp"][ch] = sp, sa
        out["dolp_unbiased"][ch] = st.dolp_debiased_plaszczynski2014(dolp, sr)
        out["residual"][ch] = res
    v = np.asarray(valid, bool) & np.isfinite(out["dolp"]) & (out["S0"] > 0)
    for k in out:
        if k not in ("S0", "S1", "S2"):
            out[k][~v] = np.nan
    out["valid"] = v
    return out


_META = {
    "S0": ("1", "Stokes S0 (total intensity)"),
    "S1": ("1", "Stokes S1 (0 minus 90 deg)"),
    "S2": ("1", "Stokes S2 (45 minus 135 deg)"),
    "dolp": ("1", "degree of linear polarization"),
    "dolp_unbiased": ("1", "degree of linear polarization, noise-debiased (MAS)"),
    "aolp": ("degree", "angle of linear polarization, image convention, [0, 180)"),
    "sigma_dolp": ("1", "standard uncertainty of dolp"),
    "sigma_aolp": ("degree", "standard uncertainty of aolp"),
    "residual": ("1", "RMS residual of the analyzer fit"),
    "valid": ("1", "pixel is valid"),
}


def stokes_dataset(products, *, channels, attrs):
    import xarray as xr

    data = {}
    for k, v in products.items():
        units, name = _META.get(k, ("1", k))
        data[k] = (("channel", "y", "x"), v, {"units": units, "long_name": name})
    ny, nx = products["S0"].shape[-2:]
    return xr.Dataset(data, coords={"channel": list(channels), "y": np.arange(ny), "x": np.arange(nx)},
                      attrs=dict(attrs))
