"""Batch settings: a TOML file (read with :mod:`tomllib`) plus command-line overrides.

Example (every key optional)::

    [discovery]
    time_gap_s = 10.0              # EXIF capture-time gap that starts a new bracket
    angles_deg = [0, 45, 90, 135]  # analyzer angles of time-grouped brackets, shot order
    manifest_name = "manifest.csv" # file that makes a folder one bracket

    [stokes]
    transfer = "auto"              # linear | srgb | auto
    extinction = 1000.0            # analyzer extinction ratio Tmax/Tmin
    angle_offset_deg = 0.0
    align = false
    calibration = "cal.nc"         # relative to this file
    max_pixels = 250000000         # refuse larger frames
    pictures = true                # PNG maps (and the report's DoLP/AoLP thumbnails)

    [advise]                       # present -> advice for every bracket
    region = [10, 20, 200, 120]    # x0,y0,x1,y1 (x1,y1 exclusive), or "mask.png"
    protect = [0, 0, 50, 50]

    [mosaic]                       # cell set -> every frame is one raw polarization-mosaic frame
    cell = "90,45;135,0"           # micro-polarizer angles of the 2x2 cell, rows split by ';'
    colour = "RGGB"                # colour mosaic sensor: Bayer order of the cells
    demosaic = "bilinear"          # demosaicing method
    bit_depth = 12                 # significant bits in 16-bit containers
    black_level = 64.0             # raw counts

    [sky]                          # present -> sky comparison for every bracket
    # keys are passed to polarsky.sky.run_sky (checked against its parameters)

    [report]
    embed_images = "auto"          # thumbnails inside report.html (true), linked beside it
                                   # (false), or inside up to 300 brackets ("auto")
    thumbnail_px = 240

    [cluster]
    workers = 2
    scheduler = "tcp://10.0.0.5:8786"
    dashboard = false

Unknown tables or keys raise :class:`~polarsky.errors.InputError` naming them.  Paths in
the file are relative to the file's folder.
"""

from __future__ import annotations

import copy
import inspect
import math
import tomllib
from pathlib import Path

from ..errors import InputError

__all__ = ["DEFAULTS", "load_config", "merge_settings", "parse_box", "check_settings"]

#: Every known key with its default.
DEFAULTS: dict = {
    "discovery": {"time_gap_s": 10.0, "angles_deg": None, "manifest_name": "manifest.csv"},
    "stokes": {"transfer": "auto", "extinction": None, "angle_offset_deg": 0.0, "align": False,
               "calibration": None, "max_pixels": None, "pictures": True},
    "advise": {"region": None, "protect": None},
    "mosaic": {"cell": None, "colour": None, "demosaic": None, "bit_depth": None, "black_level": None},
    "sky": {},
    "report": {"embed_images": "auto", "thumbnail_px": 240},
    "cluster": {"workers": None, "scheduler": None, "dashboard": False},
}
_OPEN_TABLES = {"sky"}  # keys checked against run_sky's signature instead


def _where(source, table, key=None):
    k = f"[{table}] {key}" if key else f"[{table}]"
    return f"{k} in {source}" if source else k


def parse_box(value, *, what: str, source: str = "", base: Path | None = None):
    """Normalise a region/protect value: box tuple ``(x0, y0, x1, y1)`` or a mask Path.

    >>> parse_box("1,2,30,40", what="region")
    (1, 2, 30, 40)
    """
    if value is None:
        return None
    if isinstance(value, (list, tuple)):
        parts = list(value)
    elif isinstance(value, str) and value.count(",") == 3:
        parts = [p.strip() for p in value.split(",")]
    elif isinstance(value, (str, Path)):
        p = Path(value)
        if base is not None and not p.is_absolute():
            p = base / p
        if not p.is_file():
            raise InputError(f"{what} mask {p} does not exist; give x0,y0,x1,y1 or an existing mask image"
                             + (f" ({source})" if source else ""))
        return p
    else:
        raise InputError(f"{what} must be x0,y0,x1,y1 or a mask image, got {value!r}"
                         + (f" ({source})" if source else ""))
    try:
        box = tuple(int(p) for p in parts)
    except (TypeError, ValueError):
        raise InputError(f"{what} box {value!r} needs four integers x0,y0,x1,y1"
                         + (f" ({source})" if source else "")) from None
    if len(box) != 4 or box[2] <= box[0] or box[3] <= box[1] or min(box) < 0:
        raise InputError(f"{what} box {value!r} must be x0,y0,x1,y1 with x1>x0, y1>y0, all >= 0"
                         + (f" ({source})" if source else ""))
    return box


