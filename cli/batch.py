"""``polarsky batch``: process every bracket of a folder tree on dask."""

from __future__ import annotations

import json
import sys
from pathlib import Path

import click

from polarsky.errors import InputError

SKY_CAUTION = ("caution: never look at the sun through a viewfinder or optics and do not aim sensors at it; "
               "follow local codes and licensed practice for work at height or near water")


def _angles(text):
    if text is None:
        return None
    try:
        return [float(a) for a in text.replace(";", ",").split(",") if a.strip()]
    except ValueError:
        raise InputError(f"--angles {text!r} must be degrees separated by commas, e.g. 0,45,90,135") from None


@click.command(name="batch")
@click.argument("root", type=click.Path(path_type=Path))
@click.option("--out", "out_dir", type=click.Path(path_type=Path),
              help="Output folder: DIR/<bracket>/ per bracket, DIR/summary.csv, DIR/report.html.")
@click.option("--config", "config_file", type=click.Path(path_type=Path),
              help="TOML file with the batch settings (options given here override it).")
@click.option("--workers", type=int, help="Worker processes of the local cluster (default: CPU count).")
@click.option("--scheduler", help="Run on an existing dask.distributed cluster, e.g. tcp://host:8786 "
                                  "(workers must see ROOT and DIR under the same paths).")
@click.option("--dashboard/--no-dashboard", default=None,
              help="Local cluster dashboard on 127.0.0.1 with a free port (default off).")
@click.option("--list", "list_only", is_flag=True, help="Dry run: print the brackets found and why, process nothing.")
@click.option("--json", "as_json", is_flag=True, help="Print one JSON object on stdout (no progress bar).")
@click.option("--angles", help="Analyzer angles (deg, shot order) of frames grouped by capture time, e.g. "
                               "0,45,90,135. Filter-ring readings give advice on the same ring scale.")
@click.option("--time-gap", "time_gap_s", type=float,
              help="Seconds between EXIF capture times that start a new bracket (default 10).")
@click.option("--transfer", type=click.Choice(["auto", "linear", "srgb"]), help="Frame encoding (default auto).")
@click.option("--extinction", type=float, help="Analyzer extinction ratio Tmax/Tmin (default ideal).")
@click.option("--angle-offset", "angle_offset_deg", type=float, help="Degrees added to every analyzer angle.")
@click.option("--align/--no-align", default=None, help="Register frames to the first before estimating.")
@click.option("--calibration", type=click.Path(path_type=Path), help="Calibration file (CAL.nc).")
@click.option("--max-pixels", type=int, help="Refuse frames larger than this many pixels (per frame).")
@click.option("--mosaic", "mosaic_cell", metavar="CELL",
              help="Frames are raw polarization-mosaic frames, each its own bracket; CELL is the 2x2 cell's "
                   "micro-polarizer angles, rows split by ';', e.g. \"90,45;135,0\".")
@click.option("--mosaic-colour", help="Colour mosaic sensor: Bayer order of the 2x2 polarizer cells.")
@click.option("--demosaic", help="Demosaicing method for mosaic frames (default bilinear).")
@click.option("--bit-depth", type=int, help="Significant bits of mosaic raw data in 16-bit containers.")
@click.option("--black-level", type=float, help="Mosaic sensor black level in raw counts.")
@click.option("--pictures/--no-pictures", default=None, help="Write the PNG maps per bracket (default on).")
@click.option("--region", help="Advice for every bracket: region box x0,y0,x1,y1 (x1,y1 exclusive) or mask image.")
@click.option("--protect", help="Advice: box or mask whose contrast to keep.")
def command(root, out_dir, config_file, workers, scheduler, dashboard, list_only, as_json, angles, time_gap_s,
            transfer, extinction, angle_offset_deg, align, calibration, max_pixels, mosaic_cell, mosaic_colour,
            demosaic, bit_depth, black_level, pictures, region, protect):
    """Process every bracket under ROOT into DIR (--out), on dask.

    A folder with manifest.csv (file,angle_deg[,exposure_s]) is one bracket; other frames are
    grouped by name (<stem>_<angle>deg.<ext>) or else by EXIF capture time (--time-gap, angles
    from --angles or the config).  Finished brackets are kept: a re-run redoes only brackets
    whose inputs or settings changed.  Exit status 1 if any bracket failed.
    """
    from polarsky.batch import config as cfg
    from polarsky.batch.runner import list_brackets, run_batch

    raw, base, source = None, None, ""
    if config_file is not None:
        raw, base = cfg.load_config(config_file)
        source = str(config_file)
    overrides = {
        "discovery.angles_deg": _angles(angles), "discovery.time_gap_s": time_gap_s,
        "stokes.transfer": transfer, "stokes.extinction": extinction,
        "stokes.angle_offset_deg": angle_offset_deg, "stokes.align": align,
        "stokes.calibration": str(calibration) if calibration is not None else None,
        "stokes.max_pixels": max_pixels, "stokes.pictures": pictures,
        "mosaic.cell": mosaic_cell, "mosaic.colour": mosaic_colour, "mosaic.demosaic": demosaic,
        "mosaic.bit_depth": bit_depth, "mosaic.black_level": black_level,
        "advise.region": region, "advise.protect": protect,
        "cluster.workers": workers, "cluster.scheduler": scheduler, "cluster.dashboard": dashboard,
    }
    settings = cfg.merge_settings(raw, base=base, source=source, overrides=overrides)
    if settings["cluster"]["workers"] is not None and settings["cluster"]["scheduler"]:
        raise InputError("--workers sizes the local cluster; with --scheduler the cluster's own workers are used")

    if list_only:
        brackets = list_brackets(root, out_dir.resolve() if out_dir else None, settings=settings)
        if as_json:
            click.echo(json.dumps({"root": str(root.resolve()), "brackets": [b.as_dict() for b in brackets],
                                   "count": len(brackets),
                                   "problems": sum(b.problem is not None for b in brackets)}))
        else:
            for b in brackets:
                click.echo(f"{b.name}  [{b.rule}]  {len(b.frames)} frames  {b.reason}")
                if b.problem:
                    click.echo(f"    will fail: {b.problem}")
            click.echo(f"{len(brackets)} brackets found under {root}")
        return 0

    if out_dir is None:
        raise InputError("--out DIR is required: the folder for the brackets' outputs, summary.csv and report.html")
    progress = (not as_json) and sys.stderr.isatty()

    def show_dashboard(link):
        if not as_json:
            click.echo(f"dashboard: {link}", err=True)

    result = run_batch(root, out_dir, settings=settings, workers=settings["cluster"]["workers"],
                       scheduler=settings["cluster"]["scheduler"], progress=progress,
                       dashboard=bool(settings["cluster"]["dashboard"]), on_dashboard=show_dashboard)
    if settings["sky"]:
        result["caution"] = SKY_CAUTION
    if as_json:
        click.echo(json.dumps(result, default=str))
    else:
        click.echo(f"{result['brackets']} brackets: {result['done']} done, {result['skipped']} unchanged (kept), "
                   f"{result['failed']} failed in {result['elapsed_s']:.1f} s")
        for r in result["rows"]:
            if r["status"] == "failed":
                click.echo(f"  failed {r['name']}: {r['error']}")
        click.echo(f"summary: {result['summary_csv']}")
        click.echo(f"report:  {result['report_html']}")
        if settings["sky"]:
            click.echo(SKY_CAUTION)
    return 1 if result["failed"] else 0
