"""``polarsky stokes``: Stokes maps from a bracket or from polarization-mosaic frames."""

from __future__ import annotations

import click

from polarsky.write.jsonio import print_json

from .options import frames_command, pop_settings

GROUPS = ("read", "mosaic", "estimate", "output")


@frames_command("stokes", groups=GROUPS, short_help='Stokes maps, DoLP and AoLP with uncertainties.',
                out_help='Folder for stokes.nc, summary.json and the PNG maps (replaced whole).')
def command(frames, out_dir, as_json, **kw):
    """Per-pixel Stokes S0, S1, S2, DoLP and AoLP (with uncertainties) from FRAME... .

    FRAME... is a bracket shot through a filter at several angles, or (with --mosaic) the raw
    frames of a polarization-mosaic camera. Writes stokes.nc (NetCDF-4), summary.json,
    dolp.png, aolp.png, polarization.png and, with more than 3 analyzers, residual.png.
    """
    from polarsky.tasks.stokes import run_stokes

    summary = run_stokes(list(frames), out_dir, progress=not as_json, **pop_settings(kw, *GROUPS))
    if as_json:
        print_json(summary)
        return 0
    click.echo(f"{summary['frames']} {'frames' if summary['source_kind'] == 'bracket' else 'mosaic frame(s)'}, "
               f"analyzers at {', '.join(f'{a:g}' for a in summary['analyzer_angles_deg'])} deg "
               f"({summary['angle_source']}), {summary['width_px']}x{summary['height_px']} px, channels "
               f"{','.join(summary['channels'])}")
    if summary.get("shifts_px"):
        click.echo("alignment shifts (dx, dy px): " + "; ".join(f"{dx:+.2f},{dy:+.2f}" for dx, dy in summary["shifts_px"]))
    click.echo("mean DoLP: " + ", ".join(f"{k} {v:.3f}" for k, v in summary["mean_dolp"].items() if v is not None))
    if summary.get("median_relative_residual") is not None:
        click.echo(f"fit residual: median {summary['median_relative_residual'] * 100:.2f}% of S0, "
                   f"99th percentile {summary['p99_relative_residual'] * 100:.2f}%"
                   + (" (see residual.png)" if "residual.png" in summary["outputs"] else ""))
    click.echo(f"wrote {', '.join(summary['outputs'])} to {out_dir}")
    return 0
