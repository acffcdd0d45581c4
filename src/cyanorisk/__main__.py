"""``python -m cyanorisk``: the command line."""

import sys

from cyanorisk.cli import main

sys.exit(main())
