"""``python -m timescale``: the command line (same as the ``timescale`` command)."""

import sys

from timescale.interface.cli import main

sys.exit(main())
