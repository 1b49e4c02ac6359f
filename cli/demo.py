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
    _print_plan(rep["plan"], rep["true_sky_dolp_max"])
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


def _print_plan(plan: dict, true_dolp_max: float) -> None:
    """The plans made before any frame existed, then what the rendered brackets show."""
    sky, g = plan["sky"], plan["glare"]
    click.echo("plan first (before any frame existed): the evening sky")
    click.echo(f"  predicted: filter at {sky['predicted_best_angle_deg']:.1f} deg, the sky "
               f"{sky['predicted_darkening_stops']:.2f} stops darker on average ({sky['predicted_darkening_stops_min']:.2f} "
               f"to {sky['predicted_darkening_stops_max']:.2f}), default dolp_max {sky['predicted_dolp_max']:.2f}")
    click.echo(f"  {sky['unevenness_text']}")
    click.echo(f"  the rendered bracket shows: best angle {sky['measured_best_angle_deg']:.1f} deg, "
               f"{sky['measured_darkening_stops']:.2f} stops on average ({sky['measured_darkening_stops_min']:.2f} to "
               f"{sky['measured_darkening_stops_max']:.2f}); its sky was rendered with dolp_max {true_dolp_max:.2f} "
               "and camera noise, which widens the measured extremes")
    click.echo(f"plan first: glare off the harbour water at about {g['incidence_deg']:g} deg (water n = {g['index']:.4f}, "
               "IAPWS R9-97)")
    click.echo(f"  predicted: filter at {g['predicted_best_angle_deg']:.1f} deg (vertical turned by the camera's roll); "
               f"the pure reflection is {g['predicted_reflection_dolp'] * 100:.0f}% polarized, "
               f"{g['predicted_reduction_stops_ideal']:.2f} stops removable; Brewster's angle {g['brewster_deg']:.1f} deg")
    lo, hi = g["incidence_solutions_deg"]
    click.echo(f"  the bracket shows: best angle {g['measured_best_angle_deg']:.1f} deg, the water region "
               f"{g['measured_region_dolp'] * 100:.0f}% polarized ({g['measured_reduction_stops']:.2f} stops): light from "
               "the plate below and the sky's own polarization dilute the reflection")
    click.echo(f"  read backwards (advise --surface water): that DoLP fits {lo:.1f} or {hi:.1f} deg of incidence; the "
               "rendered water spans about 50 to 82 deg, between the two, as expected for a diluted reflection")