def _num(value, where, *, positive=False, integer=False, allow_none=True):
    if value is None and allow_none:
        return None
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        raise InputError(f"{where} must be a number, got {value!r}")
    if not math.isfinite(value) or (positive and value <= 0):
        raise InputError(f"{where} must be a {'positive ' if positive else ''}finite number, got {value!r}")
    if integer:
        if int(value) != value:
            raise InputError(f"{where} must be a whole number, got {value!r}")
        return int(value)
    return float(value)


def check_settings(settings: dict, *, source: str = "", base: Path | None = None) -> dict:
    """Check types and resolve paths of a full settings dict; return a normalised copy."""
    s = copy.deepcopy(settings)
    d, st, adv, rep, cl = s["discovery"], s["stokes"], s["advise"], s["report"], s["cluster"]
    d["time_gap_s"] = _num(d["time_gap_s"], _where(source, "discovery", "time_gap_s"),
                           positive=True, allow_none=False)
    if d["angles_deg"] is not None:
        a = d["angles_deg"]
        if isinstance(a, str):
            try:
                a = [float(x) for x in a.replace(";", ",").split(",") if x.strip()]
            except ValueError:
                raise InputError(f"{_where(source, 'discovery', 'angles_deg')}: {a!r} is not a list of "
                                 "numbers (degrees), e.g. [0, 45, 90, 135]") from None
        if not isinstance(a, (list, tuple)) or len(a) < 3:
            raise InputError(f"{_where(source, 'discovery', 'angles_deg')} must list at least 3 angles in "
                             f"degrees, got {d['angles_deg']!r}")
        d["angles_deg"] = [_num(x, _where(source, "discovery", "angles_deg"), allow_none=False) for x in a]
    if not isinstance(d["manifest_name"], str) or not d["manifest_name"] or "/" in d["manifest_name"]:
        raise InputError(f"{_where(source, 'discovery', 'manifest_name')} must be a plain file name, "
                         f"got {d['manifest_name']!r}")
    if st["transfer"] not in ("auto", "linear", "srgb"):
        raise InputError(f"{_where(source, 'stokes', 'transfer')} must be auto, linear or srgb, "
                         f"got {st['transfer']!r}")
    st["extinction"] = _num(st["extinction"], _where(source, "stokes", "extinction"), positive=True)
    if st["extinction"] is not None and st["extinction"] <= 1:
        raise InputError(f"{_where(source, 'stokes', 'extinction')} is the ratio Tmax/Tmin and must be "
                         f"> 1, got {st['extinction']!r}")
    st["angle_offset_deg"] = _num(st["angle_offset_deg"], _where(source, "stokes", "angle_offset_deg"),
                                  allow_none=False)
    for key in ("align", "pictures"):
        if not isinstance(st[key], bool):
            raise InputError(f"{_where(source, 'stokes', key)} must be true or false, got {st[key]!r}")
    st["max_pixels"] = _num(st["max_pixels"], _where(source, "stokes", "max_pixels"),
                            positive=True, integer=True)
    if st["calibration"] is not None:
        p = Path(st["calibration"])
        if base is not None and not p.is_absolute():
            p = base / p
        if not p.is_file():
            raise InputError(f"calibration file {p} does not exist ({_where(source, 'stokes', 'calibration')}); "
                             "make one with 'polarsky calibrate'")
        st["calibration"] = str(p.resolve())
    mo = s["mosaic"]
    for key in ("cell", "colour", "demosaic"):
        if mo[key] is not None and (not isinstance(mo[key], str) or not mo[key].strip()):
            raise InputError(f"{_where(source, 'mosaic', key)} must be text, got {mo[key]!r}")
    if mo["cell"] is None:
        extra = [k for k in ("colour", "demosaic", "bit_depth", "black_level") if mo[k] is not None]
        if extra:
            raise InputError(f"{_where(source, 'mosaic', extra[0])} applies only to mosaic frames: give "
                             "[mosaic] cell (or --mosaic), e.g. \"90,45;135,0\"")
    mo["bit_depth"] = _num(mo["bit_depth"], _where(source, "mosaic", "bit_depth"), positive=True, integer=True)
    mo["black_level"] = _num(mo["black_level"], _where(source, "mosaic", "black_level"))
    adv["region"] = parse_box(adv["region"], what="region", source=_where(source, "advise", "region"), base=base)
    adv["protect"] = parse_box(adv["protect"], what="protect", source=_where(source, "advise", "protect"),
                               base=base)
    if adv["protect"] is not None and adv["region"] is None:
        raise InputError(f"{_where(source, 'advise', 'protect')} needs a region too: give [advise] region")
    for key in ("region", "protect"):
        if isinstance(adv[key], Path):
            adv[key] = str(adv[key].resolve())
    sky_mask = s["sky"].get("sky_mask_path")
    if isinstance(sky_mask, str) and base is not None and not Path(sky_mask).is_absolute():
        s["sky"]["sky_mask_path"] = str((base / sky_mask).resolve())
    if not (isinstance(rep["embed_images"], bool) or rep["embed_images"] == "auto"):
        raise InputError(f"{_where(source, 'report', 'embed_images')} must be true, false or \"auto\", "
                         f"got {rep['embed_images']!r}")
    rep["thumbnail_px"] = _num(rep["thumbnail_px"], _where(source, "report", "thumbnail_px"),
                               positive=True, integer=True, allow_none=False)
    cl["workers"] = _num(cl["workers"], _where(source, "cluster", "workers"), positive=True, integer=True)
    if cl["scheduler"] is not None and (not isinstance(cl["scheduler"], str) or "://" not in cl["scheduler"]):
        raise InputError(f"{_where(source, 'cluster', 'scheduler')} must be an address like "
                         f"tcp://host:8786, got {cl['scheduler']!r}")
    if not isinstance(cl["dashboard"], bool):
        raise InputError(f"{_where(source, 'cluster', 'dashboard')} must be true or false")
    return s


