"""``python -m service.cli``: the same as the ``cycleledger`` command."""

import sys

from . import main

sys.exit(main())
