"""The estimating layer: frames -> Stokes products, block by block, the same for every path.

:mod:`.calibration` (what a calibration holds, analysis matrices), :mod:`.align` (registration
of hand-held brackets), :mod:`.sources` (a bracket or a mosaic frame as row blocks),
:mod:`.block` (the estimate of one block: numpy reference or compiled kernels),
:mod:`.runner` (the one row-block runner, with context rows), :mod:`.sinks` (memory, previews,
statistics).
"""
