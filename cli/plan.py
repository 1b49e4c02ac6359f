"""``polarsky plan``: answers before the bracket exists (``sky``: sky darkening, ``glare``: glare off a surface)."""

from __future__ import annotations

import click

from polarsky.options.settings import option_names

from .options import emit, json_option, out_option, pop_settings, settings_options

PLAN_ANGLE_HELP = ("Filter angles are degrees counter-clockwise from the image's +x axis as displayed (the "
                   "transmission axis). With --calibration from 'polarsky calibrate ring' they are also given as "
                   "filter-ring readings.")

SKY_GROUPS = ("geometry", "sky", "advise", "estimate", "plan", "output")
SKY_EXCLUDE = ("solve", "protect") + tuple(n for n in option_names("estimate") if n not in ("extinction", "calibration"))
GLARE_GROUPS = ("glare", "geometry", "estimate", "output")
GLARE_EXCLUDE = tuple(n for n in option_names("geometry", "estimate") if n not in ("roll_deg", "extinction",
                                                                                    "calibration"))


@click.group(name="plan", short_help="Plan a shot before the bracket exists (sky darkening, glare).")
def command():
    """Plan a shot before the bracket exists: sky darkening (sky) or glare off a smooth surface (glare)."""


def _axis(best, reading, r, how: str, prefix: str = "") -> None:
    """The recommended transmission axis and, with a ring calibration, the ring reading."""
    click.echo(f"{prefix}set the filter's transmission axis to {best:.1f} deg ({how})")
    if reading is not None:
        from polarsky.advice.ring import ring_line

        click.echo(prefix + ring_line(reading, r))


@command.command(name="sky", short_help="How much a filter darkens the sky of a planned frame, and how evenly.",
                 epilog=PLAN_ANGLE_HELP + " Keep the sun out of the frame and never look at it through "
                 "a viewfinder.")
@settings_options(*SKY_GROUPS, exclude=SKY_EXCLUDE)
@out_option(required=False, help="Folder for plan_sky.json and the pictures (and the sweep plots); replaced whole.")
@json_option
def sky_command(out_dir, as_json, **kw):
    """Predict how much a filter darkens the sky of a frame at a time, place and heading.

    Uses the clear-sky model of 'polarsky sky' and the sun's position (NREL SPA): the filter
    angle that darkens the frame's sky most, the darkening in stops, and how unevenly it falls
    across the frame (the darkest band lies 90 deg from the sun, so wide lenses darken one side
    more). The time, place, lens and camera options are those of 'polarsky sky'; the sky part
    is the sky above --min-elevation-deg, farther than --sun-mask-deg from the sun, inside
    --sky-mask; --region is a part of the frame to darken, as in 'polarsky advise'. There is
    no frame to read EXIF from: --when, --lat and --lon are required, and --polarizer is front
    unless given.
    """
    from polarsky.tasks.plan_sky import run_plan_sky

    return emit(run_plan_sky(out_dir, **pop_settings(kw, *SKY_GROUPS, exclude=SKY_EXCLUDE)), as_json,
                lambda r: _print_sky(r, out_dir))


