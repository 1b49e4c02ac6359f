"""``polarsky batch``: process every bracket of a folder tree, on one machine or a dask cluster."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from polarsky.write.jsonio import print_json

from .options import json_option, out_option, pop_settings, settings_options

GROUPS = ("read", "mosaic", "estimate", "output", "advise", "discovery", "report", "cluster")
EXCLUDE = ("manifest",)


@click.command(name="batch", short_help="Process every bracket of a folder tree, locally or on dask.")
@click.argument("root", type=click.Path(path_type=Path))
@out_option(required=False, help="Output folder: DIR/<bracket>/ per bracket, DIR/summary.csv, DIR/report.html.")
@click.option("--config", "config_file", type=click.Path(dir_okay=False, path_type=Path), metavar="TOML",
              help="Batch settings file: tables [read], [estimate], [advise], [geometry], [sky], ... holding the "
                   "options of the same names (options given here override it). See docs/batch.md.")
@click.option("--list", "list_only", is_flag=True, help="Dry run: print the brackets found and why, process nothing.")
@json_option
@settings_options(*GROUPS, exclude=EXCLUDE)
def command(root, out_dir, config_file, list_only, as_json, **kw):
    """Process every bracket under ROOT into --out, on dask.

    A folder with manifest.csv (file,angle_deg[,exposure_s]) is one bracket; other frames are
    grouped by name (<stem>_<angle>deg.<ext>) or else by EXIF capture time (--time-gap-s,
    angles from --angles). Finished brackets are kept: a re-run redoes only brackets whose
    inputs or settings changed. Exit status 1 if any bracket failed.
    """
    from polarsky.batch.config import load_settings, sky_requested
    from polarsky.batch.runner import list_brackets, run_batch
    from polarsky.conventions import SUN_CAUTION
    from polarsky.errors import InputError

    settings, tables = load_settings(config_file, overrides=pop_settings(kw, *GROUPS, exclude=EXCLUDE))
    sky = sky_requested(tables)
    if list_only:
        settings.check_frame_options()
        brackets = list_brackets(root, Path(out_dir).resolve() if out_dir else None, settings=settings)
        if as_json:
            print_json({"root": str(root.resolve()), "brackets": [b.as_dict() for b in brackets],
                        "count": len(brackets), "problems": sum(b.problem is not None for b in brackets)})
        else:
            for b in brackets:
                click.echo(f"{b.name}  [{b.rule}]  {len(b.frames)} frames  {b.reason}")
                if b.problem:
                    click.echo(f"    will fail: {b.problem}")
            click.echo(f"{len(brackets)} brackets found under {root}")
        return 0
    if out_dir is None:
        raise InputError("--out DIR is required: the folder for the brackets' outputs, summary.csv and report.html")

    def show_dashboard(link):
        if not as_json:
            click.echo(f"dashboard: {link}", err=True)

    result = run_batch(root, out_dir, settings=settings, sky=sky, progress=(not as_json) and sys.stderr.isatty(),
                       on_dashboard=show_dashboard)
    if sky:
        result["caution"] = SUN_CAUTION
    if as_json:
        print_json(result)
    else:
        click.echo(f"{result['brackets']} brackets: {result['done']} done, {result['skipped']} unchanged (kept), "
                   f"{result['failed']} failed in {result['elapsed_s']:.1f} s")
        for r in result["rows"]:
            if r["status"] == "failed":
                click.echo(f"  failed {r['name']}: {r['error']}")
        click.echo(f"summary: {result['summary_csv']}")
        click.echo(f"report:  {result['report_html']}")
        if sky:
            click.echo(SUN_CAUTION)
    return 1 if result["failed"] else 0
