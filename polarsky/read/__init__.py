"""The reading layer: every file format and every name the user writes, read one way.

:mod:`.formats` (the one list of formats, header checks), :mod:`.frames` (decoding),
:mod:`.exif` (camera metadata), :mod:`.names` (angle tokens in file names), :mod:`.manifest`
(bracket manifests), :mod:`.masks` (regions and mask images), :mod:`.bracket` (frames +
angles + exposure -> a bracket), :mod:`.mosaic_frames` (raw mosaic frames),
:mod:`.stokes_file` (a written Stokes result), :mod:`.sky_file` (a written sky comparison),
:mod:`.calibration_file` (calibration files).
"""
