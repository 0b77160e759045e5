"""``python -m chirpsift``: the same as the ``chirpsift`` command."""

import sys

from .cli import main

sys.exit(main())
