"""Which way to set the filter: closed-form filter-angle advice.

For a region with summed Stokes vector ``(S0, S1, S2)`` the mean intensity behind an
analyzer at ``theta`` with diattenuation ``D`` and transmittance ``t`` is (Malus's law in
Stokes form)

.. math:: T(\\theta) = \\tfrac{t}{2}\\,(S_0 + D\\,(S_1 \\cos 2\\theta + S_2 \\sin 2\\theta)),

smallest at ``theta* = AoLP + 90 deg``, where ``T = t/2 (S0 - D L)`` with ``L = sqrt(S1^2 +
S2^2)``.  Its mean over a full turn of the filter is ``t/2 S0``, so the reduction is
``log2(S0 / (S0 - D L)) = -log2(1 - D DoLP)`` stops.  With a protected region ``p`` the
ratio ``T_p(theta) / T_r(theta)`` of two such sinusoids is maximized in closed form.

References
----------
.. [1] E. Collett, *Field Guide to Polarization*, SPIE (2005), p. 12 (Malus's law) and
   pp. 16-19 (Mueller matrix of a linear polarizer).
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError

__all__ = ["best_angle_for_region", "best_angle_for_contrast", "transmitted"]


def transmitted(s, angle_deg, *, diattenuation: float = 1.0):
    """Mean transmitted intensity of a region with summed/mean Stokes ``s`` at ``angle_deg``."""
    from ..core.stokes import intensity_at

    return intensity_at(s, angle_deg, diattenuation=diattenuation)


def best_angle_for_region(s, *, diattenuation: float = 1.0) -> dict:
    """Analyzer angle that minimizes a region's transmitted intensity (closed form).

    Parameters
    ----------
    s : array_like, shape (3,)
        Summed (or mean) Stokes vector of the region.
    diattenuation : float
        Filter diattenuation ``D = (ER-1)/(ER+1)``.

    Returns
    -------
    dict
        ``best_angle_deg`` in [0, 180), ``region_dolp``, ``region_aolp_deg``,
        ``reduction_stops`` (with D), ``reduction_stops_ideal`` (D = 1),
        ``transmission_at_best`` (fraction of the unfiltered intensity S0).
    """
    s = np.asarray(s, dtype=np.float64)
    if not s[0] > 0:
        raise InputError("the region holds no valid light (S0 <= 0); choose a region with valid pixels")
    lin = float(np.hypot(s[1], s[2]))
    dolp = float(min(lin / s[0], 1.0))
    aolp = float(np.degrees(0.5 * np.arctan2(s[2], s[1])) % 180.0)
    best = (aolp + 90.0) % 180.0
    def stops(d):
        left = 1.0 - d * dolp
        return float(-np.log2(left)) if left > 0 else float("inf")
    return {
        "best_angle_deg": round(best, 3) % 180.0,  # rounding may reach 180: that is 0
        "region_dolp": round(dolp, 5),
        "region_aolp_deg": round(aolp, 3) % 180.0,
        "reduction_stops": round(stops(diattenuation), 4),
        "reduction_stops_ideal": round(stops(1.0), 4),
        "transmission_at_best": round(float(0.5 * (1 - diattenuation * dolp)), 5),
    }


def best_angle_for_contrast(s_protect, s_region, *, diattenuation: float = 1.0) -> dict:
    """Analyzer angle that maximizes ``T_protect / T_region`` (closed form).

    With ``a = (P0, D P1, D P2)`` and ``b = (R0, D R1, D R2)`` the ratio
    ``(a0 + a1 c + a2 s) / (b0 + b1 c + b2 s)`` (c, s = cos, sin of 2 theta) is stationary
    where ``A s + B c + C = 0`` with ``A = a0 b1 - a1 b0``, ``B = a2 b0 - a0 b2``,
    ``C = a2 b1 - a1 b2``; both roots are evaluated and the larger ratio kept.

    Returns
    -------
    dict
        ``best_angle_deg``, ``contrast_gain`` (ratio at best / ratio without filter),
        ``protect_intensity`` and ``region_intensity`` at the best angle as fractions of
        their unfiltered intensities.
    """
    p = np.asarray(s_protect, dtype=np.float64)
    r = np.asarray(s_region, dtype=np.float64)
    if not (p[0] > 0 and r[0] > 0):
        raise InputError("the region or the protected region holds no valid light; choose regions with valid pixels")
    d = diattenuation
    a = np.array([p[0], d * p[1], d * p[2]])
    b = np.array([r[0], d * r[1], d * r[2]])
    A = a[0] * b[1] - a[1] * b[0]
    B = a[2] * b[0] - a[0] * b[2]
    C = a[2] * b[1] - a[1] * b[2]
    R = np.hypot(A, B)

    def ratio(th):
        c, s = np.cos(2 * th), np.sin(2 * th)
        return (a[0] + a[1] * c + a[2] * s) / (b[0] + b[1] * c + b[2] * s)

    if R < 1e-15 * max(abs(a[0] * b[0]), 1e-300):
        cands = [0.0]  # the ratio does not depend on the angle
    else:
        phi = np.arctan2(A, B)  # B cos(2t) + A sin(2t) = R cos(2t - phi)
        x = np.clip(-C / R, -1.0, 1.0)
        delta = np.arccos(x)
        cands = [(phi + delta) / 2, (phi - delta) / 2]
    vals = [ratio(t) for t in cands]
    th = cands[int(np.argmax(vals))]
    best = float(np.degrees(th) % 180.0)
    c, s = np.cos(2 * th), np.sin(2 * th)
    tp = 0.5 * (a[0] + a[1] * c + a[2] * s) / p[0]
    tr = 0.5 * (b[0] + b[1] * c + b[2] * s) / r[0]
    return {
        "best_angle_deg": round(best % 180.0, 3),
        "contrast_gain": round(float(max(vals) / (a[0] / b[0])), 5),
        "protect_intensity": round(float(tp), 5),
        "region_intensity": round(float(tr), 5),
    }
