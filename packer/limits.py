"""Limits on what one job may ask of packer, and how an operator changes them.

Job files are often written by scripts from web orders, so a value can be
whatever a customer typed. Every limit here stops one way of making packer
eat memory or time without end; a value over a limit is refused with a message
that names the limit and the environment variable that sets it
(``PACKER_LIMIT_<NAME>``, for example ``PACKER_LIMIT_COPIES_PER_LINE=50000``).
The limits are read from the environment of the process that runs packer (the
operator's), never from the job file, so a job cannot raise its own limits.
"""

from __future__ import annotations

import os
from dataclasses import dataclass, fields, replace

from packer.errors import InputError

__all__ = ["Limits", "LimitError", "limits", "env_name", "from_environment"]


class LimitError(InputError):
    """A job refused as a whole because it is over one of the limits."""


@dataclass(frozen=True)
class Limits:
    """The limits in force (see the Limits table in DEVELOPERS.md)."""

    job_file_bytes: int = 5_000_000      # size of a job or profile file
    yaml_depth: int = 40                 # nesting of mappings and lists in one document
    yaml_nodes: int = 200_000            # values in one document, aliases expanded
    text_chars: int = 200                # an order id, part name, printer, profile or job name
    path_chars: int = 1024               # a mesh path as written in the job
    copies_per_line: int = 10_000        # quantity of one order line
    copies_per_job: int = 100_000        # all copies of a job


def env_name(field_name: str) -> str:
    """The environment variable that sets one limit: ``PACKER_LIMIT_COPIES_PER_LINE``."""
    return f"PACKER_LIMIT_{field_name.upper()}"


def limits() -> Limits:
    """The limits in force: the defaults, changed by ``PACKER_LIMIT_*`` variables.

    Raises
    ------
    InputError
        When a variable is not a positive whole number.
    """
    return from_environment(Limits(), env_name, what="a positive whole number")


def from_environment(defaults, variable_of, *, what: str = "a positive number"):
    """``defaults`` (a frozen dataclass of limits) with each field the environment sets.

    ``variable_of(field_name)`` names the variable; a field keeps the type of its
    default (whole number or number), and a value that is not positive raises
    :class:`~packer.errors.InputError` naming the variable and ``what`` it must be.
    """
    changes = {}
    for f in fields(defaults):
        variable = variable_of(f.name)
        raw = os.environ.get(variable)
        if raw is None:
            continue
        kind = type(getattr(defaults, f.name))
        try:
            value = kind(raw)
        except ValueError:
            value = 0
        if not value > 0:
            raise InputError(f"environment variable {variable} must be {what}, got {raw!r}")
        changes[f.name] = value
    return replace(defaults, **changes)
