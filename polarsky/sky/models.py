"""Registry of clear-sky polarization models (feeds ``--model``).

A model maps the sun direction, the zenith and the viewing rays (same frame, rays of any
length) to the DoLP and an E-vector direction per ray.  Its ``shape(sun, rays, up=)`` is
the DoLP for ``dolp_max = 1`` so a linear scale can be fitted; ``evector(sun, rays, *,
need_z, up=)`` returns the E-vector as a tuple of three arrays.  Add a model by writing a
class with these members and registering it in :data:`polarsky.registries.SKY_MODELS`.

Models: ``rayleigh`` (single scattering) and ``neutral-points`` (the Berry, Dennis & Lee
2004 singularity model of the AoLP pattern, with the four neutral points).
"""

from __future__ import annotations

import numpy as np

from .rayleigh import rayleigh_evector

__all__ = ["RayleighSingleScattering", "NeutralPointsBerry2004", "get_model"]


class RayleighSingleScattering:
    """Single Rayleigh scattering; parameter ``dolp_max`` scales ``sin^2/(1+cos^2)``.

    References
    ----------
    .. [1] Chandrasekhar (1950); Coulson (1988).
    """

    name = "rayleigh"
    title = "single-scattering Rayleigh"
    parameters = ("dolp_max",)

    def shape(self, sun, rays, *, up=None):
        """DoLP for dolp_max = 1 for rays (tuple of 3 broadcastable arrays) of any length.

        Uses ``cos^2 gamma = (s.r)^2 / (r.r)``, so ``(r.r - (s.r)^2) / (r.r + (s.r)^2)``.
        """
        dt = np.result_type(rays[0], rays[1], rays[2])
        s = [dt.type(x) for x in sun]
        num = s[0] * rays[0] + s[1] * rays[1] + s[2] * rays[2]
        num *= num
        n2 = rays[0] * rays[0] + rays[1] * rays[1] + rays[2] * rays[2]
        out = n2 - num
        n2 += num
        out /= n2
        return out

    def evector(self, sun, rays, *, need_z=True, up=None):
        """E-vector (tuple of 3 arrays, any length); ``need_z=False`` may skip the z part."""
        return rayleigh_evector(sun, rays, need_z=need_z)


