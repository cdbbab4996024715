"""Command-line parsers with examples: every ``packer`` command builds its parser here.

The help of each command ends with examples that work in a clone of the
repository, and :data:`PARSERS` keeps every parser built, so a test can check
that each option has its help text.
"""

from __future__ import annotations

import argparse
from typing import Sequence

__all__ = ["command_parser", "PARSERS"]

#: Every parser built in this process, by program name.
PARSERS: dict[str, argparse.ArgumentParser] = {}


def command_parser(prog: str, description: str, examples: Sequence[str], *, notes: str = "") -> argparse.ArgumentParser:
    """An ``argparse`` parser whose help shows the description, the options and the examples.

    Parameters
    ----------
    prog
        The command as typed (``"packer plan"``).
    description
        One or two plain sentences.
    examples
        Command lines, each optionally followed by ``"  # what it does"``.
    notes
        Plain text shown after the examples (exit codes, where files go).
    """
    epilog = "examples:\n" + "\n".join(f"  {e}" for e in examples)
    if notes:
        epilog += "\n\n" + notes
    ap = argparse.ArgumentParser(prog=prog, description=description, epilog=epilog,
                                 formatter_class=argparse.RawDescriptionHelpFormatter)
    PARSERS[prog] = ap
    return ap
