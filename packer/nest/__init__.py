"""2D nesting engine: true-shape placement of footprints on plates and strips.

Knows nothing of orders, meshes or YAML.  Public entry points:

- :func:`nest_plates`: fill a sequence of identical plates, fewest plates first;
- :func:`nest_strip`: shortest strip of a fixed width;
- :func:`fit_on_plate`: does this whole set fit on one plate?
- :func:`placed_polygon`, :func:`verify_layout`: the placed outline, the exact check.

See ``packer/nest/README.md`` for the method and its measured results.
"""

from packer.nest.plates import area_bound, fit_on_plate, nest_plates
from packer.nest.shapes import Container, Placement, PlatesResult, Shape, StripResult, placed_polygon
from packer.nest.strip import nest_strip
from packer.nest.verify import verify_layout

__all__ = [
    "Shape",
    "Container",
    "Placement",
    "PlatesResult",
    "StripResult",
    "nest_plates",
    "nest_strip",
    "fit_on_plate",
    "placed_polygon",
    "verify_layout",
    "area_bound",
]
