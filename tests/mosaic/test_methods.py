"""Decoding methods: validation against published properties (REFERENCES.md 5.1, 8.1)."""

import numpy as np
import pytest

from polarsky.core.stokes import analysis_matrix, dolp_aolp, fit_stokes
from polarsky.errors import InputError
from polarsky.mosaic.layout import parse_mosaic
from polarsky.mosaic.methods import BILINEAR_KERNEL, demosaic, validate_method
from polarsky.registries import DEMOSAIC_METHODS
from polarsky.synthetic.mosaic import mosaic_sample, scene_edges, scene_uniform
from polarsky.tasks.stokes import stokes_from_mosaic_values

H, W = 48, 64
BASE = np.array([[90.0, 45.0], [135.0, 0.0]])
# all rotations and flips of the most common layout (REFERENCES.md 8.1: "test all 4 rotations/flips")
LAYOUTS = [BASE, np.rot90(BASE, 1), np.rot90(BASE, 2), np.rot90(BASE, 3), BASE[:, ::-1], BASE[::-1, :]]
LAYOUT_TEXT = [";".join(",".join(f"{v:g}" for v in r) for r in g) for g in LAYOUTS]


def _decode_stokes(raw, layout, method):
    lay = parse_mosaic(layout)
    return fit_stokes(demosaic(raw, method), analysis_matrix(lay.angles_deg))


def test_bilinear_kernel_is_the_published_one():
    # Ratliff, LaCasse & Tyo 2009 (Opt. Express 17(11) 9112); REFERENCES.md 8.1
    np.testing.assert_array_equal(BILINEAR_KERNEL * 4, [[1, 2, 1], [2, 4, 2], [1, 2, 1]])


@pytest.mark.parametrize("layout", LAYOUT_TEXT)
def test_bilinear_exact_on_affine_fields_interior(layout):
    # REFERENCES.md 8.1 [X]: bilinear (kernel 1/4[[1,2,1],[2,4,2],[1,2,1]]) reproduces any affine
    # S0, S1, S2 exactly away from the borders (Ratliff et al. 2009; Gao & Gruev 2011).
    y, x = np.mgrid[0:H, 0:W].astype(np.float64)
    s = np.stack([1 + 0.01 * x + 0.02 * y, 0.1 + 0.003 * x - 0.002 * y, -0.05 + 0.001 * x + 0.004 * y])
    raw = mosaic_sample(s, layout, dtype=np.float64)
    est = _decode_stokes(raw, layout, "bilinear")
    np.testing.assert_allclose(est[:, 1:-1, 1:-1], s[:, 1:-1, 1:-1], atol=1e-12)


@pytest.mark.parametrize("method", list(DEMOSAIC_METHODS))
@pytest.mark.parametrize("layout", LAYOUT_TEXT)
def test_all_methods_exact_on_uniform_field(method, layout):
    # REFERENCES.md 8.1 [X]: a uniform scene must come back exactly from every method.
    s = scene_uniform(H, W, s0=0.5, dolp=0.4, aolp_deg=33.0)
    est = _decode_stokes(mosaic_sample(s, layout, dtype=np.float64), layout, method)
    np.testing.assert_allclose(est, s[:, : est.shape[1], : est.shape[2]], atol=1e-12)


