"""``sphex spectrum``: degree spectra of one or more inputs, their comparison and isotropy.

The inputs (coefficient files, or grid files analysed first) are read in
order; the report gives each field's mean square and its variance without
degree 0, the share of a grid's variance above the analysed degree limit,
power-law fits, the cross power and correlation of two inputs, and writes a
table (terminal or CSV), a plot and the isotropy picture.  The tables, the
text and the figures are made in :mod:`sphex.cli.spectrum_output`.
"""
from __future__ import annotations

import argparse
from dataclasses import dataclass
from pathlib import Path
from typing import Any

from sphex.cli.progress import announce_kernel_preparation
from sphex.cli.radius import add_radius_option, choose_radius
from sphex.cli.shared import (
    UserError, add_command, check_paths, count_fields, degree_range, grid_of, is_coefficient_file,
    load_variable, progress_bar, say, whole_number,
)

EXAMPLE = """\
Degree power: the contribution of each degree to the area mean of the squared
field (its sum is the mean square), in the field's units squared; --kind
per-coefficient divides it by the 2l+1 coefficients of the degree.  Several
inputs are overlaid, labelled by their variable names; --cross adds the cross
power and correlation of two inputs.  Without --csv, --plot or --isotropy the
table is printed.

example:
  sphex spectrum topo_coef.nc --plot topo_spectrum.png --slope 10:60
  sphex spectrum data_demo/velanthe_topography.nc --csv topo_power.csv
  sphex spectrum topo_coef.nc topo_smooth_coef.nc --cross --plot topo_compare.png
  sphex spectrum topo_coef.nc --isotropy topo_isotropy.png
  sphex spectrum velanthe_gravity.gfc --csv velanthe_degree_variances.csv
"""

#: Fields summarised one by one in the report; more are counted.
LISTED_FIELDS = 8
#: Fields of one input drawn as curves; more are drawn as their mean and range.
DRAWN_FIELDS = 6
#: Spectrum kinds of the command line and the names of sphex.xr.degree_power.
KINDS = {"power": "power", "per-coefficient": "per_coefficient"}


def register(sub: Any) -> None:
    """Add ``spectrum`` to the subcommands."""
    q = add_command(sub, "spectrum",
                    "Degree spectra of one or more inputs, compared and drawn",
                    EXAMPLE)
    q.add_argument("inputs", nargs="+", metavar="FILE",
                   help="coefficient files, netCDF grid files (analysed first), or one model file "
                        "(gravity exchange, .shc, sphex model: its degree variances and their errors)")
    q.add_argument("-v", "--var", metavar="VAR", action="append",
                   help="variable of a grid file: once for all inputs, or once per input")
    q.add_argument("--lmax", type=whole_number, metavar="N", help="degree limit")
    q.add_argument("--kind", choices=list(KINDS), default="power",
                   help="power (default) or per-coefficient: power / (2l+1)")
    q.add_argument("--cross", action="store_true",
                   help="cross power and correlation per degree of the two inputs")
    q.add_argument("--slope", metavar="L1:L2", type=degree_range,
                   help="fit a power law over degrees L1..L2 to each series drawn (printed, and "
                        "drawn on the plot)")
    q.add_argument("--plot", metavar="PNG", help="write a log-log plot")
    q.add_argument("--csv", metavar="CSV", help="write the table as CSV (notes in CSV.txt)")
    q.add_argument("--isotropy", metavar="PNG",
                   help="write the isotropy picture: each degree's power shared among its "
                        "orders, against an isotropic field (one input)")
    add_radius_option(q, "radius for the plot's half-wavelength axis")
    q.add_argument("--overwrite", action="store_true", help="replace existing outputs")
    q.set_defaults(func=run)


@dataclass
class SpectrumInput:
    """One input: its coefficients, and what the report says about it.

    Attributes
    ----------
    path : str
    name : str
        The variable's name (the legend label).
    what : str
        Where the coefficients came from, for the report.
    coef : xarray.Dataset
        Coefficients (read, or analysed from the grid).
    grid_variance : numpy.ndarray or None
        Per field, the grid's variance about its mean by the grid's
        quadrature (grid inputs only).
    radius_sources : list of (str, dict)
        Attribute sets a radius may come from, in order.
    """

    path: str
    name: str
    what: str
    coef: Any
    grid_variance: Any
    radius_sources: list


def run(a: argparse.Namespace) -> int:
    from sphex.cli import spectrum_output as output
    from sphex.cli.potential import is_model_file

    _check_request(a)
    outputs = [a.plot, a.csv, a.isotropy] + ([output.notes_path(a.csv)] if a.csv else [])
    check_paths(list(a.inputs), outputs, a.overwrite)
    if len(a.inputs) == 1 and is_model_file(a.inputs[0]):
        return _run_model(a)
    names = a.var or [None]
    inputs = [_read_input(path, names[min(i, len(names) - 1)], a.lmax)
              for i, path in enumerate(a.inputs)]
    report = output.Report(inputs, KINDS[a.kind], a.slope, a.cross)
    lines = report.summary_lines()
    if a.plot:
        radius = choose_radius("spectrum", a.radius, *inputs[0].radius_sources)
        report.write_plot(a.plot, a.overwrite, radius)
        lines.append(f"wrote {a.plot}" + (f" (half-wavelength axis for {radius.describe()})"
                                          if radius else " (no radius known: no half-wavelength "
                                          "axis; give --radius for one)"))
    if a.csv:
        report.write_csv(a.csv, a.overwrite)
        lines.append(f"wrote {a.csv} (notes in {output.notes_path(a.csv)})")
    if a.isotropy:
        lines += report.write_isotropy(a.isotropy, a.overwrite)
    if not (a.csv or a.plot or a.isotropy):
        lines += report.table_lines()
    say(*lines)
    return 0


