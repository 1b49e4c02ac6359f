"""The filter ring's zero: the offset between the ring's scale and the true transmission axis.

A photographer reads angles off the filter ring, whose zero is arbitrary.  Shoot one bracket
of a source whose polarization direction is known (the reflection off a level water or glass
surface near Brewster's angle is polarized horizontally, AoLP 0; a liquid-crystal screen or a
laboratory polarizer has the axis the user gives), with the ring readings as the analyzer
angles.  The estimate then measures the source's AoLP on the ring's scale,
``psi_ring = psi_true - offset``, so

.. math:: \\text{offset} = \\psi_\\text{source} - \\psi_\\text{ring} \\pmod{180^\\circ},

the angle to *add* to a ring reading to get the true axis: the ``angle_offset_deg`` of a
calibration file (``kind = "ring"``), which the estimate adds to the analyzer angles given.
From the region's summed Stokes vector ``(S0, S1, S2)`` with ``L = sqrt(S1^2 + S2^2)`` and
the summed noise variance ``var`` of S1 (and S2), the offset's standard uncertainty is
``sqrt(var) / (2 L)`` rad (the high-SNR AoLP scatter).

References
----------
.. [1] K. Serkowski, "Polarization of starlight", Adv. Astron. Astrophys. 1, 289 (1962)
   (AoLP scatter ``sigma_psi = sigma_p / (2 p)``, from memory).
.. [2] E. Hecht, *Optics*, 5th ed. (2017), section 8.6 (reflection polarizes light
   perpendicular to the plane of incidence: horizontally for a level surface).
"""

from __future__ import annotations

import numpy as np

from ..errors import InputError

__all__ = ["ring_offset_from_sums", "ring_reading", "is_ring", "ring_of_calibration", "ring_line", "ring_keys",
           "ring_calibration_result", "MIN_DOLP", "MAX_SIGMA_DEG", "REMOUNT_NOTE", "RING_MEANING", "RING_KEYS",
           "RING_CALIBRATION_KEYS"]

#: The reference must be at least this polarized (below it, instrument polarization and stray
#: light of a few percent can turn the measured AoLP by many degrees).
MIN_DOLP = 0.10
#: Largest accepted standard uncertainty of the offset, degrees.
MAX_SIGMA_DEG = 2.0

REMOUNT_NOTE = ("the ring offset holds while the filter stays mounted as it was (a screw-in filter's scale turns "
                "with how far it is screwed in): calibrate again after remounting it")
RING_MEANING = ("ring_offset_deg is what to add to a filter-ring reading to get the true transmission axis (degrees "
                "counter-clockwise from the image +x axis as displayed)")

#: Keys every result with ring readings holds (null without a ring calibration); the result's
#: ``calibration`` key (the glossary's object) names the file.
RING_KEYS = ("ring_offset_deg", "ring_offset_sigma_deg")


def _wrap(a) -> float:
    """Degrees wrapped to [-90, 90)."""
    return (float(a) + 90.0) % 180.0 - 90.0


def ring_offset_from_sums(sums, *, var_s12: float, count: int, lin_sum=None, source_aolp_deg: float = 0.0,
                          min_dolp: float = MIN_DOLP, max_sigma_deg: float = MAX_SIGMA_DEG) -> dict:
    """The ring offset from a reference region's summed Stokes vector (on the ring's scale).

    Parameters
    ----------
    sums : array_like, shape (3,)
        Summed ``S0, S1, S2`` of the region, estimated with the ring readings as angles.
    var_s12 : float
        Summed noise variance of S1 (taken equal for S2, as for equally spaced analyzers).
    count : int
        Number of valid pixels summed.
    lin_sum : float, optional
        Sum of the per-pixel ``sqrt(S1^2 + S2^2)``; gives the spread of the per-pixel AoLP.
    source_aolp_deg : float
        The source's true AoLP, degrees (0 = horizontal, a level reflection).
    min_dolp, max_sigma_deg : float
        Refuse below this DoLP or above this uncertainty.

    Returns
    -------
    dict
        ``ring_offset_deg`` (add to a ring reading for the true axis, in [-90, 90)),
        ``ring_offset_sigma_deg``, ``region_dolp``, ``region_aolp_ring_deg`` (on the ring's
        scale), ``source_aolp_deg``, ``region_pixels`` and ``region_aolp_spread_deg`` (None
        without ``lin_sum``).

    Raises
    ------
    InputError
        No valid pixel, or a reference too weakly polarized (or too noisy) to fix the zero.

    Examples
    --------
    >>> r = ring_offset_from_sums([100.0, 0.0, 80.0], var_s12=1.0, count=100)   # AoLP 45 on the ring
    >>> r["ring_offset_deg"], r["ring_offset_sigma_deg"]
    (-45.0, 0.3581)
    """
    s = np.asarray(sums, dtype=np.float64)
    if count <= 0 or not s[0] > 0:
        raise InputError("the region holds no valid pixels (all saturated, black or outside); choose a region on the "
                         "reference source")
    src = float(source_aolp_deg)
    lin = float(np.hypot(s[1], s[2]))
    dolp = lin / s[0]
    aolp = float(np.degrees(0.5 * np.arctan2(s[2], s[1])) % 180.0)
    sigma = float(np.degrees(np.sqrt(max(var_s12, 0.0)) / (2.0 * lin))) if lin > 0 else float("inf")
    if dolp < min_dolp:
        raise InputError(f"the reference region is only {dolp * 100:.1f}% polarized (at least {min_dolp * 100:.0f}% "
                         "needed) - too weak to fix the ring's zero: aim at a reflection off level water or glass near "
                         "Brewster's angle (about 53-57 deg from the vertical) or at a polarizing screen")
    if not sigma <= max_sigma_deg:
        raise InputError(f"the ring offset would be uncertain by {sigma:.1f} deg (at most {max_sigma_deg:g} deg "
                         "accepted): the reference is too weakly polarized for its noise; use a larger region, a "
                         "brighter exposure or a more strongly polarized source")
    spread = None
    if lin_sum is not None and lin_sum > 0:
        r = min(1.0, lin / float(lin_sum))
        spread = round(float(np.degrees(np.sqrt(max(-2.0 * np.log(r), 0.0)) / 2.0)), 3)
    return {"ring_offset_deg": round(_wrap(src - aolp), 4), "ring_offset_sigma_deg": round(sigma, 4),
            "region_dolp": round(dolp, 5), "region_aolp_ring_deg": round(aolp, 4), "source_aolp_deg": src,
            "region_pixels": int(count), "region_aolp_spread_deg": spread}


