"""Polarization-mosaic (division-of-focal-plane) sensors: layout, decoding, flat calibration.

:mod:`.layout` (the 2x2 cell and colour pattern), :mod:`.methods` (decoding methods:
superpixel, bilinear; the registry entries), :mod:`.newton` (the Newton-polynomial method),
:mod:`.colour` (colour sensors), :mod:`.decode` (channels, calibration, analysis matrices
for the fit), :mod:`.fast` and :mod:`._kernels` (the compiled fused passes), :mod:`.flatcal`
(bench calibration).  Frames are read by :mod:`polarsky.read.mosaic_frames` and estimated
by :class:`polarsky.estimate.sources.MosaicSource`.
"""