def _check_request(a: argparse.Namespace) -> None:
    """Refuse combinations that cannot work, before any reading."""
    n = len(a.inputs)
    if a.var and len(a.var) not in (1, n):
        raise UserError(f"give -v once (for every input) or once per input; got {len(a.var)} for "
                        f"{n} inputs")
    if a.cross and n != 2:
        raise UserError(f"--cross compares two inputs; got {n}")
    if a.isotropy and n != 1:
        raise UserError(f"--isotropy draws one input; got {n} (run once per input)")
    if a.slope and a.lmax is not None and a.slope[1] > a.lmax:
        raise UserError(f"--slope {a.slope[0]}:{a.slope[1]} goes past --lmax {a.lmax}")


def _read_input(path: str, var: str | None, lmax: int | None) -> SpectrumInput:
    """The coefficients of one input (read, or analysed from a grid file)."""
    from sphex.xr.files import open_coefficients

    if is_coefficient_file(path):
        ds = open_coefficients(path)
        if lmax is not None:
            if lmax > ds.sizes["degree"] - 1:
                raise UserError(f"--lmax {lmax} is above the highest degree "
                                f"{ds.sizes['degree'] - 1} of {path}")
            ds = ds.isel(degree=slice(0, lmax + 1), order=slice(0, lmax + 1))
        name = str(ds.attrs.get("field_name", Path(path).stem))
        return SpectrumInput(path, name, f"coefficients to degree {ds.sizes['degree'] - 1}", ds,
                             None, [("the coefficient file's", dict(ds.attrs))])
    return _analyse_grid_input(path, var, lmax)


def _analyse_grid_input(path: str, var: str | None, lmax: int | None) -> SpectrumInput:
    """Analyse a grid file's variable; also the grid's own variance per field."""
    import numpy as np

    from sphex.xr.coords import check_lmax
    from sphex.xr.fields import analyze

    da, gattrs = load_variable(path, var)
    info = grid_of(da, path)
    lmax = check_lmax(lmax, info.grid, False, f"variable {da.name!r}")
    say(f"read  {path}: {da.name!r} on a {info.describe()}")
    announce_kernel_preparation("spectrum")
    with progress_bar(count_fields(da, info), "spectrum") as bar:
        ds = analyze(da, lmax, progress=bar)
    spatial = (info.lat_dim, info.lon_dim)
    batch = [d for d in da.dims if d not in spatial]
    values = np.asarray(da.transpose(*batch, *spatial).values, dtype=np.float64)
    values = values[..., list(info.take)]
    values = values.reshape((-1,) + values.shape[-2:])
    mean = info.grid.integrate(values) / (4 * np.pi)
    mean_square = info.grid.integrate(values ** 2) / (4 * np.pi)
    return SpectrumInput(path, str(da.name), f"{info.describe()}, analysed to degree {lmax}", ds,
                         mean_square - mean ** 2,
                         [("the variable's", dict(da.attrs)), ("the file's", gattrs)])


def _run_model(a: argparse.Namespace) -> int:
    """``spectrum MODEL``: the degree variances of a potential model and, when the file has
    formal errors, its error degree variances; the plot marks where they cross."""
    import csv

    from sphex.cli.potential import draw_model_spectrum, model_spectra
    from sphex.xr.output import atomic_output

    if a.isotropy or a.cross:
        raise UserError("--isotropy and --cross take coefficient or grid files, not a model file")
    spectra, what = model_spectra(a.inputs[0], a.lmax)
    names = [str(v) for v in spectra["series"].values]
    table = spectra.transpose("series", "degree").values
    lines = [f"spectrum of {what}"]
    if a.csv:
        with atomic_output(a.csv, a.overwrite) as tmp:
            with open(tmp, "w", newline="") as f:
                w = csv.writer(f)
                w.writerow(["degree"] + [n.replace(" ", "_") for n in names])
                for l in range(table.shape[1]):
                    w.writerow([l] + [f"{v:.15g}" for v in table[:, l]])
        lines.append(f"wrote {a.csv}")
    if a.plot:
        draw_model_spectrum(a.plot, a.overwrite, spectra, Path(a.inputs[0]).name)
        lines.append(f"wrote {a.plot}")
    if not a.csv and not a.plot:
        lines.append("degree " + " ".join(f"{n:>24}" for n in names))
        for l in range(table.shape[1]):
            lines.append(f"{l:6d} " + " ".join(f"{v:24.15g}" for v in table[:, l]))
    say(*lines)
    return 0

