"""``polarsky calibrate response``: a camera's response curve from an exposure series.

Writes ``response.json`` (the curve, code 255 = 1, and what it was made from) into the
output folder; ``--response DIR`` then linearizes that camera's 8-bit frames with it.
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError
from ._common import collect_warnings, resolve_settings

__all__ = ["run_calibrate_response", "MIN_FRAMES"]

#: Frames an exposure series needs at least.
MIN_FRAMES = 3


def run_calibrate_response(frames, out_dir, settings=None, **options) -> dict:
    """Recover the inverse response of the camera that wrote ``frames``.

    Parameters
    ----------
    frames : sequence of path
        8-bit frames of one still scene (tripod, fixed aperture, focus and white balance)
        at several exposure times, no filter turned between them.
    out_dir : path
    settings : Settings, optional
        ``exposures`` (seconds per frame; default EXIF), ``response_method``, ``max_pixels``.

    Returns
    -------
    dict
        What ``response.json`` holds (without the curve) plus ``response`` (the file's path).
    """
    from .. import registries
    from ..read.frames import read_frame
    from ..write.response_file import publish_response
    from ..write.stage import check_out_dir

    settings = resolve_settings(settings, options)
    rd, cal = settings.read, settings.calibrate
    files = [str(f) for f in frames]
    if len(files) < MIN_FRAMES:
        raise InputError(f"{len(files)} frame(s) given; a response curve needs at least {MIN_FRAMES} frames of one "
                         "still scene at different exposure times (5 to 9 a stop apart are typical)")
    check_out_dir(out_dir, inputs=files)
    method = registries.RESPONSE_METHODS.get(cal.response_method)
    with collect_warnings() as caught:
        # the stored layout: a curve is per code value, and tags flipping within a series do not matter
        loaded = [read_frame(f, transfer="linear", max_pixels=rd.max_pixels, orientation=None) for f in files]
        for fr in loaded:
            if fr.data.dtype != np.uint8:
                raise InputError(f"frame {fr.path} has {fr.bits}-bit values; a response curve is made from the "
                                 "camera's 8-bit frames (JPEG), the ones it will linearize")
            if fr.data.shape != loaded[0].data.shape:
                raise InputError(f"frame {fr.path.name} differs in size or channels from {loaded[0].path.name}; "
                                 "shoot the series without changing the image size")
        exposures, source = _exposures(loaded, cal.exposures)
        images = [np.moveaxis(fr.data, 0, -1) if fr.data.shape[0] == 3 else fr.data[0] for fr in loaded]
        from ..core.response import normalize_response
        from ..core.transfer import srgb_to_linear

        curve = method.function(images, exposures)
        n_ch = loaded[0].data.shape[0]
        lut = normalize_response(curve if n_ch == 3 else curve[:, :1])
        channels = ["R", "G", "B"] if n_ch == 3 else ["L"]
        result = {"method": method.name, "method_reference": method.reference, "channels": channels,
                  "frames": len(files), "inputs": files, "exposures_s": [float(e) for e in exposures],
                  "exposure_source": source, "linear_at_half_code": [round(float(v), 5) for v in lut[:, 128]],
                  "srgb_at_half_code": round(float(srgb_to_linear(128 / 255)), 5)}
        publish_response(out_dir, lut, result, warnings=caught.messages())
    return result


def _exposures(loaded, given):
    """Exposure of each frame (seconds, or EXIF relative exposure) and where it came from."""
    if given:
        if len(given) != len(loaded):
            raise InputError(f"--exposures gives {len(given)} time(s) for {len(loaded)} frame(s); give one per frame, "
                             "in frame order")
        exp, source = np.asarray(given, dtype=np.float64), "option"
    else:
        missing = [fr.path.name for fr in loaded if fr.exposure is None]
        if missing:
            raise InputError(f"frame {missing[0]} has no EXIF exposure time; give --exposures with the time of each "
                             "frame in seconds")
        exp, source = np.asarray([fr.exposure for fr in loaded], dtype=np.float64), "exif"
    if np.unique(np.round(np.log2(exp), 3)).size < 3:
        raise InputError("the exposures of the series do not differ (fewer than 3 distinct times); shoot the scene "
                         "at several exposure times")
    return exp, source
