"""The error hierarchy shared by every stage.

One base class, so the command line can map any packer error to an exit code:
:class:`InputError` for bad input, with subclasses for geometry and size.
A copy that fits no plate is not an error: it goes to the plan's unplaced list
with its reason.
"""


class PackerError(Exception):
    """Base class of every error packer raises on purpose."""


class InputError(PackerError):
    """Input that cannot be used as given: bad YAML, unknown key, missing file."""


class GeometryError(InputError):
    """A mesh or polygon that is not a valid solid or shape (open, inverted, empty)."""


class SizeError(InputError):
    """A size a computation cannot use: a capacity that is not positive, a weight over it, no machines."""
