"""Shared fixtures: small synthetic brackets rendered by our own code (invented scenes)."""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
if str(ROOT) not in sys.path:
    sys.path.insert(0, str(ROOT))

from tests.synth import render_frames, smooth_scene, write_pngs, write_tiffs  # noqa: E402


@pytest.fixture
def scene():
    return smooth_scene(48, 64)


@pytest.fixture
def png_bracket(tmp_path, scene):
    frames = render_frames(scene, [0, 45, 90, 135])
    return write_pngs(tmp_path / "in", frames, [0, 45, 90, 135], bits=16), scene


@pytest.fixture
def tiff_bracket(tmp_path, scene):
    frames = render_frames(scene, [0, 60, 120])
    return write_tiffs(tmp_path / "in", frames, [0, 60, 120]), scene
