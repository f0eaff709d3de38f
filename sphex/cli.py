"""The ``sphex`` command line.

Every subcommand parses its arguments, calls the Python API, prints a short
report and exits 0.  A user error (missing file or variable, not netCDF, a grid
that is not global, a degree limit above the grid's, an unknown option value,
an existing output without ``--overwrite``) prints one line on stderr and exits
2, with no traceback and no output file.  Outputs are written to a temporary
file beside the target and renamed at the end.

Heavy modules (numpy, xarray, numba, matplotlib) are imported inside the
subcommands, so ``sphex --help`` answers at once.  Set ``SPHEX_DEBUG=1`` to see
the full traceback of an error.
"""
from __future__ import annotations

import argparse
import os
import signal
import sys
from collections.abc import Sequence
from pathlib import Path
from typing import Any, NoReturn

__all__ = ["main", "UserError"]

PROG = "sphex"


class UserError(Exception):
    """A problem with what the user asked for; reported in one line, exit 2."""


class _Parser(argparse.ArgumentParser):
    """ArgumentParser whose errors are one line (and exit 2)."""

    def error(self, message: str) -> NoReturn:
        msg = " ".join(message.split())
        sys.stderr.write(f"{self.prog}: error: {msg} (see '{self.prog} --help')\n")
        raise SystemExit(2)


_FMT = argparse.RawDescriptionHelpFormatter

_MAIN_HELP = """\
Spherical-harmonic expansion of global latitude-longitude fields.

Reads CF-style netCDF files, finds latitude and longitude by name or by CF
attributes, and works on any extra dimensions (time, level, member) as a batch.

commands:
  analyze     grid file -> spherical-harmonic coefficient file
  synthesize  coefficient file -> grid file (any supported grid)
  spectrum    degree power spectrum (table, CSV, plot)
  smooth      isotropic smoothing (Gaussian, spherical cap, degree taper)
  regrid      spectral regridding onto another grid
  inspect     what grid each variable is on, or why it is not usable
  demo        the whole job on bundled synthetic data
  bench       speed measurements

Grids (--grid): a netCDF file whose latitude/longitude define the grid,
gauss:LMAX, or equiangular:NLATxNLON:LAYOUT with LAYOUT poles, cells or north.

start here:
  sphex demo
  sphex inspect my_field.nc
  sphex analyze my_field.nc -v topo -o topo_coef.nc
"""

_EXAMPLES = {
    "analyze": """\
The coefficient file has dimensions degree and order (plus any extra ones such
as time) and variables cos_coef / sin_coef; its attributes state the
normalisation, phase convention, lmax, reference radius and units.  A file
name ending in .txt gets a plain text table (one field only).

example:
  sphex analyze data_demo/velanthe_topography.nc -v topography --lmax 60 -o topo_coef.nc
""",
    "synthesize": """\
example:
  sphex synthesize topo_coef.nc --grid gauss:90 -o topo_gauss.nc
  sphex synthesize topo_coef.nc --grid original_field.nc -o back_on_my_grid.nc
""",
    "spectrum": """\
Degree power: the contribution of each degree to the area mean of the squared
field (its sum is the mean square), in the field's units squared.  Without
--csv or --plot the table is printed.

example:
  sphex spectrum topo_coef.nc --plot topo_spectrum.png --slope 10:60
  sphex spectrum my_field.nc -v topo --csv topo_power.csv
""",
    "smooth": """\
--gaussian uses a Gaussian kernel whose weight is one half at RADIUS_KM (on a
sphere of --planet-radius km, else the file's planet_radius_km attribute,
else Earth's 6371 km); --cap averages over spherical caps; --band L1:L2 keeps
degrees up to L1 and rolls off smoothly to zero at L2.

example:
  sphex smooth my_field.nc -v topo --gaussian 250 --planet-radius 1350 -o topo_smooth.nc
""",
    "regrid": """\
The field is analysed on its own grid, truncated to the smaller exact degree
limit of the two grids (or --lmax), and synthesised on the target.

example:
  sphex regrid my_field.nc -v topo --grid equiangular:91x180:poles -o topo_2deg.nc
""",
    "inspect": """\
example:
  sphex inspect my_field.nc
""",
    "demo": """\
Makes the synthetic moon Velanthe's topography and surface-temperature files
(invented data), analyses them, and writes coefficients, a spectrum plot, maps
and a degree-order picture into DIR.

example:
  sphex demo --out sphex-demo-output
""",
}