class NeutralPointsBerry2004:
    """Berry, Dennis & Lee (2004) singularity model: the four neutral points of the clear sky.

    In the stereographic sky plane ``zeta = tan(theta/2) exp(i phi)`` (zenith at 0, phi
    measured from the sun's azimuth) the single-scattering pattern is
    ``w_R = -4 (zeta - zeta_S)^2 (1 + conj(zeta_S) zeta)^2 / ((1+|zeta|^2)^2 (1+|zeta_S|^2)^2)``
    with ``|w_R| = sin^2(gamma)`` and the E-vector at ``arg(w)/2``.  Multiple scattering
    splits each double zero: the sun's into the Babinet and Brewster points, ``delta``
    above and below the sun on its vertical circle, and the antisun's into the Arago point
    (``delta`` above the antisun) and the fourth point (``delta`` below):
    ``w = -4 (zeta - zeta_Ba)(zeta - zeta_Br)(1 + conj(zeta_Ba) zeta)(1 + conj(zeta_Br) zeta)
    / ((1+|zeta|^2)^2 (1+|zeta_Ba|^2)(1+|zeta_Br|^2))``, which has simple zeros (index +1/2
    singularities of the E-line field) at the four points and equals ``w_R`` for
    ``delta = 0``.

    The DoLP shape is taken as ``|w| / (1 + cos^2 gamma)``, the single-scattering shape
    with the split zeros; the horizon depolarization that the paper adds to match measured
    degrees is not modelled here.

    Parameters
    ----------
    neutral_point_deg : float
        Angular distance ``delta`` of each neutral point from the sun or antisun, degrees
        (about 15-25 in clear air; the Arago point is ~20 degrees above the antisun, higher
        in turbid air).

    References
    ----------
    .. [1] M. V. Berry, M. R. Dennis, R. L. Lee Jr, "Polarization singularities in the clear
       sky", New J. Phys. 6, 162 (2004), doi:10.1088/1367-2630/6/1/162.
    .. [2] AMS Glossary of Meteorology, "Arago point" (positions of the neutral points).
    """

    name = "neutral-points"
    title = "neutral-point model, Berry et al. 2004"
    parameters = ("dolp_max",)

    def __init__(self, neutral_point_deg: float = 20.0):
        self.delta = np.deg2rad(float(neutral_point_deg))

    # the frame: z' = up, x' toward the sun's azimuth, y' = z' x x'
    @staticmethod
    def _frame(sun, up):
        up = np.asarray(up, dtype=np.float64)
        up = up / np.linalg.norm(up)
        s = np.asarray(sun, dtype=np.float64)
        h = s - (s @ up) * up
        if np.linalg.norm(h) < 1e-12:  # sun at the zenith: any horizontal axis
            h = np.cross(up, [1.0, 0.0, 0.0])
            if np.linalg.norm(h) < 1e-12:
                h = np.cross(up, [0.0, 1.0, 0.0])
        x = h / np.linalg.norm(h)
        y = np.cross(up, x)
        theta_s = np.arccos(np.clip(s @ up / np.linalg.norm(s), -1, 1))
        return x, y, up, theta_s

    def _w(self, sun, rays, up):
        x, y, z, theta_s = self._frame(sun, up)
        dt = np.result_type(rays[0], rays[1], rays[2])
        rx = x[0] * rays[0] + x[1] * rays[1] + x[2] * rays[2]
        ry = y[0] * rays[0] + y[1] * rays[1] + y[2] * rays[2]
        rz = z[0] * rays[0] + z[1] * rays[1] + z[2] * rays[2]
        n = np.sqrt(rx * rx + ry * ry + rz * rz)
        # zeta = tan(theta/2) e^{i phi} = (rx + i ry) / (n + rz)
        with np.errstate(divide="ignore", invalid="ignore"):
            zeta = (rx + 1j * ry) / (n + rz)
        zb = np.tan((theta_s - self.delta) / 2)  # Babinet (toward the zenith)
        zr = np.tan((theta_s + self.delta) / 2)  # Brewster
        a2 = np.abs(zeta) ** 2
        w = (-4 * (zeta - zb) * (zeta - zr) * (1 + zb * zeta) * (1 + zr * zeta)
             / ((1 + a2) ** 2 * (1 + zb * zb) * (1 + zr * zr)))
        return w, zeta, (x, y, z), (rx, ry, rz, n), dt

    def shape(self, sun, rays, *, up=None):
        w, _, _, (rx, ry, rz, n), dt = self._w(sun, rays, up)
        s = np.asarray(sun, dtype=np.float64)
        s = s / np.linalg.norm(s)
        cg = (s[0] * rays[0] + s[1] * rays[1] + s[2] * rays[2]) / n
        return (np.abs(w) / (1 + cg * cg)).astype(dt, copy=False)

    def evector(self, sun, rays, *, need_z=True, up=None):
        w, zeta, (x, y, z), (rx, ry, rz, n), dt = self._w(sun, rays, up)
        phi = np.angle(zeta)
        beta = 0.5 * np.angle(w) - phi  # from e_theta toward e_phi
        th = np.arccos(np.clip(rz / n, -1, 1))
        ct, st, cp, sp = np.cos(th), np.sin(th), np.cos(phi), np.sin(phi)
        cb, sb = np.cos(beta), np.sin(beta)
        # e_theta = ct cp x + ct sp y - st z; e_phi = -sp x + cp y
        ax = cb * ct * cp - sb * sp
        ay = cb * ct * sp + sb * cp
        az = -cb * st
        e = tuple((ax * x[k] + ay * y[k] + az * z[k]).astype(dt, copy=False) for k in range(3))
        return e


def get_model(name: str, **params):
    """An instance of the sky model registered as ``name`` (:data:`polarsky.registries.SKY_MODELS`)."""
    from ..registries import SKY_MODELS

    return SKY_MODELS.get(name)(**params)
