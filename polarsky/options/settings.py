"""Typed settings: the one table of every option of the command line, the batch file and the API.

The table is ``table.toml`` beside this module: one entry per option, grouped.  An option's
name is the Python keyword, the batch TOML key (in the table named after its group) and, with
``-`` for ``_``, the command-line option; its entry gives the parser, the default, the help
text, the metavar and the choices.  Each group becomes a frozen dataclass here (``ReadSettings``,
``EstimateSettings``, ...) whose fields carry their entry as metadata; :mod:`polarsky.cli.options`
builds the click options from them, :mod:`polarsky.batch.config` reads TOML tables with them,
and :meth:`Settings.from_options` maps keyword arguments onto them: one name and one syntax
everywhere.
"""

from __future__ import annotations

import dataclasses
import tomllib
from dataclasses import dataclass, field, fields
from pathlib import Path

from ..errors import InputError
from . import parsers

__all__ = ["Settings", "GROUPS", "option_names", "field_of", "choices_of", "TABLE"]

with open(Path(__file__).with_name("table.toml"), "rb") as _fh:
    #: The options table (``table.toml``): group -> {"doc": ..., option -> entry}.
    TABLE = tomllib.load(_fh)


def _field(name: str, entry: dict):
    default = entry.get("default")
    if isinstance(default, list):
        default = tuple(default)
    if entry.get("multiple") and default is None:
        default = ()
    spec = {"parse": getattr(parsers, entry["parse"]), "help": entry["help"], "metavar": entry.get("metavar"),
            "choices": entry.get("choices"), "multiple": bool(entry.get("multiple")), "flag": "--" + name.replace("_", "-"),
            "flag_value": entry.get("flag_value")}
    return name, object, field(default=default, metadata=spec)


def _frozen_setattr(self, name, value):
    if name in self.__dict__ or name not in self.__dataclass_fields__:
        raise dataclasses.FrozenInstanceError(f"cannot assign to field {name!r}")
    object.__setattr__(self, name, value)


def _frozen_delattr(self, name):
    raise dataclasses.FrozenInstanceError(f"cannot delete field {name!r}")


def _hash(self):
    return hash(tuple(getattr(self, f) for f in self.__dataclass_fields__))


def _group(group: str, class_name: str):
    """The settings class of one group: a dataclass whose fields cannot be reassigned.

    Frozen by hand (a field is set once, by ``__init__``) rather than by ``frozen=True``,
    whose generated methods make creating the classes take several times longer at every
    start of the command line.
    """
    entries = TABLE[group]
    cls = dataclasses.make_dataclass(class_name, [_field(k, v) for k, v in entries.items() if isinstance(v, dict)],
                                     kw_only=True)
    cls.__setattr__, cls.__delattr__, cls.__hash__ = _frozen_setattr, _frozen_delattr, _hash
    cls.__module__ = __name__  # the classes pickle by name (dask workers receive settings)
    cls.__doc__ = entries["doc"]
    return cls


ReadSettings = _group("read", "ReadSettings")
MosaicSettings = _group("mosaic", "MosaicSettings")
EstimateSettings = _group("estimate", "EstimateSettings")
OutputSettings = _group("output", "OutputSettings")
GeometrySettings = _group("geometry", "GeometrySettings")
SkySettings = _group("sky", "SkySettings")
AdviseSettings = _group("advise", "AdviseSettings")
PlanSettings = _group("plan", "PlanSettings")
GlareSettings = _group("glare", "GlareSettings")
RingSettings = _group("ring", "RingSettings")
CalibrateSettings = _group("calibrate", "CalibrateSettings")
DiscoverySettings = _group("discovery", "DiscoverySettings")
ReportSettings = _group("report", "ReportSettings")
ClusterSettings = _group("cluster", "ClusterSettings")
WorkbenchSettings = _group("workbench", "WorkbenchSettings")

#: group name (TOML table) -> settings class
GROUPS = {"read": ReadSettings, "mosaic": MosaicSettings, "estimate": EstimateSettings, "output": OutputSettings,
          "geometry": GeometrySettings, "sky": SkySettings, "advise": AdviseSettings, "plan": PlanSettings,
          "glare": GlareSettings, "ring": RingSettings, "calibrate": CalibrateSettings,
          "discovery": DiscoverySettings, "report": ReportSettings, "cluster": ClusterSettings,
          "workbench": WorkbenchSettings}

_GROUP_OF = {f.name: g for g, cls in GROUPS.items() for f in fields(cls)}


def option_names(*groups) -> list:
    """Option names of the given groups (all groups when none given), in table order."""
    return [f.name for g in (groups or GROUPS) for f in fields(GROUPS[g])]


def field_of(name: str):
    """The dataclass field of option ``name``."""
    return next(f for f in fields(GROUPS[_GROUP_OF[name]]) if f.name == name)


def choices_of(f) -> tuple:
    """The choices of a field: its list, or the names of the registry it names."""
    ch = f.metadata["choices"]
    if isinstance(ch, str):
        from .. import registries

        return getattr(registries, ch).names()
    return tuple(ch or ())


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
    plan: PlanSettings = field(default_factory=PlanSettings)
    glare: GlareSettings = field(default_factory=GlareSettings)
    ring: RingSettings = field(default_factory=RingSettings)
    calibrate: CalibrateSettings = field(default_factory=CalibrateSettings)
    discovery: DiscoverySettings = field(default_factory=DiscoverySettings)
    report: ReportSettings = field(default_factory=ReportSettings)
    cluster: ClusterSettings = field(default_factory=ClusterSettings)
    workbench: WorkbenchSettings = field(default_factory=WorkbenchSettings)
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
            if value is None or (value == () and name in _GROUP_OF and field_of(name).metadata["multiple"]):
                continue
            if name not in _GROUP_OF:
                raise InputError(f"unknown setting {name!r}{' in ' + where if where else ''}; known settings are "
                                 f"{', '.join(_GROUP_OF)}")
            f = field_of(name)
            what = f"{where} {name}".strip() if where else "--" + name.replace("_", "-")
            changes.setdefault(_GROUP_OF[name], {})[name] = f.metadata["parse"](value, what, base, f.metadata)
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
            extra = [n for n in ("mosaic_color", "black_level", "demosaic") if n in given]
            if extra:
                flags = ", ".join("--" + n.replace("_", "-") for n in extra)
                raise InputError(f"{flags} apply only to mosaic frames; add --mosaic CELL (e.g. \"90,45;135,0\") "
                                 "or drop them")
            return
        bracket_only = {"angles": self.read.angles, "manifest": self.read.manifest,
                        "extinction": self.estimate.extinction, "angle_offset": self.estimate.angle_offset,
                        "align": self.estimate.align}
        for n in ("orientation", "angle_frame", "exposure", "response", "float_scale", "filter_mount"):
            if n in given:
                flag = "--" + n.replace("_", "-")
                raise InputError(f"{flag} applies to a bracket of frames; mosaic frames are read in the sensor's own "
                                 f"layout and scale (the cell fixes their angles); drop {flag}")
        for n, v in bracket_only.items():
            if n in given and v not in (None, 0.0, False):
                flag = "--" + n.replace("_", "-")
                raise InputError(f"{flag} describes a bracket of frames and cannot be used with --mosaic (the mosaic "
                                 f"cell fixes the analyzer angles); drop {flag}")
