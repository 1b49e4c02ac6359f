"""``polarsky calibrate response``: a camera's response curve from an exposure series."""

from __future__ import annotations

import click

from polarsky.write.jsonio import print_json

from .options import frames_command, pop_settings

GROUPS = ("read", "calibrate")
INCLUDE = ("max_pixels", "exposures", "response_method")


def _exclude():
    from polarsky.options.settings import option_names

    return tuple(n for n in option_names(*GROUPS) if n not in INCLUDE)


EXCLUDE = _exclude()


@frames_command("response", groups=GROUPS, exclude=EXCLUDE,
                short_help="Camera response curve from an exposure series (for --response).",
                out_help="Folder for response.json (replaced whole).", epilog="")
def command(frames, out_dir, as_json, **kw):
    """Recover the response curve of the camera that wrote the 8-bit FRAME... (JPEG).

    Shoot one still scene from a tripod at 5 to 9 exposure times about a stop apart (fixed
    aperture, ISO, focus and white balance, no filter turned), with the picture style you use
    for brackets. Give the times with --exposures (seconds, frame order) unless the EXIF has
    them. Then '--response DIR' linearizes that camera's 8-bit frames with the curve instead of
    the assumed sRGB one.
    """
    from polarsky.tasks.calibrate_response import run_calibrate_response

    res = run_calibrate_response(list(frames), out_dir, **pop_settings(kw, *GROUPS, exclude=EXCLUDE))
    if as_json:
        print_json(res)
        return 0
    click.echo(f"response curve ({res['method']}) from {res['frames']} frames, exposures "
               f"{', '.join(f'{e:g}' for e in res['exposures_s'])} s ({res['exposure_source']})")
    click.echo("linear value at code 128: " + ", ".join(f"{c} {v:.4f}" for c, v in zip(res['channels'],
                                                                                        res['linear_at_half_code']))
               + f" (sRGB: {res['srgb_at_half_code']:.4f})")
    click.echo(f"wrote {res['response']}")
    return 0
