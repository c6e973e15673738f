"""``python -m wstats.cli``: the same program as ``wstats``."""

import sys

from wstats.cli.main import main

sys.exit(main())
