"""``sphex bench``: handed whole to the benchmark's own parser (:mod:`sphex.bench`)."""
from __future__ import annotations

from collections.abc import Sequence
from typing import Any


def register(sub: Any) -> None:
    """List ``bench`` among the subcommands (its options and example are the benchmark's)."""
    sub.add_parser("bench", help="Speed measurements (see 'sphex bench --help')", add_help=False)


def run(argv: Sequence[str]) -> int:
    """Run ``sphex bench ARGV``; returns the exit status."""
    from sphex import bench as benchmarks

    return int(benchmarks.main(list(argv)) or 0)
