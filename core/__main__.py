"""``python -m core``: the command line (see core/cli.py)."""

import sys

from core.cli import main

sys.exit(main())
