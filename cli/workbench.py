"""``polarsky workbench``: a local page to look at a bracket, mark the glare and read the angle."""

from __future__ import annotations

import click

from .options import ANGLE_HELP, out_option, pop_settings, settings_options

GROUPS = ("read", "mosaic", "estimate", "geometry", "sky", "discovery", "workbench")


@click.command(name="workbench", short_help="A page in your browser: mark the glare, read the angle.",
               epilog=ANGLE_HELP)
@click.argument("paths", nargs=-1, type=click.Path(path_type=str))
@out_option(required=False, help="Folder the page saves regions (mask images) and advice JSON into, and nothing "
                                 "else [default: polarsky-workbench].")
@settings_options(*GROUPS)
def command(paths, out_dir, **kw):
    """Look at PATH... in your browser: layers, readout, region -> filter angle at once.

    PATH is the frames of a bracket (or, with --mosaic, polarization-mosaic frames), an output
    folder of 'polarsky stokes', 'polarsky batch' or 'polarsky sky', or a folder of frames
    (grouped as the batch groups them). With the options of 'polarsky sky' (--when, --lat,
    --lon, lens and orientation) a bracket is also compared with the clear-sky model. The page
    is served on this machine only; its address carries a random token. Ctrl-C stops it.
    """
    from polarsky.workbench.launch import run_workbench

    return run_workbench(list(paths), out_dir, **pop_settings(kw, *GROUPS))
