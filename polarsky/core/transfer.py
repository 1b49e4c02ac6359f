"""Transfer functions between encoded pixel values and linear light.

References
----------
.. [1] IEC 61966-2-1:1999, *Multimedia systems and equipment - Colour measurement and
   management - Part 2-1: Default RGB colour space - sRGB*, section 5.2 (the transfer
   function with its linear segment below 0.04045).
"""

from __future__ import annotations

import functools

import numpy as np

__all__ = ["srgb_to_linear", "linear_to_srgb", "srgb_lut", "srgb_slope"]


_KNEE_V = 0.04045
_KNEE_L = 0.0031308


def _as_float(a):
    """``a`` as a float array (float32 stays float32, integers become float64) and its dtype."""
    a = np.asarray(a)
    dt = a.dtype if a.dtype.kind == "f" else np.dtype(np.float64)
    return a.astype(dt, copy=False), dt


def srgb_to_linear(v):
    """Decode sRGB-encoded values in [0, 1] to linear light (IEC 61966-2-1).

    Parameters
    ----------
    v : array_like
        Encoded signal in [0, 1].

    Returns
    -------
    ndarray
        ``v / 12.92`` for ``v <= 0.04045``, else ``((v + 0.055) / 1.055) ** 2.4``;
        float32 input stays float32.

    References
    ----------
    .. [1] IEC 61966-2-1:1999, section 5.2.

    Examples
    --------
    >>> round(float(srgb_to_linear(0.5)), 8)
    0.21404114
    """
    v, dt = _as_float(v)
    return np.where(v <= _KNEE_V, v / dt.type(12.92), ((v + dt.type(0.055)) / dt.type(1.055)) ** dt.type(2.4)).astype(dt)


def linear_to_srgb(lin):
    """Encode linear light in [0, 1] with the sRGB transfer function (IEC 61966-2-1).

    Parameters
    ----------
    lin : array_like
        Linear light; negative values count as 0.

    Returns
    -------
    ndarray
        ``12.92 L`` for ``L <= 0.0031308``, else ``1.055 L^(1/2.4) - 0.055`` (the inverse of
        :func:`srgb_to_linear`, IEC 61966-2-1:1999 section 5.2), in the float dtype of ``lin``.

    Examples
    --------
    >>> round(float(linear_to_srgb(0.18)), 12)
    0.4613561295
    """
    lin, dt = _as_float(lin)
    lin = np.clip(lin, 0, None)
    return np.where(lin <= _KNEE_L, lin * dt.type(12.92), dt.type(1.055) * lin ** (1 / 2.4) - dt.type(0.055)).astype(dt)


@functools.lru_cache(maxsize=4)
def srgb_lut(levels: int = 256) -> np.ndarray:
    """Lookup table (float32, read-only, length ``levels``) decoding codes 0..levels-1 to linear."""
    lut = srgb_to_linear(np.arange(levels, dtype=np.float64) / (levels - 1)).astype(np.float32)
    lut.flags.writeable = False
    return lut


def srgb_slope(v):
    """Derivative dL/dV of the sRGB decoding at encoded value ``v`` (for noise propagation)."""
    v = np.asarray(v, dtype=np.float64)
    return np.where(v <= _KNEE_V, 1 / 12.92, 2.4 / 1.055 * ((v + 0.055) / 1.055) ** 1.4)
