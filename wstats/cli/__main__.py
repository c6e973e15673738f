"""``python -m wstats.cli``: the same program as ``wstats``."""

import sys

from wstats.cli.main import main

if __name__ == "__main__":  # not when a Dask worker process re-imports the main module
    sys.exit(main())
