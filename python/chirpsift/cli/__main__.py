"""``python -m chirpsift.cli``: the same as the ``chirpsift`` command."""

import sys

from . import main

sys.exit(main())