def _build_parser() -> _Parser:
    p = _Parser(prog=PROG, description=_MAIN_HELP, formatter_class=_FMT)
    p.add_argument("--version", action="version", version=f"%(prog)s {_version()}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND", parser_class=_Parser)

    def add(name: str, help_: str) -> _Parser:
        return sub.add_parser(name, help=help_, description=help_ + ".",
                              epilog=_EXAMPLES.get(name), formatter_class=_FMT)

    def out_args(q: _Parser, what: str = "output netCDF file") -> None:
        q.add_argument("-o", "--output", required=True, metavar="OUT", help=what)
        q.add_argument("--overwrite", action="store_true", help="replace OUT if it exists")

    q = add("analyze", "Spherical-harmonic coefficients of a gridded netCDF variable")
    q.add_argument("input", metavar="IN.nc", help="netCDF file with a global gridded variable")
    q.add_argument("-v", "--var", metavar="VAR", help="variable (optional if only one is gridded)")
    q.add_argument("--lmax", type=_nonneg_int, metavar="N", help="highest degree (default: the grid's exact limit)")
    q.add_argument("--norm", default="orthonormal", choices=["orthonormal", "full", "schmidt", "unnormalized"],
                   help="normalisation (default orthonormal)")
    q.add_argument("--no-phase", action="store_true",
                   help="leave out the Condon-Shortley phase (-1)^m")
    q.add_argument("--radius", type=_positive_float, metavar="METRES",
                   help="reference radius to record with the coefficients")
    q.add_argument("--chunks", type=_chunks, metavar="DIM=N",
                   help="fields per chunk when streaming a long series (default: about 8 MiB of "
                        "input per chunk along time)")
    q.add_argument("--scheduler", metavar="ADDRESS",
                   help="run on this dask.distributed scheduler (e.g. tcp://10.0.0.5:8786) instead "
                        "of threads in this process")
    out_args(q, "output coefficient file (.nc, or .txt for a text table)")
    q.set_defaults(func=_cmd_analyze)

    q = add("synthesize", "Gridded field from a coefficient file")
    q.add_argument("input", metavar="COEF.nc", help="coefficient file (netCDF or text table)")
    q.add_argument("--grid", required=True, metavar="GRID",
                   help="netCDF file whose coordinates define the grid, gauss:LMAX, or "
                        "equiangular:NLATxNLON:LAYOUT")
    q.add_argument("--lmax", type=_nonneg_int, metavar="N", help="truncate to this degree first")
    q.add_argument("--name", metavar="NAME", help="output variable name (default: the field's)")
    out_args(q)
    q.set_defaults(func=_cmd_synthesize)

    q = add("spectrum", "Degree power spectrum of coefficients or of a gridded variable")
    q.add_argument("input", metavar="FILE", help="coefficient file, or netCDF grid file with -v")
    q.add_argument("-v", "--var", metavar="VAR", help="variable of a grid file")
    q.add_argument("--lmax", type=_nonneg_int, metavar="N", help="degree limit")
    q.add_argument("--plot", metavar="PNG", help="write a log-log plot")
    q.add_argument("--csv", metavar="CSV", help="write the spectrum as CSV")
    q.add_argument("--slope", metavar="L1:L2", type=_degree_range,
                   help="fit a power law over degrees L1..L2 (printed, and drawn on the plot)")
    q.add_argument("--overwrite", action="store_true", help="replace PNG/CSV if they exist")
    q.set_defaults(func=_cmd_spectrum)

    q = add("smooth", "Isotropic smoothing of a gridded variable on its own grid")
    q.add_argument("input", metavar="IN.nc")
    q.add_argument("-v", "--var", metavar="VAR", help="variable (optional if only one is gridded)")
    g = q.add_mutually_exclusive_group(required=True)
    g.add_argument("--gaussian", type=_km, metavar="RADIUS_KM",
                   help="Gaussian kernel, weight 1/2 at this distance")
    g.add_argument("--cap", type=_cap_radius, metavar="RADIUS_DEG",
                   help="average over spherical caps of this radius")
    g.add_argument("--band", type=_degree_range, metavar="L1:L2",
                   help="keep degrees <= L1, smooth roll-off to 0 at L2")
    q.add_argument("--planet-radius", type=_km, metavar="KM",
                   help="sphere radius for --gaussian")
    q.add_argument("--lmax", type=_nonneg_int, metavar="N", help="degree limit of the analysis")
    out_args(q)
    q.set_defaults(func=_cmd_smooth)

    q = add("regrid", "Spectral regridding of a gridded variable onto another grid")
    q.add_argument("input", metavar="IN.nc")
    q.add_argument("-v", "--var", metavar="VAR", help="variable (optional if only one is gridded)")
    q.add_argument("--grid", required=True, metavar="GRID",
                   help="netCDF file, gauss:LMAX, or equiangular:NLATxNLON:LAYOUT")
    q.add_argument("--lmax", type=_nonneg_int, metavar="N", help="degree limit")
    out_args(q)
    q.set_defaults(func=_cmd_regrid)

    q = add("inspect", "Say what grid each variable of a file is on")
    q.add_argument("input", metavar="FILE.nc")
    q.set_defaults(func=_cmd_inspect)

    q = add("demo", "Run the whole job on bundled synthetic data")
    q.add_argument("--out", default="sphex-demo-output", metavar="DIR",
                   help="output directory (default ./sphex-demo-output)")
    q.add_argument("--overwrite", action="store_true", help="replace files already in DIR")
    q.set_defaults(func=_cmd_demo)

    sub.add_parser("bench", help="Speed measurements (see 'sphex bench --help')", add_help=False)
    return p


