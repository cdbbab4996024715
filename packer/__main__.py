"""Allow ``python -m packer``."""

import sys

from packer.cli import main

if __name__ == "__main__":      # not when a spawned worker process imports this module
    sys.exit(main())
