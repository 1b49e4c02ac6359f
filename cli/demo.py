"""``polarsky demo``: render the invented harbour scene and run the pipeline on it."""

from __future__ import annotations

import click

from polarsky.advice import SAFETY_NOTE

from .common import print_json


@click.command(name="demo")
@click.option("--out", "out_dir", default="demo-out", show_default=True, type=click.Path(file_okay=False, path_type=str),
              help="Folder for the rendered bracket and every output.")
@click.option("--json", "as_json", is_flag=True, help="Print the demo report as one JSON object.")
def command(out_dir, as_json):
    """Render an invented inspection scene with known truth and run polarsky on it."""
    from polarsky.demo import run_demo

    if not as_json:
        click.echo("Rendering the invented 'Kestrel Reach' harbour scene: a plate under a sky-reflecting water surface ...")
    rep = run_demo(out_dir)
    if as_json:
        print_json(rep)
        return 0
    click.echo(f"bracket: {len(rep['frames'])} PNG frames in {out_dir}/bracket")
    click.echo("hand-held shake, true vs measured (dx, dy px): " + "; ".join(
        f"{t[0]:+.2f},{t[1]:+.2f} vs {m[0]:+.2f},{m[1]:+.2f}" for t, m in zip(rep["true_shifts_px"], rep["measured_shifts_px"] or rep["true_shifts_px"])))
    click.echo(f"darken the water (region {rep['region']}): best angle {rep['best_angle_deg']:.1f} deg "
               f"(truth {rep['true_best_angle_deg']:.1f}), {rep['reduction_stops']:.2f} stops (truth {rep['true_reduction_stops']:.2f})")
    click.echo(f"keep the plate visible (protect {rep['protect']}): best angle {rep['contrast_best_angle_deg']:.1f} deg "
               f"(truth {rep['true_contrast_best_angle_deg']:.1f}), contrast gain {rep['contrast_gain']:.2f}x "
               f"(truth {rep['true_contrast_gain']:.2f}x)")
    click.echo(f"evening sky (sun at azimuth {rep['sun_azimuth_deg']:.1f}, elevation {rep['sun_elevation_deg']:.1f} deg): "
               f"camera heading from the sky {rep['sky_yaw_deg']:.1f} deg (truth {rep['true_sky_yaw_deg']:.1f}, "
               f"compass said {rep['sky_yaw_guess_deg']:.1f}); fitted max DoLP {rep['sky_dolp_max']:.3f} "
               f"(truth {rep['true_sky_dolp_max']:.3f}); AoLP residual {rep['sky_aolp_rms_deg']:.2f} deg RMS")
    for k, v in rep["outputs"].items():
        click.echo(f"  {k}: {v}")
    click.echo(SAFETY_NOTE)
    return 0
