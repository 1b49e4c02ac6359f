"""Planning before the bracket exists: sky darkening over a frame, glare off a smooth surface.

An analysis stage beside :mod:`polarsky.sky` and :mod:`polarsky.advice`; the orchestrators
are :mod:`polarsky.tasks.plan_sky` and :mod:`polarsky.tasks.plan_glare`.

:mod:`.sky` (the plan of one shot from the sky model), :mod:`.unevenness` (its unevenness in
words), :mod:`.sweep` (over the day or headings), :mod:`.radiance` (sky radiance weights),
:mod:`.glare` (Fresnel glare and what a filter removes), :mod:`.result` (the JSON results).
"""
