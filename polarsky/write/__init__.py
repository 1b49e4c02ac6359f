"""The writing layer: every output file, written one way.

:mod:`.stage` (an output folder published whole, locked while written), :mod:`.netcdf`
(NetCDF-4 files, one library), :mod:`.jsonio` (JSON files and ``--json`` prints),
:mod:`.dataset` (the xarray Stokes Dataset), :mod:`.summary` (the summary builder),
:mod:`.calibration_file` (calibration files), :mod:`.masks` (regions as mask images),
:mod:`.pictures` (PNG pictures with colour keys).
"""
