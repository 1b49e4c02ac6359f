"""Speed figures of the sky comparison (issue: the clear sky as a model and a calibration target).

Prints
1. the model cost for a 24-megapixel frame (DoLP + AoLP + horizon maps, pinhole lens)
   beside the Stokes estimate for the same frame (polarsky.stokes.fit_stokes + dolp_aolp on
   4 float32 frames); target: model <= estimate;
2. the orientation fit on a 6-megapixel frame (fit on a subsample, then the full-frame
   model and residuals); target: < 10 s.

Run from the repository root:  python benchmarks/bench_sky.py
"""

from __future__ import annotations

import sys
import tempfile
import time
import warnings
from pathlib import Path

import numpy as np

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))

from polarsky.errors import PolarskyWarning  # noqa: E402
from polarsky.geometry import make_lens  # noqa: E402
from polarsky.sky.models import get_model  # noqa: E402
from polarsky.sky.orient import fit_orientation, sample_bracket  # noqa: E402
from polarsky.sky.run import run_sky  # noqa: E402
from polarsky.sky.skymap import SkyGeometry, model_maps  # noqa: E402
from polarsky.sky.sun import parse_when, sun_position  # noqa: E402
from polarsky.sky.synth import render_sky_stokes  # noqa: E402
from polarsky.stokes import analysis_matrix, dolp_aolp, fit_stokes  # noqa: E402


def best_of(fn, n=3):
    best = np.inf
    for _ in range(n):
        t = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - t)
    return best


def main():
    model = get_model("rayleigh")
    w24, h24 = 6000, 4000
    g24 = SkyGeometry(make_lens("pinhole", w24, h24, hfov_deg=65), 120.0, 30.0, 3.0, 210.0, 35.0, "front")
    model_maps(SkyGeometry(make_lens("pinhole", 64, 48, hfov_deg=65), 0, 0, 0, 0, 10), model)  # compile
    t_model = best_of(lambda: model_maps(g24, model, 0.8, want=("dolp", "aolp", "up")), n=5)
    t_model_np = best_of(lambda: model_maps(g24, model, 0.8, want=("dolp", "aolp", "up"), engine="numpy"), n=2)
    t_geom = best_of(lambda: model_maps(g24, model, 0.8,
                                        want=("dolp", "aolp", "scattering_angle", "elevation", "azimuth", "up")), n=2)
    frames = np.random.default_rng(0).uniform(0.2, 0.6, (4, h24, w24)).astype(np.float32)
    w = analysis_matrix([0, 45, 90, 135])
    t_est = best_of(lambda: dolp_aolp(fit_stokes(frames, w)))
    t_fused = None
    try:
        from polarsky import _kernels
        from polarsky.stokes import solve_matrix

        flat = frames.reshape(4, -1)
        sm = solve_matrix(w).astype(np.float32)

        def fused():
            s_ = np.empty((3, flat.shape[1]), np.float32)
            d_ = np.empty(flat.shape[1], np.float32)
            a_ = np.empty(flat.shape[1], np.float32)
            _kernels.stokes_maps(flat, sm, s_, d_, a_)

        _kernels.stokes_maps(flat[:, :1000], sm, *(np.empty((3, 1000), np.float32), np.empty(1000, np.float32),
                                                   np.empty(1000, np.float32)))
        t_fused = best_of(fused, n=5)
    except (ImportError, AttributeError):  # pragma: no cover - the core's compiled kernels are optional here
        pass
    del frames
    gf = SkyGeometry(make_lens("fisheye-equisolid", w24, h24, fov_deg=180), 0.0, 90.0, 0.0, 210.0, 35.0, "sensor")
    t_fish = best_of(lambda: model_maps(gf, model, 0.8, want=("dolp", "aolp", "up")), n=1)
    print(f"24 MP ({w24}x{h24}) model DoLP+AoLP+horizon, pinhole/front (compiled, outputs allocated): "
          f"{t_model:6.3f} s")
    print(f"24 MP the same, numpy reference path: {t_model_np:6.3f} s")
    print(f"24 MP Stokes estimate (polarsky.stokes.fit_stokes + dolp_aolp, 4 float32 frames): {t_est:6.3f} s")
    print(f"  -> model / estimate = {t_model / t_est:.2f} (target <= 1): {'OK' if t_model <= t_est else 'MISSED'}")
    if t_fused is not None:
        print(f"24 MP fused compiled Stokes estimate of the core (_kernels.stokes_maps, outputs allocated): "
              f"{t_fused:6.3f} s -> model / fused estimate = {t_model / t_fused:.2f}")
    print(f"24 MP all geometry maps (+ scattering angle, elevation, azimuth), pinhole: {t_geom:6.3f} s")
    print(f"24 MP model DoLP+AoLP+horizon, fisheye-equisolid/sensor (numpy path): {t_fish:6.3f} s")

    # 6 MP orientation fit
    when = parse_when("2024-06-21T17:30:00+02:00")
    sun = sun_position(when, 47.0, 8.0)
    w6, h6 = 3000, 2000
    g6 = SkyGeometry(make_lens("pinhole", w6, h6, hfov_deg=70), 10.0, 25.0, 4.0, sun["azimuth_deg"],
                     sun["elevation_deg"], "front")
    s = render_sky_stokes(g6, dolp_max=0.75)
    s += np.random.default_rng(1).normal(0, 0.003, s.shape).astype(np.float32)
    d, a = dolp_aolp(s)
    prods = {"S": s[:, None], "dolp": d[None], "aolp": a[None], "valid": np.isfinite(d)[None], "channels": ["L"],
             "attrs": {}}
    start = g6.with_orientation(40.0, 10.0, 4.0)
    t0 = time.perf_counter()
    b = sample_bracket(start, a[None], d[None], np.isfinite(d) & (s[0] > 0.1))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", PolarskyWarning)
        fit = fit_orientation([b], model, solve=("yaw", "pitch"), search=True, warn=False)
    t_fit = time.perf_counter() - t0
    pose = fit["poses"][0]
    with tempfile.TemporaryDirectory() as tmp, warnings.catch_warnings():
        warnings.simplefilter("ignore", PolarskyWarning)
        t0 = time.perf_counter()
        res = run_sky([], tmp, stokes=prods, when="2024-06-21T17:30:00+02:00", lat=47.0, lon=8.0, hfov_deg=70,
                      yaw_deg=40, pitch_deg=10, roll_deg=4, solve="yaw,pitch", pictures=False)
        t_run = time.perf_counter() - t0
        t0 = time.perf_counter()
        run_sky([], tmp, stokes=prods, when="2024-06-21T17:30:00+02:00", lat=47.0, lon=8.0, hfov_deg=70,
                yaw_deg=40, pitch_deg=10, roll_deg=4, solve="yaw,pitch", pictures=True)
        t_pic = time.perf_counter() - t0
    print(f"6 MP ({w6}x{h6}) orientation fit (yaw, pitch; grid search + robust fit on a 20000-pixel subsample): "
          f"{t_fit:6.2f} s -> yaw {pose['yaw_deg']:.3f} (true 10), pitch {pose['pitch_deg']:.3f} (true 25)")
    print(f"6 MP polarsky sky --solve yaw,pitch end to end (fit, refit on the full mask, full-frame model and "
          f"residuals, sky.nc + sky.json): {t_run:6.2f} s (target < 10 s): {'OK' if t_run < 10 else 'MISSED'}; "
          f"yaw {res['yaw_deg']:.3f}, pitch {res['pitch_deg']:.3f}")
    print(f"6 MP the same with the 7 PNG pictures: {t_pic:6.2f} s")


if __name__ == "__main__":
    main()
