"""``sphex report``: one self-contained HTML page about a field, a coefficient file or a model."""
from __future__ import annotations

import argparse
import re
import shlex
from typing import Any

from sphex.cli.localized import centre
from sphex.cli.shared import (
    PROG, Progress, add_command, add_output_arguments, cap_radius, degree_range, say,
    whole_number,
)

EXAMPLE = """\
The page holds maps (equal-area and latitude-longitude), the degree power
spectrum with a power-law fit, the degrees that hold 50, 90 and 99 % of the
variance, the degree-order amplitudes, the field smoothed at three radii and
a table of key numbers; for a series also the spectra of the first and last
steps and the power in degree bands per step; with --compare both spectra,
the correlation per degree with its 95 % level for uncorrelated fields, the
ratio of the spectra and a map of the difference.  Images are embedded: the
page opens offline, on a phone and on paper, and shows the command that made it.

A grid file with the eastward and northward components of a wind or current
(CF standard names eastward_wind / northward_wind or the sea-water ones, or
--east and --north) adds the kinetic-energy spectrum split into rotational
and divergent parts, its key numbers and maps of vorticity and divergence;
without -v the page is about the wind alone.  --at LAT,LON --cap DEG
--window-degree N adds the localised (multitaper) spectrum of that cap, as
'sphex local-spectrum' computes it (only when asked: it costs one analysis
per window).

example:
  sphex report data_demo/velanthe_topography.nc -v topography -o topo_report.html
  sphex report data_demo/velanthe_winds.nc -o winds_report.html
  sphex report data_demo/velanthe_topography.nc --at 31.5S,124.5E --cap 30 \\
      --window-degree 15 -o orun_report.html
  sphex report model_run.nc -v tas --compare observed.nc -v2 t2m -o model_vs_obs.html
  sphex report topo_coef.nc --lmax 60 --slope 8:50 -o topo_coef_report.html
  sphex report velanthe_gravity.gfc -o gravity_model_report.html
"""


def register(sub: Any) -> None:
    """Add ``report`` to the subcommands."""
    q = add_command(sub, "report", "One self-contained HTML page: maps, spectra, key numbers",
                    EXAMPLE)
    q.add_argument("input", metavar="IN", help="netCDF grid file (with -v), coefficient file "
                   "or model file (gravity exchange, .shc, sphex model)")
    q.add_argument("-v", "--var", metavar="VAR", help="variable of a grid file")
    q.add_argument("--compare", metavar="OTHER", help="a second grid or coefficient file to "
                   "compare with")
    q.add_argument("-v2", "--var2", metavar="VAR2", help="variable of OTHER")
    q.add_argument("--lmax", type=whole_number, metavar="N", help="degree limit (default: the "
                   "grid's exact limit, or all degrees of the file)")
    q.add_argument("--slope", type=degree_range, metavar="L1:L2", help="degrees of the "
                   "power-law fit (default: from about lmax/10 to 9 lmax/10)")
    q.add_argument("--bands", type=degree_bands, metavar="L1:L2[,L3:L4...]", help="degree "
                   "bands whose power a series shows per step (default: three bands, split at "
                   "lmax^(1/3) and lmax^(2/3))")
    q.add_argument("--east", metavar="VAR", help="eastward component of a wind or current "
                   "(default: found by its CF standard_name)")
    q.add_argument("--north", metavar="VAR", help="northward component (default: found by its "
                   "CF standard_name)")
    q.add_argument("--at", type=centre, metavar="LAT,LON", help="add the localised spectrum of a "
                   "cap centred here, in degrees (28S,128E or -28,128); needs --cap and "
                   "--window-degree")
    q.add_argument("--cap", type=cap_radius, metavar="DEG", help="angular radius of the cap, in "
                   "(0, 180] degrees")
    q.add_argument("--window-degree", type=whole_number, metavar="N", help="highest degree of "
                   "the cap's windows (the spectral resolution)")
    q.add_argument("--windows", type=whole_number, metavar="K", help="use the K "
                   "best-concentrated windows (default: all at least 99%% concentrated)")
    add_output_arguments(q, "the HTML page to write")
    # "--at -28,128": a value, not an option (as in local-spectrum)
    q._negative_number_matcher = re.compile(r"^-\d+$|^-\d*\.\d+$|^-[\d.]+[NSns]?,")
    q.set_defaults(func=run)


def degree_bands(text: str) -> list[tuple[int, int]]:
    """``L1:L2[,L3:L4...]``: inclusive degree bands, each with 1 <= L1 <= L2."""
    out = []
    for part in text.split(","):
        a, sep, b = part.strip().partition(":")
        try:
            l1, l2 = int(a), int(b)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{part!r} is not L1:L2 (two whole numbers)") from None
        if not sep or not 1 <= l1 <= l2:
            raise argparse.ArgumentTypeError(f"{part!r} must be L1:L2 with 1 <= L1 <= L2")
        out.append((l1, l2))
    return out


def command_line(a: argparse.Namespace) -> str:
    """The command line of this run, as shown on the page (options in a fixed order)."""
    words = [PROG, "report", a.input]
    for flag, value in (("-v", a.var), ("--compare", a.compare), ("-v2", a.var2),
                        ("--lmax", a.lmax),
                        ("--slope", f"{a.slope[0]}:{a.slope[1]}" if a.slope else None),
                        ("--bands", ",".join(f"{x}:{y}" for x, y in a.bands) if a.bands else None),
                        ("--east", a.east), ("--north", a.north),
                        ("--at", f"{a.at[0]:g},{a.at[1]:g}" if a.at else None),
                        ("--cap", f"{a.cap:g}" if a.cap is not None else None),
                        ("--window-degree", a.window_degree), ("--windows", a.windows),
                        ("-o", a.output)):
        if value is not None:
            words += [flag, str(value)]
    if a.overwrite:
        words.append("--overwrite")
    return shlex.join(words)


def run(a: argparse.Namespace) -> int:
    from sphex.cli.shared import UserError
    from sphex.report import Region, build_report, write_report
    from sphex.xr.output import check_output_path

    if a.var2 is not None and a.compare is None:
        raise UserError("-v2 chooses the variable of --compare OTHER; give --compare too")
    if (a.east is None) != (a.north is None):
        raise UserError("give both --east and --north (or neither, to find the components by "
                        "their CF standard_name)")
    region = None
    if a.at is None:
        for value, option in ((a.cap, "--cap"), (a.window_degree, "--window-degree"),
                              (a.windows, "--windows")):
            if value is not None:
                raise UserError(f"{option} belongs to a localised spectrum; give its centre with "
                                "--at LAT,LON too")
    else:
        missing = [o for v, o in ((a.cap, "--cap DEG"), (a.window_degree, "--window-degree N"))
                   if v is None]
        if missing:
            raise UserError(f"--at needs {' and '.join(missing)} (for example --at "
                            "31.5S,124.5E --cap 30 --window-degree 15)")
        region = Region(a.at[0], a.at[1], a.cap, a.window_degree, a.windows)
    check_output_path(a.output, a.overwrite)
    with Progress(8, "report") as bar:
        page = build_report(a.input, variable=a.var, compare=a.compare, compare_variable=a.var2,
                            lmax=a.lmax, slope=a.slope, bands=a.bands, command=command_line(a),
                            progress=bar, east=a.east, north=a.north, region=region)
    write_report(page, a.output, a.overwrite)
    say(f"wrote {a.output} ({len(page.encode('utf-8')) / 1e6:.1f} MB, self-contained HTML)")
    return 0
