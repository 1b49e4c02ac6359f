"""The demo's planning step: the plan made before the frames agrees with what the rendered brackets show."""

from __future__ import annotations

import pytest


def test_sky_plan_against_the_rendered_sky_bracket(tmp_path):
    # The demo's sky bracket is rendered from the single-scattering model (Chandrasekhar 1950) for the
    # sun's position (NREL SPA) with dolp_max 0.72 and camera noise; the plan assumes 0.7. The plan's
    # recommended angle and total darkening must match advise's on the rendered bracket (Collett 2005).
    from polarsky.synthetic import harbour as hb
    from polarsky.tasks.demo import _compare_sky, _plan_first

    planned, glare = _plan_first(tmp_path)
    cmp = _compare_sky(planned, hb.write_sky_bracket(tmp_path / "sky-bracket"))
    assert cmp["measured_best_angle_deg"] == pytest.approx(cmp["predicted_best_angle_deg"], abs=1.5)
    assert cmp["measured_darkening_stops_total"] == pytest.approx(cmp["predicted_darkening_stops_total"], abs=0.03)
    assert cmp["measured_darkening_stops"] == pytest.approx(cmp["predicted_darkening_stops"], abs=0.06)
    assert sorted(p.name for p in (tmp_path / "plan-glare").iterdir() if p.name[0] != ".") == [
        "plan_glare.json", "plan_glare_sweep.png"]
    assert glare["best_angle_deg"] == pytest.approx(90.0 + hb.CAMERA_ROLL_DEG)   # Hecht 2017 sec. 8.6, rolled
