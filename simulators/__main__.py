"""``python -m simulators [options]``: the same as ``sweepd sim``."""

import sys

from simulators.cli import main

sys.exit(main())
