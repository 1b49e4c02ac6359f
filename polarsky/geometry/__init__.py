"""Camera and world geometry: orientation, lens models, polarizer placement.

World frame ENU (east, north, up); camera frame x right, y down the image, z forward
along the optical axis.  See ``docs/sky.md`` and the project conventions.
"""

from .camera import Lens, make_lens
from .orientation import az_el_from_enu, camera_to_world, enu_from_az_el
from .polarizer import PLACEMENTS, image_aolp_from_evector, image_direction_from_evector

__all__ = [
    "Lens",
    "make_lens",
    "camera_to_world",
    "enu_from_az_el",
    "az_el_from_enu",
    "PLACEMENTS",
    "image_aolp_from_evector",
    "image_direction_from_evector",
]