def _version() -> str:
    try:
        from importlib.metadata import version

        return version("sphex")
    except Exception:
        return "unknown"


# ---------------------------------------------------------------------------
# argument types (argparse turns their ValueError/ArgumentTypeError into one line)
# ---------------------------------------------------------------------------
def _nonneg_int(text: str) -> int:
    try:
        v = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a whole number") from None
    if v < 0:
        raise argparse.ArgumentTypeError(f"{text!r} must be 0 or more")
    return v


def _positive_float(text: str) -> float:
    try:
        v = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a number") from None
    if not v > 0 or v == float("inf"):
        raise argparse.ArgumentTypeError(f"{text!r} must be a positive number")
    return v


def _strip_unit(text: str, units: tuple[str, ...]) -> str:
    """'300km' or '300 km' -> '300' for an option measured in units[0]."""
    t = text.strip()
    for u in units:
        if t.lower().endswith(u):
            return t[: len(t) - len(u)].strip()
    return t


def _km(text: str) -> float:
    t = _strip_unit(text, ("km",))
    if t == text.strip() and t.lower().endswith("m"):  # metres, or another unit
        raise argparse.ArgumentTypeError(f"{text!r}: give the distance in km (a number, 'km' optional)")
    return _positive_float(t)


def _cap_radius(text: str) -> float:
    v = _positive_float(_strip_unit(text, ("degrees", "degree", "deg", "\u00b0")))
    if v > 180:
        raise argparse.ArgumentTypeError(f"{text!r} must be at most 180 degrees")
    return v


