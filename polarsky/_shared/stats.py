"""Order statistics on the hot paths, without the imports ``np.percentile`` pulls in.

``np.percentile`` of numpy 2 imports ``numpy.ma`` on first use (tens of milliseconds at every
start of a command); :func:`percentile` gives the same values from ``np.partition``.
"""

from __future__ import annotations

import numpy as np

__all__ = ["percentile"]


def percentile(values, q: float) -> float:
    """The ``q``-th percentile (0..100) of ``values``, as ``np.percentile`` computes it by
    default (linear interpolation between the two nearest ranks, Hyndman & Fan 1996
    definition 7).  NaN if ``values`` is empty or holds a NaN.

    Examples
    --------
    >>> percentile([1.0, 2.0, 3.0, 4.0], 50), float(np.percentile([1.0, 2.0, 3.0, 4.0], 50))
    (2.5, 2.5)
    """
    a = np.asarray(values, dtype=np.float64).ravel()
    if a.size == 0 or np.isnan(a).any():
        return float("nan")
    pos = (a.size - 1) * float(q) / 100.0
    lo = int(np.floor(pos))
    hi = min(lo + 1, a.size - 1)
    part = np.partition(a, (lo, hi))
    frac = pos - lo
    return float(part[lo] + (part[hi] - part[lo]) * frac) if frac else float(part[lo])
