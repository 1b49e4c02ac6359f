"""How polarsky installs and imports: no top-level ``cli``, ``python -m polarsky``, no global state,
runtime dependencies exactly what the code imports (checks of our own packaging)."""

from __future__ import annotations

import ast
import re
import subprocess
import sys
import tomllib
from pathlib import Path

ROOT = Path(__file__).resolve().parents[2]


def _run(code: str, cwd) -> str:
    return subprocess.run([sys.executable, "-c", code], cwd=cwd, capture_output=True, text=True, check=True).stdout


def test_installed_package_has_no_top_level_cli_module(tmp_path):
    out = _run("import importlib.util as u; print(u.find_spec('cli') is None, u.find_spec('polarsky.cli') is not None)",
               tmp_path)
    assert out.split() == ["True", "True"]


def test_python_dash_m_polarsky_shows_the_commands(tmp_path):
    r = subprocess.run([sys.executable, "-m", "polarsky", "--help"], cwd=tmp_path, capture_output=True, text=True)
    assert r.returncode == 0
    for name in ("stokes", "advise", "sky", "calibrate", "batch", "demo"):
        assert re.search(rf"^\s+{name}\s+\S", r.stdout, re.M), name
    # summaries are whole sentences, not cut short
    rows = [line for line in r.stdout.splitlines() if line.startswith("  ")]
    assert rows and not any(line.rstrip().endswith("...") for line in rows)


def test_importing_polarsky_and_running_a_command_leave_pillow_as_they_found_it(tmp_path):
    from tests.synth import render_frames, smooth_scene, write_pngs

    angles = [0, 45, 90, 135]
    paths = write_pngs(tmp_path / "in", render_frames(smooth_scene(16, 20), angles), angles, bits=8)
    code = ("import PIL.Image as I; before = I.MAX_IMAGE_PIXELS; import polarsky; after_import = I.MAX_IMAGE_PIXELS; "
            "from polarsky.cli.main import main; "
            f"rc = main({[str(p) for p in paths]!r} and ['stokes', *{[str(p) for p in paths]!r}, '--out', "
            f"{str(tmp_path / 'out')!r}, '--no-pictures']); "
            "print(rc, before == after_import == I.MAX_IMAGE_PIXELS)")
    assert _run(code, tmp_path).split()[-2:] == ["0", "True"]


def test_importing_polarsky_imports_no_heavy_library(tmp_path):
    out = _run("import sys, polarsky; print(sorted(m for m in ('numba', 'dask', 'matplotlib', 'xarray', 'netCDF4', "
               "'cv2', 'pvlib') if m in sys.modules))", tmp_path)
    assert out.strip() == "[]"


_IMPORT_NAMES = {"opencv-python-headless": "cv2", "pillow": "PIL", "dask": "dask", "netcdf4": "netCDF4"}


def _third_party_imports() -> set:
    names = set()
    for path in list((ROOT / "polarsky").rglob("*.py")) + list((ROOT / "cli").rglob("*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Import):
                names.update(a.name.split(".")[0] for a in node.names)
            elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
                names.add(node.module.split(".")[0])
    stdlib = set(sys.stdlib_module_names)
    return {n for n in names if n not in stdlib and n not in ("polarsky", "__future__")}


def test_runtime_dependencies_are_exactly_what_the_code_imports():
    project = tomllib.loads((ROOT / "pyproject.toml").read_text())["project"]
    declared = set()
    for req in project["dependencies"]:
        name = re.split(r"[<>=!\[; ]", req, maxsplit=1)[0].lower()
        declared.add(_IMPORT_NAMES.get(name, name))
    assert declared == _third_party_imports()
    for req in project["dependencies"]:
        assert ">=" in req, f"{req}: pin a lower bound"
