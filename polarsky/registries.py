"""The registries of every family of methods, and the command line's choices.

Declared here (light: no numerical imports) and loaded on first use; see
:class:`polarsky._shared.registry.Registry`.
"""

from __future__ import annotations

from ._shared.registry import Registry

__all__ = ["DEMOSAIC_METHODS", "LENS_MODELS", "SKY_MODELS", "SKY_RADIANCE_MODELS", "SURFACES", "RESPONSE_METHODS"]

#: Decoding of a polarization mosaic (``--demosaic``): entries are
#: :class:`polarsky.mosaic.methods.DemosaicMethod`.
DEMOSAIC_METHODS = Registry("demosaic method", "--demosaic", {
    "superpixel": "polarsky.mosaic.methods:SUPERPIXEL",
    "bilinear": "polarsky.mosaic.methods:BILINEAR",
    "newton": "polarsky.mosaic.methods:NEWTON",
})

#: Lens projections (``--lens``): entries are :class:`polarsky.geometry.camera.Lens` classes.
LENS_MODELS = Registry("lens model", "--lens", {
    "pinhole": "polarsky.geometry.camera:PinholeLens",
    "fisheye-equidistant": "polarsky.geometry.camera:FisheyeEquidistantLens",
    "fisheye-equisolid": "polarsky.geometry.camera:FisheyeEquisolidLens",
})

#: Clear-sky polarization models (``--model``): entries are model classes of
#: :mod:`polarsky.sky.models`.
SKY_MODELS = Registry("sky model", "--model", {
    "rayleigh": "polarsky.sky.models:RayleighSingleScattering",
    "neutral-points": "polarsky.sky.models:NeutralPointsBerry2004",
})

#: Sky radiance models that weigh the sky's pixels in a plan (``--radiance``): entries are
#: :class:`polarsky.plan.radiance.RadianceModel` instances.
SKY_RADIANCE_MODELS = Registry("sky radiance model", "--radiance", {
    "uniform": "polarsky.plan.radiance:UNIFORM",
    "cie-clear": "polarsky.plan.radiance:CIE_CLEAR_SKY",
})

#: Reflecting surfaces of glare planning (``--surface``): entries are
#: :class:`polarsky.core.refractive_index.SurfaceIndex` (index relative to air, with its source).
SURFACES = Registry("surface", "--surface", {
    "water": "polarsky.core.refractive_index:WATER",
    "glass": "polarsky.core.refractive_index:GLASS",
    "ice": "polarsky.core.refractive_index:ICE",
})

#: Recovery of a camera response curve from an exposure series (``calibrate response --response-method``):
#: entries are :class:`polarsky.core.response.ResponseMethod`.
RESPONSE_METHODS = Registry("response method", "--response-method", {
    "debevec": "polarsky.core.response:DEBEVEC",
    "robertson": "polarsky.core.response:ROBERTSON",
})