def load_config(path) -> tuple[dict, Path]:
    """Read a batch TOML file; return ``(raw tables, folder of the file)``.

    Raises
    ------
    InputError
        The file is missing, not TOML, or has unknown tables or keys (all of them are named).
    """
    path = Path(path)
    try:
        with open(path, "rb") as fh:
            raw = tomllib.load(fh)
    except FileNotFoundError:
        raise InputError(f"config file {path} does not exist; give an existing .toml file") from None
    except tomllib.TOMLDecodeError as exc:
        raise InputError(f"config file {path} is not valid TOML: {exc}") from None
    unknown = []
    for table, value in raw.items():
        if table not in DEFAULTS:
            unknown.append(f"[{table}]" if isinstance(value, dict) else table)
            continue
        if not isinstance(value, dict):
            unknown.append(f"{table} (must be a [{table}] table)")
            continue
        if table in _OPEN_TABLES:
            continue
        unknown.extend(f"{table}.{k}" for k in value if k not in DEFAULTS[table])
    if unknown:
        known = ", ".join(f"[{t}]" for t in DEFAULTS)
        raise InputError(f"unknown key(s) in config {path}: {', '.join(unknown)}; known tables are {known}")
    return raw, path.parent


def merge_settings(raw: dict | None = None, *, base: Path | None = None, source: str = "",
                   overrides: dict | None = None) -> dict:
    """Defaults <- config tables <- command-line ``overrides`` (``{"table.key": value}``).

    Override values that are None are ignored (the option was not given).  Paths given on
    the command line are relative to the current folder.
    """
    s = copy.deepcopy(DEFAULTS)
    for table, values in (raw or {}).items():
        s[table].update(values)
    s = check_settings(s, source=source, base=base)
    if overrides:
        o = copy.deepcopy(s)
        for dotted, value in overrides.items():
            if value is None:
                continue
            table, key = dotted.split(".")
            if table not in DEFAULTS or (table not in _OPEN_TABLES and key not in DEFAULTS[table]):
                raise InputError(f"unknown setting {dotted}")
            o[table][key] = value
        s = check_settings(o, source="command line", base=Path.cwd())
    return s


def accepted_keywords(func) -> set | None:
    """Names of keyword parameters ``func`` accepts (None if it takes ``**kwargs``)."""
    params = inspect.signature(func).parameters.values()
    if any(p.kind is p.VAR_KEYWORD for p in params):
        return None
    return {p.name for p in params if p.kind in (p.KEYWORD_ONLY, p.POSITIONAL_OR_KEYWORD)}
