"""Invented scenes rendered by our own code, with known truth: the demo, tests and benchmarks.

:mod:`.harbour` (the demo's invented harbour-inspection scene and evening sky), :mod:`.sky`
(clear-sky brackets from the model), :mod:`.mosaic` (polarization-mosaic frames and bench
frames), :mod:`.tree` (folder trees of small brackets for batch runs).
"""
