"""Per-pixel intensity noise: shot noise, read noise and quantization.

The variance of a linear pixel value ``x`` (normalized to [0, 1] of full scale) is

.. math:: \\sigma^2 = x / N_{fw} + q\\,g(x),\\qquad q = (r^2 + 1/12) / F^2

with ``N_fw`` the electrons at full scale (shot noise), ``r`` the read noise and ``1/12`` the
quantization noise of one code in DN, ``F`` the full scale in DN, and ``g(x) = 1`` for
linear files or ``g(x) = (dL/dV)^2`` for sRGB-encoded files, whose read and quantization
noise arise on the encoded value ``V`` (IEC 61966-2-1 slope, never below 1/12.92^2).

:func:`model_variance` is written once and serves both the numpy reference (arrays) and the
compiled kernels (scalars, inlined by numba).

References
----------
.. [1] EMVA Standard 1288, Release 4.0 (2021), section 2 (linear camera model: shot noise,
   dark noise, quantization noise 1/12 DN^2).
.. [2] IEC 61966-2-1:1999, section 5.2 (sRGB transfer function and its slope).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

from ..errors import InputError

__all__ = ["NoiseModel", "model_variance", "DEFAULT_FULL_WELL_E", "NOISE_SOURCES"]

#: Full-well capacity assumed when no gain is given (electrons at full scale).
DEFAULT_FULL_WELL_E = 20000.0
#: Accepted values of the ``noise`` setting.
NOISE_SOURCES = ("auto", "model", "residual")

_SRGB_SLOPE_COEF = (2.4 / 1.055) ** 2
_SRGB_SLOPE_POWER = 2 * 1.4 / 2.4
_SRGB_SLOPE_MIN = 1 / 12.92 ** 2


def model_variance(mean_intensity, inv_full_well, q_var, srgb):
    """Noise-model variance at a linear intensity (normalized units squared).

    Parameters
    ----------
    mean_intensity : float or ndarray
        Linear intensity, [0, 1] of full scale (negative values count as 0).
    inv_full_well : float
        ``1 / N_fw`` (electrons at full scale).
    q_var : float
        Read plus quantization variance in normalized units squared,
        ``(read_noise_dn^2 + 1/12) / full_scale^2``.
    srgb : bool
        The values were sRGB-encoded (read and quantization noise scaled by ``(dL/dV)^2``).

    Returns
    -------
    float or ndarray
        Variance in the dtype of ``mean_intensity``.

    Examples
    --------
    >>> float(model_variance(0.5, 1 / 20000, 0.0, False))
    2.5e-05
    """
    x = np.maximum(mean_intensity, 0 * mean_intensity)
    var = x * inv_full_well
    if srgb:
        slope2 = np.maximum(_SRGB_SLOPE_COEF * x ** _SRGB_SLOPE_POWER, _SRGB_SLOPE_MIN + 0 * x)
        var = var + q_var * slope2
    else:
        var = var + q_var
    return var


@dataclass(frozen=True)
class NoiseModel:
    """Where the uncertainties come from, and the camera's noise parameters.

    Parameters
    ----------
    gain_e_per_dn : float, optional
        Electrons per digital number of the files; default assumes a full well of
        :data:`DEFAULT_FULL_WELL_E` electrons at full scale.
    read_noise_dn : float
        Read noise in digital numbers of the files.
    source : {"auto", "model", "residual"}
        ``auto`` uses the fit residual when there are more than 3 analyzers and no gain was
        given, the noise model otherwise.
    """

    gain_e_per_dn: float | None = None
    read_noise_dn: float = 1.0
    source: str = "auto"

    def __post_init__(self):
        if self.source not in NOISE_SOURCES:
            raise InputError(f"--noise {self.source!r} is not one of {', '.join(NOISE_SOURCES)}")
        g = self.gain_e_per_dn
        if g is not None and not (math.isfinite(g) and g > 0):
            raise InputError(f"--gain-e-per-dn must be a positive number, got {g!r}")
        r = self.read_noise_dn
        if not (math.isfinite(r) and r >= 0):
            raise InputError(f"--read-noise-dn must be a finite number >= 0, got {r!r}")

    def resolved_source(self, n_analyzers: int) -> str:
        """``"model"`` or ``"residual"`` for a fit of ``n_analyzers`` analyzers."""
        if self.source == "auto":
            return "residual" if (n_analyzers > 3 and self.gain_e_per_dn is None) else "model"
        if self.source == "residual" and n_analyzers <= 3:
            raise InputError("--noise residual needs more than 3 analyzer angles; use --noise model "
                             "(and give --gain-e-per-dn)")
        return self.source

    def parameters(self, full_scale: float) -> tuple:
        """``(inv_full_well, q_var)`` for :func:`model_variance` at a native full scale (DN)."""
        fw = DEFAULT_FULL_WELL_E if self.gain_e_per_dn is None else self.gain_e_per_dn * full_scale
        q = (self.read_noise_dn ** 2 + 1.0 / 12.0) / full_scale ** 2
        return 1.0 / fw, q

    def variance(self, mean_intensity, full_scale: float, srgb: bool):
        """Noise-model variance (normalized units squared) at a mean linear intensity."""
        inv_fw, q = self.parameters(full_scale)
        x = np.asarray(mean_intensity)
        dt = x.dtype if x.dtype.kind == "f" else np.float64
        return model_variance(x.astype(dt, copy=False), dt.type(inv_fw), dt.type(q), bool(srgb)).astype(dt, copy=False)