def test_worked_example_from_four_orientations():
    # REFERENCES.md 5.1: S = (1, 0.3, -0.2) -> I(0,45,90,135) = (0.65, 0.40, 0.35, 0.60),
    # DoLP 0.3605551, AoLP -16.845034 deg (ideal analyzer I = 1/2(S0 + S1 cos2t + S2 sin2t),
    # Hagen & Otani 2019, Opt. Eng. 58(8) 080501, eq. 1). Mosaic 0,45;90,135.
    lay = "0,45;90,135"
    raw = np.tile(np.array([[0.65, 0.40], [0.35, 0.60]]), (H // 2, W // 2))
    for method in DEMOSAIC_METHODS:
        s = _decode_stokes(raw, lay, method)
        dolp, aolp = dolp_aolp(s)
        np.testing.assert_allclose(dolp, 0.3605551, atol=1e-7)
        np.testing.assert_allclose(aolp, 180 - 16.845034, atol=1e-5)


def test_ifov_step_edge_superpixel_dolp_above_one():
    # REFERENCES.md 8.1 [X] (IFOV error, Ratliff et al. 2009): unpolarized step edge through a
    # superpixel, left column S0 = 1, right 0, layout [[90,45],[135,0]]:
    # I = (I0, I45, I90, I135) = (0, 0, 0.5, 0.5) -> S = (0.5, -0.5, -0.5), DoLP = 1.414.
    s0 = np.zeros((H, W))
    s0[:, 0::2] = 1.0
    s = np.stack([s0, 0 * s0, 0 * s0])
    raw = mosaic_sample(s, "90,45;135,0", dtype=np.float64)
    est = _decode_stokes(raw, "90,45;135,0", "superpixel")
    np.testing.assert_allclose(est[:, 0, 0], [0.5, -0.5, -0.5], atol=1e-12)
    dolp, _ = dolp_aolp(est)
    np.testing.assert_allclose(dolp, np.sqrt(2), atol=1e-12)


@pytest.mark.parametrize("layout", LAYOUT_TEXT)
def test_ifov_artifact_for_every_layout_and_reduced_by_interpolation(layout):
    # a vertical unpolarized step edge: superpixel shows false polarization in the cells
    # it cuts; interpolation reduces it (Ratliff et al. 2009)
    s0 = np.where(np.arange(W) < 31, 1.0, 0.2)[None, :].repeat(H, 0)
    s = np.stack([s0, 0 * s0, 0 * s0])
    raw = mosaic_sample(s, layout, dtype=np.float64)
    false = {}
    for m in DEMOSAIC_METHODS:
        d, _ = dolp_aolp(_decode_stokes(raw, layout, m))
        false[m] = np.nanmax(d[4:-4])
    assert false["superpixel"] > 0.3
    assert false["newton"] < false["bilinear"] < false["superpixel"]


def _rms_errors(method, scene, layout="90,45;135,0"):
    h, w = scene.shape[-2:]
    raw = mosaic_sample(scene, layout, dtype=np.float32)
    est = _decode_stokes(raw, layout, method).astype(np.float64)
    truth = scene if DEMOSAIC_METHODS[method].scale == 1 else scene.reshape(3, h // 2, 2, w // 2, 2).mean(axis=(2, 4))
    d, a = dolp_aolp(est)
    dt, at = dolp_aolp(truth)
    b = 4 // DEMOSAIC_METHODS[method].scale
    da = ((a - at + 90) % 180 - 90)[b:-b, b:-b]
    pol = dt[b:-b, b:-b] >= 0.1  # AoLP is scored where it is defined (true DoLP >= 0.1)
    return np.sqrt(np.mean((d - dt)[b:-b, b:-b] ** 2)), np.sqrt(np.mean(da[pol] ** 2))


def test_higher_order_beats_bilinear_on_edges():
    scene = scene_edges(128, 128)
    dn, an = _rms_errors("newton", scene)
    db, ab = _rms_errors("bilinear", scene)
    ds, as_ = _rms_errors("superpixel", scene)
    assert dn < 0.7 * db and an < 0.5 * ab, (dn, db, an, ab)
    assert db < ds


@pytest.mark.parametrize("method", list(DEMOSAIC_METHODS))
def test_float32_in_float32_out_and_shapes(method):
    raw = np.random.default_rng(0).uniform(0.1, 0.9, (H, W)).astype(np.float32)
    out = demosaic(raw, method)
    k = DEMOSAIC_METHODS[method].scale
    assert out.dtype == np.float32 and out.shape == (4, H // k, W // k)
    # each pixel keeps its own measured value
    if k == 1:
        for p in range(4):
            py, px = divmod(p, 2)
            np.testing.assert_array_equal(out[p, py::2, px::2], raw[py::2, px::2])


@pytest.mark.parametrize("layout", ["90,45;135,0", "10,50;100,150"])
def test_newton_kernels_equal_numpy_reference(layout):
    from polarsky.core.stokes import solve_matrix
    from polarsky.mosaic import newton
    from polarsky.mosaic.decode import position_matrix

    raw = mosaic_sample(scene_edges(64, 48), layout)
    ref = newton.demosaic_newton_numpy(raw)
    np.testing.assert_allclose(newton.demosaic_newton_li2019(raw), ref, rtol=1e-5, atol=1e-6)
    w = position_matrix(parse_mosaic(layout))
    s, mean, rss = (np.empty(shape, np.float32) for shape in ((3,) + raw.shape, raw.shape, raw.shape))
    newton.newton_fit_li2019(raw, solve_matrix(w).astype(np.float32), w.astype(np.float32), s, mean, rss,
                             eps=newton.newton_eps(float(np.mean(np.abs(raw)))))
    np.testing.assert_allclose(s, fit_stokes(ref, w), rtol=1e-5, atol=1e-6)
    np.testing.assert_allclose(mean, ref.mean(axis=0), rtol=1e-5, atol=1e-6)


def test_unknown_method():
    with pytest.raises(InputError, match="--demosaic 'cubic' is not a known demosaic method; choose one of superpixel, bilinear, newton"):
        validate_method("cubic")


def test_dataset_records_mosaic_and_method():
    s = scene_uniform(H, W)
    ds = stokes_from_mosaic_values(mosaic_sample(s, "90,45;135,0"), mosaic="90,45;135,0", demosaic="newton")
    assert ds.attrs["mosaic"] == "90,45;135,0" and ds.attrs["demosaic"] == "newton"
    assert ds.attrs["polarizer"] == "sensor" and "Li" in ds.attrs["demosaic_reference"]
    assert list(ds.channel.values) == ["L"] and ds.sizes["y"] == H and ds.sizes["x"] == W
    np.testing.assert_allclose(ds.dolp.values, 0.3, atol=1e-6)
    assert ds.aolp.attrs["units"] == "degree"


@pytest.mark.parametrize("layout", LAYOUT_TEXT[:4])
def test_sky_offsets_per_position_are_applied(layout, tmp_path):
    from polarsky.estimate.calibration import Calibration
    from polarsky.write.calibration_file import write_calibration

    lay = parse_mosaic(layout)
    offsets = np.array([3.0, -4.0, 1.4, -0.8])
    true_angles = np.tile((np.array(lay.angles_deg) + offsets).reshape(2, 2), (H // 2, W // 2))
    s = scene_uniform(H, W, s0=0.6, dolp=0.5, aolp_deg=70.0)
    raw = mosaic_sample(s, lay, angle_deg=true_angles)
    cal = write_calibration(tmp_path / "calibration.nc",
                            Calibration(kind="sky", angle_offset_deg=offsets[:, None]))  # dims (position, channel)
    for method in DEMOSAIC_METHODS:
        ds = stokes_from_mosaic_values(raw, mosaic=layout, demosaic=method, calibration=cal)
        np.testing.assert_allclose(ds.aolp.values, 70.0, atol=1e-3)
        plain = stokes_from_mosaic_values(raw, mosaic=layout, demosaic=method)
        np.testing.assert_allclose(ds.S1.values, s[1, 0, 0], atol=1e-5)
        err = np.hypot(plain.S1.values - s[1, 0, 0], plain.S2.values - s[2, 0, 0]).max()
        assert err > 0.005  # uncorrected: clearly off (calibrated: < 1e-5)


@pytest.mark.parametrize("method", list(DEMOSAIC_METHODS))
@pytest.mark.parametrize("layout", ["90,45;135,0", "10,50;100,150"])
def test_fast_paths_equal_fit_of_decoded_channels(method, layout):
    from polarsky.core.stokes import residual_rms
    from polarsky.mosaic.decode import position_matrix
    from polarsky.mosaic.fast import fast_fit

    lay = parse_mosaic(layout)
    raw = mosaic_sample(scene_edges(H, W), lay)
    w = position_matrix(lay)
    channels = demosaic(raw, method)
    ref = fit_stokes(channels, w)
    s, mean, rss = fast_fit(raw, w, method)
    np.testing.assert_allclose(s, ref, atol=1e-6)
    np.testing.assert_allclose(mean, channels.mean(axis=0), atol=1e-6)
    # 4 analyzers, 3 unknowns: one degree of freedom, rss = residual_rms^2
    np.testing.assert_allclose(rss, residual_rms(channels, w, ref) ** 2, rtol=1e-3, atol=1e-9)
