"""``summary.json``: one builder and one schema for brackets and mosaic frames.

Every key is present in every summary, with the same type whatever the source (``null``
where it does not apply); ``docs/schemas/summary.schema.json`` documents them and the tests
validate every path against it.  The batch reads its table from these keys.
"""

from __future__ import annotations

from .._version import __version__

__all__ = ["SUMMARY_KEYS", "build_summary", "calibration_facts"]

#: Keys of summary.json, in order.
SUMMARY_KEYS = (
    "software_version", "source_kind", "inputs", "frames", "analyzer_angles_deg", "angle_source",
    "width_px", "height_px", "sensor_width_px", "sensor_height_px", "output_pixel_size_px", "channels", "transfer",
    "polarizer", "mosaic", "mosaic_color", "demosaic", "demosaic_reference", "bit_depth", "black_level",
    "exposure_scale", "exposure_source", "condition_number", "extinction_ratio", "analysis_matrix", "calibration",
    "aligned", "shifts_px", "rotations_deg", "scales", "filter_mount", "roll_corrections_deg",
    "orientation", "frame_orientations", "angle_frame", "float_scale", "response", "response_check",
    "exposure_estimate", "exposure_estimate_sigma", "saturated_px", "black_px", "uncertainty_source",
    "pixels", "valid_pixels", "mean_dolp", "mean_dolp_unbiased", "mean_sigma_aolp_deg", "scene_dolp",
    "scene_aolp_deg", "median_relative_residual", "p99_relative_residual",
    "warnings", "outputs", "timing_s",
)


def calibration_facts(cal, *, per_pixel: bool = False):
    """The ``calibration`` value of a summary: None, or what was applied from which file."""
    if cal is None:
        return None
    applied = []
    if cal.pixel:
        applied.append("per-pixel analysis vectors (gain, diattenuation, angle)")
    if cal.angle_offset_deg is not None:
        applied.append("angle offset")
    if cal.diattenuation is not None:
        applied.append("diattenuation")
    return {"file": cal.source, "kind": cal.kind, "created": cal.attrs.get("created"), "applied": applied,
            "per_pixel": bool(per_pixel)}


def build_summary(**facts) -> dict:
    """The summary dict: every key of :data:`SUMMARY_KEYS`, ``None`` where not given.

    Raises
    ------
    KeyError
        A key that is not in :data:`SUMMARY_KEYS` (a programming error: extend the schema).
    """
    unknown = set(facts) - set(SUMMARY_KEYS)
    if unknown:
        raise KeyError(f"unknown summary key(s): {', '.join(sorted(unknown))}")
    out = {k: facts.get(k) for k in SUMMARY_KEYS}
    out["software_version"] = __version__
    out["warnings"] = list(facts.get("warnings") or [])
    return out
