"""Thumbnails per bracket and the batch's ``report.html``.

The report is one HTML file with no network use at all: styles and the small sorting
script are inline, pictures are embedded as base64 PNG (or, with ``embed_images = false``,
linked relative to the report so the output folder stays self-contained).

Thumbnails are made on the workers (``thumb_dolp.png``, ``thumb_aolp.png`` from the maps
the Stokes step drew, ``thumb_frame.png`` from the first frame with, when advice was asked,
the recommended filter axis drawn across it, and ``thumb_sky_*.png`` from the sky
comparison's residual figures).
"""

from __future__ import annotations

import base64
import html
import math
from pathlib import Path

import numpy as np

from .._shared.stats import percentile
from ..palette import rgb

__all__ = ["make_thumbnails", "write_report", "axis_endpoints"]

THUMB_DOLP, THUMB_AOLP, THUMB_FRAME = "thumb_dolp.png", "thumb_aolp.png", "thumb_frame.png"
_AXIS_NAME = "magenta"  # the colour of COLOURS["recommended_axis"] in polarsky.palette


def axis_endpoints(angle_deg: float, width: int, height: int):
    """End points ``((x0, y0), (x1, y1))`` in pixel coordinates of a line through the image
    centre at ``angle_deg`` (from +x, counter-clockwise as displayed, so toward row 0).

    >>> [tuple(round(v, 6) for v in p) for p in axis_endpoints(90.0, 11, 21)]
    [(5.0, 20.0), (5.0, 0.0)]
    """
    t = math.radians(angle_deg)
    cx, cy = (width - 1) / 2.0, (height - 1) / 2.0
    dx, dy = math.cos(t), -math.sin(t)  # rows grow downward, so counter-clockwise is -y
    half = min(cx / abs(dx) if abs(dx) > 1e-9 else math.inf,
               cy / abs(dy) if abs(dy) > 1e-9 else math.inf)  # reach the image border
    return (cx - half * dx, cy - half * dy), (cx + half * dx, cy + half * dy)


def _shrink(img, px):
    from PIL import Image

    img = img.copy()
    img.thumbnail((px, px), Image.LANCZOS)
    return img


