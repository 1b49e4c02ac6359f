"""``polarsky advise``: the filter angle that darkens a region (or best keeps another)."""

from __future__ import annotations

import click

from polarsky.conventions import FIELD_CAUTION
from polarsky.write.jsonio import print_json

from .options import frames_command, pop_settings

GROUPS = ("read", "mosaic", "estimate", "advise", "output")


@frames_command("advise", groups=GROUPS, out_required=False, short_help='Which way to set the filter, and what it removes.',
                out_help='Folder for advice.json and the pictures (the axis drawn on the frame, the predicted view); replaced whole.')
def command(frames, out_dir, as_json, **kw):
    """Which way to set the filter for FRAME..., and how much it will remove (give --region)."""
    from polarsky.advice.result import advice_text
    from polarsky.tasks.advise import run_advise

    result = run_advise(list(frames), out_dir, progress=not as_json, **pop_settings(kw, *GROUPS))
    if as_json:
        print_json(result)
        return 0
    click.echo(advice_text(result))
    if out_dir:
        click.echo(f"wrote {', '.join(result['outputs'])} to {out_dir}")
    click.echo(FIELD_CAUTION)
    return 0
