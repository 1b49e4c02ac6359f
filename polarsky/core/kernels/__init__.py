"""Compiled (numba) per-pixel kernels: the fast path of the Stokes estimate.

:mod:`polarsky.core.stokes` and :mod:`polarsky.core.noise` are the reference (numpy); these
kernels fuse the same arithmetic into single passes over memory for large frames, and the
tests check that both agree.  Nothing here is imported unless a frame is large enough to
use it (see :mod:`polarsky.estimate.block`).

Modules:

``policy``
    The one fast-math policy and the decorators every kernel (Stokes and mosaic) uses.
``compiled``
    Scalar helpers written once (arctangent, the per-pixel finish, uncertainties) and the
    passes that do not depend on the number of frames.
``source``
    Generator of ``_generated`` (the solve pass with its frame loop unrolled, 3 to 8 frames).
``dispatch``
    The entry points the estimate calls.
"""
