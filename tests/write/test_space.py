"""A full disk is one line that names the output folder and the space needed, never a
traceback or a staging folder's name (polarsky.write.space, polarsky.write.stage).

Writes are made to fail the way the libraries fail on a full device: h5py raises
``OSError`` errno 28 with its own long text and no file name, a PNG written by Python an
``OSError`` errno 28 without a name, ``Path.write_text`` one naming the file.
"""

from __future__ import annotations

import errno
from collections import namedtuple

import pytest

from polarsky.cli.main import main
from polarsky.errors import InputError
from polarsky.tasks.stokes import run_stokes
from polarsky.write.space import human_size, write_error

_ENOSPC = "No space left on device"


def _enospc(*args, **kwargs):
    raise OSError(errno.ENOSPC, _ENOSPC)


def _h5py_enospc(self, *args, **kwargs):
    raise OSError(errno.ENOSPC, "Can't write unprocessed chunk data (file write failed: errno = 28, error message = "
                                "'No space left on device')")


def _check_nothing_left(tmp_path, out):
    assert not out.exists()
    assert not [p.name for p in out.parent.iterdir() if p.name.startswith(f".{out.name}.")]


@pytest.mark.parametrize("where", ["netcdf", "pictures", "json"])
def test_a_full_disk_while_writing_names_the_folder_and_the_space(png_bracket, tmp_path, monkeypatch, capsys, where):
    paths, _ = png_bracket
    out = tmp_path / "out"
    if where == "netcdf":
        monkeypatch.setattr("polarsky.write.netcdf.StokesWriter._drain", _h5py_enospc)
    elif where == "pictures":
        monkeypatch.setattr("polarsky.write.pictures.maps.write_png", _enospc)
    else:
        def write_text(self, *args, **kwargs):  # Python's own writes name the file
            raise OSError(errno.ENOSPC, _ENOSPC, str(self))

        monkeypatch.setattr("pathlib.Path.write_text", write_text)
    assert main(["stokes", *map(str, paths), "--out", str(out)]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert len(err) == 1, err
    assert err[0].startswith(f"error: no space left on the device of {out}")
    assert "this run writes about" in err[0] and "free some space or choose another --out" in err[0]
    assert "staging" not in err[0] and "partial" not in err[0] and "Traceback" not in err[0]
    if where == "json":
        assert " while writing summary.json:" in err[0]  # the temporary name is not shown
    _check_nothing_left(tmp_path, out)


def test_too_little_free_space_is_refused_before_writing(png_bracket, tmp_path, monkeypatch):
    paths, _ = png_bracket
    usage = namedtuple("usage", "total used free")
    monkeypatch.setattr("polarsky.write.space.shutil.disk_usage", lambda p: usage(10**9, 10**9 - 1000, 1000))
    with pytest.raises(InputError, match=f"not enough space on the device of {tmp_path / 'out'}: this run writes "
                                         r"about \d+\.\d kB and 1.0 kB are free"):
        run_stokes(paths, tmp_path / "out")
    _check_nothing_left(tmp_path, tmp_path / "out")


def test_a_full_disk_in_a_batch_bracket_names_its_folder(tmp_path, monkeypatch):
    from polarsky.batch.discover import discover_brackets
    from polarsky.batch.task import process_bracket
    from polarsky.options.settings import Settings
    from polarsky.synthetic.tree import write_bracket

    write_bracket(tmp_path / "in", "pier", height=16, width=24)
    out = tmp_path / "out"
    out.mkdir()
    monkeypatch.setattr("polarsky.write.pictures.maps.write_png", _enospc)
    (b,) = discover_brackets(tmp_path / "in")
    row = process_bracket({"bracket": b, "out_dir": str(out), "settings": Settings(), "sky": False, "run_id": "t"})
    assert row["status"] == "failed"
    assert row["error"].startswith(f"no space left on the device of {out / b.name}")
    assert ".polarsky-tmp" not in row["error"]


def test_other_write_failures_and_sizes_in_words(tmp_path):
    out = tmp_path / "o"
    e = write_error(OSError(errno.EACCES, "Permission denied", str(tmp_path / ".o.polarsky-staging-1-0/a/x.png")),
                    out, staging=tmp_path / ".o.polarsky-staging-1-0")
    assert str(e) == (f"cannot write to {out} while writing a/x.png (Permission denied); choose a folder you can "
                      "write to")
    assert [human_size(n) for n in (999, 1000, 2_500_000, 7.2e12)] == ["999 bytes", "1.0 kB", "2.5 MB", "7.2 TB"]
