"""``polarsky advise``: the filter angle that darkens a region (or best keeps another)."""

from __future__ import annotations

import click

from polarsky.conventions import FIELD_CAUTION
from polarsky.options.settings import option_names
from polarsky.write.jsonio import print_json

from .options import frames_command, pop_settings

GROUPS = ("read", "mosaic", "estimate", "advise", "geometry", "glare", "output")
#: of the geometry and glare groups advise takes only the surface and the camera's pitch (--surface)
EXCLUDE = tuple(n for n in option_names("geometry", "glare") if n not in ("pitch_deg", "surface", "index"))


@frames_command("advise", groups=GROUPS, exclude=EXCLUDE, out_required=False,
                short_help='Which way to set the filter, and what it removes.',
                out_help='Folder for advice.json and the pictures (the axis drawn on the frame, the predicted view); replaced whole.')
def command(frames, out_dir, as_json, **kw):
    """Which way to set the filter for FRAME..., and how much it will remove (give --region).

    With --surface or --index the region's DoLP is also turned into the two angles of
    incidence of a reflection off that surface (--pitch-deg, negative = looking down, tells
    which one the camera geometry favours). With a ring calibration (--calibration from
    'polarsky calibrate ring') the recommendation is also given as a filter-ring reading.
    """
    from polarsky.advice.result import advice_text
    from polarsky.tasks.advise import run_advise

    result = run_advise(list(frames), out_dir, progress=not as_json, **pop_settings(kw, *GROUPS, exclude=EXCLUDE))
    if as_json:
        print_json(result)
        return 0
    click.echo(advice_text(result))
    if out_dir:
        click.echo(f"wrote {', '.join(result['outputs'])} to {out_dir}")
    click.echo(FIELD_CAUTION)
    return 0
