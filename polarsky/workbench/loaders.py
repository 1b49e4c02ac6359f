"""What the workbench holds in memory: a Stokes result, estimated or read, and its advice.

A bracket (or polarization-mosaic frames) is estimated exactly as ``polarsky stokes`` and
``polarsky advise`` estimate it: :func:`polarsky.tasks._common.open_source` reads it and the
row-block runner fills a :class:`~polarsky.estimate.sinks.MemorySink`.  A ``stokes.nc`` is
read with :func:`polarsky.read.stokes_file.read_stokes`, a sky comparison with
:func:`polarsky.read.sky_file.read_sky`.  The advice adds the region sums over the runner's
row blocks (:func:`polarsky.advice.regions.region_sums_in_blocks`) and builds the result with
:func:`polarsky.tasks.advise.advice_from_sums`, so ``/api/advice`` prints what
``polarsky advise --json`` prints for the same frames, options and boxes.
"""

from __future__ import annotations

import re
from dataclasses import dataclass, field

from ..errors import InputError

__all__ = ["Result", "load_frames", "load_stokes", "box_region", "region_sums", "advice_for"]

#: A box ``x0,y0,x1,y1``; requests to the workbench name boxes, never files.
_BOX = re.compile(r"^\s*-?\d{1,9}\s*,\s*-?\d{1,9}\s*,\s*-?\d{1,9}\s*,\s*-?\d{1,9}\s*$")


@dataclass
class Result:
    """A Stokes result in memory, ready for the page.

    Attributes
    ----------
    arrays : dict
        Per-pixel products (C, h, w): ``S0``, ``S1``, ``S2``, ``dolp``, ``dolp_unbiased``,
        ``aolp`` (degrees), ``sigma_dolp``, ``sigma_aolp`` (degrees), ``residual`` (more than
        three analyzers), ``valid`` (bool).
    channels : list of str
    facts : dict
        Facts of the estimate: those :func:`~polarsky.tasks._common.open_source` returns, or
        the attributes of a ``stokes.nc`` (``analyzer_angles_deg``, ``inputs``,
        ``polarizer``, ``analysis_matrix``, ...).
    rows : int
        Rows per block of the runner for this frame (the region sums follow its blocks).
    extinction : float or None
        Extinction ratio the estimate assumed (None = ideal filter).
    warnings : list of str
        Warnings of the estimate, as ``polarsky advise`` reports them in its result.
    sky : dict or None
        A sky comparison of the same frame (:func:`polarsky.read.sky_file.read_sky`).
    """

    arrays: dict
    channels: list
    facts: dict
    rows: int
    extinction: float | None = None
    warnings: list = field(default_factory=list)
    sky: dict | None = None

    @property
    def shape(self) -> tuple:
        return self.arrays["S0"].shape[1:]


def load_frames(frames, settings, *, sky_folder=None, sky_out=None) -> Result:
    """Estimate a bracket or mosaic frames as the commands do (``settings``: a Settings).

    With ``sky_out`` (a folder) the estimate is also compared with the clear-sky model, as
    ``polarsky sky`` compares it with the same settings (time, place, lens, orientation), and
    the comparison (``sky.json``, ``sky.nc``) is written there and shown.
    """
    from ..conventions import VARIABLES
    from ..estimate.runner import block_rows, run_blocks
    from ..estimate.sinks import MemorySink
    from ..tasks._common import collect_warnings, open_source

    with collect_warnings(reemit=False) as caught:
        op = open_source(list(frames), settings)
        src = op.source
        names = [n for n in VARIABLES if n != "residual" or src.n_analyzers > 3]
        mem = MemorySink(src.shape, len(src.channels), names)
        run_blocks(src, op.noise, [mem])
    if sky_out is not None:  # the comparison 'polarsky sky' makes, from these products (no pictures)
        from ..tasks.sky import products_in_memory, run_sky

        run_sky(list(frames), sky_out, settings.replace({"pictures": False}), stokes=products_in_memory(mem, op),
                warnings=caught.messages())
        sky_folder = sky_out
    return Result(arrays=mem.arrays, channels=list(src.channels), facts=op.facts,
                  rows=block_rows(src.shape, len(src.channels)), extinction=settings.estimate.extinction,
                  warnings=caught.messages(), sky=_sky(sky_folder))


def load_stokes(path, *, sky_folder=None) -> Result:
    """Read a ``stokes.nc`` written by ``polarsky stokes`` (or a batch, or a mosaic run)."""
    from ..estimate.runner import block_rows
    from ..read.stokes_file import read_stokes

    p = read_stokes(path)
    s = p.pop("S")
    arrays = {"S0": s[0], "S1": s[1], "S2": s[2], "valid": p.pop("valid")}
    channels, attrs = p.pop("channels"), p.pop("attrs")
    arrays.update(p)
    missing = [k for k in ("dolp", "aolp", "sigma_dolp", "sigma_aolp", "dolp_unbiased") if k not in arrays]
    if missing:
        raise InputError(f"{path} lacks {', '.join(missing)}; give a stokes.nc written by 'polarsky stokes'")
    facts = dict(attrs)
    facts["inputs"] = [str(f) for f in (attrs.get("inputs") or [])]
    facts["analyzer_angles_deg"] = [float(a) for a in (attrs.get("analyzer_angles_deg") or [])]
    facts["polarizer"] = str(attrs.get("polarizer") or "front")
    er = attrs.get("extinction_ratio")
    h, w = arrays["S0"].shape[1:]
    return Result(arrays=arrays, channels=list(channels), facts=facts, rows=block_rows((h, w), len(channels)),
                  extinction=float(er) if isinstance(er, (int, float)) else None, sky=_sky(sky_folder))


def _sky(folder):
    if folder is None:
        return None
    from ..read.sky_file import read_sky

    return read_sky(folder)


def box_region(text, *, option: str = "--region"):
    """A :class:`~polarsky.read.masks.Region` from a box ``x0,y0,x1,y1`` only.

    Requests name boxes, never files: anything else is refused before the text could be
    taken for a path (:func:`~polarsky.read.masks.parse_region` would read a mask image).
    """
    from ..read.masks import parse_region

    text = str(text)
    if not _BOX.match(text):
        raise InputError(f"{option} {text!r} is not a box x0,y0,x1,y1 (pixels, x1 and y1 exclusive)")
    return parse_region(text, option=option)


def region_sums(result: Result, region: str, protect: str | None = None):
    """The regions and their sums and valid pixel counts, as ``polarsky advise`` adds them.

    Returns
    -------
    regions : dict of str -> Region
    sums, counts : dict
    """
    from ..advice.regions import region_sums_in_blocks

    regions = {"region": box_region(region, option="--region")}
    if protect:
        regions["protect"] = box_region(protect, option="--protect")
    masks = {k: r.as_mask(result.shape) for k, r in regions.items()}
    sums, counts = region_sums_in_blocks(result.arrays, masks, result.rows)
    return regions, sums, counts


def advice_for(result: Result, regions, sums, counts, *, extinction="estimate") -> dict:
    """What ``polarsky advise --json`` prints for these sums on this result.

    ``extinction`` defaults to the one the result was estimated with; another value gives
    what a filter of that extinction ratio reaches on the same estimate.
    """
    from ..tasks.advise import advice_from_sums

    er = result.extinction if extinction == "estimate" else extinction
    return advice_from_sums(sums, counts, result.facts, len(result.channels), region=regions["region"],
                            protect=regions.get("protect"), extinction=er, warnings=result.warnings)