def ring_reading(true_angle_deg, ring_offset_deg) -> float:
    """The ring reading that puts the transmission axis at ``true_angle_deg``, in [0, 180).

    Examples
    --------
    >>> ring_reading(90.0, 7.5)
    82.5
    """
    return round((float(true_angle_deg) - float(ring_offset_deg)) % 180.0, 3)


def is_ring(cal) -> bool:
    """Whether a calibration (or None) is a filter-ring calibration."""
    return cal is not None and cal.kind == "ring"


def ring_of_calibration(cal) -> dict:
    """The ring offset held by a calibration (:class:`polarsky.estimate.calibration.Calibration`).

    Returns
    -------
    dict
        ``ring_offset_deg``, ``ring_offset_sigma_deg``, both None when ``cal`` is None.

    Raises
    ------
    InputError
        Not a filter-ring calibration (``polarsky calibrate ring`` makes one).
    """
    if cal is None:
        return dict.fromkeys(RING_KEYS)
    if cal.kind != "ring" or cal.angle_offset_deg is None:
        raise InputError(f"--calibration {cal.source} is a {cal.kind!r} calibration, not a filter-ring one; make one "
                         "with 'polarsky calibrate ring'")
    sig = cal.uncertainty.get("angle_offset_deg")
    return {"ring_offset_deg": float(np.ravel(cal.angle_offset_deg)[0]),
            "ring_offset_sigma_deg": None if sig is None else float(np.ravel(sig)[0])}


def ring_keys(ring: dict, readings: dict) -> dict:
    """The ring keys of a result: ``ring`` (from :func:`ring_of_calibration`) and, for each
    ``key -> true angle`` of ``readings``, its ring reading (None without a ring calibration)."""
    off = ring["ring_offset_deg"]
    out = {k: ring[k] for k in RING_KEYS}
    out.update({k: (None if off is None or v is None else ring_reading(v, off)) for k, v in readings.items()})
    return out


def ring_line(reading, result: dict) -> str:
    """One line: the recommendation as a ring reading, with the offset and where it came from
    (``result`` holds ``ring_offset_deg``, ``ring_offset_sigma_deg`` and ``calibration``)."""
    sig = result["ring_offset_sigma_deg"]
    source = (result.get("calibration") or {}).get("file") or "the calibration"
    return (f"on your filter ring: set it to {reading:.1f} (ring offset {result['ring_offset_deg']:+.2f}"
            f"{'' if sig is None else f' ± {sig:.2g}'} deg from {source}; {REMOUNT_NOTE})")


#: Keys of ``calibration.json`` of a ring calibration (``polarsky calibrate ring --json``).
RING_CALIBRATION_KEYS = ("software_version", "kind", "ring_offset_deg", "ring_offset_sigma_deg", "region_dolp",
                         "region_aolp_ring_deg", "source_aolp_deg", "region", "region_pixels",
                         "region_aolp_spread_deg", "analyzer_angles_deg", "extinction_ratio", "inputs", "meaning",
                         "notes", "calibration_file", "warnings", "outputs")


def ring_calibration_result(offset: dict, *, region: str, analyzer_angles_deg, extinction, inputs,
                            calibration_file: str) -> dict:
    """``calibration.json`` of a ring calibration: the keys of :data:`RING_CALIBRATION_KEYS`.

    ``offset`` from :func:`ring_offset_from_sums`; ``calibration_file`` the path of the
    ``calibration.nc`` written.
    """
    from .._version import __version__

    notes = [REMOUNT_NOTE]
    if offset["source_aolp_deg"] == 0.0:
        notes.append("source AoLP 0 assumes a level reflecting surface seen by a level camera (roll 0): a tilted "
                     "horizon in the frame shifts the offset by the tilt; give --source-aolp-deg for other sources")
    spread = offset["region_aolp_spread_deg"]
    if spread is not None and spread > 10.0:
        notes.append(f"the region's polarization direction varies by about {spread:.0f} deg from pixel to pixel: "
                     "choose a region of one uniform reflection")
    out = dict(offset, software_version=__version__, kind="ring", region=region,
               analyzer_angles_deg=[float(a) for a in analyzer_angles_deg], extinction_ratio=extinction,
               inputs=[str(p) for p in inputs], meaning=RING_MEANING, notes=notes, calibration_file=str(calibration_file),
               warnings=[], outputs=None)
    return {k: out[k] for k in RING_CALIBRATION_KEYS}
