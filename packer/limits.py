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
from dataclasses import dataclass, fields

from packer.errors import InputError

__all__ = ["Limits", "LimitError", "limits", "env_name"]


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
    values = {}
    for f in fields(Limits):
        raw = os.environ.get(env_name(f.name))
        if raw is None:
            continue
        try:
            values[f.name] = int(raw)
        except ValueError:
            values[f.name] = 0
        if values[f.name] < 1:
            raise InputError(f"environment variable {env_name(f.name)} must be a positive whole number, got {raw!r}")
    return Limits(**values)
