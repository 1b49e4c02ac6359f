"""``polarsky plan glare``: how much of the glare off a smooth surface a filter removes, and where to stand.

Reads the surface (``--surface`` or ``--index``), the angle of incidence, the filter's
extinction ratio, the camera roll and a ring calibration; plans the glare
(:mod:`polarsky.plan.glare`) and with ``out_dir`` writes ``plan_glare.json`` and the sweep
plot, published whole.
"""

from __future__ import annotations

from ._common import load_calibration, resolve_settings

__all__ = ["run_plan_glare", "plan_glare"]


def plan_glare(settings=None, **options) -> dict:
    """The glare plan (``plan_glare.json`` without ``outputs``); nothing is written.

    Parameters
    ----------
    settings : polarsky.Settings, optional
    **options
        ``surface`` or ``index``; ``incidence_deg`` (required); ``extinction``,
        ``behind_fraction``, ``roll_deg``, ``sweep`` (incidence angles), ``calibration`` (a
        ring calibration).

    Raises
    ------
    InputError
        Bad or missing values, a calibration that is not a ring calibration.
    """
    import numpy as np

    from ..advice.ring import ring_of_calibration
    from ..advice.surface import MOVE_CAUTION, resolve_surface
    from ..conventions import FIELD_CAUTION
    from ..core.stokes import diattenuation_from_extinction
    from ..errors import InputError
    from ..plan.glare import glare_plan, glare_sweep
    from ..plan.result import plan_glare_result
    from ..write.summary import calibration_facts

    settings = resolve_settings(settings, options)
    gl, est = settings.glare, settings.estimate
    surface = resolve_surface(gl.surface, gl.index)
    if gl.incidence_deg is None:
        raise InputError("--incidence-deg is required: the angle between your line of sight and the surface normal, "
                         "degrees (0 = straight at the surface, 90 = grazing)")
    cal = load_calibration(est.calibration)
    ring = ring_of_calibration(cal)
    d = 1.0 if est.extinction is None else diattenuation_from_extinction(est.extinction)
    numbers = glare_plan(surface["index"], gl.incidence_deg, diattenuation=d, extinction=est.extinction,
                         behind_fraction=gl.behind_fraction, roll_deg=settings.geometry.roll_deg)
    sweep = None
    if gl.sweep is not None:
        angles = np.asarray(gl.sweep, dtype=np.float64)
        if angles[0] <= numbers["brewster_deg"] <= angles[-1]:  # Brewster's angle gets its own row
            angles = np.unique(np.append(angles, numbers["brewster_deg"]))
        sweep = glare_sweep(surface["index"], angles, diattenuation=d)
    return plan_glare_result(numbers, surface=surface, calibration=calibration_facts(cal), ring=ring, sweep=sweep,
                             caution=f"{FIELD_CAUTION} Note: {MOVE_CAUTION}.")


def run_plan_glare(out_dir=None, settings=None, **options) -> dict:
    """``polarsky plan glare``: :func:`plan_glare` and, with ``out_dir``, ``plan_glare.json``
    and ``plan_glare_sweep.png`` (the reduction against incidence, Brewster's angle marked).

    Returns
    -------
    dict
        The glare plan as ``plan_glare.json`` holds it (docs/schemas/plan_glare.schema.json), with
        ``outputs`` the files written (None without ``out_dir``, and nothing is written).
    """
    from ..write.stage import check_out_dir
    from ._common import publish_result

    settings = resolve_settings(settings, options)
    if out_dir is None:
        return plan_glare(settings)
    check_out_dir(out_dir)  # a bad --out stops the run before anything is computed
    result = plan_glare(settings)

    def draw(folder):
        from ..write.pictures.plan import glare_sweep_picture

        return [glare_sweep_picture(result, folder)]

    return publish_result(out_dir, result, "plan_glare.json", command="plan glare",
                          draw=draw if settings.output.pictures else None)
