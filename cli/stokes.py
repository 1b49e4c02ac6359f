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
    if summary.get("orientation") not in (None, 1):
        click.echo(f"shown with orientation {summary['orientation']} (angles on the {summary['angle_frame']} layout)")
    if summary.get("shifts_px"):
        click.echo("alignment (dx, dy px; roll deg counter-clockwise; scale): " + "; ".join(
            f"{dx:+.2f},{dy:+.2f} {r:+.3f} {sc:.4f}" for (dx, dy), r, sc in
            zip(summary["shifts_px"], summary["rotations_deg"], summary["scales"])))
        if summary.get("roll_corrections_deg"):
            click.echo("analyzer angles corrected for the roll (filter on the lens; --filter-mount scene if it was "
                       "fixed to the scene)")
    if summary.get("exposure_estimate"):
        click.echo("relative exposure from the bracket itself: " + ", ".join(
            f"{g:.3f}" for g in summary["exposure_estimate"]) + f" (applied: {summary['exposure_source']})")
    click.echo("mean DoLP: " + ", ".join(f"{k} {v:.3f}" for k, v in summary["mean_dolp"].items() if v is not None))
    if summary.get("median_relative_residual") is not None:
        click.echo(f"fit residual: median {summary['median_relative_residual'] * 100:.2f}% of S0, "
                   f"99th percentile {summary['p99_relative_residual'] * 100:.2f}%"
                   + (" (see residual.png)" if "residual.png" in summary["outputs"] else ""))
    click.echo(f"wrote {', '.join(summary['outputs'])} to {out_dir}")
    return 0
