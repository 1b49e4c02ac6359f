"""Value parsers of the settings table: ``parse(value, what, base, spec) -> typed value``.

``value`` is text (the command line), a TOML value or a Python value; ``what`` names the
option for messages; ``base`` is the folder relative paths are relative to (or None);
``spec`` is the option's entry of the table (``choices``, ``flag``).  The table
(``table.toml``) names its parser by the function's name.
"""

from __future__ import annotations

from pathlib import Path

from .._shared.checks import check_positive, check_range, number_text, parse_number
from ..errors import InputError
from .. import registries
from . import syntax


def _in_file(what, parse):
    """``parse()``, with a settings file's ``what`` ("file [table] key") put before its message.

    Parsers that defer to another module's checks (regions, the mosaic cell, registries) get
    messages naming the option; values from a batch file must name the file, table and key.
    """
    try:
        return parse()
    except InputError as exc:
        if what.startswith("--"):
            raise
        raise InputError(f"{what}: {exc}") from None


def _num(value, what, *, allow_exponent=True):
    return parse_number(value, what, allow_exponent=allow_exponent)


def number(value, what, base=None, spec=None):
    return _num(value, what)


def positive(value, what, base=None, spec=None):
    return check_positive(_num(value, what), what)


def non_negative(value, what, base=None, spec=None):
    v = _num(value, what)
    if v < 0:
        raise InputError(f"{what} must be at least 0, got {number_text(v)}")
    return v


def fraction(value, what, base=None, spec=None):
    v = _num(value, what)
    if not 0 < v <= 1:
        raise InputError(f"{what} must lie in (0, 1], got {number_text(v)}")
    return v


def positive_int(value, what, base=None, spec=None):
    v = _num(value, what)
    if v != int(v) or v < 1:
        raise InputError(f"{what} must be a whole number of at least 1, got {number_text(v)}")
    return int(v)


def boolean(value, what, base=None, spec=None):
    if isinstance(value, bool):
        return value
    s = str(value).strip().lower()
    if s in ("true", "yes", "on", "1"):
        return True
    if s in ("false", "no", "off", "0"):
        return False
    raise InputError(f"{what} must be true or false, got {value!r}")


def choice(value, what, base=None, spec=None):
    names = [str(c).lower() for c in spec["choices"]]
    s = str(value).strip().lower()
    if s not in names:
        raise InputError(f"{what} {value!r} is not one of {', '.join(names)}")
    return s


def registered(value, what, base=None, spec=None):
    """A name of the registry the table names in ``choices`` (its canonical spelling)."""
    return _in_file(what, lambda: getattr(registries, spec["choices"]).key(value))


def path(value, what, base=None, spec=None):
    pth = Path(value)
    if str(value).strip() == "":
        raise InputError(f"{what} is empty; give a path")
    if base is not None and not pth.is_absolute():
        pth = base / pth
    return pth


def calibration(value, what, base=None, spec=None):
    """A calibration folder or file (checked to exist), or a Calibration object (Python API)."""
    from ..estimate.calibration import Calibration
    from ..read.calibration_file import find_calibration

    if isinstance(value, Calibration):
        return value
    return _in_file(what, lambda: find_calibration(path(value, what, base)))


def paths(value, what, base=None, spec=None):
    items = [value] if isinstance(value, (str, Path)) else list(value)
    return tuple(path(v, what, base) for v in items)


def variables(value, what, base=None, spec=None):
    """Names of Stokes variables (``S0,S1,S2,valid``), each known, in the data model's order."""
    from ..conventions import VARIABLES

    items = [str(v).strip() for v in (value if isinstance(value, (list, tuple)) else str(value).split(","))]
    bad = [v for v in items if v not in VARIABLES]
    if bad or not items:
        raise InputError(f"{what} {value!r}: {', '.join(bad) or 'nothing'} not known; give names among "
                         f"{','.join(VARIABLES)}")
    return tuple(v for v in VARIABLES if v in items)


def angles(value, what, base=None, spec=None):
    return syntax.parse_angle_list(value, what)


def pair(value, what, base=None, spec=None):
    return syntax.parse_number_list(value, what, 2)


def distortion(value, what, base=None, spec=None):
    vals = syntax.parse_number_list(value, what)
    if len(vals) not in (4, 5, 8):
        raise InputError(f"{what} {value!r} must hold 4, 5 or 8 OpenCV coefficients k1,k2,p1,p2[,k3[,k4,k5,k6]]")
    return vals


def when(value, what, base=None, spec=None):
    return syntax.parse_when(value, what)


def latitude(value, what, base=None, spec=None):
    return check_range(_num(value, what), -90, 90, what, unit="degrees north")


def longitude(value, what, base=None, spec=None):
    return check_range(_num(value, what), -180, 360, what, unit="degrees east")


def pitch(value, what, base=None, spec=None):
    return check_range(_num(value, what), -90, 90, what, unit="degrees (elevation of the optical axis)")


def elevation(value, what, base=None, spec=None):
    return check_range(_num(value, what), -90, 90, what, unit="degrees")


def temperature(value, what, base=None, spec=None):
    return check_range(_num(value, what), -90, 60, what, unit="deg C")


def neutral_point(value, what, base=None, spec=None):
    v = _num(value, what)
    if not 0 <= v < 60:
        raise InputError(f"{what} {number_text(v)} must lie in [0, 60) degrees")
    return v


def sun_mask(value, what, base=None, spec=None):
    v = _num(value, what)
    if not 0 <= v < 90:
        raise InputError(f"{what} {number_text(v)} must lie in [0, 90) degrees")
    return v


def extinction(value, what, base=None, spec=None):
    v = _num(value, what)
    if not v > 1:
        raise InputError(f"{what} {number_text(v)} is the extinction ratio Tmax/Tmin and must be a finite number "
                         "above 1 (leave it out for an ideal filter)")
    return v


