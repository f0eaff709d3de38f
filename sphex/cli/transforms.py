"""``sphex analyze`` (grid file -> coefficient file) and ``sphex synthesize`` (back)."""
from __future__ import annotations

import argparse
import sys
from pathlib import Path
from typing import Any

from sphex.cli.progress import announce_kernel_preparation
from sphex.cli.radius import add_radius_option, choose_radius
from sphex.cli.shared import (
    UserError, add_command, add_output_arguments, check_paths, chunk_spec, count_fields, grid_file,
    grid_of, load_variable, open_input, positive_number, progress_bar, say, target_grid,
    whole_number, write_field,
)

#: The normalisations by their full names (sphex.legendre.NORMS; repeated here so that
#: building the parser imports no numeric module).
NORMS = ("orthonormal", "full", "schmidt", "unnormalized")

ANALYZE_EXAMPLE = """\
The coefficient file has dimensions degree and order (plus any extra ones such
as time) and variables cos_coef / sin_coef; its attributes state the
normalisation, phase convention, lmax, reference radius and units.  The
radius is --radius (km, or 1350km / 1350000m), else the input's
planet_radius_km attribute.  A file name ending in .txt gets a plain text
table (one field only).

Fields with missing values (NaN, such as ocean-only fields) are refused unless
--missing fit: each field is then estimated from its observed cells by least
squares (nothing is filled); the file records the residual RMS, iterations and
condition estimate.  Large gaps need --damping (a warning says so).

example:
  sphex analyze data_demo/velanthe_topography.nc -v topography --lmax 60 -o topo_coef.nc
  sphex analyze ocean_only.nc -v ssh --lmax 40 --missing fit --damping 1e-4 -o ssh_coef.nc
"""

SYNTHESIZE_EXAMPLE = """\
example:
  sphex synthesize topo_coef.nc --grid gauss:90 -o topo_gauss.nc
  sphex synthesize topo_coef.nc --grid data_demo/velanthe_topography.nc -o topo_back.nc
"""


def register(sub: Any) -> None:
    """Add ``analyze`` and ``synthesize`` to the subcommands."""
    q = add_command(sub, "analyze", "Spherical-harmonic coefficients of a gridded netCDF variable",
                    ANALYZE_EXAMPLE)
    q.add_argument("input", metavar="IN.nc", help="netCDF file with a global gridded variable")
    q.add_argument("-v", "--var", metavar="VAR", help="variable (optional if only one is gridded)")
    q.add_argument("--lmax", type=whole_number, metavar="N",
                   help="highest degree (default: the grid's exact limit)")
    q.add_argument("--norm", default="orthonormal", type=normalisation,
                   metavar="{" + ",".join(NORMS) + "}",
                   help="normalisation (default orthonormal)")
    q.add_argument("--no-phase", action="store_true",
                   help="leave out the Condon-Shortley phase (-1)^m")
    add_radius_option(q, "reference radius to record with the coefficients")
    q.add_argument("--chunks", type=chunk_spec, metavar="DIM=N",
                   help="fields per chunk when streaming a long series (default: about 16 MiB of "
                        "input per chunk along time)")
    q.add_argument("--scheduler", metavar="ADDRESS",
                   help="run on this dask.distributed scheduler (e.g. tcp://10.0.0.5:8786) instead "
                        "of threads in this process")
    q.add_argument("--missing", choices=["raise", "fit"], default="raise",
                   help="fields with NaN: refuse them (raise, the default) or fit the observed "
                        "cells by least squares (fit)")
    q.add_argument("--damping", type=positive_number, metavar="X",
                   help="with --missing fit: Tikhonov damping, for gaps too large for lmax")
    add_output_arguments(q, "output coefficient file (.nc, or .txt for a text table)")
    q.set_defaults(func=run_analyze)

    q = add_command(sub, "synthesize", "Gridded field from a coefficient file", SYNTHESIZE_EXAMPLE)
    q.add_argument("input", metavar="COEF.nc", help="coefficient file (netCDF or text table)")
    q.add_argument("--grid", required=True, metavar="GRID",
                   help="netCDF file whose coordinates define the grid, gauss:LMAX, or "
                        "equiangular:NLATxNLON:LAYOUT")
    q.add_argument("--lmax", type=whole_number, metavar="N", help="truncate to this degree first")
    q.add_argument("--name", metavar="NAME", help="output variable name (default: the field's)")
    add_output_arguments(q)
    q.set_defaults(func=run_synthesize)


