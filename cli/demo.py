"""``polarsky demo``: render the invented harbour scene and run polarsky on it."""

from __future__ import annotations

import click

from polarsky.conventions import FIELD_CAUTION
from polarsky.write.jsonio import print_json

from .options import json_option


@click.command(name="demo", short_help="Run polarsky on an invented scene with known truth.")
@click.option("--out", "out_dir", default="demo-out", show_default=True, metavar="DIR",
              type=click.Path(file_okay=False, path_type=str), help="Folder for the rendered brackets and every output.")
@json_option
def command(out_dir, as_json):
    """Render an invented inspection scene and its evening sky with known truth; run polarsky on them."""
    from polarsky.tasks.demo import run_demo

    if not as_json:
        click.echo("Rendering the invented 'Kestrel Reach' harbour scene: a plate under a sky-reflecting water surface ...")
    rep = run_demo(out_dir, progress=not as_json)
    if as_json:
        print_json(rep)
        return 0
    click.echo(f"bracket: {len(rep['frames'])} PNG frames in {out_dir}/bracket")
    measured = rep["measured_shifts_px"] or rep["true_shifts_px"]
    click.echo("hand-held shake, true vs measured (dx, dy px): " + "; ".join(
        f"{t[0]:+.2f},{t[1]:+.2f} vs {m[0]:+.2f},{m[1]:+.2f}" for t, m in zip(rep["true_shifts_px"], measured)))
    click.echo(f"darken the water (region {rep['region']}): best angle {rep['best_angle_deg']:.1f} deg "
               f"(truth {rep['true_best_angle_deg']:.1f}), {rep['reduction_stops']:.2f} stops "
               f"(truth {rep['true_reduction_stops']:.2f})")
    click.echo(f"keep the plate visible (protect {rep['protect']}): best angle {rep['contrast_best_angle_deg']:.1f} deg "
               f"(truth {rep['true_contrast_best_angle_deg']:.1f}), contrast gain {rep['contrast_gain']:.2f}x "
               f"(truth {rep['true_contrast_gain']:.2f}x)")
    click.echo(f"evening sky (sun at azimuth {rep['sun_azimuth_deg']:.1f}, elevation {rep['sun_elevation_deg']:.1f} deg): "
               f"camera heading from the sky {rep['sky_yaw_deg']:.1f} deg (truth {rep['true_sky_yaw_deg']:.1f}, "
               f"compass said {rep['sky_yaw_guess_deg']:.1f}); fitted max DoLP {rep['sky_dolp_max']:.3f} "
               f"(truth {rep['true_sky_dolp_max']:.3f}); AoLP residual {rep['rms_aolp_residual_deg']:.2f} deg RMS")
    click.echo(f"wrote {', '.join(rep['outputs'])} to {out_dir}")
    click.echo(FIELD_CAUTION)
    return 0
