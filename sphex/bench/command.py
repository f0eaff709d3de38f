"""``sphex bench``: the benchmark's command line (also ``python -m sphex.bench``).

Without ``--scale`` it runs :mod:`sphex.bench.transforms` and the evaluation
at scattered points of :mod:`sphex.bench.points` (``--points``; the iterative
fit with ``--fit``); with ``--scale`` the remaining options go to
:mod:`sphex.bench.scaleout`.
"""
from __future__ import annotations

import argparse
import json
from collections.abc import Sequence

from sphex.bench import points, transforms

__all__ = ["main"]


def main(argv: Sequence[str] | None = None) -> int:
    """``sphex bench [options]``: the transform benchmark, or the scale-out one with --scale."""
    parser = argparse.ArgumentParser(
        prog="sphex bench",
        description="Time analysis and synthesis on Gauss grids (scalar fields, and a (u, v) "
                    "pair of vector components) against the DGEMM rate measured in the same run.",
        epilog="example: sphex bench --sizes 255 511 --no-memory")
    parser.add_argument("--sizes", type=int, nargs="+", default=list(transforms.DEFAULT_SIZES),
                        help="degrees to time (default: 255 511 1023 2047)")
    parser.add_argument("--batch", default="511x32",
                        help="LMAXxFIELDS batch case, or 'none' (default: 511x32)")
    parser.add_argument("--repeat", type=int, default=3,
                        help="best of at least this many calls, more while they fit in 1 s "
                             "(default 3)")
    parser.add_argument("--no-memory", action="store_true", help="skip the peak-memory subprocesses")
    parser.add_argument("--vector-size", type=int, default=1023, metavar="LMAX",
                        help="degree of the vector (u, v) pair case, 0 to skip (default 1023)")
    parser.add_argument("--huge", type=int, nargs="?", const=10800, default=None, metavar="LMAX",
                        help="also one analysis and synthesis at this degree in a fresh process "
                             "(default 10800: 1.9 GB of input, several minutes)")
    parser.add_argument("--cold", action="store_true",
                        help="also time first calls with an empty numba cache (analyze + "
                             "synthesize at L=255, the demo) and warm CLI calls (about a minute)")
    parser.add_argument("--no-rotation", action="store_true",
                        help="skip rotation (L=1023, 2047) and the localised spectrum (L=1023, "
                             "20 windows)")
    parser.add_argument("--points", type=int, default=1_000_000, metavar="N",
                        help="scattered points for the evaluation of degree-360 coefficients "
                             "(default 1000000; 0 skips it)")
    parser.add_argument("--fit", action="store_true",
                        help="also an iterative fit of degree 180 from 10^6 points (about ten "
                             "minutes on two cores)")
    parser.add_argument("--scale", action="store_true",
                        help="run the dask scale-out benchmark instead (see sphex.bench.scaleout)")
    parser.add_argument("--json", action="store_true", help="print JSON instead of a table")
    args, rest = parser.parse_known_args(argv)
    if args.scale:
        from sphex.bench import scaleout

        return scaleout.main(rest + (["--json"] if args.json else [])
                             + (["--no-memory"] if args.no_memory else [])
                             + (["--repeat", str(args.repeat)] if args.repeat != 3 else []))
    if rest:
        parser.error(f"unrecognized arguments: {' '.join(rest)}")
    batch = None
    if args.batch.lower() != "none":
        try:
            lb, kb = (int(v) for v in args.batch.lower().split("x"))
        except ValueError:
            parser.error(f"--batch must look like 511x32 or 'none', got {args.batch!r}")
        batch = (lb, kb)
    if (any(L < 1 for L in args.sizes) or args.repeat < 1 or args.vector_size < 0
            or args.points < 0):
        parser.error("sizes and --repeat must be positive integers, --vector-size and --points "
                     "0 or more")
    result = transforms.run(args.sizes, batch, not args.no_memory, args.repeat, args.huge,
                            args.cold, args.vector_size or None)
    if args.points:
        result["points_evaluation"] = points.time_point_evaluation(points=args.points)
    if args.fit:
        result["points_fit"] = points.time_iterative_fit()
    table = "\n".join([transforms.format_table(result)] + points.format_points(result))
    if not args.no_rotation:
        from sphex.bench import localize

        result["rotation_and_local_spectra"] = localize.run(repeat=args.repeat)
        table += "\n\n" + localize.format_table(result["rotation_and_local_spectra"])
    print(json.dumps(result, indent=2) if args.json else table)
    return 0