def _print_sky(r: dict, out_dir) -> None:
    click.echo(f"sun: azimuth {r['sun_azimuth_deg']:.1f} deg, elevation {r['sun_elevation_deg']:.1f} deg at "
               f"{r['when']} (NREL SPA)")
    click.echo(f"frame centre: {r['scattering_angle_center_deg']:.1f} deg from the sun, predicted DoLP "
               f"{r['dolp_center']:.2f} there (dolp_max {r['dolp_max']:.2f}; {r['model_title']} model, "
               f"{r['radiance_model']} sky radiance)")
    _axis(r["best_angle_deg"], r["best_ring_reading_deg"], r,
          "counter-clockwise from the image's horizontal as displayed")
    er = r["extinction_ratio"]
    filt = "with an ideal filter" if er is None else f"with ER {er:g} (ideal {r['darkening_stops_ideal']:.2f})"
    click.echo(f"the sky darkens {r['darkening_stops']:.2f} stops on average at that angle "
               f"({r['darkening_stops_min']:.2f} to {r['darkening_stops_max']:.2f} over the frame's sky) {filt}")
    if er is None:
        click.echo("  real filters reach less (" + ", ".join(f"ER {k}: {v:.2f} stops" for k, v in
                                                            r["darkening_stops_examples"].items())
                   + "); give --extinction for yours")
    click.echo(f"unevenness: {r['darkening_stops_range']:.2f} stops between the least and the most darkened sky; "
               + r["unevenness_text"])
    if r["darkening_stops_min"] < 0:
        click.echo("  (negative = that part of the sky gets brighter than with the filter at a random angle)")
    if r["region"] is not None:
        click.echo(f"region {r['region']} ({r['region_pixels']} sky pixels): darkening "
                   f"{r['region_darkening_stops']:.2f} stops ({r['region_darkening_stops_min']:.2f} to "
                   f"{r['region_darkening_stops_max']:.2f}) at its own best angle; at the frame's angle it darkens "
                   f"{r['region_darkening_stops_at_best_angle']:.2f}")
        _axis(r["region_best_angle_deg"], r["region_best_ring_reading_deg"], r, "for the region alone", "  ")
    if r["sun_in_frame"]:
        click.echo("Safety: the sun is in this frame: do not look through an optical viewfinder, frame with the "
                   "screen, and do not leave the camera aimed there")
    for kind in ("time", "yaw"):
        if r[f"sweep_{kind}"] is not None:
            _print_sweep(r[f"sweep_{kind}"], kind)
    _wrote(r, out_dir)
    click.echo(r["limits"])
    click.echo(r["caution"])


def _wrote(r: dict, out_dir) -> None:
    if r["outputs"]:
        click.echo(f"wrote {', '.join(r['outputs'])} to {out_dir}")


def _print_sweep(sw: dict, kind: str) -> None:
    click.echo("")
    head = "time" if kind == "time" else "yaw deg"
    ring = any(row["best_ring_reading_deg"] is not None for row in sw["rows"])
    ring_head = f" {'ring':>5}" if ring else ""
    click.echo(f"{head:>8} {'sun az':>7} {'sun el':>7} {'angle':>6}{ring_head} {'mean':>6} {'min':>6} {'max':>6} "
               f"{'range':>6}   (darkening in stops at the best angle)")
    for row in sw["rows"]:
        key = row["when"][11:16] if kind == "time" else f"{row['yaw_deg']:g}"
        if row["note"] is not None:
            click.echo(f"{key:>8} {row['sun_azimuth_deg']:>7.1f} {row['sun_elevation_deg']:>7.1f}   "
                       + ("sun below the horizon" if row["sun_elevation_deg"] <= 0 else "no sky in the frame"))
            continue
        reading = f" {row['best_ring_reading_deg']:>5.1f}" if ring else ""
        click.echo(f"{key:>8} {row['sun_azimuth_deg']:>7.1f} {row['sun_elevation_deg']:>7.1f} "
                   f"{row['best_angle_deg']:>6.1f}{reading} {row['darkening_stops']:>6.2f} "
                   f"{row['darkening_stops_min']:>6.2f} {row['darkening_stops_max']:>6.2f} "
                   f"{row['darkening_stops_range']:>6.2f}" + ("   sun in the frame!" if row["sun_in_frame"] else ""))
    click.echo(sw["summary_text"])


@command.command(name="glare", short_help="How much glare off water or glass a filter removes, and where to stand.",
                 epilog=PLAN_ANGLE_HELP)
@settings_options(*GLARE_GROUPS, exclude=GLARE_EXCLUDE)
@out_option(required=False, help="Folder for plan_glare.json and plan_glare_sweep.png; replaced whole.")
@json_option
def glare_command(out_dir, as_json, **kw):
    """How much of the glare off a smooth surface (water, glass) a filter removes, and where to stand.

    Fresnel reflectances Rs and Rp, the DoLP of the reflection, the filter axis that removes
    most of it (in the plane of incidence: vertical in the image for a level surface and a level
    camera; --roll-deg turns it with the horizon), the reduction in stops, Brewster's angle and
    how far to tilt to reach it.
    """
    from polarsky.tasks.plan_glare import run_plan_glare

    return emit(run_plan_glare(out_dir, **pop_settings(kw, *GLARE_GROUPS, exclude=GLARE_EXCLUDE)), as_json,
                lambda r: _print_glare(r, out_dir))


