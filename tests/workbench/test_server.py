"""The workbench server without a browser: the token, the advice contract, the readout,
what it serves and where it writes."""

from __future__ import annotations

import hashlib
import http.client
import json
import shlex
import urllib.error
import urllib.request
import warnings

import numpy as np
import pytest

from polarsky.cli.main import main
from polarsky.errors import PolarskyWarning

from .conftest import advise_json


def get(wb, path, *, token=True, headers=None):
    """(status, body bytes, headers) of a GET; ``token`` False: none, a str: that one."""
    if token is True:
        token = wb.token
    if token:
        path += ("&" if "?" in path else "?") + "token=" + token
    req = urllib.request.Request(wb.base + path, headers=headers or {})
    try:
        with urllib.request.urlopen(req, timeout=30) as r:
            return r.status, r.read(), dict(r.headers)
    except urllib.error.HTTPError as e:
        with e:
            return e.code, e.read(), dict(e.headers)


def raw_get(wb, target):
    """GET with the request target sent as written (no client-side normalization)."""
    conn = http.client.HTTPConnection("127.0.0.1", wb.port, timeout=30)
    try:
        conn.putrequest("GET", target, skip_accept_encoding=True)
        conn.putheader("X-Polarsky-Token", wb.token)
        conn.endheaders()
        r = conn.getresponse()
        return r.status, r.read()
    finally:
        conn.close()


# ---------------------------------------------------------------------------- the token
def test_every_request_needs_the_token(workbench):
    for path in ("/", "/static/workbench.js", "/api/session", "/api/advice?region=0,0,10,10",
                 "/api/tile/0/1/frame/all/0/0/0.png", "/favicon.ico"):
        status, body, _ = get(workbench, path, token=False)
        assert status == 403, path
        assert b"token" in body
        assert get(workbench, path, token="wrong-" + workbench.token)[0] == 403
    assert get(workbench, "/")[0] == 200
    status, _, _ = get(workbench, "/api/session", token=False, headers={"X-Polarsky-Token": workbench.token})
    assert status == 200


def test_printed_address_and_security_headers(workbench):
    assert workbench.url == f"http://127.0.0.1:{workbench.port}/?token={workbench.token}"
    assert len(workbench.token) >= 32
    status, body, headers = get(workbench, "/")
    assert status == 200
    csp = headers["content-security-policy"]
    assert "default-src 'none'" in csp and "script-src 'self'" in csp and "connect-src 'self'" in csp
    assert headers["referrer-policy"] == "no-referrer"
    page = body.decode()
    assert "http://" not in page.replace(workbench.base, "") and "https://" not in page  # nothing from elsewhere


# ---------------------------------------------------------------------------- the advice contract
@pytest.mark.parametrize("region,protect", [("10,40,120,85", None), ("0,0,140,90", None),
                                            ("10,40,120,85", "60,5,110,35")])
def test_advice_endpoint_is_what_advise_json_prints(workbench, bracket, capsys, region, protect):
    frames, _ = bracket
    q = f"/api/advice?region={region}" + (f"&protect={protect}" if protect else "")
    status, body, headers = get(workbench, q)
    assert status == 200 and headers["content-type"].startswith("application/json")
    assert body.decode() == advise_json(capsys, frames, region, protect)


def test_copied_command_reproduces_the_advice(workbench, capsys):
    status, body, _ = get(workbench, "/api/panel?region=5,5,70,60&protect=80,50,130,80")
    panel = json.loads(body)
    words = shlex.split(panel["command"])
    assert words[:2] == ["polarsky", "advise"] and words[-1] == "--json"
    capsys.readouterr()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", PolarskyWarning)
        assert main(words[1:]) == 0
    assert json.loads(capsys.readouterr().out) == panel["advice"]
    # what real filters reach, from the same library call with their extinction ratio
    assert [f["extinction_ratio"] for f in panel["filters"]] == [30.0, 300.0]
    stops = [f["reduction_stops"] for f in panel["filters"]]
    assert stops[0] < stops[1] <= panel["advice"]["reduction_stops_ideal"] + 1e-9
    assert "Set the filter's transmission axis" in panel["text"]


def test_bad_boxes_get_the_library_message(workbench):
    status, body, _ = get(workbench, "/api/advice?region=0,0,500,20")
    assert status == 400
    assert "does not fit in the 140x90 frame" in json.loads(body)["error"]
    status, body, _ = get(workbench, "/api/advice?region=21,11,24,13")  # only saturated pixels
    assert status == 400 and "holds no valid pixels" in json.loads(body)["error"]


# ---------------------------------------------------------------------------- the readout
def test_pixel_readout_is_the_netcdf_value(workbench, bracket):
    from polarsky.read.stokes_file import open_stokes

    _, stokes_dir = bracket
    ds = open_stokes(stokes_dir / "stokes.nc")
    for x, y in [(0, 0), (37, 61), (139, 89), (22, 12)]:
        status, body, _ = get(workbench, f"/api/pixel?x={x}&y={y}")
        v = json.loads(body)["channels"][0]
        assert v["valid"] == bool(ds["valid"].values[0, y, x])
        for key, var in [("S0", "S0"), ("dolp", "dolp"), ("sigma_dolp", "sigma_dolp"),
                         ("dolp_unbiased", "dolp_unbiased"), ("aolp_deg", "aolp"), ("sigma_aolp_deg", "sigma_aolp")]:
            ref = ds[var].values[0, y, x]
            if np.isfinite(ref):
                assert np.float32(v[key]) == ref, (x, y, key)
            else:
                assert v[key] is None
    assert get(workbench, "/api/pixel?x=140&y=0")[0] == 404


