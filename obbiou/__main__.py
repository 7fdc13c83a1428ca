"""``python -m obbiou``: the command line (see :mod:`obbiou.cli`)."""

import sys

from obbiou.cli import main

sys.exit(main())