def normalisation(text: str) -> str:
    """A normalisation by its full name; a clipped old name gets the full one in the message."""
    if text in NORMS:
        return text
    from sphex.legendre import check_norm

    try:
        return check_norm(text)
    except ValueError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def run_analyze(a: argparse.Namespace) -> int:
    """netCDF output streams the input chunk by chunk; a text table is analysed in memory."""
    check_paths([a.input], [a.output], a.overwrite)
    phase = "no phase" if a.no_phase else "Condon-Shortley phase"
    if a.damping is not None and a.missing != "fit":
        raise UserError("--damping only applies to --missing fit; add it or drop --damping")
    if a.missing == "fit":
        return run_analyze_fit(a, phase)
    if Path(a.output).suffix.lower() not in (".txt", ".tab", ".dat"):
        return _analyze_streaming(a, phase)
    from sphex.xr.coefficients import to_harmonics
    from sphex.xr.coords import check_lmax
    from sphex.xr.fields import analyze
    from sphex.xr.tables import write_table

    da, gattrs = load_variable(a.input, a.var)
    info = grid_of(da, a.input)
    lmax = check_lmax(a.lmax, info.grid, False, f"variable {da.name!r}")
    n = count_fields(da, info)
    if n != 1:
        raise UserError(f"a text table holds one field but {da.name!r} has {n}; write .nc instead")
    radius = choose_radius("analyze", a.radius, ("the variable's", da.attrs),
                           ("the file's", gattrs))
    say(f"read  {a.input}: {da.name!r} on a {info.describe()}")
    announce_kernel_preparation("analyze")
    with progress_bar(n, "analyze") as bar:
        ds = analyze(da, lmax, norm=a.norm, condon_shortley=not a.no_phase,
                     radius=None if radius is None else radius.metres, progress=bar)
    write_table(to_harmonics(ds), a.output, overwrite=a.overwrite,
                name=ds.attrs.get("field_name"))
    say(f"wrote {a.output}: {n} field, degrees 0..{lmax}, {a.norm} normalisation, {phase}",
        _radius_line(radius))
    return 0


def _analyze_streaming(a: argparse.Namespace, phase: str) -> int:
    """``analyze`` to netCDF: the input is read lazily and streamed into the output."""
    from sphex.xr.coords import choose_variable
    from sphex.xr.streaming import stream_analyze

    src = open_input(a.input)
    try:
        try:
            name = choose_variable(src, a.var, a.input)
        except ValueError as exc:
            raise UserError(str(exc)) from None
        info = grid_of(src[name], a.input)
        n = count_fields(src[name], info)
        radius = choose_radius("analyze", a.radius, ("the variable's", src[name].attrs),
                               ("the file's", src.attrs))
    finally:
        src.close()
    say(f"read  {a.input}: {name!r} on a {info.describe()}")
    announce_kernel_preparation("analyze")
    with progress_bar(n, "analyze") as bar:
        r = stream_analyze(a.input, name, a.output, a.lmax, a.norm, a.chunks, a.scheduler,
                           a.overwrite, condon_shortley=not a.no_phase,
                           radius=None if radius is None else radius.metres, progress=bar)
    say(f"wrote {a.output}: {r.fields} field{'s' if r.fields != 1 else ''}, degrees "
        f"0..{r.lmax}, {a.norm} normalisation, {phase}", _radius_line(radius))
    return 0


def _radius_line(radius) -> str:
    if radius is None:
        return ("      no radius recorded: none given with --radius and no planet_radius_km "
                "attribute")
    return f"      {radius.describe()}, recorded in the coefficient file"


