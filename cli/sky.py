"""``polarsky sky``: compare a sky bracket with the clear-sky model; orientation from the sky."""

from __future__ import annotations

import click

from polarsky.errors import InputError
from polarsky.write.jsonio import print_json

from .options import frames_command, pop_settings

GROUPS = ("read", "mosaic", "estimate", "geometry", "sky", "output")


def _sigma(v):
    return "undetermined" if v is None else f"± {v:.3f}"


@frames_command("sky", groups=GROUPS, short_help='Compare the sky with the clear-sky model.',
                out_help='Folder for sky.json, sky.nc and the pictures (replaced whole).')
def command(frames, out_dir, as_json, **kw):
    """Compare the sky in FRAME... (a bracket, one stokes.nc, or mosaic frames) with the clear-sky model.

    Reports the sun position (NREL SPA), the fitted maximum DoLP beside the pure-air bound,
    the AoLP/DoLP residuals over the sky pixels used, and with --solve the camera orientation
    recovered from the sky.
    """
    from polarsky.tasks.sky import run_sky

    frames = list(frames)
    opts = pop_settings(kw, *GROUPS)
    if not frames and not opts.get("manifest"):
        raise InputError("give the frames of a sky bracket (or one stokes.nc), e.g. polarsky sky f_000deg.tif ... --out DIR")
    res = run_sky(frames, out_dir, **opts)
    if as_json:
        print_json(res)
        return 0
    click.echo(f"sun: azimuth {res['sun_azimuth_deg']:.2f} deg, elevation {res['sun_elevation_deg']:.2f} deg "
               f"({res['when']}, time from {res['time_source']}, place from {res['place_source']})")
    o = res["orientation"]
    line = f"camera: yaw {res['yaw_deg']:.2f}, pitch {res['pitch_deg']:.2f}, roll {res['roll_deg']:.2f} deg"
    if o.get("source") == "solved":
        line += " (solved: " + ", ".join(f"{a} {_sigma(o.get(a + '_sigma_deg'))}" for a in o["solved"]) + " deg)"
    click.echo(line + f"; polarizer {res['polarizer']}")
    if o.get("source") == "solved" and len(o["parameters"]) > 1:
        names, corr = o["parameters"], o["correlation"]
        pairs = [f"{names[i]}/{names[j]} {corr[i][j]:+.2f}" for i in range(len(names)) for j in range(i + 1, len(names))]
        click.echo("correlation of the solved angles: " + ", ".join(pairs))
    for note in o.get("notes", []):
        click.echo("note: " + note)
    dm, sig = res["dolp_max"], res["dolp_max_sigma"]
    if dm is None:
        click.echo("dolp_max: not determined")
    else:
        click.echo(f"dolp_max {dm:.3f} {_sigma(sig)} (pure-air bound {res['dolp_max_bound']:.3f}, Young 1980; "
                   f"model: {res['model_title']})")
    if res["rms_aolp_residual_deg"] is not None:
        click.echo(f"residuals over {res['sky_pixels']} sky pixels: AoLP rms {res['rms_aolp_residual_deg']:.2f} deg, "
                   f"DoLP rms {res['rms_dolp_residual']:.3f}")
    click.echo(f"wrote {', '.join(res['outputs'])} to {out_dir}")
    click.echo(res["caution"])
    return 0
