"""Sweeps of a sky plan: the darkening and its unevenness over the day or over headings.

Each step is planned as :func:`polarsky.plan.sky.plan_at` plans one shot.  Steps with the sun
below the horizon, or with no sky in the frame, stay in the table with a ``note`` and no
numbers.  "Deepest" is the step with the largest mean darkening; "most even" the smallest
range among the steps reaching at least half the deepest darkening (an even but useless step
is not recommended).
"""

from __future__ import annotations

from ..advice.ring import ring_reading
from ..errors import InputError
from .sky import plan_at

__all__ = ["sweep_sky", "SWEEP_KEYS", "SWEEP_ROW_KEYS"]

#: Keys of a sweep (``sweep_time`` / ``sweep_yaw`` of ``plan_sky.json``).
SWEEP_KEYS = ("rows", "deepest_row", "most_even_row", "summary_text")
#: Keys of each row (numbers None where the row has a ``note``).
SWEEP_ROW_KEYS = ("when", "yaw_deg", "sun_azimuth_deg", "sun_elevation_deg", "scattering_angle_center_deg",
                  "best_angle_deg", "best_ring_reading_deg", "darkening_stops", "darkening_stops_min", "darkening_stops_max",
                  "darkening_stops_range", "sun_in_frame", "note")


def sweep_sky(st, steps, *, kind: str, ring_offset_deg=None) -> dict:
    """Plan every step of a sweep.

    Parameters
    ----------
    st : SkySetup
    steps : sequence of dict
        ``when`` (ISO text), ``sun`` (a :func:`polarsky.sky.sun.sun_position` dict with
        ``when``) and ``yaw_deg`` of each step.
    kind : {"time", "yaw"}
        What the sweep varies (for its words).
    ring_offset_deg : float, optional
        A filter ring's offset: each row also gives its angle as a ring reading.

    Returns
    -------
    dict
        ``rows`` (the keys of :data:`SWEEP_ROW_KEYS`), ``deepest_row`` and
        ``most_even_row`` (indices into ``rows``) and ``summary_text``.

    Raises
    ------
    InputError
        No step with daylit sky in the frame.
    """
    rows = []
    for step in steps:
        sun = step["sun"]
        row = dict.fromkeys(SWEEP_ROW_KEYS)
        row.update(when=step["when"], yaw_deg=float(step["yaw_deg"]), sun_azimuth_deg=round(sun["azimuth_deg"], 3),
                   sun_elevation_deg=round(sun["elevation_deg"], 3))
        try:
            nums = plan_at(st, sun, yaw_deg=step["yaw_deg"], words=False).numbers
        except InputError as exc:
            row["note"] = str(exc)
        else:
            row.update({k: nums[k] for k in SWEEP_ROW_KEYS if k in nums and k not in ("yaw_deg",)})
            if ring_offset_deg is not None:
                row["best_ring_reading_deg"] = ring_reading(nums["best_angle_deg"], ring_offset_deg)
        rows.append(row)
    good = [k for k, r in enumerate(rows) if r["note"] is None]
    if not good:
        what = ("the sun stays below the horizon" if kind == "time" and all(r["sun_elevation_deg"] <= 0 for r in rows)
                else "no step has daylit sky in the frame")
        raise InputError(f"--sweep-{kind}: {what} over the whole sweep; choose other times or headings")
    deepest = max(good, key=lambda k: rows[k]["darkening_stops"])
    strong = [k for k in good if rows[k]["darkening_stops"] >= 0.5 * rows[deepest]["darkening_stops"]] or good
    even = min(strong, key=lambda k: rows[k]["darkening_stops_range"])

    def at(r):
        return f"at {r['when'][11:16]}" if kind == "time" else f"heading {r['yaw_deg']:g} deg"

    d, e = rows[deepest], rows[even]
    text = (f"deepest {at(d)}: {d['darkening_stops']:.2f} stops on average (range {d['darkening_stops_range']:.2f}); "
            f"most even {at(e)}: range {e['darkening_stops_range']:.2f} stops at {e['darkening_stops']:.2f} stops on "
            "average (among steps reaching at least half the deepest darkening)")
    if len(rows) > len(good):
        text += f"; {len(rows) - len(good)} step(s) without daylit sky in the frame"
    return {"rows": rows, "deepest_row": deepest, "most_even_row": even, "summary_text": text}
