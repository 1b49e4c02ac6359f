"""Typed settings: the one table of every option of the command line, the batch file and the API.

Each group of settings is a frozen dataclass whose fields *are* the table: a field's name is
the Python keyword, the batch TOML key (in the table named after the group) and, with ``-``
for ``_``, the command-line option; its metadata holds the parser, the help text and the
metavar.  :mod:`polarsky.cli.options` builds the click options from these fields,
:mod:`polarsky.batch.config` reads TOML tables with them, and :meth:`Settings.from_options`
maps keyword arguments onto them, so one name and one syntax serve everywhere.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field, fields
from pathlib import Path

from ..errors import InputError
from . import parsers as p

__all__ = ["Settings", "GROUPS", "option_names", "field_of", "ReadSettings", "MosaicSettings",
           "EstimateSettings", "OutputSettings", "GeometrySettings", "SkySettings", "AdviseSettings",
           "CalibrateSettings", "DiscoverySettings", "ReportSettings", "ClusterSettings"]


def option(default=None, *, parse, help, metavar=None, choices=None, flag=True, multiple=False):
    """A settings field with its command-line and file description (see module docs)."""
    return field(default=default, metadata={"parse": parse, "help": help, "metavar": metavar, "choices": choices,
                                            "flag": flag, "multiple": multiple})


@dataclass(frozen=True, kw_only=True)
class ReadSettings:
    """How frames are read: angles, transfer, limits."""

    angles: tuple | None = option(parse=p.angles, metavar="A,B,...", help=(
        "Analyzer angle of each frame in frame order, degrees: 0,45,90,135 or ranges start:stop:step such as "
        "0:180:45. Without --angles or --manifest each file name must hold one '<number>deg' token."))
    manifest: Path | None = option(parse=p.path, metavar="CSV", help=(
        "CSV with columns file,angle_deg and optional exposure_s (file names relative to it)."))
    transfer: str = option("auto", parse=p.choice("auto", "linear", "srgb"), choices=("auto", "linear", "srgb"),
                           help="How pixel values encode light: auto = 8-bit sRGB, deeper data and raw linear.")
    max_pixels: int = option(250_000_000, parse=p.positive_int, metavar="N",
                             help="Refuse frames with more pixels than this.")
    bit_depth: int | None = option(parse=p.bit_depth, choices=("8", "10", "12", "14", "16"), help=(
        "Significant bits of raw data stored in 16-bit containers (mosaic frames; default: the container's)."))
    black_level: float | None = option(parse=p.non_negative, metavar="COUNTS",
                                       help="Sensor black level in raw counts (mosaic frames; default 0, DNG: the file's).")


@dataclass(frozen=True, kw_only=True)
class MosaicSettings:
    """Polarization-mosaic cameras: one raw frame is a whole bracket."""

    mosaic: str | None = option(parse=p.mosaic_cell, metavar="CELL", help=(
        "Frames come from a polarization-mosaic camera whose 2x2 cell holds these micro-polarizer angles, rows "
        "split by ';', e.g. \"90,45;135,0\" (degrees, image convention). Each FRAME is then one raw sensor image; "
        "several are averaged."))
    mosaic_colour: str | None = option(parse=p.bayer, choices=("RGGB", "BGGR", "GRBG", "GBRG"), help=(
        "Colour mosaic sensor: Bayer order of the 2x2 micro-polarizer cells (colour repeats every 4x4 pixels)."))
    demosaic: str = option("bilinear", parse=p.demosaic, choices=p.DEMOSAIC_CHOICES, help=(
        "Mosaic decoding: superpixel (half resolution), bilinear, or newton (edge-directed, Li et al. 2019)."))


@dataclass(frozen=True, kw_only=True)
class EstimateSettings:
    """The filter model and the noise model of the Stokes estimate."""

    extinction: float | None = option(parse=p.extinction, metavar="ER",
                                      help="Extinction ratio Tmax/Tmin of the filter, above 1 (default: ideal).")
    angle_offset: float = option(0.0, parse=p.number, metavar="DEG", help=(
        "Degrees added to every analyzer angle (the true zero of your filter ring)."))
    align: bool = option(False, parse=p.boolean, help="Register the frames to the first before the estimate.")
    calibration: Path | None = option(parse=p.path, metavar="CAL", help=(
        "Apply a calibration made by 'polarsky calibrate' (its calibration.nc or the folder holding it)."))
    gain_e_per_dn: float | None = option(parse=p.positive, metavar="E",
                                         help="Sensor gain for the noise model, electrons per file unit.")
    read_noise_dn: float = option(1.0, parse=p.non_negative, metavar="DN", help="Read noise, file units.")
    noise: str = option("auto", parse=p.choice("auto", "model", "residual"), choices=("auto", "model", "residual"),
                        help="Uncertainties from the noise model or, with more than 3 analyzers, from the fit residual.")


@dataclass(frozen=True, kw_only=True)
class OutputSettings:
    """What is written."""

    pictures: bool = option(True, parse=p.boolean, help="Write the PNG pictures.")


@dataclass(frozen=True, kw_only=True)
class GeometrySettings:
    """Time, place, lens and camera orientation."""

    when: object = option(parse=p.when, metavar="ISO8601", help=(
        "Time of the exposure with its UTC offset, e.g. 2026-06-21T14:05:00+02:00 (default: EXIF)."))
    lat: float | None = option(parse=p.latitude, metavar="DEG", help="Latitude, degrees north (default: EXIF GPS).")
    lon: float | None = option(parse=p.longitude, metavar="DEG",
                               help="Longitude, degrees east, west negative (default: EXIF GPS).")
    altitude_m: float | None = option(parse=p.number, metavar="M",
                                      help="Height above sea level, metres (default: EXIF GPS or 0).")
    pressure_hpa: float | None = option(parse=p.positive, metavar="HPA", help=(
        "Air pressure for refraction, hPa (default: standard atmosphere at the altitude)."))
    temperature_c: float = option(12.0, parse=p.temperature, metavar="C", help="Air temperature for refraction, deg C.")
    delta_t_s: float | None = option(parse=p.number, metavar="S",
                                     help="TT - UT1, seconds (default: estimated for the date).")
    lens: str = option("pinhole", parse=p.lens, choices=p.LENS_CHOICES, help="Lens projection.")
    hfov_deg: float | None = option(parse=p.positive, metavar="DEG",
                                    help="Pinhole: horizontal field of view across the frame, degrees.")
    focal_px: float | None = option(parse=p.positive, metavar="PX", help="Pinhole: focal length in pixels.")
    focal_mm: float | None = option(parse=p.positive, metavar="MM", help=(
        "Pinhole: focal length in mm (with --sensor-width-mm; default EXIF FocalLength)."))
    sensor_width_mm: float | None = option(parse=p.positive, metavar="MM", help="Width of the imaged sensor area, mm.")
    distortion: tuple | None = option(parse=p.distortion, metavar="K1,K2,P1,P2[,K3]",
                                      help="Pinhole: OpenCV distortion coefficients.")
    fov_deg: float | None = option(parse=p.positive, metavar="DEG",
                                   help="Fisheye: field of view across the image circle, degrees.")
    circle_centre_px: tuple | None = option(parse=p.pair, metavar="X,Y", help=(
        "Fisheye: image-circle centre (x,y in pixels); default the image centre."))
    circle_radius_px: float | None = option(parse=p.positive, metavar="PX", help=(
        "Fisheye: image-circle radius; default half the shorter image side."))
    yaw_deg: float = option(0.0, parse=p.number, metavar="DEG",
                            help="Azimuth of the optical axis, degrees clockwise from true north.")
    pitch_deg: float = option(0.0, parse=p.pitch, metavar="DEG", help="Elevation of the optical axis, degrees.")
    roll_deg: float = option(0.0, parse=p.number, metavar="DEG",
                             help="Roll about the optical axis, clockwise as seen from behind the camera, degrees.")
    polarizer: str | None = option(parse=p.choice("front", "sensor"), choices=("front", "sensor"), help=(
        "Where the analyzers sit: front (a filter before the lens) or sensor (micro-polarizers); default: what the "
        "Stokes estimate recorded (front for brackets, sensor for mosaic frames)."))


@dataclass(frozen=True, kw_only=True)
class SkySettings:
    """The sky comparison."""

    sky_mask: object = option(parse=p.region("--sky-mask"), metavar="x0,y0,x1,y1|MASK", help=(
        "Pixels the sky fit may use: a box or a mask image of the frame size (non-zero = sky)."))
    model: str = option("rayleigh", parse=p.sky_model, choices=p.SKY_MODEL_CHOICES, help="Clear-sky polarization model.")
    neutral_point_deg: float = option(20.0, parse=p.neutral_point, metavar="DEG", help=(
        "--model neutral-points: distance of the Babinet/Brewster points from the sun and of the Arago/fourth "
        "points from the antisun, degrees."))
    sun_mask_deg: float = option(10.0, parse=p.sun_mask, metavar="DEG",
                                 help="Radius of the sun disk and aureole left out of the fit, degrees.")
    min_elevation_deg: float = option(0.0, parse=p.elevation, metavar="DEG",
                                      help="Pixels at or below this elevation are never sky.")
    solve: tuple = option((), parse=p.solve, metavar="yaw,pitch,roll", help=(
        "Fit these orientation angles (any subset) to the observed AoLP; the given angles are starting values."))


@dataclass(frozen=True, kw_only=True)
class AdviseSettings:
    """Filter advice for a region."""

    region: object = option(parse=p.region("--region"), metavar="x0,y0,x1,y1|MASK", help=(
        "Region to darken: a pixel box (x1, y1 exclusive) or a mask image (non-zero = inside)."))
    protect: object = option(parse=p.region("--protect"), metavar="x0,y0,x1,y1|MASK", help=(
        "Protected region to keep visible: maximize its brightness relative to --region."))


@dataclass(frozen=True, kw_only=True)
class CalibrateSettings:
    """Options of the calibrate commands."""

    bracket_size: int | None = option(parse=p.positive_int, metavar="N", help=(
        "Split FRAME... into brackets of this many consecutive frames (default: one bracket)."))
    pose: tuple = option((), parse=p.poses, metavar="YAW,PITCH,ROLL", multiple=True, help=(
        "Orientation of each bracket in degrees, once per bracket (default: --yaw-deg, --pitch-deg, --roll-deg)."))
    reference_dolp_max: float | None = option(parse=p.fraction, metavar="P", help=(
        "The sky's true maximum DoLP (e.g. from a reference polarimeter); enables the diattenuation estimate."))
    per_position: bool = option(False, parse=p.boolean, help=(
        "Mosaic cameras: fit an angle offset for each micro-polarizer position (instead of one per channel)."))
    dark: tuple = option((), parse=p.paths, metavar="FRAME", multiple=True, help=(
        "Dark frame (lens capped, same exposure), repeat for several: averaged and subtracted; finds hot pixels."))


@dataclass(frozen=True, kw_only=True)
class DiscoverySettings:
    """How a batch finds its brackets."""

    time_gap_s: float = option(10.0, parse=p.positive, metavar="S", help=(
        "Seconds between EXIF capture times that start a new bracket (frames grouped by capture time)."))


@dataclass(frozen=True, kw_only=True)
class ReportSettings:
    """The batch report."""

    embed_images: object = option("auto", parse=p.embed, metavar="auto|true|false", help=(
        "Thumbnails inside report.html (true), linked beside it (false), or inside up to 300 brackets (auto)."))
    thumbnail_px: int = option(240, parse=p.positive_int, metavar="PX", help="Thumbnail size in the report.")


@dataclass(frozen=True, kw_only=True)
class ClusterSettings:
    """Where a batch runs."""

    workers: int | None = option(parse=p.positive_int, metavar="N",
                                 help="Worker processes of the local cluster (default: CPU count).")
    scheduler: str | None = option(parse=p.scheduler, metavar="tcp://HOST:PORT", help=(
        "Run on an existing dask.distributed cluster (workers must see ROOT and --out under the same paths)."))
    dashboard: bool = option(False, parse=p.boolean, help="Local cluster dashboard on 127.0.0.1 with a free port.")


#: group name (TOML table) -> settings class
GROUPS = {"read": ReadSettings, "mosaic": MosaicSettings, "estimate": EstimateSettings, "output": OutputSettings,
          "geometry": GeometrySettings, "sky": SkySettings, "advise": AdviseSettings, "calibrate": CalibrateSettings,
          "discovery": DiscoverySettings, "report": ReportSettings, "cluster": ClusterSettings}

_GROUP_OF = {f.name: g for g, cls in GROUPS.items() for f in fields(cls)}


def option_names(*groups) -> list:
    """Option names of the given groups (all groups when none given), in table order."""
    return [f.name for g in (groups or GROUPS) for f in fields(GROUPS[g])]


def field_of(name: str):
    """The dataclass field of option ``name``."""
    return next(f for f in fields(GROUPS[_GROUP_OF[name]]) if f.name == name)


@dataclass(frozen=True)
class Settings:
    """Every setting, by group.  Build it with :meth:`from_options`."""

    read: ReadSettings = field(default_factory=ReadSettings)
    mosaic: MosaicSettings = field(default_factory=MosaicSettings)
    estimate: EstimateSettings = field(default_factory=EstimateSettings)
    output: OutputSettings = field(default_factory=OutputSettings)
    geometry: GeometrySettings = field(default_factory=GeometrySettings)
    sky: SkySettings = field(default_factory=SkySettings)
    advise: AdviseSettings = field(default_factory=AdviseSettings)
    calibrate: CalibrateSettings = field(default_factory=CalibrateSettings)
    discovery: DiscoverySettings = field(default_factory=DiscoverySettings)
    report: ReportSettings = field(default_factory=ReportSettings)
    cluster: ClusterSettings = field(default_factory=ClusterSettings)
    #: option names given explicitly (not defaults)
    given: frozenset = frozenset()

    @classmethod
    def from_options(cls, options=None, *, base: Path | None = None, where: str = "") -> "Settings":
        """Settings from option names and values (None = not given).

        Parameters
        ----------
        options : mapping
            ``{"angles": "0,45,90", "extinction": 300, ...}``: values as text (command line),
            TOML values or Python values.
        base : Path, optional
            Folder that relative paths are relative to (a settings file's folder).
        where : str
            Where the values came from, for messages (``"batch.toml [read]"``).

        Raises
        ------
        InputError
            An unknown name or a bad value (the message names it).
        """
        return cls().replace(options or {}, base=base, where=where)

    def replace(self, options, *, base: Path | None = None, where: str = "") -> "Settings":
        """A copy with the given options set (None values are ignored)."""
        changes: dict = {}
        given = set(self.given)
        for name, value in dict(options).items():
            if value is None or (isinstance(value, tuple) and value == () and field_of_safe(name) is not None
                                 and field_of(name).metadata["multiple"]):
                continue
            if name not in _GROUP_OF:
                raise InputError(f"unknown setting {name!r}{' in ' + where if where else ''}; known settings are "
                                 f"{', '.join(_GROUP_OF)}")
            f = field_of(name)
            what = f"{where} {name}".strip() if where else "--" + name.replace("_", "-")
            changes.setdefault(_GROUP_OF[name], {})[name] = f.metadata["parse"](value, what, base)
            given.add(name)
        groups = {g: dataclasses.replace(getattr(self, g), **vals) for g, vals in changes.items()}
        out = dataclasses.replace(self, **groups, given=frozenset(given))
        out._check()
        return out

    def _check(self) -> None:
        if self.advise.protect is not None and self.advise.region is None:
            raise InputError("--protect needs --region too: the protected region is kept relative to the region")

    def check_frame_options(self) -> None:
        """Refuse options that do not fit the kind of frames (mosaic or bracket) being estimated."""
        given = self.given
        if self.mosaic.mosaic is None:
            extra = [n for n in ("mosaic_colour", "bit_depth", "black_level", "demosaic") if n in given]
            if extra:
                flags = ", ".join("--" + n.replace("_", "-") for n in extra)
                raise InputError(f"{flags} apply only to mosaic frames; add --mosaic CELL (e.g. \"90,45;135,0\") "
                                 "or drop them")
            return
        bracket_only = {"angles": self.read.angles, "manifest": self.read.manifest,
                        "extinction": self.estimate.extinction, "angle_offset": self.estimate.angle_offset,
                        "align": self.estimate.align}
        for n, v in bracket_only.items():
            if n in given and v not in (None, 0.0, False):
                flag = "--" + n.replace("_", "-")
                raise InputError(f"{flag} describes a bracket of frames and cannot be used with --mosaic (the mosaic "
                                 f"cell fixes the analyzer angles); drop {flag}")


def field_of_safe(name):
    return field_of(name) if name in _GROUP_OF else None
