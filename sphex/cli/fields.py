"""``sphex smooth`` and ``sphex regrid``: a gridded variable in, a gridded variable out."""
from __future__ import annotations

import argparse
from typing import Any

from sphex.cli.shared import (
    add_command, add_output_arguments, cap_radius, check_paths, count_fields, degree_range,
    distance_km, grid_file, grid_of, keep_precision, load_variable, progress_bar, say, target_grid,
    whole_number, write_field,
)

SMOOTH_EXAMPLE = """\
--gaussian uses a Gaussian kernel whose weight is one half at RADIUS_KM (on a
sphere of --planet-radius km, else the file's planet_radius_km attribute,
else Earth's 6371 km); --cap averages over spherical caps; --band L1:L2 keeps
degrees up to L1 and rolls off smoothly to zero at L2.

example:
  sphex smooth my_field.nc -v topo --gaussian 250 --planet-radius 1350 -o topo_smooth.nc
"""

REGRID_EXAMPLE = """\
The field is analysed on its own grid, truncated to the smaller exact degree
limit of the two grids (or --lmax), and synthesised on the target.

example:
  sphex regrid my_field.nc -v topo --grid equiangular:91x180:poles -o topo_2deg.nc
"""

#: Sphere radius (km) for --gaussian when neither the option nor the file gives one.
EARTH_RADIUS_KM = 6371.0


def register(sub: Any) -> None:
    """Add ``smooth`` and ``regrid`` to the subcommands."""
    q = add_command(sub, "smooth", "Isotropic smoothing of a gridded variable on its own grid",
                    SMOOTH_EXAMPLE)
    q.add_argument("input", metavar="IN.nc")
    q.add_argument("-v", "--var", metavar="VAR", help="variable (optional if only one is gridded)")
    g = q.add_mutually_exclusive_group(required=True)
    g.add_argument("--gaussian", type=distance_km, metavar="RADIUS_KM",
                   help="Gaussian kernel, weight 1/2 at this distance")
    g.add_argument("--cap", type=cap_radius, metavar="RADIUS_DEG",
                   help="average over spherical caps of this radius")
    g.add_argument("--band", type=degree_range, metavar="L1:L2",
                   help="keep degrees <= L1, smooth roll-off to 0 at L2")
    q.add_argument("--planet-radius", type=distance_km, metavar="KM",
                   help="sphere radius for --gaussian")
    q.add_argument("--lmax", type=whole_number, metavar="N", help="degree limit of the analysis")
    add_output_arguments(q)
    q.set_defaults(func=run_smooth)

    q = add_command(sub, "regrid", "Spectral regridding of a gridded variable onto another grid",
                    REGRID_EXAMPLE)
    q.add_argument("input", metavar="IN.nc")
    q.add_argument("-v", "--var", metavar="VAR", help="variable (optional if only one is gridded)")
    q.add_argument("--grid", required=True, metavar="GRID",
                   help="netCDF file, gauss:LMAX, or equiangular:NLATxNLON:LAYOUT")
    q.add_argument("--lmax", type=whole_number, metavar="N", help="degree limit")
    add_output_arguments(q)
    q.set_defaults(func=run_regrid)


def run_smooth(a: argparse.Namespace) -> int:
    check_paths([a.input], [a.output], a.overwrite)
    from sphex.xr.coords import check_lmax
    from sphex.xr.fields import smooth

    da, gattrs = load_variable(a.input, a.var)
    info = grid_of(da, a.input)
    lmax = check_lmax(a.lmax, info.grid, False, f"variable {da.name!r}")
    radius = a.planet_radius
    note = ""
    if a.gaussian is not None and radius is None:
        radius = _file_radius_km(da.attrs) or _file_radius_km(gattrs)
        if radius is None:
            radius = EARTH_RADIUS_KM
            note = " (no --planet-radius and no planet_radius_km attribute: assumed Earth, 6371 km)"
    n = count_fields(da, info)
    with progress_bar(n, "smooth") as bar:
        out = smooth(da, gaussian_km=a.gaussian, cap_deg=a.cap, band=a.band,
                     planet_radius_km=radius, lmax=lmax)
        bar.update(n)
    out = keep_precision(out, da)
    how = out.attrs["history"].splitlines()[-1]
    write_field(out, a.output, a.overwrite, gattrs, how)
    say(f"read  {a.input}: {da.name!r} on a {info.describe()}",
        f"wrote {a.output}: {how.removeprefix('sphex smooth: ')}{note}")
    return 0


def _file_radius_km(attrs: dict) -> float | None:
    for key in ("planet_radius_km", "sphere_radius_km"):
        if key in attrs:
            try:
                return float(attrs[key])
            except (TypeError, ValueError):
                return None
    return None


def run_regrid(a: argparse.Namespace) -> int:
    check_paths([a.input, grid_file(a.grid)], [a.output], a.overwrite)
    from sphex.xr.coords import check_lmax, synthesis_target
    from sphex.xr.fields import regrid

    da, gattrs = load_variable(a.input, a.var)
    info = grid_of(da, a.input)
    target = target_grid(a.grid)
    tinfo, _, _ = synthesis_target(target)
    lmax = a.lmax
    if lmax is not None:
        check_lmax(lmax, info.grid, False, f"variable {da.name!r}")
    n = count_fields(da, info)
    with progress_bar(n, "regrid") as bar:
        out = regrid(da, target, lmax=lmax)
        bar.update(n)
    out = keep_precision(out, da)
    how = out.attrs["history"].splitlines()[-1]
    write_field(out, a.output, a.overwrite, gattrs, how)
    say(f"read  {a.input}: {da.name!r} on a {info.describe()}",
        f"wrote {a.output}: on a {tinfo.describe()}")
    return 0
