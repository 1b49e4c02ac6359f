"""``polarsky plan sky|glare``, ``polarsky calibrate ring`` and ``advise --surface`` on the command line."""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

from polarsky.cli.main import main
from tests.tasks.test_calibrate_ring import reference_bracket

SKY = ["--when", "2026-06-21T19:10:00+02:00", "--lat", "46.37", "--lon", "9.84", "--altitude-m", "420",
       "--hfov-deg", "70", "--yaw-deg", "72", "--pitch-deg", "28", "--roll-deg", "2.5", "--size-px", "96,64"]


def _json(capsys, args):
    rc = main(args)
    out = capsys.readouterr().out
    assert rc == 0
    assert out.strip().count("\n") == 0
    return json.loads(out)


def test_plan_sky_json_keys(capsys):
    obj = _json(capsys, ["plan", "sky", *SKY, "--json"])
    # the keys the plan must give (scattering_angle_center_deg in the glossary's British spelling)
    for k in ("best_angle_deg", "darkening_stops", "darkening_stops_min", "darkening_stops_max", "sun_azimuth_deg",
              "sun_elevation_deg", "scattering_angle_center_deg", "unevenness_text", "dolp_max_source",
              "radiance_model", "caution"):
        assert obj[k] is not None


def test_plan_sky_text_with_sweeps_and_region(tmp_path, capsys):
    rc = main(["plan", "sky", *SKY, "--sweep-time", "05:00,21:00,120", "--sweep-yaw", "0,330,30", "--region",
               "0,0,40,30", "--out", str(tmp_path / "o")])
    text = capsys.readouterr().out
    assert rc == 0
    assert "sun below the horizon" in text and "deepest" in text and "region 0,0,40,30" in text
    assert "the left third darkens" in text and "Safety:" in text and "wrote plan_sky.json" in text


def test_plan_glare_json_keys(capsys):
    obj = _json(capsys, ["plan", "glare", "--surface", "water", "--incidence-deg", "60", "--extinction", "300",
                         "--behind-fraction", "0.3", "--json"])
    for k in ("rs", "rp", "reflection_dolp", "reduction_stops", "reduction_stops_ideal", "brewster_deg",
              "best_angle_deg", "contrast_gain", "index_source", "wavelength_nm", "temperature_c"):
        assert obj[k] is not None
    assert obj["best_angle_deg"] == 90.0 and obj["surface"] == "water"


def test_plan_glare_sweep_alone_takes_its_default(tmp_path, capsys):
    rc = main(["plan", "glare", "--index", "1.5", "--incidence-deg", "40", "--sweep", "--out", str(tmp_path / "g")])
    text = capsys.readouterr().out
    assert rc == 0
    assert "<- Brewster" in text and "<- planned" in text and " 85.00 " in text


def test_calibrate_ring_then_ring_readings(tmp_path, capsys):
    paths = [str(p) for p in reference_bracket(tmp_path / "in", offset_deg=7.0)]
    cal = tmp_path / "ring"
    obj = _json(capsys, ["calibrate", "ring", *paths, "--region", "0,0,60,40", "--out", str(cal), "--json"])
    assert obj["ring_offset_deg"] == pytest.approx(7.0, abs=0.05) and obj["ring_offset_sigma_deg"] > 0
    g = _json(capsys, ["plan", "glare", "--surface", "water", "--incidence-deg", "53", "--calibration", str(cal),
                       "--json"])
    assert g["best_ring_reading_deg"] == pytest.approx((90.0 - obj["ring_offset_deg"]) % 180, abs=1e-3)
    # advise on the reference itself: the true axis is 90 (perpendicular to the horizontal source, Hecht
    # 2017 sec. 8.6) and the ring reading 90 - offset
    a = _json(capsys, ["advise", *paths, "--region", "0,0,60,40", "--calibration", str(cal), "--json"])
    assert a["best_angle_deg"] == pytest.approx(90.0, abs=0.1)
    assert a["best_ring_reading_deg"] == pytest.approx(83.0, abs=0.1)
    rc = main(["advise", *paths, "--region", "0,0,60,40", "--calibration", str(cal)])
    text = capsys.readouterr().out
    assert rc == 0 and "On your filter ring: set it to 83.0" in text and "turn the filter 7.0 deg clockwise" in text


def test_advise_surface_inverse(tmp_path, capsys):
    # a reflection of DoLP 0.6 off water: both solutions (Hecht 2017 sec. 8.6), and the geometry's choice
    paths = [str(p) for p in reference_bracket(tmp_path / "in", offset_deg=0.0, dolp=0.6)]
    a = _json(capsys, ["advise", *paths, "--region", "0,0,60,40", "--surface", "water", "--pitch-deg", "-30",
                       "--json"])
    est = a["surface_estimate"]
    lo, hi = est["incidence_solutions_deg"]
    assert lo < est["brewster_deg"] < hi and est["favoured_incidence_deg"] == hi
    assert est["incidence_from_pitch_deg"] == 60.0


@pytest.mark.parametrize("args, words", [
    (["plan", "sky", *SKY[:2], "--lat", "95", "--lon", "9", "--hfov-deg", "70"], "--lat 95"),
    (["plan", "glare", "--surface", "water", "--incidence-deg", "95"], "--incidence-deg 95"),
    (["plan", "glare", "--index", "-1.5", "--incidence-deg", "40"], "--index -1.5"),
    (["plan", "sky", "--when", "2026-06-21T19:10:00", "--lat", "46", "--lon", "9", "--hfov-deg", "70"], "UTC offset"),
    (["plan", "sky", "--when", "2026-06-21T23:30:00+02:00", "--lat", "46.37", "--lon", "9.84", "--hfov-deg", "70"],
     "below the horizon"),
    (["plan", "sky", *SKY[:6], "--hfov-deg", "40", "--pitch-deg", "-60"], "no sky"),
    (["plan", "sky", *SKY, "--sweep-time", "00:00,02:00,60"], "below the horizon over the whole sweep"),
    (["advise", "x.png", "--region", "0,0,1,1", "--pitch-deg", "-20"], "--pitch-deg"),
    (["calibrate", "ring", "x.png", "--region", "0,0,1,1", "--out", "o", "--angle-offset", "3"], "--angle-offset"),
])
def test_bad_values_exit_2_with_one_line(args, words, capsys):
    rc = main(args)
    err = capsys.readouterr().err
    assert rc == 2
    assert err.startswith("error: ") and err.count("\n") == 1 and words in err


def test_plan_runs_as_a_subprocess(tmp_path):
    p = subprocess.run([sys.executable, "-m", "polarsky", "plan", "glare", "--index", "1.5", "--incidence-deg", "95"],
                       capture_output=True, text=True, cwd=tmp_path)
    assert p.returncode == 2 and p.stderr.startswith("error: --incidence-deg 95") and "Traceback" not in p.stderr
