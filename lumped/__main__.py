"""``python -m lumped``: the command line."""

import sys

from lumped.cli import main

sys.exit(main())
