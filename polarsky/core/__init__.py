"""The numpy core: pure functions, one module per physical concept.

:mod:`.stokes` (analysis matrix, least squares, DoLP/AoLP, uncertainties, debiasing),
:mod:`.noise` (the camera noise model), :mod:`.transfer` (sRGB), :mod:`.fresnel` (reflection),
:mod:`.kernels` (the compiled fast path, tested against the rest).  Arrays in, arrays out;
float32 stays float32; nothing here reads or writes files.
"""