def _chunks(text: str) -> dict[str, int]:
    from sphex.xr.streaming import parse_chunks

    try:
        return parse_chunks(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def _degree_range(text: str) -> tuple[int, int]:
    a, sep, b = text.partition(":")
    try:
        l1, l2 = int(a), int(b)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not L1:L2 (two whole numbers)") from None
    if not sep or not 0 <= l1 < l2:
        raise argparse.ArgumentTypeError(f"{text!r} must be L1:L2 with 0 <= L1 < L2")
    return l1, l2


# ---------------------------------------------------------------------------
# shared steps
# ---------------------------------------------------------------------------
def _open_input(path: str):
    import sphex.xr as sxr

    return sxr.files.open_netcdf(path)


def _gridded_vars(ds) -> list[str]:
    import sphex.xr as sxr

    out = []
    for k, v in ds.data_vars.items():
        try:
            sxr.find_grid(v)
        except ValueError:
            continue
        out.append(str(k))
    return out


def _load_var(path: str, var: str | None):
    """Open ``path`` and return (DataArray loaded in memory, file global attrs)."""
    ds = _open_input(path)
    try:
        if var is None:
            names = _gridded_vars(ds)
            if len(names) != 1:
                listed = ", ".join(map(str, ds.data_vars)) or "none"
                raise UserError(f"{path}: choose a variable with -v (variables: {listed})")
            var = names[0]
        if var not in ds.data_vars:
            listed = ", ".join(map(str, ds.data_vars)) or "none"
            raise UserError(f"{path} has no variable {var!r} (variables: {listed})")
        da = ds[var].load()
        attrs = dict(ds.attrs)
    finally:
        ds.close()
    return da, attrs


def _grid_info(da, path: str):
    import sphex.xr as sxr

    try:
        return sxr.find_grid(da)
    except ValueError as exc:
        raise UserError(f"{path}: {exc}") from None


def _target_grid(spec: str):
    """A Grid (from text) or a Dataset whose coordinates define the grid."""
    import sphex.xr as sxr

    head = spec.split(":", 1)[0].lower()
    if ":" in spec and head in ("gauss", "equiangular") and not Path(spec).exists():
        return sxr.parse_grid(spec)
    if Path(spec).exists():
        ds = _open_input(spec)
        try:
            info = sxr.find_grid(ds)
        except ValueError as exc:
            ds.close()
            raise UserError(f"--grid {spec}: {exc}") from None
        import xarray as xr

        coords = xr.Dataset(coords={info.lat_name: ds[info.lat_name],
                                    info.lon_name: ds[info.lon_name]}).load()
        ds.close()
        return coords
    raise UserError(f"--grid {spec!r} is neither a file nor gauss:LMAX or "
                    "equiangular:NLATxNLON:LAYOUT")


def _n_fields(da, info) -> int:
    n = 1
    for d, size in da.sizes.items():
        if d not in (info.lat_dim, info.lon_dim):
            n *= size
    return n


def _progress(total: int, label: str):
    from sphex._io import Progress

    return Progress(total, label)


def _write_field(da, path: str, overwrite: bool, global_attrs: dict, line: str) -> None:
    import sphex.xr as sxr

    ds = da.to_dataset(name=da.name if da.name is not None else "field")
    attrs = {k: v for k, v in global_attrs.items() if k != "history"}
    attrs["history"] = sxr.fields.append_history(global_attrs, line)
    ds.attrs = attrs
    sxr.write_dataset(ds, path, overwrite)


def _keep_precision(out, da):
    import numpy as np

    return out.astype(np.float32) if da.dtype == np.float32 else out


def _say(*lines: str) -> None:
    print("\n".join(lines))


# ---------------------------------------------------------------------------
# subcommands
# ---------------------------------------------------------------------------
def _cmd_analyze(a: argparse.Namespace) -> int:
    from sphex.xr.output import check_output_path

    check_output_path(a.output, a.overwrite)
    import sphex.xr as sxr

    is_text = Path(a.output).suffix.lower() in (".txt", ".tab", ".dat")
    if not is_text:
        # netCDF output: stream the input chunk by chunk along its non-spatial axes
        from sphex.xr.streaming import stream_analyze

        r = stream_analyze(a.input, a.var, a.output, a.lmax, a.norm, a.chunks, a.scheduler,
                           a.overwrite, condon_shortley=not a.no_phase, radius=a.radius)
        _say(f"read  {a.input}: {r.variable!r} on a {r.grid}",
             f"wrote {a.output}: {r.fields} field{'s' if r.fields != 1 else ''}, degrees "
             f"0..{r.lmax}, {a.norm} normalisation, "
             f"{'no phase' if a.no_phase else 'Condon-Shortley phase'}")
        return 0
    da, _ = _load_var(a.input, a.var)
    info = _grid_info(da, a.input)
    lmax = sxr.coords.check_lmax(a.lmax, info.grid, False, f"variable {da.name!r}")
    n = _n_fields(da, info)
    if is_text and n != 1:
        raise UserError(f"a text table holds one field but {da.name!r} has {n}; write .nc instead")
    with _progress(n, "analyze") as bar:
        ds = sxr.analyze(da, lmax, norm=a.norm, condon_shortley=not a.no_phase,
                         radius=a.radius, progress=bar if bar.enabled else None)
    if is_text:
        sxr.write_table(sxr.to_harmonics(ds), a.output, overwrite=a.overwrite,
                        name=ds.attrs.get("field_name"))
    else:
        ds.attrs["history"] = f"sphex analyze {a.input} -v {da.name} --lmax {lmax} --norm {a.norm}"
        sxr.write_dataset(ds, a.output, a.overwrite)
    _say(f"read  {a.input}: {da.name!r} on a {info.describe()}",
         f"wrote {a.output}: {n} field{'s' if n != 1 else ''}, degrees 0..{lmax}, "
         f"{a.norm} normalisation, {'no phase' if a.no_phase else 'Condon-Shortley phase'}")
    return 0


def _cmd_synthesize(a: argparse.Namespace) -> int:
    from sphex.xr.output import check_output_path

    check_output_path(a.output, a.overwrite)
    import sphex.xr as sxr

    ds = sxr.open_coefficients(a.input)
    target = _target_grid(a.grid)
    info, _, _ = sxr.coords.synthesis_target(target)
    l_file = ds.sizes["degree"] - 1
    if a.lmax is not None and a.lmax > l_file:
        raise UserError(f"--lmax {a.lmax} is above the coefficients' highest degree {l_file}")
    out = sxr.synthesize(ds, target, lmax=a.lmax)
    if a.name:
        out.name = a.name
    used = l_file if a.lmax is None else a.lmax
    note = ""
    if used > info.grid.lmax_exact:
        note = (f" (note: degrees above {info.grid.lmax_exact} are not resolved by this grid "
                "and alias on re-analysis)")
    _write_field(out, a.output, a.overwrite, {},
                 f"sphex synthesize {a.input} --grid {a.grid}")
    _say(f"wrote {a.output}: {out.name!r} to degree {used} on a {info.describe()}{note}")
    return 0


def _power_table(power) -> tuple[list[str], Any]:
    """Column labels and a (nlabels, ndegree) array from a degree-power DataArray."""
    import numpy as np

    extra = [d for d in power.dims if d != "degree"]
    if not extra:
        return ["power"], np.asarray(power.values)[None, :]
    stacked = power.stack(__field__=extra).transpose("__field__", "degree")
    labels = []
    for idx in stacked["__field__"].values:
        idx = idx if isinstance(idx, tuple) else (idx,)
        labels.append(" ".join(f"{d}={_label(v)}" for d, v in zip(extra, idx)))
    return labels, np.asarray(stacked.values)


def _label(v: Any) -> str:
    import numpy as np

    if isinstance(v, np.datetime64) or hasattr(v, "to_datetime64"):
        return str(np.datetime_as_string(np.datetime64(v, "m")))
    return str(v)


def _cmd_spectrum(a: argparse.Namespace) -> int:
    from sphex.xr.output import atomic_output, check_output_path

    for p in (a.plot, a.csv):
        if p:
            check_output_path(p, a.overwrite)
    import numpy as np
    import sphex.xr as sxr

    if _looks_like_coefficients(a.input):
        ds = sxr.open_coefficients(a.input)
        if a.lmax is not None:
            ds = ds.isel(degree=slice(0, a.lmax + 1), order=slice(0, a.lmax + 1))
        source = f"coefficients to degree {ds.sizes['degree'] - 1}"
    else:
        da, _ = _load_var(a.input, a.var)
        info = _grid_info(da, a.input)
        lmax = sxr.coords.check_lmax(a.lmax, info.grid, False, f"variable {da.name!r}")
        with _progress(_n_fields(da, info), "analyze") as bar:
            ds = sxr.analyze(da, lmax, progress=bar if bar.enabled else None)
        source = f"{da.name!r} on a {info.describe()}"
    power = sxr.degree_power(ds)
    lmax = power.sizes["degree"] - 1
    if a.slope and a.slope[1] > lmax:
        raise UserError(f"--slope {a.slope[0]}:{a.slope[1]} goes past the highest degree {lmax}")
    labels, table = _power_table(power)
    units = power.attrs.get("units", "")
    deg = np.arange(lmax + 1)
    lines = [f"spectrum of {source}"]
    for lab, row in zip(labels[:8], table[:8]):
        ms = float(row.sum())
        head = f"  {lab}: " if len(labels) > 1 else "  "
        lines.append(f"{head}mean square {ms:.6g} {units}, rms {np.sqrt(max(ms, 0.0)):.6g}"
                     f"{' ' + _root_units(units) if units else ''}")
    if len(labels) > 8:
        lines.append(f"  ... and {len(labels) - 8} more fields")
    fit = None
    if a.slope:
        fit = _fit_slope(table.mean(axis=0), *a.slope)
        lines.append(f"  power-law fit over degrees {a.slope[0]}..{a.slope[1]}"
                     f"{' (mean of all fields)' if len(labels) > 1 else ''}: slope {fit[0]:.3f}")
    if a.csv:
        with atomic_output(a.csv, a.overwrite) as tmp:
            with open(tmp, "w", encoding="utf-8") as f:
                f.write("# degree power: contribution of each degree to the area mean of the "
                        f"squared field{'; units ' + units if units else ''}\n")
                f.write("degree," + ",".join(_csv_cell(x) for x in labels) + "\n")
                for l in deg:
                    f.write(f"{l}," + ",".join(f"{v:.17g}" for v in table[:, l]) + "\n")
        lines.append(f"wrote {a.csv}")
    if a.plot:
        from sphex import plot

        curves = table if len(labels) <= 6 else None
        fig = plot.power_figure(
            list(curves) if curves is not None else [table.mean(axis=0)],
            labels=labels if curves is not None else [f"mean of {len(labels)} fields"],
            band=None if curves is not None else (table.min(axis=0), table.max(axis=0)),
            units=units or None, fit=a.slope, title=f"Degree power: {Path(a.input).name}")
        plot.save(fig, a.plot, overwrite=a.overwrite)
        lines.append(f"wrote {a.plot}")
    if not a.csv and not a.plot:
        w = max(22, *(len(x) for x in labels)) if labels else 22
        lines.append("degree " + " ".join(f"{x:>{w}}" for x in labels))
        for l in deg:
            lines.append(f"{l:6d} " + " ".join(f"{v:{w}.15g}" for v in table[:, l]))
    _say(*lines)
    return 0


def _root_units(units: str) -> str:
    if units.endswith("^2"):
        u = units[:-2]
        return u[1:-1] if u.startswith("(") and u.endswith(")") else u
    return f"sqrt({units})"


def _csv_cell(s: str) -> str:
    return '"' + s.replace('"', '""') + '"' if ("," in s or '"' in s) else s


def _fit_slope(power, l1: int, l2: int) -> tuple[float, float]:
    from sphex.spectra import spectral_slope

    res = spectral_slope(power, l1, l2)
    return float(res[0]), float(res[1])


def _looks_like_coefficients(path: str) -> bool:
    import sphex.xr as sxr

    if sxr.tables.is_table_file(path):
        return True
    ds = _open_input(path)
    try:
        return sxr.is_coefficients(ds)
    finally:
        ds.close()


def _cmd_smooth(a: argparse.Namespace) -> int:
    from sphex.xr.output import check_output_path

    check_output_path(a.output, a.overwrite)
    import sphex.xr as sxr

    da, gattrs = _load_var(a.input, a.var)
    info = _grid_info(da, a.input)
    lmax = sxr.coords.check_lmax(a.lmax, info.grid, False, f"variable {da.name!r}")
    radius = a.planet_radius
    note = ""
    if a.gaussian is not None and radius is None:
        radius = _file_radius_km(da.attrs) or _file_radius_km(gattrs)
        if radius is None:
            radius = 6371.0
            note = " (no --planet-radius and no planet_radius_km attribute: assumed Earth, 6371 km)"
    n = _n_fields(da, info)
    with _progress(n, "smooth") as bar:
        out = sxr.smooth(da, gaussian_km=a.gaussian, cap_deg=a.cap, band=a.band,
                         planet_radius_km=radius, lmax=lmax)
        bar.update(n)
    out = _keep_precision(out, da)
    how = out.attrs["history"].splitlines()[-1]
    _write_field(out, a.output, a.overwrite, gattrs, how)
    _say(f"read  {a.input}: {da.name!r} on a {info.describe()}",
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


def _cmd_regrid(a: argparse.Namespace) -> int:
    from sphex.xr.output import check_output_path

    check_output_path(a.output, a.overwrite)
    import sphex.xr as sxr

    da, gattrs = _load_var(a.input, a.var)
    info = _grid_info(da, a.input)
    target = _target_grid(a.grid)
    tinfo, _, _ = sxr.coords.synthesis_target(target)
    lmax = a.lmax
    if lmax is not None:
        sxr.coords.check_lmax(lmax, info.grid, False, f"variable {da.name!r}")
    n = _n_fields(da, info)
    with _progress(n, "regrid") as bar:
        out = sxr.regrid(da, target, lmax=lmax)
        bar.update(n)
    out = _keep_precision(out, da)
    how = out.attrs["history"].splitlines()[-1]
    _write_field(out, a.output, a.overwrite, gattrs, how)
    _say(f"read  {a.input}: {da.name!r} on a {info.describe()}",
         f"wrote {a.output}: on a {tinfo.describe()}")
    return 0


def _cmd_inspect(a: argparse.Namespace) -> int:
    import sphex.xr as sxr

    if sxr.tables.is_table_file(a.input):
        ds = sxr.open_coefficients(a.input)
        _say(f"{a.input}: text coefficient table", *_describe_coefficients(ds))
        return 0
    ds = _open_input(a.input)
    try:
        lines = [f"{a.input}:"]
        if sxr.is_coefficients(ds):
            lines += _describe_coefficients(ds)
        else:
            if not ds.data_vars:
                lines.append("  no data variables")
            for name, v in ds.data_vars.items():
                dims = ", ".join(f"{d}: {s}" for d, s in v.sizes.items()) or "scalar"
                units = v.attrs.get("units")
                head = f"  {name} ({dims}){' [' + str(units) + ']' if units else ''}"
                try:
                    info = sxr.find_grid(v)
                except ValueError as exc:
                    reason = str(exc).removeprefix(f"variable {str(name)!r}: ")
                    lines.append(f"{head}\n    not usable: {reason}")
                    continue
                extra = [d for d in v.dims if d not in (info.lat_dim, info.lon_dim)]
                batch = f"; {_n_fields(v, info)} fields over {', '.join(map(str, extra))}" if extra else ""
                lines.append(f"{head}\n    {info.describe()}{batch}")
    finally:
        ds.close()
    _say(*lines)
    return 0


def _describe_coefficients(ds) -> list[str]:
    at = ds.attrs
    extra = [d for d in ds["cos_coef"].dims if d not in ("degree", "order")]
    lines = [f"  coefficients of {at.get('field_name', 'a field')!r} to degree {ds.sizes['degree'] - 1}",
             f"  normalisation {at.get('normalization', 'orthonormal')}, phase "
             f"{at.get('phase_convention', 'condon-shortley')}"]
    if "reference_radius" in at:
        lines.append(f"  reference radius {float(at['reference_radius']):g} m")
    if "units" in at:
        lines.append(f"  units {at['units']}")
    if extra:
        lines.append("  extra dimensions: " + ", ".join(f"{d} ({ds.sizes[d]})" for d in extra))
    return lines


def _cmd_demo(a: argparse.Namespace) -> int:
    from sphex import demo

    return demo.run(a.out, overwrite=a.overwrite)


# ---------------------------------------------------------------------------
def _fail(command: str | None, exc: BaseException) -> int:
    msg = " ".join(str(exc).split()) or type(exc).__name__
    where = f"{PROG} {command}" if command else PROG
    sys.stderr.write(f"{where}: error: {msg}\n")
    return 2


def _on_term(signum: int, frame: Any) -> None:
    raise KeyboardInterrupt


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; returns the exit status.

    Parameters
    ----------
    argv : sequence of str, optional
        Arguments without the program name (default ``sys.argv[1:]``).

    Returns
    -------
    int
        0 on success, 2 on a user error, 130 when interrupted.
    """
    argv = list(sys.argv[1:] if argv is None else argv)
    if argv and argv[0] == "bench":
        from sphex import bench

        return int(bench.main(argv[1:]) or 0)
    parser = _build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "func", None):
        parser.print_help()
        return 0
    debug = os.environ.get("SPHEX_DEBUG", "") not in ("", "0")
    previous = None
    try:
        previous = signal.signal(signal.SIGTERM, _on_term)
    except (ValueError, OSError):  # not in the main thread
        pass
    try:
        return int(args.func(args) or 0)
    except BrokenPipeError:  # output piped into head & co.: not an error
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        return 0
    except KeyboardInterrupt:
        sys.stderr.write(f"{PROG} {args.command}: interrupted; no output written\n")
        return 130
    except (UserError, ValueError, OSError) as exc:
        if debug:
            raise
        return _fail(args.command, exc)
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)

if __name__ == "__main__":
    raise SystemExit(main())
