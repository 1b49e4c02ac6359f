"""Order statistics agree with numpy's (the general-purpose reference implementation)."""

from __future__ import annotations

import numpy as np
import pytest

from polarsky._shared.stats import percentile


@pytest.mark.parametrize("n", [1, 2, 5, 100, 1001])
@pytest.mark.parametrize("q", [0, 1, 50, 99, 99.5, 100])
def test_percentile_equals_numpys_default(n, q):
    a = np.random.default_rng(n).standard_normal(n).astype(np.float32)
    assert percentile(a, q) == pytest.approx(float(np.percentile(a.astype(np.float64), q)), rel=1e-12, abs=1e-12)
