"""The advice result and its words: what ``polarsky advise`` prints.

:func:`advice_result` turns region sums into the result (the JSON of ``advise --json``, the
workbench's ``/api/advice``); :func:`advice_text` says it in words a photographer uses.
"""

from __future__ import annotations

import numpy as np

from .._shared.checks import dolp_above_one_cause
from ..errors import InputError
from .angle import best_angle_for_contrast, best_angle_for_region, transmitted

__all__ = ["advice_result", "advice_text", "ANGLE_CONVENTION_NOTE", "ADVICE_KEYS"]

#: Keys of the advice (``advice.json``, ``advise --json``), in order; all present, null where
#: they do not apply (docs/schemas/advice.schema.json).
ADVICE_KEYS = ("software_version", "best_angle_deg", "reduction_stops", "reduction_stops_ideal", "transmission_at_best",
               "region_dolp", "region_aolp_deg", "extinction_ratio", "region", "region_pixels", "protect",
               "protect_pixels", "contrast_gain", "protect_intensity", "region_intensity", "minimum_angle_deg",
               "analyzer_angles_deg", "angle_offset_deg", "calibration", "ring_offset_deg", "ring_offset_sigma_deg",
               "best_ring_reading_deg", "surface_estimate", "inputs", "shifts_px", "polarizer", "angle_convention",
               "warnings", "outputs")

#: A region's DoLP (of its summed Stokes vector) above this is refused; up to it, the excess
#: over 1 is taken as noise.
REGION_DOLP_LIMIT = 1.01

ANGLE_CONVENTION_NOTE = ("degrees counter-clockwise from the image +x axis as displayed, in the frame of the input "
                         "analyzer angles (ring readings stay ring readings)")


def advice_result(sums: dict, counts: dict, *, region, protect=None, extinction=None, analyzer_angles_deg,
                  inputs, shifts_px=None, polarizer: str = "front", angle_offset_deg: float = 0.0,
                  calibration=None, ring=None, surface=None, pitch_deg=None) -> dict:
    """The advice (what ``polarsky advise --json`` prints) from a region's summed Stokes vectors.

    Parameters
    ----------
    sums : dict
        ``"region"`` (and with ``protect`` ``"protect"``): summed Stokes vector (3,) of the
        valid pixels inside (see :func:`region_stokes_sum`).
    counts : dict
        Valid pixel counts under the same keys.
    region, protect : Region
        The regions (their ``text`` is echoed).
    extinction : float, optional
        Filter extinction ratio (None = ideal).
    analyzer_angles_deg, inputs, shifts_px, polarizer
        Facts of the bracket echoed in the result.
    angle_offset_deg : float
        Offset the estimate added to the analyzer angles as given (``--angle-offset`` and a
        calibration's offset): the results are in the frame of the given angles plus it.
    calibration : dict, optional
        The calibration applied (the glossary's ``calibration`` object), echoed.
    ring : dict, optional
        A filter-ring calibration (:func:`polarsky.advice.ring.ring_of_calibration`): the
        recommendation is also given as a reading on the scale of the angles given
        (``best_ring_reading_deg = best_angle_deg - angle_offset_deg``).
    surface : dict, optional
        The reflecting medium (:func:`polarsky.advice.surface.resolve_surface`): the angle of
        incidence is estimated from the region's DoLP (key ``surface_estimate``), with
        ``pitch_deg`` (elevation of the optical axis) choosing between its two solutions.
    """
    from ..core.stokes import diattenuation_from_extinction

    if counts["region"] == 0:
        raise InputError(f"region {region.text} holds no valid pixels (all saturated, black or outside); choose another region")
    d = 1.0 if extinction is None else diattenuation_from_extinction(extinction)
    for key, reg in (("region", region), ("protect", protect)):
        s = np.asarray(sums.get(key, (1.0, 0.0, 0.0)), dtype=np.float64)
        if s[0] > 0 and np.hypot(s[1], s[2]) > REGION_DOLP_LIMIT * s[0]:
            raise InputError(f"{'region' if key == 'region' else 'protected region'} {reg.text} has a DoLP of "
                             f"{np.hypot(s[1], s[2]) / s[0]:.3f}, above 1, which no light has: the filter model does "
                             f"not fit these frames; {dolp_above_one_cause(extinction, calibration)}")
    result = best_angle_for_region(sums["region"], diattenuation=d)
    result["extinction_ratio"] = extinction
    result["region"] = region.text
    result["region_pixels"] = counts["region"]
    if protect is not None:
        if counts["protect"] == 0:
            raise InputError(f"protected region {protect.text} holds no valid pixels; choose another region")
        minimum = result["best_angle_deg"]
        con = best_angle_for_contrast(sums["protect"], sums["region"], diattenuation=d)
        result.update(con)
        result["minimum_angle_deg"] = minimum
        result["protect"] = protect.text
        result["protect_pixels"] = counts["protect"]
        # reduction of the region at the recommended (contrast) angle
        s = sums["region"]
        t_best = transmitted(s, con["best_angle_deg"], diattenuation=d)
        result["reduction_stops"] = round(float(np.log2(0.5 * s[0] / t_best)), 4) if t_best > 0 else float("inf")
    from .._version import __version__
    from .ring import ring_keys, ring_reading

    if ring is not None:
        result.update(ring_keys(ring, {}))
        result["best_ring_reading_deg"] = ring_reading(result["best_angle_deg"], angle_offset_deg)
    if surface is not None:
        from .surface import surface_estimate

        result["surface_estimate"] = surface_estimate(result["region_dolp"], surface, pitch_deg=pitch_deg,
                                                      region_aolp_deg=result["region_aolp_deg"])
    result.update(software_version=__version__, analyzer_angles_deg=[float(a) for a in analyzer_angles_deg],
                  angle_offset_deg=round(float(angle_offset_deg), 6), calibration=calibration,
                  inputs=[str(p) for p in inputs], shifts_px=shifts_px, polarizer=polarizer,
                  angle_convention=ANGLE_CONVENTION_NOTE)
    return {k: result.get(k) for k in ADVICE_KEYS} | {"warnings": [], "outputs": None}


