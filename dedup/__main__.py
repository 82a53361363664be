"""``python -m dedup``: the same as the ``dedup`` command."""

import sys

from .cli import main

sys.exit(main())
