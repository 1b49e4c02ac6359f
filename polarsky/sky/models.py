"""Registry of clear-sky polarization models (feeds ``--model``).

A model maps the sun direction and viewing rays (same frame, any lengths) and its
parameters to the DoLP and an E-vector direction per ray.  Its ``shape`` is the DoLP for
``dolp_max = 1`` so a linear scale can be fitted.  Add a model by writing a class with the
same three members and listing it in :data:`SKY_MODELS` (for example the Berry, Dennis &
Lee (2004) neutral-point model, which needs the sun and antisun singularities split).
"""

from __future__ import annotations

import numpy as np

from .rayleigh import rayleigh_evector

__all__ = ["SKY_MODELS", "RayleighSingleScattering", "get_model"]


class RayleighSingleScattering:
    """Single Rayleigh scattering; parameter ``dolp_max`` scales ``sin^2/(1+cos^2)``.

    References
    ----------
    .. [1] Chandrasekhar (1950); Coulson (1988).
    """

    name = "rayleigh"
    parameters = ("dolp_max",)

    def shape(self, sun, rays):
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

    def evector(self, sun, rays, *, need_z=True):
        """E-vector (tuple of 3 arrays, any length); ``need_z=False`` may skip the z part."""
        return rayleigh_evector(sun, rays, need_z=need_z)


#: Sky models by name.
SKY_MODELS = {"rayleigh": RayleighSingleScattering}


def get_model(name: str):
    from ..errors import InputError

    if name not in SKY_MODELS:
        raise InputError(f"sky model {name!r} is not known; choose one of {', '.join(SKY_MODELS)}")
    return SKY_MODELS[name]()
