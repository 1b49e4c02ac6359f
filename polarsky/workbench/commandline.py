"""The ``polarsky advise`` command line equivalent to what the workbench shows.

A *recipe* says how a result was (or would be) made: ``{"frames": [...], "settings":
Settings}``.  The command is written from the options table: every setting of the bracket
groups (``read``, ``mosaic``, ``estimate``) that differs from its default becomes its
option, in the syntax its parser reads back.
"""

from __future__ import annotations

import dataclasses
import shlex
from pathlib import Path

__all__ = ["advise_command", "recipe_from_facts", "recorded_paths", "GROUPS"]

#: Settings groups that decide the Stokes estimate (and so the advice).
GROUPS = ("read", "mosaic", "estimate")


def _number(v) -> str:
    """The shortest text that reads back as the same number."""
    if isinstance(v, int):
        return str(v)
    v = float(v)
    text = format(v, "g")
    return text if float(text) == v else repr(v)


def _words(name: str, value) -> list:
    flag = "--" + name.replace("_", "-")
    if isinstance(value, bool):
        return [flag] if value else ["--no-" + flag[2:]]
    if isinstance(value, (tuple, list)):
        return [flag, ",".join(_number(v) for v in value)]
    if isinstance(value, (int, float)):
        return [flag, _number(value)]
    if not isinstance(value, (str, Path)):  # e.g. a Calibration object given through the Python API
        raise ValueError(f"{flag} was given as a Python object")
    return [flag, str(value)]


def option_words(settings) -> list:
    """Command-line words of the bracket settings that differ from their defaults."""
    words = []
    for group in GROUPS:
        for f in dataclasses.fields(getattr(settings, group)):
            value = getattr(getattr(settings, group), f.name)
            if value is not None and value != f.default:
                words += _words(f.name, value)
    return words


def advise_command(recipe: dict | None, region: str, protect: str | None = None) -> str | None:
    """``polarsky advise FRAMES... [options] --region BOX [--protect BOX] --json``, or None."""
    if recipe is None:
        return None
    try:
        options = option_words(recipe["settings"])
    except ValueError:
        return None
    words = ["polarsky", "advise", *[str(f) for f in recipe.get("frames", [])], *options]
    words += ["--region", region]
    if protect:
        words += ["--protect", protect]
    words.append("--json")
    return " ".join(shlex.quote(w) for w in words)


def recorded_paths(paths) -> list:
    """Input paths a result recorded, each where it lies now: a path recorded inside the
    staging folder of a run that has since published it (:func:`polarsky.write.stage.published_path`)
    is given in the published folder."""
    from pathlib import Path

    from ..write.stage import published_path

    return [str(p) if Path(p).exists() else str(published_path(p)) for p in paths]


def recipe_from_facts(facts: dict, n_channels: int) -> tuple[dict | None, str]:
    """A recipe rebuilt from the attributes of a ``stokes.nc``, and a note for people.

    Options the attributes do not record (noise model, pixel limit) do not change the Stokes
    maps the advice uses; a manifest's path and a calibration's angle offset are not recorded
    either, so those results get the angles (and offset) written out instead.
    """
    from ..errors import InputError
    from ..estimate.calibration import applied_analysis
    from ..options.settings import Settings

    if not facts.get("inputs"):
        return None, "the result does not record its input frames"
    opts: dict = {}
    if facts.get("mosaic"):
        opts.update(mosaic=facts["mosaic"], mosaic_color=facts.get("mosaic_color"), demosaic=facts.get("demosaic"),
                    bit_depth=facts.get("bit_depth"), black_level=facts.get("black_level"))
    elif facts.get("angle_source") != "file names":
        opts["angles"] = facts["analyzer_angles_deg"]
    transfer = facts.get("transfer")
    if isinstance(transfer, list) and len(set(transfer)) == 1 and transfer[0] in ("linear", "srgb"):
        opts["transfer"] = transfer[0]
    if not facts.get("mosaic"):
        opts.update(extinction=facts.get("extinction_ratio"), align=bool(facts.get("aligned")) or None)
    cal = facts.get("calibration")
    if isinstance(cal, dict) and cal.get("file"):
        opts["calibration"] = cal["file"]
    elif not facts.get("mosaic"):
        offsets, _ = applied_analysis(facts, n_channels)
        if len({round(float(o), 6) for o in offsets}) == 1 and round(float(offsets[0]), 6) != 0.0:
            opts["angle_offset"] = round(float(offsets[0]), 6)
    try:
        settings = Settings.from_options(opts)
    except InputError as exc:
        return None, f"the attributes of stokes.nc do not give a command ({exc})"
    note = "rebuilt from the attributes of stokes.nc"
    if facts.get("precision") == "standard":
        note += ("; the maps were stored to their documented precision, so the command, which estimates "
                 "again from the frames, can differ in the last digit")
    if facts.get("angle_source") == "manifest":
        note += " (the manifest's exposure times are not recorded there: check them)"
    return {"frames": recorded_paths(facts["inputs"]), "settings": settings}, note
