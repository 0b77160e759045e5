"""``python -m chirpsift.benchmarks``: the same as ``chirpsift bench``."""

import sys

from . import main

sys.exit(main())
