"""The bundled fixtures: they regenerate identically and give their known answers."""

from __future__ import annotations

import json
from pathlib import Path

import pytest

from polarsky.cli.main import main

FIX = Path(__file__).resolve().parents[2] / "fixtures"


def test_fixtures_regenerate_identically(tmp_path):
    import importlib.util

    spec = importlib.util.spec_from_file_location("make_fixtures", FIX / "make_fixtures.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    mod.main(tmp_path)
    for rel in ("glare_bracket/manifest.csv", "glare_bracket/truth.json", "glare_bracket/glare_000deg.png",
                "glare_bracket/glare_135deg.png"):
        assert (tmp_path / rel).read_bytes() == (FIX / rel).read_bytes(), rel


def test_manifest_fixture_advice(capsys):
    truth = json.loads((FIX / "glare_bracket" / "truth.json").read_text())
    assert main(["advise", "--manifest", str(FIX / "glare_bracket" / "manifest.csv"), "--region", truth["region"], "--json"]) == 0
    js = json.loads(capsys.readouterr().out)
    assert js["best_angle_deg"] == pytest.approx(truth["best_angle_deg"], abs=0.05)
    assert js["region_dolp"] == pytest.approx(truth["region_dolp"], abs=1e-3)
    assert js["reduction_stops_ideal"] == pytest.approx(truth["reduction_stops_ideal"], abs=5e-3)
