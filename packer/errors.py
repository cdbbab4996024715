"""The error hierarchy shared by every stage.

One base class, so the command line can map any packer error to an exit code:

- :class:`InputError` for bad input (with subclasses for geometry and size),
- :class:`InfeasibleError` when a problem is proven to have no solution,
- :class:`TimeLimitError` when the time budget ran out without any solution.
"""


class PackerError(Exception):
    """Base class of every error packer raises on purpose."""


class InputError(PackerError):
    """Input that cannot be used as given: bad YAML, unknown key, missing file."""


class GeometryError(InputError):
    """A mesh or polygon that is not a valid solid or shape (open, inverted, empty)."""


class SizeError(InputError):
    """A part that is larger than every place it could go."""


class InfeasibleError(PackerError):
    """A problem proven to have no solution (not merely: none found in time)."""


class TimeLimitError(PackerError):
    """The time budget ran out before any solution was found."""
