"""Allow ``python -m packer``."""

import sys

from packer.cli import main

sys.exit(main())
