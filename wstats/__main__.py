"""Allow ``python -m wstats``."""

from __future__ import annotations

import sys

from wstats.cli.main import main

sys.exit(main())
