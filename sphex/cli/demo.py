"""``sphex demo``: the whole job on the bundled synthetic data (the job itself is :mod:`sphex.demo`)."""
from __future__ import annotations

import argparse
from typing import Any

from sphex.cli.progress import Progress, announce_kernel_preparation
from sphex.cli.shared import add_command

EXAMPLE = """\
Makes the synthetic moon Velanthe's topography and surface-temperature files
(invented data), analyses them, and writes coefficients, a spectrum plot, maps
and the isotropy picture into DIR.

example:
  sphex demo --out sphex-demo-output
"""


def register(sub: Any) -> None:
    """Add ``demo`` to the subcommands."""
    q = add_command(sub, "demo", "Run the whole job on bundled synthetic data", EXAMPLE)
    q.add_argument("--out", default="sphex-demo-output", metavar="DIR",
                   help="output directory (default ./sphex-demo-output)")
    q.add_argument("--overwrite", action="store_true", help="replace files already in DIR")
    q.set_defaults(func=run)


def run(a: argparse.Namespace) -> int:
    from sphex.compiling import DEMO_BESIDE, compile_beside

    announce_kernel_preparation("demo", kernels=("scalar", "gauss", "vector"))
    # a first run's wind kernels compile in a second process from here on, beside the
    # imports and the scalar work (the demo picks the helper up again)
    beside = compile_beside(DEMO_BESIDE)
    try:
        from sphex import demo as demo_job

        return demo_job.run(a.out, overwrite=a.overwrite, progress=Progress)
    finally:
        if beside is not None:
            beside.stop()
