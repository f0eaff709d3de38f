"""``python -m sphex.cli``: the same as the ``sphex`` command."""
from sphex.cli.parser import main

raise SystemExit(main())