def run_analyze_fit(a: argparse.Namespace, phase: str) -> int:
    """--missing fit: the fields are fitted in memory, one by one, with the core's warnings
    shown as one line each."""
    import warnings

    import numpy as np

    from sphex.least_squares import IllPosedWarning
    from sphex.xr.coefficients import to_harmonics
    from sphex.xr.coords import check_lmax
    from sphex.xr.fields import analyze
    from sphex.xr.files import write_harmonics
    from sphex.xr.tables import write_table

    da, gattrs = load_variable(a.input, a.var)
    info = grid_of(da, a.input)
    lmax = check_lmax(a.lmax, info.grid, False, f"variable {da.name!r}")
    n = count_fields(da, info)
    radius = choose_radius("analyze", a.radius, ("the variable's", da.attrs),
                           ("the file's", gattrs))
    table = Path(a.output).suffix.lower() in (".txt", ".tab", ".dat")
    if table and n != 1:
        raise UserError(f"a text table holds one field but {da.name!r} has {n}; write .nc instead")
    with warnings.catch_warnings(record=True) as caught, progress_bar(100 * n, "fit") as bar:
        warnings.simplefilter("always", IllPosedWarning)
        ds = analyze(da, lmax, norm=a.norm, condon_shortley=not a.no_phase,
                     radius=None if radius is None else radius.metres,
                     missing="fit", damping=a.damping or 0.0,
                     progress=bar if bar.enabled else None)
    for w in caught:
        print(f"sphex analyze: warning: {w.message}", file=sys.stderr)
    if table:
        write_table(to_harmonics(ds), a.output, overwrite=a.overwrite,
                    name=ds.attrs.get("field_name"))
    else:
        write_harmonics(ds, a.output, overwrite=a.overwrite)
    units = f" {da.attrs['units']}" if "units" in da.attrs else ""
    rms = np.atleast_1d(ds.attrs["fit_residual_rms"])
    its = np.atleast_1d(ds.attrs["fit_iterations"])
    cond = np.atleast_1d(ds.attrs["fit_condition_estimate"])
    say(f"read  {a.input}: {da.name!r} on a {info.describe()}",
        f"fit   observed {100 * float(np.min(ds.attrs['fit_observed_fraction'])):.1f}% of the area"
        f"{' or more' if n > 1 else ''}; residual rms {rms.max():.3g}{units}"
        f"{' (largest)' if n > 1 else ''}, {its.max()} iterations{' (most)' if n > 1 else ''}, "
        f"condition estimate {np.max(cond):.3g}, damping {a.damping or 0:g}",
        f"wrote {a.output}: {n} field{'s' if n != 1 else ''}, degrees 0..{lmax}, "
        f"{a.norm} normalisation, {phase}")
    return 0


def run_synthesize(a: argparse.Namespace) -> int:
    check_paths([a.input, grid_file(a.grid)], [a.output], a.overwrite)
    from sphex.xr.coords import synthesis_target
    from sphex.xr.fields import synthesize
    from sphex.xr.files import open_coefficients

    ds = open_coefficients(a.input)
    target = target_grid(a.grid)
    info, _, _ = synthesis_target(target)
    l_file = ds.sizes["degree"] - 1
    if a.lmax is not None and a.lmax > l_file:
        raise UserError(f"--lmax {a.lmax} is above the coefficients' highest degree {l_file}")
    n = 1
    for d, size in ds["cos_coef"].sizes.items():
        n *= size if d not in ("degree", "order") else 1
    say(f"read  {a.input}: coefficients of {ds.attrs.get('field_name', 'a field')!r} to degree "
        f"{l_file}, {n} field{'s' if n != 1 else ''}")
    announce_kernel_preparation("synthesize")
    with progress_bar(n, "synthesize") as bar:
        out = synthesize(ds, target, lmax=a.lmax, progress=bar)
    if a.name:
        out.name = a.name
    elif out.name is None:
        out.name = "field"
    used = l_file if a.lmax is None else a.lmax
    note = ""
    if used > info.grid.lmax_exact:
        note = (f" (note: degrees above {info.grid.lmax_exact} are not resolved by this grid "
                "and alias on re-analysis)")
    attrs = {}
    if "reference_radius" in ds.attrs:      # the radius travels with the field
        attrs["planet_radius_km"] = float(ds.attrs["reference_radius"]) / 1e3
    write_field(out, a.output, a.overwrite, attrs, f"sphex synthesize {a.input} --grid {a.grid}")
    say(f"wrote {a.output}: {out.name!r} to degree {used} on a {info.describe()}{note}")
    return 0


