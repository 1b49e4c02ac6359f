"""``polarsky calibrate sky``: analyzer angle offset (and diattenuation) from the clear sky."""

from __future__ import annotations

import click

from polarsky.write.jsonio import print_json

from .options import ANGLE_HELP, frames_command, pop_settings

GROUPS = ("read", "mosaic", "estimate", "geometry", "sky", "calibrate")
EXCLUDE = ("dark", "exposures", "response_method")


@frames_command("sky", groups=GROUPS, exclude=EXCLUDE, short_help='Analyzer angle offset from the clear sky.',
                out_help='Folder for calibration.nc and calibration.json (replaced whole).',
                epilog=ANGLE_HELP + (" Several brackets: give their frames in order with --bracket-size N (or one "
                                     "stokes.nc per bracket) and one --pose YAW,PITCH,ROLL per bracket."))
def command(frames, out_dir, as_json, **kw):
    """Analyzer angle offset per channel from clear-sky FRAME... (apply with '--calibration DIR').

    The offset is the angle to add to the nominal analyzer angles (filter-ring readings) so
    that the sky's AoLP matches the single-scattering model at the known sun position. Leave
    roll out of --solve over narrow fields: it cannot be told apart from the offset.
    """
    from polarsky.tasks.calibrate_sky import run_calibrate_sky

    res = run_calibrate_sky(list(frames), out_dir, **pop_settings(kw, *GROUPS, exclude=EXCLUDE))
    if as_json:
        print_json(res)
        return 0
    if res["per_position"]:
        for k, (offs, sigs) in enumerate(zip(res["angle_offset_deg"], res["angle_offset_sigma_deg"])):
            for ch, off, sig in zip(res["channels"], offs, sigs):
                click.echo(f"position {k} channel {ch}: angle offset {off:+.3f} {_sigma(sig)} deg")
    else:
        for ch, off, sig in zip(res["channels"], res["angle_offset_deg"], res["angle_offset_sigma_deg"]):
            click.echo(f"channel {ch}: analyzer angle offset {off:+.3f} {_sigma(sig)} deg")
    if res["diattenuation"] is not None:
        click.echo("effective diattenuation: " + ", ".join(
            f"{ch} {d:.4f} ± {s:.4f}" for ch, d, s in zip(res["channels"], res["diattenuation"], res["diattenuation_sigma"])))
    for note in res["notes"]:
        click.echo("note: " + note)
    click.echo(f"wrote {res['calibration_file']} ({res['brackets']} bracket(s), {res['sky_pixels']} sky pixels)")
    click.echo(res["caution"])
    return 0


def _sigma(v):
    return "undetermined" if v is None else f"± {v:.3f}"
