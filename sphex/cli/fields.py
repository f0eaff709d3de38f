"""``sphex smooth`` and ``sphex regrid``: gridded variables in, gridded variables out."""
from __future__ import annotations

import argparse
from typing import Any

from sphex.cli.progress import announce_kernel_preparation
from sphex.cli.radius import add_radius_option, choose_radius
from sphex.cli.shared import (
    UserError, add_command, add_output_arguments, cap_radius, check_paths, count_fields,
    degree_range, distance_km, grid_file, grid_of, keep_precision, load_variable, open_input,
    progress_bar, say, target_grid, whole_number, write_field,
)

SMOOTH_EXAMPLE = """\
--gaussian uses a Gaussian kernel whose weight is one half at RADIUS_KM on a
sphere of --radius (km, or 1350km / 1350000m), else of the input's
planet_radius_km attribute, else of Earth's mean radius 6371 km (the command
says which); --cap averages over spherical caps; --band L1:L2 keeps degrees
up to L1 and rolls off smoothly to zero at L2.

example:
  sphex smooth data_demo/velanthe_topography.nc --gaussian 250 -o topo_250km.nc
"""

REGRID_EXAMPLE = """\
Each field is analysed on its own grid, truncated to the smaller exact degree
limit of the two grids (or --lmax), and synthesised on the target.  Without
-v every variable on the input's grid is regridded; variables without
latitude and longitude are copied, and the coordinates keep their names.

example:
  sphex regrid data_demo/velanthe_surface_temperature.nc --grid equiangular:2.5deg -o temp_2p5deg.nc
"""


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
    add_radius_option(q, "radius of the sphere for --gaussian")
    q.add_argument("--lmax", type=whole_number, metavar="N", help="degree limit of the analysis")
    add_output_arguments(q)
    q.set_defaults(func=run_smooth)

    q = add_command(sub, "regrid", "Spectral regridding of gridded variables onto another grid",
                    REGRID_EXAMPLE)
    q.add_argument("input", metavar="IN.nc")
    q.add_argument("-v", "--var", metavar="VAR", action="append",
                   help="variable to regrid (repeat for several; default: every variable on "
                        "the input's grid)")
    q.add_argument("--grid", required=True, metavar="GRID",
                   help="netCDF file, gauss:LMAX, equiangular:NLATxNLON:LAYOUT or "
                        "equiangular:SPACINGdeg")
    q.add_argument("--lmax", type=whole_number, metavar="N",
                   help="degree limit (default: the smaller exact limit of the two grids)")
    add_output_arguments(q)
    q.set_defaults(func=run_regrid)


def run_smooth(a: argparse.Namespace) -> int:
    check_paths([a.input], [a.output], a.overwrite)
    from sphex.xr.coords import check_lmax
    from sphex.xr.fields import smooth

    da, gattrs = load_variable(a.input, a.var)
    info = grid_of(da, a.input)
    lmax = check_lmax(a.lmax, info.grid, False, f"variable {da.name!r}")
    radius = None
    if a.gaussian is not None:
        radius = choose_radius("smooth", a.radius, ("the variable's", da.attrs),
                               ("the file's", gattrs), assume_earth=True)
    say(f"read  {a.input}: {da.name!r} on a {info.describe()}")
    announce_kernel_preparation("smooth")
    with progress_bar(count_fields(da, info), "smooth") as bar:
        out = smooth(da, gaussian_km=a.gaussian, cap_deg=a.cap, band=a.band,
                     planet_radius_km=None if radius is None else radius.km, lmax=lmax,
                     progress=bar)
    out = keep_precision(out, da)
    how = out.attrs["history"].splitlines()[-1]
    write_field(out, a.output, a.overwrite, gattrs, how)
    say(f"wrote {a.output}: {how.removeprefix('sphex smooth: ')}",
        *([f"      {radius.describe()}"] if radius is not None else []))
    return 0