def _frame_preview(frame, px: int):
    """An 8-bit grey preview of a frame (display only).

    ``frame`` is a path, decoded by the reader every command uses, or a frame already decoded
    (:class:`polarsky.read.frames.Frame`); either is shown as its file's own transfer says
    (8-bit images sRGB-encoded, deeper data and raw files linear), whatever ``--transfer`` was.
    """
    from PIL import Image

    from ..errors import InputError
    from ..read.frames import read_frame

    if isinstance(frame, (str, Path)):
        try:
            frame = read_frame(frame)
        except InputError:
            return None
    linear = not (frame.kind == "image" and frame.data.dtype == np.uint8)  # read_frame's transfer "auto"
    step = max(1, int(max(frame.data.shape[1:]) // (2 * px)))
    d = frame.data[:, ::step, ::step]
    a = d[0].astype(np.float32) if d.shape[0] == 1 else d.astype(np.float32).mean(axis=0)
    a *= np.float32(1.0 / frame.full_scale)
    # the display range from a sparse sample (a thumbnail's contrast, not a measurement)
    sample = a[::3, ::3]
    sample = sample[np.isfinite(sample)]
    lo, hi = (percentile(sample, 0.5), percentile(sample, 99.5)) if sample.size else (0.0, 1.0)
    a -= np.float32(lo)
    a *= np.float32(1.0 / max(hi - lo, 1e-12))
    np.clip(a, 0, 1, out=a)
    if linear:  # linear data: lift the shadows for viewing, through a 4096-entry table
        lut = ((np.arange(4096, dtype=np.float32) / 4095) ** (1 / 2.2) * 255 + 0.5).astype(np.uint8)
        codes = lut[(a * 4095 + 0.5).astype(np.uint16)]
    else:
        codes = (a * 255 + 0.5).astype(np.uint8)
    img = Image.fromarray(codes)  # grey: resized as one channel, then made RGB for the coloured axis
    if max(img.size) < px:  # small frames: enlarge (nearest) so the axis line stays visible
        k = px / max(img.size)
        img = img.resize((max(1, round(img.width * k)), max(1, round(img.height * k))), Image.NEAREST)
    return _shrink(img, px).convert("RGB")


def make_thumbnails(folder, frames=(), *, px: int = 240, best_angle_deg=None, pictures=None,
                    first_frame=None) -> list[str]:
    """Write the report thumbnails of one bracket into ``folder``; return their names.

    Parameters
    ----------
    folder : path
        The bracket's folder, holding the PNG pictures of its steps.
    frames : sequence of path
        The bracket's frames (the first is shown, with the recommended axis when
        ``best_angle_deg`` is given).
    px : int
        Longest side of a thumbnail (pixels).
    best_angle_deg : float, optional
    pictures : dict, optional
        The Stokes pictures already in memory (file name -> (H, W, 3) uint8, as
        :func:`polarsky.write.pictures.maps.stokes_pictures` keeps them): the DoLP and AoLP
        thumbnails are made from them instead of decoding ``dolp.png`` and ``aolp.png``.
    first_frame : Frame, optional
        The first frame already decoded, used instead of decoding ``frames[0]``.
    """
    from PIL import Image, ImageDraw

    folder = Path(folder)
    made = []
    pngs = sorted(p for p in folder.rglob("*.png") if not p.name.startswith("thumb_"))

    def first(*words):
        for p in pngs:
            if all(w in p.name.lower() for w in words) and "sky" not in p.name.lower():
                return p
        return None

    for target, word in ((THUMB_DOLP, "dolp"), (THUMB_AOLP, "aolp")):
        if pictures is not None and f"{word}.png" in pictures:
            _shrink(Image.fromarray(pictures[f"{word}.png"]), px).save(folder / target, compress_level=1)
            made.append(target)
            continue
        src = first(word)
        if src is not None:
            with Image.open(src) as im:
                _shrink(im.convert("RGB"), px).save(folder / target, compress_level=1)
            made.append(target)
    for p in pngs:
        n = p.name.lower()
        if "sky" in n and "residual" in n:  # the sky comparison's residual figures
            with Image.open(p) as im:
                _shrink(im.convert("RGB"), px).save(folder / f"thumb_sky_{p.stem}.png", compress_level=1)
            made.append(f"thumb_sky_{p.stem}.png")
    if first_frame is not None or frames:
        prev = _frame_preview(first_frame if first_frame is not None else Path(frames[0]), px)
        if prev is not None:
            if best_angle_deg is not None and np.isfinite(best_angle_deg):
                draw = ImageDraw.Draw(prev)
                (x0, y0), (x1, y1) = axis_endpoints(float(best_angle_deg), prev.width, prev.height)
                lw = max(2, prev.width // 80)
                draw.line([(x0, y0), (x1, y1)], fill=(0, 0, 0), width=lw + 2)
                draw.line([(x0, y0), (x1, y1)], fill=tuple(int(255 * c) for c in rgb("recommended_axis")), width=lw)
            prev.save(folder / THUMB_FRAME, compress_level=1)
            made.append(THUMB_FRAME)
    return made


# --------------------------------------------------------------------------------------------
_CSS = """
body{font:14px/1.4 system-ui,sans-serif;margin:1.2em;color:#1d2328;background:#fbfbf8}
h1{font-size:1.4em;margin:0 0 .3em}h2{font-size:1.1em;margin:1.4em 0 .4em}
.counts span{display:inline-block;margin-right:1.2em}.failedc{color:#a3261b;font-weight:600}
table{border-collapse:collapse;width:100%}th,td{border-bottom:1px solid #d8d8d0;padding:4px 6px;
text-align:left;vertical-align:top}th{background:#e9ece4;cursor:pointer;user-select:none;position:sticky;top:0}
th.asc::after{content:" \\25B2"}th.desc::after{content:" \\25BC"}td.num{text-align:right;
font-variant-numeric:tabular-nums}tr.failed td{background:#fbeae7}img{display:block;max-width:240px}a{color:#1f5f8b}
.err{color:#a3261b}.small{color:#5b6166;font-size:.9em}.note{background:#fff6d8;padding:.4em .7em;
border-left:4px solid #d9a400}figure{display:inline-block;margin:0 6px 6px 0}figcaption{font-size:.8em;color:#5b6166}
"""

_JS = """
(function(){
  var table=document.getElementById('brackets');
  if(!table){return;}
  var heads=table.tHead.rows[0].cells;
  function key(cell,numeric){
    var v=cell.getAttribute('data-sort');
    if(v===null){v=cell.textContent;}
    if(numeric){var f=parseFloat(v);return isNaN(f)?-Infinity:f;}
    return v.toLowerCase();
  }
  Array.prototype.forEach.call(heads,function(th,idx){
    th.addEventListener('click',function(){
      var numeric=th.getAttribute('data-type')==='num';
      var asc=!th.classList.contains('asc');
      Array.prototype.forEach.call(heads,function(h){h.classList.remove('asc','desc');});
      th.classList.add(asc?'asc':'desc');
      var body=table.tBodies[0];
      var rows=Array.prototype.slice.call(body.rows);
      rows.sort(function(a,b){
        var x=key(a.cells[idx],numeric),y=key(b.cells[idx],numeric);
        if(x<y){return asc?-1:1;} if(x>y){return asc?1:-1;} return 0;
      });
      rows.forEach(function(r){body.appendChild(r);});
    });
  });
})();
"""


def _img(path: Path, report_dir: Path, embed: bool, alt: str) -> str:
    if not path.is_file():
        return ""
    if embed:
        src = "data:image/png;base64," + base64.b64encode(path.read_bytes()).decode("ascii")
    else:
        src = html.escape(path.relative_to(report_dir).as_posix())
    return f'<img src="{src}" alt="{html.escape(alt)}" loading="lazy">'


def _fmt(v, digits=3):
    if v is None or v == "":
        return ""
    if isinstance(v, float):
        return "" if not math.isfinite(v) else f"{v:.{digits}f}"
    return str(v)


COLUMNS = [
    # key, heading, numeric, digits
    ("name", "bracket", False, 0),
    ("status", "status", False, 0),
    ("frames", "frames", True, 0),
    ("analyzer_angles_deg", "analyzer angles (deg)", False, 0),
    ("mean_dolp", "mean DoLP", True, 3),
    ("best_angle_deg", "best angle (deg)", True, 1),
    ("reduction_stops", "reduction (stops)", True, 2),
    ("rms_dolp_residual", "sky DoLP resid. RMS", True, 3),
    ("rms_aolp_residual_deg", "sky AoLP resid. RMS (deg)", True, 1),
    ("time_s", "time (s)", True, 2),
]


def write_report(path, rows: list[dict], *, out_dir, title: str, embed_images: bool = True,
                 notes=()) -> Path:
    """Write ``report.html`` for the batch ``rows`` (atomically); return its path."""
    from .state import atomic_write_text

    out_dir = Path(out_dir)
    path = Path(path)
    n_fail = sum(r["status"] == "failed" for r in rows)
    n_done = sum(r["status"] == "done" for r in rows)
    n_skip = sum(r["status"] == "skipped" for r in rows)
    has_adv = any(r.get("best_angle_deg") not in (None, "") for r in rows)
    has_sky = any(r.get("rms_dolp_residual") not in (None, "") for r in rows)
    cols = [c for c in COLUMNS
            if not (c[0] in ("best_angle_deg", "reduction_stops") and not has_adv)
            and not (c[0] in ("rms_dolp_residual", "rms_aolp_residual_deg") and not has_sky)]
    e = html.escape
    out = ["<!DOCTYPE html>", '<html lang="en"><head><meta charset="utf-8">',
           '<meta name="viewport" content="width=device-width, initial-scale=1">',
           f"<title>{e(title)}</title><style>{_CSS}</style></head><body>",
           f"<h1>{e(title)}</h1>",
           f'<p class="counts"><span>{len(rows)} brackets</span><span>{n_done} done</span>'
           f'<span>{n_skip} unchanged (kept)</span><span class="{"failedc" if n_fail else ""}">'
           f"{n_fail} failed</span></p>"]
    for note in notes:
        out.append(f'<p class="note">{e(note)}</p>')
    out.append('<p class="small">Angles in degrees from the image +x axis, counter-clockwise as displayed. '
               f"The {_AXIS_NAME} line on a frame is the recommended filter axis. Click a column heading to sort.</p>")
    out.append('<table id="brackets"><thead><tr>')
    for key, head, numeric, _ in cols:
        out.append(f'<th data-key="{key}"' + (' data-type="num"' if numeric else "") + f">{e(head)}</th>")
    out.append("<th>frame</th><th>DoLP</th><th>AoLP</th>" + ("<th>sky residuals</th>" if has_sky else "")
               + "<th>error / warnings</th></tr></thead><tbody>")
    for r in rows:
        cls = ' class="failed"' if r["status"] == "failed" else ""
        out.append(f'<tr data-name="{e(str(r["name"]))}"{cls}>')
        for key, _, numeric, digits in cols:
            v = r.get(key)
            if numeric:
                sort = "" if v in (None, "") else str(v)
                out.append(f'<td class="num" data-sort="{e(sort)}">{e(_fmt(v, digits))}</td>')
            elif key == "name" and r["status"] != "failed":
                out.append(f'<td><a href="{e(str(v))}/">{e(_fmt(v))}</a></td>')
            else:
                out.append(f"<td>{e(_fmt(v))}</td>")
        folder = out_dir / str(r["name"])
        ok = r["status"] != "failed" and folder.is_dir()
        for thumb, alt in ((THUMB_FRAME, "first frame"), (THUMB_DOLP, "DoLP map"), (THUMB_AOLP, "AoLP map")):
            out.append("<td>" + (_img(folder / thumb, path.parent, embed_images, f"{r['name']} {alt}")
                                 if ok else "") + "</td>")
        if has_sky:
            figs = sorted(folder.glob("thumb_sky_*.png")) if ok else []
            out.append("<td>" + "".join(
                f"<figure>{_img(f, path.parent, embed_images, f.stem)}<figcaption>"
                f"{e(f.stem[len('thumb_sky_'):])}</figcaption></figure>" for f in figs) + "</td>")
        msg = r.get("error") or ""
        warn = r.get("warnings") or ""
        out.append(f'<td><span class="err">{e(msg)}</span>'
                   + (f'<br><span class="small">{e(warn)}</span>' if warn else "") + "</td></tr>")
    out.append("</tbody></table>")
    failed = [r for r in rows if r["status"] == "failed"]
    out.append(f'<h2 id="failures">Failures ({len(failed)})</h2>')
    if failed:
        out.append("<ul>" + "".join(f"<li><b>{e(str(r['name']))}</b> ({e(str(r.get('source', '')))}): "
                                    f'<span class="err">{e(str(r.get("error", "")))}</span></li>'
                                    for r in failed) + "</ul>")
    else:
        out.append("<p>None.</p>")
    out.append(f"<script>{_JS}</script></body></html>")
    atomic_write_text(path, "\n".join(out) + "\n")
    return path
