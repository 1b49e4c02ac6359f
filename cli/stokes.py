"""``polarsky stokes``: Stokes maps from a bracket (or a mosaic frame)."""

from __future__ import annotations

import click

from polarsky.pipeline import run_stokes

from .common import ANGLE_HELP, bracket_kwargs, bracket_options, frames_argument, print_json, progress_wanted
from .mosaic_options import mosaic_options, mosaic_run_from_options, strip_mosaic_options


@click.command(name="stokes", epilog=ANGLE_HELP)
@frames_argument
@bracket_options
@click.option("--out", "out_dir", required=True, type=click.Path(file_okay=False, path_type=str),
              help="Folder for stokes.nc, summary.json and the PNG maps.")
@click.option("--json", "as_json", is_flag=True, help="Print the summary as one JSON object.")
@mosaic_options
def command(frames, out_dir, as_json, **kw):
    """Per-pixel Stokes S0, S1, S2, DoLP and AoLP (with uncertainties) from FRAME... .

    Writes stokes.nc (NetCDF-4), summary.json, dolp.png, aolp.png, polarization.png and,
    with more than 3 frames, residual.png.
    """
    mosaic = strip_mosaic_options(kw)
    opts = bracket_kwargs(kw)
    # polarization-mosaic camera (cli/mosaic_options.py); None when --mosaic is absent
    summary = mosaic_run_from_options(list(frames), out_dir, mosaic, bracket_opts=opts)
    if summary is None:
        summary = run_stokes(list(frames), out_dir, progress=progress_wanted(as_json), **opts)
    if as_json:
        print_json(summary)
        return 0
    md = summary.get("mean_dolp", {})
    click.echo(f"{summary['frames']} frames at {', '.join(f'{a:g}' for a in summary['analyzer_angles_deg'])} deg "
               f"({summary['angle_source']}), {summary['width']}x{summary['height']}, channels {','.join(summary['channels'])}")
    if summary.get("shifts_px"):
        click.echo("alignment shifts (dx, dy px): " + "; ".join(f"{dx:+.2f},{dy:+.2f}" for dx, dy in summary["shifts_px"]))
    click.echo("mean DoLP: " + ", ".join(f"{k} {v:.3f}" for k, v in md.items() if v is not None))
    if "residual_relative_median" in summary:
        click.echo(f"fit residual: median {summary['residual_relative_median'] * 100:.2f}% of S0, "
                   f"99th percentile {summary['residual_relative_p99'] * 100:.2f}% (see residual.png)")
    click.echo(f"wrote {', '.join(summary['outputs'])} to {out_dir}")
    return 0