def _regrid_plan(ds: Any, names: list[str] | None, path: str) -> tuple[list[str], Any, list[str],
                                                                        list[str]]:
    """Variables to regrid, their grid, variables to copy, and variables that cannot be carried."""
    from sphex.xr.coords import choose_variable, find_grid

    if names:
        chosen = list(dict.fromkeys(choose_variable(ds, n, path) for n in names))
    else:
        chosen = _usable(ds) or [choose_variable(ds, None, path)]   # no usable one: its reason
    info = grid_of(ds[chosen[0]], path)
    if names:
        for n in chosen[1:]:
            if not _same_grid(grid_of(ds[n], path), info):
                raise UserError(f"{path}: {n!r} is on another grid than {chosen[0]!r}; regrid "
                                "them in two runs")
    else:
        chosen = [n for n in chosen if _same_grid(find_grid(ds[n]), info)]
    spatial = {info.lat_dim, info.lon_dim}
    others = [(str(k), v) for k, v in ds.data_vars.items() if str(k) not in chosen]
    copied = [k for k, v in others if not spatial & set(v.dims)]
    dropped = [k for k, v in others if spatial & set(v.dims)]
    return chosen, info, copied, dropped


def _usable(ds: Any) -> list[str]:
    from sphex.xr.coords import find_grid

    out = []
    for k, v in ds.data_vars.items():
        try:
            find_grid(v)
        except ValueError:
            continue
        out.append(str(k))
    return out


def _same_grid(a: Any, b: Any) -> bool:
    keys = ("lat_dim", "lon_dim", "lat_name", "lon_name", "grid")
    return all(getattr(a, k) == getattr(b, k) for k in keys)


def run_regrid(a: argparse.Namespace) -> int:
    check_paths([a.input, grid_file(a.grid)], [a.output], a.overwrite)
    import xarray as xr

    from sphex.xr.coords import check_lmax, synthesis_target
    from sphex.xr.fields import append_history, regrid
    from sphex.xr.files import write_dataset

    src = open_input(a.input)
    try:
        try:
            chosen, info, copied, dropped = _regrid_plan(src, a.var, a.input)
        except ValueError as exc:
            raise UserError(str(exc)) from None
        data = {n: src[n].load() for n in chosen + copied}
        gattrs = dict(src.attrs)
    finally:
        src.close()
    target = target_grid(a.grid)
    tinfo, _, _ = synthesis_target(target)
    limit = min(info.grid.lmax_exact, tinfo.grid.lmax_exact)
    lmax = limit if a.lmax is None else check_lmax(a.lmax, info.grid, False,
                                                   f"variable {chosen[0]!r}")
    say(f"read  {a.input}: {', '.join(map(repr, chosen))} on a {info.describe()}")
    total = sum(count_fields(data[n], info) for n in chosen)
    announce_kernel_preparation("regrid")
    out_vars = {}
    with progress_bar(total, "regrid") as bar:
        base = 0
        for n in chosen:
            def step(done: int, _: int, base: int = base) -> None:
                bar(base + done, total)

            out_vars[n] = keep_precision(regrid(data[n], target, lmax=lmax, progress=step), data[n])
            base += count_fields(data[n], info)
    out = xr.Dataset({**out_vars, **{n: data[n] for n in copied}})
    line = out_vars[chosen[0]].attrs["history"].splitlines()[-1]
    for v in out_vars.values():
        v.attrs.pop("history", None)
    out.attrs = {k: v for k, v in gattrs.items() if k != "history"}
    out.attrs["history"] = append_history(gattrs, line)
    write_dataset(out, a.output, a.overwrite)
    say(f"wrote {a.output}: {', '.join(map(repr, chosen))} ({total} field{'s' if total != 1 else ''})"
        f" on a {tinfo.describe()}; regridded through degrees 0..{lmax}",
        *_regrid_notes(lmax, tinfo.grid.lmax_exact, copied, dropped))
    return 0


def _regrid_notes(lmax: int, target_exact: int, copied: list[str], dropped: list[str]) -> list[str]:
    notes = []
    if lmax > target_exact:
        notes.append(f"      note: the target grid is exact to degree {target_exact} only; "
                     f"degrees {target_exact + 1}..{lmax} are in the values at its points but "
                     "are not resolved by it and alias on re-analysis")
    if copied:
        notes.append(f"      copied unchanged: {', '.join(copied)}")
    if dropped:
        notes.append(f"      left out (on latitude or longitude but not a field on the grid, or "
                     f"not chosen with -v): {', '.join(dropped)}")
    return notes
