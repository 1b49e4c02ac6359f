"""``polarsky calibrate ring``: the filter ring's zero from a reference bracket."""

from __future__ import annotations

import click

from .options import ANGLE_HELP, emit, frames_command, pop_settings

GROUPS = ("read", "estimate", "advise", "ring")
EXCLUDE = ("protect",)


@frames_command("ring", groups=GROUPS, exclude=EXCLUDE, short_help="The filter ring's zero from a reference bracket.",
                out_help="Folder for calibration.nc (give it to --calibration) and calibration.json (replaced whole).",
                epilog=ANGLE_HELP + " Shoot the reference with the ring readings as the analyzer angles (--angles or "
                "file names). Afterwards give --calibration DIR to stokes, advise, sky and plan: advise and plan then "
                "also print ring readings.")
def command(frames, out_dir, as_json, **kw):
    """Offset between the filter ring's scale and the true transmission axis, from FRAME... of a known source.

    --region marks the reference source (a reflection off level water or glass near Brewster's
    angle, AoLP 0; or a screen or polarizer whose axis --source-aolp-deg gives). ring_offset_deg
    is what to add to a ring reading to get the true axis; its uncertainty comes from the
    region's DoLP and noise. Refused when the reference is too weakly polarized to fix it.
    """
    from polarsky.tasks.calibrate_ring import run_calibrate_ring

    return emit(run_calibrate_ring(list(frames), out_dir, **pop_settings(kw, *GROUPS, exclude=EXCLUDE)), as_json, _print)


def _print(res: dict) -> None:
    click.echo(f"reference region {res['region']} ({res['region_pixels']} pixels): DoLP {res['region_dolp']:.3f}, "
               f"AoLP {res['region_aolp_ring_deg']:.2f} deg on the ring's scale (source {res['source_aolp_deg']:g} deg)")
    click.echo(f"ring offset {res['ring_offset_deg']:+.2f} ± {res['ring_offset_sigma_deg']:.2g} deg: add it to a ring "
               "reading to get the true transmission axis")
    for note in res["notes"]:
        click.echo("note: " + note)
    click.echo(f"wrote {res['calibration_file']} (and calibration.json)")
