"""How precisely each map is stored in ``stokes.nc``: quantization to a documented precision.

Two rules, both leaving ordinary float32 numbers that every NetCDF reader reads as they are;
the dropped low mantissa bits become zeros, which the shuffle and deflate filters compress:

* **Step** (absolute precision): values are rounded to the nearest multiple of a power-of-two
  step, so every value is within half a step of the original.  Multiplying by a power of two is
  exact in floating point, so the rounding is the only error.  Small values (S1, S2, low
  DoLP) keep only the bits the absolute precision needs.
* **Bits** (relative precision, the BitRound method [1]_): the float32 mantissa is rounded to
  ``n`` bits, so every value is within a relative ``2^-(n+1)`` of the original.  Used for
  uncertainties and residuals, whose useful precision is a number of significant digits.

:data:`PRECISION` is the default per variable (``--precision standard``):

===========================  ===================  =============================================
variable                     rule                 largest error
===========================  ===================  =============================================
S0, S1, S2                   step 2^-13 x FS      6.1e-5 of full scale (FS, see below)
dolp, dolp_unbiased          step 2^-13           6.1e-5
aolp                         step 2^-6 deg        0.0078 deg
sigma_dolp, sigma_aolp       8 mantissa bits      0.2 % of the value (2-3 significant digits)
residual                     8 mantissa bits      0.2 % of the value
valid                        exact                -
===========================  ===================  =============================================

FS is the full scale of the Stokes values: 1 for frames that are not normalized for exposure;
with exposure normalization the largest power of two not above the smallest frame's full scale
(``1 / relative exposure``), so the guarantee holds for every frame.  ``--precision full``
keeps the float32 values as computed.

References
----------
.. [1] M. Klöwer, M. Razinger, J. J. Dominguez, P. D. Düben, T. N. Palmer, "Compressing
   atmospheric data into its real information content", Nature Computational Science 1,
   713-724 (2021), doi:10.1038/s43588-021-00156-2 (the BitRound method).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np

__all__ = ["Step", "Bits", "PRECISION", "precision_for", "bitround", "round_to_step", "relative_error"]


@dataclass(frozen=True)
class Step:
    """Round to a multiple of ``2**exponent`` (times the full scale if ``of_full_scale``)."""

    exponent: int
    of_full_scale: bool = False

    def step(self, full_scale: float = 1.0) -> float:
        fs = 2.0 ** math.floor(math.log2(full_scale)) if self.of_full_scale else 1.0
        return 2.0 ** self.exponent * fs

    def apply(self, a: np.ndarray, full_scale: float = 1.0) -> np.ndarray:
        return round_to_step(a, self.step(full_scale))

    def describe(self, full_scale: float = 1.0) -> str:
        s = self.step(full_scale)
        return f"rounded to a multiple of {s:.6g}: error at most {s / 2:.2g}"


@dataclass(frozen=True)
class Bits:
    """Keep ``bits`` float32 mantissa bits (BitRound)."""

    bits: int

    def apply(self, a: np.ndarray, full_scale: float = 1.0) -> np.ndarray:
        return bitround(a, self.bits)

    def describe(self, full_scale: float = 1.0) -> str:
        return f"BitRound to {self.bits} mantissa bits: relative error at most {relative_error(self.bits):.2g}"


#: variable -> default precision rule (``--precision standard``)
PRECISION = {"S0": Step(-13, True), "S1": Step(-13, True), "S2": Step(-13, True),
             "dolp": Step(-13), "dolp_unbiased": Step(-13), "aolp": Step(-6),
             "sigma_dolp": Bits(8), "sigma_aolp": Bits(8), "residual": Bits(8)}


def precision_for(kind: str) -> dict:
    """The per-variable rules of ``--precision`` ``kind`` (``standard`` or ``full``)."""
    return dict(PRECISION) if kind == "standard" else {}


def relative_error(bits: int) -> float:
    """Largest relative rounding error of :func:`bitround` with ``bits`` mantissa bits."""
    return 2.0 ** -(bits + 1)


def round_to_step(values: np.ndarray, step: float) -> np.ndarray:
    """Round float32 ``values`` in place to the nearest multiple of ``step`` (a power of two).

    Examples
    --------
    >>> round_to_step(np.array([0.30000001, -0.1, np.nan], np.float32), 2.0 ** -13)  # 2457.6 -> 2458, -819.2 -> -819
    array([ 0.30004883, -0.09997559,         nan], dtype=float32)
    """
    a = np.asarray(values)
    if a.dtype != np.float32:
        raise TypeError("round_to_step works on float32 arrays")
    m, e = math.frexp(step)
    if m != 0.5:
        raise ValueError(f"step {step} is not a power of two")
    inv = np.float32(1.0 / step)
    np.multiply(a, inv, out=a)
    np.rint(a, out=a)
    np.multiply(a, np.float32(step), out=a)
    return a


def bitround(values: np.ndarray, bits: int) -> np.ndarray:
    """Round float32 ``values`` in place to ``bits`` mantissa bits (NaN and inf unchanged).

    Examples
    --------
    >>> a = np.array([0.1234567, np.nan, 180.0], np.float32)
    >>> bool(abs(bitround(a.copy(), 13)[0] - 0.1234567) <= 0.1234567 * relative_error(13))
    True
    """
    a = np.asarray(values)
    if a.dtype != np.float32:
        raise TypeError("bitround works on float32 arrays")
    if bits >= 23:
        return a
    u = a.view(np.uint32)
    drop = 23 - int(bits)
    finite = (u & np.uint32(0x7F800000)) != np.uint32(0x7F800000)
    rounded = (u + np.uint32(1 << (drop - 1))) & np.uint32((0xFFFFFFFF << drop) & 0xFFFFFFFF)
    np.copyto(u, rounded, where=finite)
    return a
