"""Reading a sky comparison written by ``polarsky sky`` (``sky.nc`` and ``sky.json``)."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from ..errors import InputError

__all__ = ["read_sky", "SKY_FILE", "SKY_JSON"]

SKY_FILE = "sky.nc"
SKY_JSON = "sky.json"


def read_sky(folder) -> dict:
    """The maps of ``sky.nc`` and the content of ``sky.json`` in an output folder of ``polarsky sky``.

    Returns
    -------
    dict
        ``maps``: name -> ndarray, (channel, y, x) or (y, x) as written
        (:func:`polarsky.write.sky_file.write_sky_nc`); ``info``: the ``sky.json`` dict
        (empty when the file is absent).

    Raises
    ------
    InputError
        ``sky.nc`` is missing or cannot be read, or ``sky.json`` is not JSON.
    """
    import h5py

    folder = Path(folder)
    path = folder / SKY_FILE
    if not path.is_file():
        raise InputError(f"{path} does not exist; give the output folder of 'polarsky sky'")
    try:
        with h5py.File(path, "r") as f:
            maps = {}
            for name, var in f.items():  # the maps: 2-D and 3-D variables (not dimensions)
                if isinstance(var, h5py.Dataset) and var.ndim in (2, 3) and not var.is_scale:
                    maps[name] = np.asarray(var[...])
        info = json.loads((folder / SKY_JSON).read_text(encoding="utf-8")) if (folder / SKY_JSON).is_file() else {}
    except Exception as exc:  # noqa: BLE001 - any decoding failure is a bad file
        raise InputError(f"{path} cannot be read as a sky result ({type(exc).__name__}); give the output folder of "
                         "'polarsky sky'") from None
    if not isinstance(info, dict):
        raise InputError(f"{folder / SKY_JSON} is not a sky result; give the output folder of 'polarsky sky'")
    return {"maps": maps, "info": info}
