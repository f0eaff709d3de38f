"""``sphex map``: a picture of one field of a grid file, or of coefficients synthesised on a grid."""
from __future__ import annotations

import argparse
from typing import Any

from sphex.cli.progress import announce_kernel_preparation
from sphex.cli.shared import (
    UserError, add_command, grid_of, is_coefficient_file, load_variable, say, target_grid,
)

EXAMPLE = """\
The map is equirectangular, north up and east to the right, with the colour
scale centred on 0 for a field of both signs.  A file with several fields
(time, level, ...) shows the first unless --field picks another.  A
coefficient file is synthesised first, on --grid or on a grid fine enough for
its degrees.

example:
  sphex map data_demo/velanthe_topography.nc -o topo_map.png
  sphex map data_demo/velanthe_surface_temperature.nc --field time=6 -o temp_step6.png
  sphex map topo_coef.nc -o topo_from_coefficients.png
"""

#: Latitude rows of the default grid for coefficients: 2 (lmax + 1), within these bounds.
MAP_ROWS = (180, 1024)


def register(sub: Any) -> None:
    """Add ``map`` to the subcommands."""
    q = add_command(sub, "map", "Picture of a gridded field or of coefficients, north up",
                    EXAMPLE)
    q.add_argument("input", metavar="FILE", help="grid file, or coefficient file")
    q.add_argument("-v", "--var", metavar="VAR", help="variable of a grid file")
    q.add_argument("--field", type=field_choice, metavar="DIM=INDEX",
                   help="which field of a series: DIM=INDEX[,DIM=INDEX] (0 is the first; "
                        "default the first)")
    q.add_argument("--grid", metavar="GRID",
                   help="grid for coefficients (default: equiangular cells fine enough for "
                        "their degrees)")
    q.add_argument("--lmax", type=int, metavar="N", help="truncate coefficients to this degree")
    q.add_argument("-o", "--output", required=True, metavar="PNG", help="picture to write")
    q.add_argument("--overwrite", action="store_true", help="replace PNG if it exists")
    q.set_defaults(func=run)


def field_choice(text: str) -> dict[str, int]:
    """``time=3`` or ``time=3,level=0``: a field by its index along each dimension."""
    out: dict[str, int] = {}
    for part in text.split(","):
        name, sep, number = (x.strip() for x in part.partition("="))
        try:
            out[name] = int(number)
        except ValueError:
            name = ""
        if not sep or not name:
            raise argparse.ArgumentTypeError(f"{text!r}: write DIM=INDEX, for example time=0 "
                                             "(several: time=0,level=2)")
    return out


def run(a: argparse.Namespace) -> int:
    import numpy as np

    from sphex import plot
    from sphex.xr.output import check_output_path

    check_output_path(a.output, a.overwrite)
    if is_coefficient_file(a.input):
        da = _synthesised(a)
    else:
        if a.grid or a.lmax is not None:
            raise UserError("--grid and --lmax apply to coefficient files; this is a grid file")
        da, _ = load_variable(a.input, a.var)
        say(f"read  {a.input}: {da.name!r} on a {grid_of(da, a.input).describe()}")
    da, picked = _one_field(da, a.field or {}, a.input)
    finite = np.asarray(da.values)[np.isfinite(da.values)]
    signed = bool(finite.size) and finite.min() < 0 < finite.max()
    title = str(da.attrs.get("long_name", da.name))
    fig = plot.map_figure(da, cmap="strata" if signed else "ember",
                          center=0.0 if signed else None,
                          title=title + (f", {picked}" if picked else ""))
    plot.save(fig, a.output, overwrite=a.overwrite)
    say(f"wrote {a.output}: {da.name!r}{' at ' + picked if picked else ''}, north up, east to the "
        f"right{', colours centred on 0' if signed else ''}")
    return 0



def _synthesised(a: argparse.Namespace) -> Any:
    """The coefficients of ``a.input`` synthesised on the map's grid."""
    from sphex.xr.coords import parse_grid
    from sphex.xr.fields import synthesize
    from sphex.xr.files import open_coefficients

    if a.var:
        raise UserError("-v applies to grid files; a coefficient file holds one variable")
    ds = open_coefficients(a.input)
    l_file = ds.sizes["degree"] - 1
    if a.lmax is not None and not 0 <= a.lmax <= l_file:
        raise UserError(f"--lmax {a.lmax} is outside the coefficients' degrees 0..{l_file}")
    lmax = l_file if a.lmax is None else a.lmax
    if a.grid:
        grid = target_grid(a.grid)
    else:
        rows = min(max(2 * (lmax + 1), MAP_ROWS[0]), MAP_ROWS[1])
        grid = parse_grid(f"equiangular:{rows}x{2 * rows}:cells")
    say(f"read  {a.input}: coefficients of {ds.attrs.get('field_name', 'a field')!r} to degree "
        f"{l_file}")
    announce_kernel_preparation("map")
    return synthesize(ds, grid, lmax=a.lmax)


def _one_field(da: Any, choice: dict[str, int], path: str) -> tuple[Any, str]:
    """The chosen field of ``da`` and how it is named (``time 2101-01-01T00:00``), and a note."""
    from sphex.xr.coords import find_grid

    info = find_grid(da)
    extra = [d for d in da.dims if d not in (info.lat_dim, info.lon_dim)]
    unknown = [d for d in choice if d not in extra]
    if unknown:
        raise UserError(f"--field names {', '.join(unknown)}, but {da.name!r} in {path} has "
                        f"{'only the dimensions ' + ', '.join(map(str, extra)) if extra else 'one field'}")
    picked = []
    for d in extra:
        k = choice.get(str(d), 0)
        if not -da.sizes[d] <= k < da.sizes[d]:
            raise UserError(f"--field {d}={k}: {d} has {da.sizes[d]} entries (0..{da.sizes[d] - 1})")
        value = da[d].values[k] if d in da.coords else k
        picked.append(f"{d} {_value_text(value)}")
        if str(d) not in choice and da.sizes[d] > 1:
            say(f"      drawing the first of {da.sizes[d]} along {d}; choose another with "
                f"--field {d}=INDEX")
        da = da.isel({d: k})
    return da, ", ".join(picked)


def _value_text(v: Any) -> str:
    import numpy as np

    if isinstance(v, np.datetime64):
        return str(np.datetime_as_string(v, "m"))
    return str(v)
