"""TEMPORARY stand-in for ``polarsky.pipeline.run_stokes`` while the core lands.

Used only when ``polarsky.pipeline`` cannot be imported.  Small images only.
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from ..errors import InputError
from ..stokes import analysis_matrix, dolp_aolp, fit_stokes


def _read(path):
    import imageio.v3 as iio

    try:
        a = np.asarray(iio.imread(path))
    except Exception as exc:
        raise InputError(f"cannot read frame {path}: {exc}") from None
    if a.ndim == 3:
        a = a[..., :3].mean(axis=-1)
    if a.dtype == np.uint8:
        v = a.astype(np.float32) / 255.0
        return np.where(v <= 0.04045, v / 12.92, ((v + 0.055) / 1.055) ** 2.4).astype(np.float32)
    return (a.astype(np.float32) / float(np.iinfo(a.dtype).max if a.dtype.kind == "u" else 1.0))


def run_stokes(frames, out_dir, *, angles_deg=None, manifest=None, transfer="auto", extinction=None,
               angle_offset_deg=0.0, align=False, calibration=None, max_pixels=None, progress=False):
    import csv

    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt
    import xarray as xr

    if manifest is not None:
        with open(manifest, newline="") as fh:
            rows = list(csv.DictReader(fh))
        frames = [Path(manifest).parent / r["file"] for r in rows]
        angles_deg = [float(r["angle_deg"]) for r in rows]
    if angles_deg is None or len(angles_deg) != len(frames):
        raise InputError("angles do not match the frames")
    imgs = [_read(f) for f in frames]
    if len({i.shape for i in imgs}) != 1:
        raise InputError("frames differ in size")
    stack = np.stack(imgs)
    w = analysis_matrix(angles_deg, angle_offset_deg=angle_offset_deg)
    s = fit_stokes(stack, w)
    dolp, aolp = dolp_aolp(s)
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    ds = xr.Dataset({k: (("channel", "y", "x"), v[None].astype(np.float32))
                     for k, v in dict(S0=s[0], S1=s[1], S2=s[2], dolp=dolp, aolp=aolp).items()},
                    coords={"channel": ["L"]})
    ds.to_netcdf(out_dir / "stokes.nc", engine="h5netcdf")
    summary = {"frames": [str(f) for f in frames], "angles_deg": list(angles_deg),
               "mean_dolp": float(np.nanmean(dolp))}
    (out_dir / "summary.json").write_text(json.dumps(summary))
    for name, arr, cmap, vmax in (("dolp", dolp, "viridis", 1.0), ("aolp", aolp, "twilight", 180.0)):
        fig, ax = plt.subplots(figsize=(4, 3))
        im = ax.imshow(arr, cmap=cmap, vmin=0, vmax=vmax)
        fig.colorbar(im, ax=ax)
        fig.savefig(out_dir / f"{name}.png", dpi=60)
        plt.close(fig)
    return summary
