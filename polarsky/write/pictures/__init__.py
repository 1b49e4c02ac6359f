"""PNG pictures with colour keys: Stokes maps, advice, the sky comparison.

Every picture takes its colours from :mod:`polarsky.palette`, labels its axes ``x (px)`` and
``y (px)`` and draws pixels that are not valid (or not shown) as a grey checkerboard.
"""
