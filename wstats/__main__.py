"""Allow ``python -m wstats``."""

from __future__ import annotations

import sys

from wstats.cli.main import main

if __name__ == "__main__":  # not when a Dask worker process re-imports the main module
    sys.exit(main())
