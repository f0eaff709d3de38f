"""``python -m sphex.bench``: the same as ``sphex bench``."""
from sphex.bench.command import main

raise SystemExit(main())
