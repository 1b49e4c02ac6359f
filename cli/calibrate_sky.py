"""``polarsky calibrate sky``: analyzer angle offset (and diattenuation) from the clear sky."""

from __future__ import annotations

import click

from polarsky.errors import InputError

from .common import ANGLE_HELP, bracket_kwargs, bracket_options, frames_argument, print_json
from .mosaic_options import mosaic_options, strip_mosaic_options
from .sky import geometry_kwargs, geometry_options, mosaic_products, parse_floats


def _position_intensities(frames, mosaic: dict, opts: dict) -> dict:
    """Per-position intensities (4, C, h, w) of mosaic frames, decoded bilinearly without calibration."""
    from polarsky.mosaic.decode import decode_mosaic
    from polarsky.mosaic.io import read_mosaic_stack
    from polarsky.mosaic.layout import parse_mosaic

    layout = parse_mosaic(mosaic["mosaic"], mosaic.get("mosaic_colour"))
    bd = mosaic.get("bit_depth")
    stack = read_mosaic_stack(frames, bit_depth=None if bd is None else int(bd), black_level=mosaic.get("black_level"),
                              transfer=opts.get("transfer") or "auto")
    dec = decode_mosaic(stack.values, stack.invalid, layout, method=mosaic.get("demosaic") or "bilinear")
    return {"intensities": dec["intensities"], "angles_deg": list(layout.angles_deg), "mosaic": layout.text,
            "mosaic_colour": layout.colour}


@click.command(name="sky", epilog=ANGLE_HELP + " Several brackets: give their frames in order with --bracket-size N "
               "(or one stokes.nc per bracket) and one --pose YAW,PITCH,ROLL per bracket.")
@frames_argument
@bracket_options
@geometry_options
@click.option("--bracket-size", type=int, default=None,
              help="Split FRAME... into brackets of this many consecutive frames (default: one bracket); "
                   "--angles then lists the angles of one bracket.")
@click.option("--pose", "poses", multiple=True, metavar="YAW,PITCH,ROLL",
              help="Orientation of each bracket in degrees, repeated once per bracket (default: --yaw-deg, "
                   "--pitch-deg, --roll-deg for all).")
@click.option("--solve", default=None, metavar="yaw,pitch",
              help="Also fit these orientation angles per bracket. Leave roll out over narrow fields: it cannot be "
                   "told apart from the angle offset.")
@click.option("--reference-dolp-max", type=float, default=None,
              help="The sky's true maximum DoLP (e.g. from a reference polarimeter); enables the diattenuation estimate.")
@click.option("--per-position", is_flag=True,
              help="Mosaic cameras: fit an angle offset for each micro-polarizer position (instead of one per "
                   "channel); the frames are decoded without --calibration.")
@click.option("--out", "out_path", required=True, type=click.Path(dir_okay=False, path_type=str), metavar="CAL.nc",
              help="Calibration file to write.")
@click.option("--json", "as_json", is_flag=True, help="Print the result as one JSON object.")
@mosaic_options
def command(frames, out_path, as_json, bracket_size, poses, solve, reference_dolp_max, per_position, **kw):
    """Analyzer angle offset per channel from clear-sky FRAME... (apply with 'polarsky stokes --calibration').

    The offset is the angle to add to the nominal analyzer angles (filter-ring readings) so
    that the sky's AoLP matches the single-scattering model at the known sun position.
    """
    from polarsky.sky.calibrate import run_sky_calibration, split_brackets

    frames = list(frames)
    if not frames:
        raise InputError("give the frames of at least one clear-sky bracket (or stokes.nc files)")
    mosaic = strip_mosaic_options(kw)
    pose_list = [parse_floats(p, "--pose", 3) for p in poses] or None
    geo = geometry_kwargs(kw)
    opts = bracket_kwargs(kw)
    angles = opts.get("angles_deg")
    stokes = None
    position_data = None
    if per_position and mosaic.get("mosaic") is None:
        raise InputError("--per-position applies to polarization-mosaic frames; add --mosaic CELL or drop it")
    if per_position and opts.get("calibration"):
        raise InputError("--per-position fits the positions from the raw frames; drop --calibration")
    if mosaic.get("mosaic") is not None:
        # each mosaic FRAME is one measurement (or --bracket-size consecutive frames, averaged)
        size = bracket_size or 1
        if size < 1 or len(frames) % size:
            raise InputError(f"{len(frames)} mosaic frames do not split into groups of {size}; give a multiple of "
                             "--bracket-size frames")
        brackets = [frames[i:i + size] for i in range(0, len(frames), size)]
        stokes = [mosaic_products(b, mosaic, opts) for b in brackets]
        if per_position:
            position_data = [_position_intensities(b, mosaic, opts) for b in brackets]
        opts = {}
    else:
        mosaic_products(frames, mosaic, opts)  # rejects mosaic-only options without --mosaic
        brackets = split_brackets(frames, bracket_size)
    res = run_sky_calibration(brackets, out_path, poses=pose_list, solve=solve or (), stokes=stokes,
                              reference_dolp_max=reference_dolp_max, position_data=position_data, **geo, **opts)
    if as_json:
        print_json(res)
        return 0
    if res["per_position"]:
        for k, (offs, sigs) in enumerate(zip(res["angle_offset_deg"], res["angle_offset_sigma_deg"])):
            for ch, off, sig in zip(res["channels"], offs, sigs):
                s = "undetermined" if sig is None else f"± {sig:.3f}"
                click.echo(f"position {k} channel {ch}: angle offset {off:+.3f} {s} deg")
    else:
        for ch, off, sig in zip(res["channels"], res["angle_offset_deg"], res["angle_offset_sigma_deg"]):
            s = "undetermined" if sig is None else f"± {sig:.3f}"
            click.echo(f"channel {ch}: analyzer angle offset {off:+.3f} {s} deg")
    if res["diattenuation"] is not None:
        click.echo("effective diattenuation: " + ", ".join(f"{ch} {d:.4f} ± {s:.4f}" for ch, d, s in
                                                          zip(res["channels"], res["diattenuation"], res["diattenuation_sigma"])))
    for note in res["notes"]:
        click.echo("note: " + note)
    click.echo(f"wrote {res['calibration']} ({res['brackets']} bracket(s), {res['sky_pixels']} sky pixels"
               f"{', angles ' + str(angles) if angles else ''})")
    click.echo(res["caution"])
    return 0
