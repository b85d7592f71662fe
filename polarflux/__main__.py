"""``python -m polarflux``: the same as the ``polarflux`` command."""

import sys

from .cli import main

sys.exit(main())