def _turn_text(best: float, angles, offset: float) -> str:
    """How to turn the filter from the nearest setting of the bracket (settings as given)."""
    given = np.asarray(angles, dtype=np.float64)
    diffs = (best - (given + offset) + 90.0) % 180.0 - 90.0
    k = int(np.argmin(np.abs(diffs)))
    d = float(diffs[k])
    if abs(d) < 0.05:
        return f"that is the {given[k]:g} deg setting you already shot"
    sense = "counter-clockwise" if d > 0 else "clockwise"
    return (f"from the {given[k]:g} deg setting of your bracket, turn the filter {abs(d):.1f} deg {sense} "
            "as seen on the displayed image (from behind the camera)")


def _sentence(text: str) -> str:
    return text[0].upper() + text[1:] + "."


def advice_text(result: dict) -> str:
    """A short human answer from the advise result."""
    lines = []
    best = result["best_angle_deg"]
    offset = result.get("angle_offset_deg") or 0.0
    if abs(offset) < 1e-9:
        lines.append(f"Set the filter's transmission axis to {best:.1f} deg (counter-clockwise from the image's "
                     "horizontal as displayed, on the scale of the angles you gave).")
    else:
        lines.append(f"Set the filter's transmission axis to {best:.1f} deg (counter-clockwise from the image's "
                     f"horizontal as displayed), which your filter scale reads as {(best - offset) % 180:.1f} deg "
                     f"(the angles you gave plus {offset:+.2f} deg).")
    lines.append(f"To get there: {_turn_text(best, result['analyzer_angles_deg'], offset)}.")
    dolp = result["region_dolp"]
    stops_i = result["reduction_stops_ideal"]
    removed = (1 - 2 ** -stops_i) * 100 if np.isfinite(stops_i) else 100.0
    lines.append(f"The region's light is {dolp * 100:.0f}% linearly polarized (AoLP {result['region_aolp_deg']:.1f} deg): "
                 f"at that angle an ideal filter removes {removed:.0f}% of what a filter at a random angle passes "
                 f"({stops_i:.2f} stops darker).")
    er = result.get("extinction_ratio")
    if er is not None:
        lines.append(f"A real filter with extinction ratio {er:g} reaches {result['reduction_stops']:.2f} stops.")
    else:
        from ..core.stokes import diattenuation_from_extinction

        st = []
        for e in (30, 300):
            d = diattenuation_from_extinction(e)
            left = 1 - d * dolp
            st.append(f"ER {e}: {-np.log2(left):.2f} stops")
        lines.append("Real filters reach less (" + ", ".join(st) + "); give --extinction for yours.")
    if result.get("contrast_gain") is not None:
        lines.append(f"Protected region kept: at this angle it passes {result['protect_intensity'] * 100:.0f}% of its light "
                     f"while the region passes {result['region_intensity'] * 100:.0f}%; "
                     f"protected/region contrast improves {result['contrast_gain']:.2f}x over no filter.")
    if dolp < 0.05:
        lines.append("The region is barely polarized: no filter angle will remove much of this light.")
    if result.get("best_ring_reading_deg") is not None:
        from .ring import ring_line

        lines.append(_sentence(ring_line(result["best_ring_reading_deg"], result)))
    if result.get("surface_estimate") is not None:
        lines.extend(_sentence(note) for note in result["surface_estimate"]["notes"])
    return "\n".join(lines)
