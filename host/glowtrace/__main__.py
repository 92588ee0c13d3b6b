"""`python -m glowtrace` runs the command line, as the `glowtrace` script does."""

import sys

from .cli import main

sys.exit(main())
