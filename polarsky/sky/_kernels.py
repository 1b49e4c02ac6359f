"""Compiled (numba) single-pass model maps for a pinhole camera and the Rayleigh sky.

:func:`polarsky.sky.skymap.model_maps` uses this kernel for the common case (pinhole lens
without distortion, single-scattering model, float32 maps); the numpy code in
:mod:`polarsky.sky.skymap` stays the reference implementation and tests check that both
agree.  Rows are processed in parallel.

References
----------
.. [1] S. Chandrasekhar, *Radiative Transfer*, Oxford (1950) (single scattering).
.. [2] M. Abramowitz, I. A. Stegun, *Handbook of Mathematical Functions*, NBS (1964),
   eq. 4.4.49 (the arctangent polynomial, via :func:`polarsky.core.kernels.compiled.atan2_poly`).
"""

from __future__ import annotations

import math

import numpy as np
from numba import prange

from ..core.kernels.compiled import atan2_poly as atan2_as
from ..core.kernels.policy import parallel_kernel

__all__ = ["pinhole_rayleigh_maps"]

_DEG = 57.29577951308232


@parallel_kernel
def _maps(sun, up, east, north, f, cx, cy, dmax, sensor, dolp, aolp, scat, elev, azim, upm,
          w_dolp, w_aolp, w_scat, w_elev, w_azim, w_up):
    h, w = upm.shape if w_up else (dolp.shape if w_dolp else aolp.shape)
    inv_f = 1.0 / f
    for r in prange(h):
        y = (r - cy) * inv_f
        for c in range(w):
            x = (c - cx) * inv_f
            n2 = x * x + y * y + 1.0
            num = sun[0] * x + sun[1] * y + sun[2]
            if w_dolp:
                q = num * num
                dolp[r, c] = dmax * (n2 - q) / (n2 + q)
            if w_aolp:
                # E = s x (x, y, 1)
                e0 = sun[1] - sun[2] * y
                e1 = sun[2] * x - sun[0]
                if sensor:
                    e2 = sun[0] * y - sun[1] * x
                    rho = math.sqrt(x * x + y * y)
                    norm = math.sqrt(n2)
                    if rho > 0:
                        cphi = x / rho
                        sphi = y / rho
                    else:
                        cphi = 1.0
                        sphi = 0.0
                    ct = 1.0 / norm
                    st = rho / norm
                    a = e0 * ct * cphi + e1 * ct * sphi - e2 * st
                    b = -e0 * sphi + e1 * cphi
                    dx = a * cphi - b * sphi
                    dup = -(a * sphi + b * cphi)
                else:
                    dx = e0
                    dup = -e1
                if dup < 0:
                    dup = -dup
                    dx = -dx
                ang = atan2_as(dup, dx) * _DEG
                if ang >= 180.0:
                    ang = 0.0
                aolp[r, c] = ang
            if w_scat or w_elev:
                norm = math.sqrt(n2)
                if w_scat:
                    cg = num / norm
                    cg = min(1.0, max(-1.0, cg))
                    scat[r, c] = math.acos(cg) * _DEG
                if w_elev:
                    se = (up[0] * x + up[1] * y + up[2]) / norm
                    se = min(1.0, max(-1.0, se))
                    elev[r, c] = math.asin(se) * _DEG
            if w_azim:
                ee = east[0] * x + east[1] * y + east[2]
                nn = north[0] * x + north[1] * y + north[2]
                az = atan2_as(ee, nn) * _DEG
                if az < 0:
                    az += 360.0
                azim[r, c] = az
            if w_up:
                upm[r, c] = (up[0] * x + up[1] * y + up[2]) > 0


@parallel_kernel
def _front_maps(s0, s1, s2, u0, u1, u2, f, cx, cy, dmax, dolp, aolp, upm):
    """DoLP, AoLP and the horizon test only, front placement: row terms hoisted, branch-light."""
    h, w = upm.shape
    inv = 1.0 / f
    for r in prange(h):
        y = (r - cy) * inv
        e0 = s1 - s2 * y
        by = s1 * y + s2
        uy = u1 * y + u2
        yy = y * y + 1.0
        drow = dolp[r]
        arow = aolp[r]
        urow = upm[r]
        for c in range(w):
            x = (c - cx) * inv
            n2 = x * x + yy
            num = s0 * x + by
            q = num * num
            drow[c] = dmax * (n2 - q) / (n2 + q)
            e1 = s2 * x - s0
            sg = 1.0 if e1 <= 0 else -1.0  # fold the line direction into [0, 180)
            ang = atan2_as(-e1 * sg, e0 * sg) * _DEG
            arow[c] = ang if ang < 180.0 else 0.0
            urow[c] = (u0 * x + uy) > 0


def pinhole_rayleigh_maps(h, w, *, sun_cam, up_cam, east_cam, north_cam, focal_px, cx, cy, dolp_max, placement,
                          want) -> dict:
    """Float32 maps (h, w) named in ``want`` (dolp, aolp, scattering_angle, elevation, azimuth, up, inside)."""
    def arr(name, dt=np.float32):
        return np.empty((h, w), dt) if name in want else np.empty((1, 1), dt)

    if placement == "front" and set(want) <= {"dolp", "aolp", "up", "inside"}:
        dolp = np.empty((h, w), np.float32)
        aolp = np.empty((h, w), np.float32)
        upm = np.empty((h, w), np.bool_)
        s, u = (np.asarray(v, dtype=np.float64) for v in (sun_cam, up_cam))
        _front_maps(s[0], s[1], s[2], u[0], u[1], u[2], float(focal_px), float(cx), float(cy), float(dolp_max),
                    dolp, aolp, upm)
        res = {"dolp": dolp, "aolp": aolp, "up": upm}
        res = {k: res[k] for k in want if k != "inside"}
        if "inside" in want:
            res["inside"] = np.ones((h, w), dtype=bool)
        return res

    out = {k: arr(k) for k in ("dolp", "aolp", "scattering_angle", "elevation", "azimuth")}
    out["up"] = np.empty((h, w), np.bool_)
    f64 = lambda v: np.ascontiguousarray(v, dtype=np.float64)  # noqa: E731
    _maps(f64(sun_cam), f64(up_cam), f64(east_cam), f64(north_cam), float(focal_px), float(cx), float(cy),
          float(dolp_max), placement == "sensor", out["dolp"], out["aolp"], out["scattering_angle"],
          out["elevation"], out["azimuth"], out["up"], "dolp" in want, "aolp" in want, "scattering_angle" in want,
          "elevation" in want, "azimuth" in want, True)
    res = {k: out[k] for k in want if k != "inside"}
    if "inside" in want:
        res["inside"] = np.ones((h, w), dtype=bool)
    return res