def bit_depth(value, what, base=None, spec=None):
    v = positive_int(value, what)
    if not 8 <= v <= 32:
        raise InputError(f"{what} {number_text(v)} must be a whole number of bits from 8 to 32")
    return v


def exposures(value, what, base=None, spec=None):
    """Positive exposure times in seconds, separated by commas; ``1/250`` as cameras show them."""
    items = list(value) if isinstance(value, (list, tuple)) else [t.strip() for t in str(value).split(",")]
    vals = []
    for t in items:
        if isinstance(t, str) and t.count("/") == 1:
            num, den = (_num(x, what) for x in t.split("/"))
            vals.append(check_positive(num, what) / check_positive(den, what))
        else:
            vals.append(check_positive(_num(t, what), what))
    return tuple(vals)


def orientation(value, what, base=None, spec=None):
    """``auto`` or an EXIF/TIFF Orientation value 1..8."""
    s = str(value).strip().lower()
    if s == "auto":
        return "auto"
    if s in tuple("12345678"):
        return int(s)
    raise InputError(f"{what} {value!r} must be auto or an orientation 1..8 (1 = as stored, 6 = turned 90 deg "
                     "clockwise, 8 = counter-clockwise, 3 = 180 deg)")


def response(value, what, base=None, spec=None):
    """A response-curve file or folder (checked when read), or a ResponseCurve (Python API)."""
    from ..read.response_file import find_response

    if hasattr(value, "lut"):
        return value
    return _in_file(what, lambda: find_response(path(value, what, base)))


def mosaic_cell(value, what, base=None, spec=None):
    from ..mosaic.layout import parse_mosaic

    return _in_file(what, lambda: parse_mosaic(str(value)).text)


def bayer(value, what, base=None, spec=None):
    s = str(value).strip().upper()
    if s not in ("RGGB", "BGGR", "GRBG", "GBRG"):
        raise InputError(f"{what} {value!r} is not a Bayer order; give one of RGGB, BGGR, GRBG, GBRG")
    return s


def solve(value, what, base=None, spec=None):
    items = value if isinstance(value, (list, tuple)) else str(value).split(",")
    names = tuple(dict.fromkeys(str(v).strip().lower() for v in items if str(v).strip()))
    bad = [n for n in names if n not in ("yaw", "pitch", "roll")]
    if bad:
        raise InputError(f"{what} {value!r}: {', '.join(bad)} not known; give any of yaw,pitch,roll separated by commas")
    return tuple(n for n in ("yaw", "pitch", "roll") if n in names)


def poses(value, what, base=None, spec=None):
    items = [value] if isinstance(value, str) else list(value)
    out = []
    for item in items:
        if isinstance(item, str):
            out.append(syntax.parse_number_list(item, what, 3))
        else:
            out.append(tuple(parse_number(v, what) for v in item))
            if len(out[-1]) != 3:
                raise InputError(f"{what} {item!r} must hold yaw,pitch,roll in degrees")
    return tuple(out)


def region(value, what, base=None, spec=None):
    from ..read.masks import parse_region

    # a settings file's value is named by its file, table and key; the command line's by its flag
    option = spec["flag"] if spec and what.startswith("--") else what
    return parse_region(value, option=option, base=base)


def embed(value, what, base=None, spec=None):
    if value == "auto" or (isinstance(value, str) and value.strip().lower() == "auto"):
        return "auto"
    return boolean(value, what)


def scheduler(value, what, base=None, spec=None):
    s = str(value).strip()
    if "://" not in s:
        raise InputError(f"{what} must be an address like tcp://host:8786, got {value!r}")
    return s


def size_px(value, what, base=None, spec=None):
    """``WIDTH,HEIGHT`` in whole pixels, 8 to 8000 a side."""
    vals = syntax.parse_number_list(value, what, 2)
    if any(v != int(v) or not 8 <= v <= 8000 for v in vals):
        raise InputError(f"{what} {value!r} must be two whole numbers WIDTH,HEIGHT between 8 and 8000 pixels")
    return tuple(int(v) for v in vals)


def incidence(value, what, base=None, spec=None):
    return check_range(_num(value, what), 0, 90, what, unit="degrees from the surface normal (0 = straight at the "
                                                          "surface, 90 = grazing)")


def refractive_index(value, what, base=None, spec=None):
    v = _num(value, what)
    if v <= 0:
        raise InputError(f"{what} {v:g} must be a positive number: the refractive index of the reflecting medium "
                         "relative to air, e.g. 1.333 for water, 1.5 for glass")
    if v <= 1:
        raise InputError(f"{what} {v:g} is not above 1: a surface reflects glare toward the camera only from a "
                         "denser medium (water 1.333, glass 1.5); give the index relative to air")
    if v > 5:
        raise InputError(f"{what} {v:g} is above 5; dielectric surfaces lie between 1.3 and 2.5 (metals are not "
                         "described by a real index)")
    return v


def sweep(value, what, base=None, spec=None):
    return syntax.parse_sweep(value, what)


def time_sweep(value, what, base=None, spec=None):
    return syntax.parse_time_sweep(value, what)


def port(value, what, base=None, spec=None):
    v = _num(value, what)
    if v != int(v) or not 0 <= v <= 65535:
        raise InputError(f"{what} must be a port number from 0 to 65535 (0: any free port), got {value!r}")
    return int(v)


def host(value, what, base=None, spec=None):
    s = str(value).strip()
    if not s or any(ch.isspace() or ch in "/?#@" for ch in s):
        raise InputError(f"{what} must be an address of this machine such as 127.0.0.1, got {value!r}")
    return s