def _print_glare(r: dict, out_dir) -> None:
    from polarsky.advice.surface import tilt_text
    from polarsky.core.stokes import diattenuation_from_extinction
    from polarsky.plan.glare import stops_removed

    cond = "" if r["wavelength_nm"] is None else f" at {r['wavelength_nm']:g} nm, {r['temperature_c']:g} deg C"
    click.echo(f"{r['surface'] or 'the surface'} (n = {r['index']:.4f}{cond}; {r['index_source']}), incidence "
               f"{r['incidence_deg']:g} deg:")
    click.echo(f"reflectance Rs {r['rs']:.4f}, Rp {r['rp']:.4f} (unpolarized light {r['reflectance']:.4f}); "
               f"the reflection is {r['reflection_dolp'] * 100:.0f}% polarized")
    level = ("vertical in the image for a level surface and a level camera" if r["roll_deg"] == 0 else
             f"for a level surface seen with the camera rolled {r['roll_deg']:g} deg")
    _axis(r["best_angle_deg"], r["best_ring_reading_deg"], r, f"{level}; the axis lies in the plane of incidence")
    ideal = "all" if r["reduction_stops_ideal"] is None else f"{r['reduction_stops_ideal']:.2f} stops"
    er = r["extinction_ratio"]
    if er is None:
        ex = ", ".join(f"ER {e}: {stops_removed(r['reflection_dolp'], diattenuation_from_extinction(e)):.2f} stops"
                       for e in (30, 300))
        click.echo(f"an ideal filter removes {ideal} of the reflection; real filters reach less ({ex}); give "
                   "--extinction for yours")
    else:
        click.echo(f"your filter (ER {er:g}) removes {r['reduction_stops']:.2f} stops of the reflection "
                   f"(an ideal one {ideal})")
    b_real = "" if er is None else f", your filter {r['brewster_reduction_stops']:.2f} stops"
    click.echo(f"Brewster's angle {r['brewster_deg']:.2f} deg: there an ideal filter removes the whole reflection"
               f"{b_real}; " + tilt_text(r["incidence_deg"], r["brewster_deg"]))
    lo, hi = r["incidence_range_90pct_polarized_deg"]
    click.echo(f"the reflection is at least 90% polarized between {lo:.1f} and {hi:.1f} deg of incidence")
    if r["behind_fraction"] is not None:
        click.echo(f"light from behind the surface: {r['behind_fraction'] * 100:.0f}% of what the camera sees "
                   f"unfiltered, {r['behind_fraction_filtered'] * 100:.0f}% with the filter: its contrast gains "
                   f"x{r['contrast_gain']:.2f}")
    click.echo("(stops relative to the filter at a random angle; the filter's own ~1 stop loss is not counted)")
    if r["sweep"]:
        _print_glare_sweep(r)
    _wrote(r, out_dir)
    click.echo(r["caution"])


def _print_glare_sweep(r: dict) -> None:
    er = r["extinction_ratio"]
    click.echo("")
    er_head = "" if er is None else f" {'ER ' + format(er, 'g'):>7}"
    click.echo(f"{'incid.':>7} {'Rs':>7} {'Rp':>7} {'DoLP':>6} {'ideal':>6}{er_head}   (stops removed)")
    for row in r["sweep"]:
        ideal = "all" if row["reduction_stops_ideal"] is None else f"{row['reduction_stops_ideal']:.2f}"
        real = "" if er is None else " " + format("all" if row["reduction_stops"] is None
                                                  else f"{row['reduction_stops']:.2f}", ">7")
        mark = "  <- Brewster" if abs(row["incidence_deg"] - r["brewster_deg"]) < 1e-3 else ""
        mark += "  <- planned" if abs(row["incidence_deg"] - r["incidence_deg"]) < 1e-9 else ""
        click.echo(f"{row['incidence_deg']:>7.2f} {row['rs']:>7.4f} {row['rp']:>7.4f} {row['reflection_dolp']:>6.3f} "
                   f"{ideal:>6}{real}{mark}")