# ---------------------------------------------------------------------------- what it serves
@pytest.mark.parametrize("target", [
    "/static/../../../../etc/passwd", "/static/..%2f..%2f..%2fetc%2fpasswd", "/static/%2e%2e/%2e%2e/etc/passwd",
    "/static//etc/passwd", "/static/%2Fetc%2Fpasswd", "//etc/passwd", "/etc/passwd", "/api/../../etc/passwd",
    "/static/stokes.nc", "/static/scene_000deg.png", "/static/__init__.py", "/static/index.html",
    "/api/tile/0/1/../../../etc/passwd", "/api/key/..%2F..%2Fsession.py.png",
])
def test_no_path_from_a_request_is_served(workbench, target):
    status, body = raw_get(workbench, target)
    assert status in (400, 404)
    assert b"root:" not in body and b"import" not in body


def test_symlinks_and_files_beside_the_results_are_not_served(workbench, bracket, tmp_path):
    frames, stokes_dir = bracket
    link = frames[0].parent / "workbench.css.link"
    secret = tmp_path / "secret.txt"
    secret.write_text("not for the page")
    link.symlink_to(secret)
    try:
        for target in ("/static/workbench.css.link", "/static/secret.txt", f"/static/{frames[0].name}",
                       "/api/preview/0/1.bin/../../secret.txt"):
            status, body = raw_get(workbench, target)
            assert status == 404 and b"not for the page" not in body
    finally:
        link.unlink()
    # a region is a box, never a file: a mask path in a request is refused, not read
    status, body, _ = get(workbench, f"/api/advice?region={secret}")
    assert status == 400 and "is not a box" in json.loads(body)["error"]


def test_tiles_are_decimated_and_invalid_pixels_checkered(workbench):
    import cv2

    status, body, _ = get(workbench, "/api/entry?entry=0")
    meta = json.loads(body)["meta"]
    assert (meta["width"], meta["height"], meta["tile"]) == (140, 90, 256)
    status, png, headers = get(workbench, "/api/tile/0/1/dolp/all/0/0/0.png")
    assert status == 200 and headers["content-type"] == "image/png"
    img = cv2.imdecode(np.frombuffer(png, np.uint8), cv2.IMREAD_UNCHANGED)
    assert img.shape == (90, 140, 3)  # one partial tile holds the whole small frame
    spot = img[10:14, 20:25]  # the saturated spot: grey checkerboard levels of polarsky/palette.py
    greys = {round(0.55 * 255), round(0.75 * 255)}
    assert set(np.unique(spot)) <= greys and (spot[..., 0] == spot[..., 2]).all()
    assert get(workbench, "/api/tile/0/1/dolp/all/0/1/0.png")[0] == 404   # outside the frame
    assert get(workbench, "/api/tile/0/1/nonsense/all/0/0/0.png")[0] == 404
    assert get(workbench, "/api/tile/0/2/dolp/all/0/0/0.png")[0] == 404   # another version
    status, data, headers = get(workbench, "/api/preview/0/1.bin")
    info = json.loads(headers["x-preview"])
    assert len(data) == 2 * info["channels"] * 3 * info["width"] * info["height"]


# ---------------------------------------------------------------------------- where it writes
def _tree(folder):
    return {p.relative_to(folder).as_posix(): hashlib.sha256(p.read_bytes()).hexdigest()
            for p in sorted(folder.rglob("*")) if p.is_file()}


def test_save_writes_only_into_the_output_folder(workbench, bracket, capsys):
    frames, stokes_dir = bracket
    inputs = frames[0].parent.parent
    before = _tree(inputs)
    out = workbench.session.out_dir
    req = urllib.request.Request(f"{workbench.base}/api/save", method="POST",
                                 data=json.dumps({"entry": 0, "region": "10,40,120,85",
                                                  "protect": "60,5,110,35"}).encode(),
                                 headers={"X-Polarsky-Token": workbench.token, "Content-Type": "application/json"})
    with urllib.request.urlopen(req, timeout=30) as r:
        saved = json.loads(r.read())
    assert _tree(inputs) == before  # the inputs and the stokes.nc folder are untouched
    folder = out / "scene_000deg" / "advice-01"
    assert saved["folder"] == str(folder)
    # published whole by the write layer (its hidden marker says polarsky wrote the folder)
    assert sorted(p.name for p in folder.iterdir()) == [".polarsky-run.json", "advice.json", "protect.png", "region.png"]
    assert [p.name for p in out.rglob(".*")] == [".polarsky-run.json"]  # no staging folder left behind
    advice = json.loads((folder / "advice.json").read_text())
    # the mask images are what --region/--protect accept: the same advice from them
    via_masks = json.loads(advise_json(capsys, frames, str(folder / "region.png"), str(folder / "protect.png")))
    assert via_masks["best_angle_deg"] == advice["best_angle_deg"]
    assert via_masks["region_pixels"] == advice["region_pixels"]
    assert advice["outputs"] == ["advice.json", "region.png", "protect.png"]
    # a second save goes into a new folder; a save without the token is refused
    with urllib.request.urlopen(req, timeout=30) as r:
        assert json.loads(r.read())["folder"].endswith("advice-02")
    bad = urllib.request.Request(f"{workbench.base}/api/save", method="POST", data=b"{}",
                                 headers={"Content-Type": "application/json"})
    with pytest.raises(urllib.error.HTTPError) as e:
        urllib.request.urlopen(bad, timeout=30)
    assert e.value.code == 403
    e.value.close()
