"""``python -m sphex``: the same command line as ``sphex``."""
import sys

from sphex.cli import main

sys.exit(main())
