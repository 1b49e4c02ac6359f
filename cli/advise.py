"""``polarsky advise``: the filter angle that darkens a region (or best keeps another)."""

from __future__ import annotations

import click

from polarsky.advice import SAFETY_NOTE, advice_text, run_advise

from .common import ANGLE_HELP, bracket_kwargs, bracket_options, frames_argument, print_json, progress_wanted


@click.command(name="advise", epilog=ANGLE_HELP)
@frames_argument
@bracket_options
@click.option("--region", required=True, metavar="x0,y0,x1,y1|MASK",
              help="Region to darken: pixel box (x1, y1 exclusive) or a mask image (non-zero = inside).")
@click.option("--protect", default=None, metavar="x0,y0,x1,y1|MASK",
              help="Region to keep visible: maximize its brightness relative to --region.")
@click.option("--out", "out_dir", default=None, type=click.Path(file_okay=False, path_type=str),
              help="Folder for advice.json and pictures (axis drawn on the frame, predicted view).")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object on stdout.")
def command(frames, region, protect, out_dir, as_json, **kw):
    """Which way to set the polarizer for FRAME..., and how much it will remove."""
    opts = bracket_kwargs(kw)
    result = run_advise(list(frames), out_dir, region=region, protect=protect,
                        progress=progress_wanted(as_json), **opts)
    if as_json:
        print_json(result)
        return 0
    click.echo(advice_text(result, result["analyzer_angles_deg"]))
    if out_dir:
        click.echo(f"wrote {', '.join(result['outputs'])} to {out_dir}")
    click.echo(SAFETY_NOTE)
    return 0
