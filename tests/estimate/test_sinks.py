"""The summary's running statistics: the compiled sums agree with numpy's (the reference)."""

from __future__ import annotations

import numpy as np

from polarsky.estimate.sinks import StatsSink


def test_compiled_masked_sums_equal_numpy_sums():
    rng = np.random.default_rng(4)
    c, h, w = 3, 37, 53
    products = {k: rng.random((c, h, w)).astype(np.float32) for k in
                ("S0", "S1", "S2", "dolp", "dolp_unbiased", "aolp", "sigma_dolp", "sigma_aolp", "residual")}
    products["valid"] = rng.random((c, h, w)) > 0.2
    ref, fast = StatsSink((h, w), c), StatsSink((h, w), c, compiled=True)
    for r0 in range(0, h, 10):  # block by block, as the runner feeds them
        block = {k: v[:, r0:r0 + 10] for k, v in products.items()}
        ref.write(r0, min(h, r0 + 10), block, None)
        fast.write(r0, min(h, r0 + 10), block, None)
    a, b = ref.summary(["R", "G", "B"]), fast.summary(["R", "G", "B"])
    assert a == b  # rounded to 6 digits: summation order does not show
    np.testing.assert_allclose(fast.sum_s, ref.sum_s, rtol=1e-12)
    np.testing.assert_allclose(fast.sum_dolp, ref.sum_dolp, rtol=1e-12)
