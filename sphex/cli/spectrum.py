"""``sphex spectrum``: the degree power spectrum as a table, a CSV file or a plot."""
from __future__ import annotations

import argparse
from pathlib import Path
from typing import Any

from sphex.cli.shared import (
    UserError, add_command, check_paths, count_fields, degree_range, grid_of, load_variable, open_input,
    progress_bar, say, whole_number,
)

EXAMPLE = """\
Degree power: the contribution of each degree to the area mean of the squared
field (its sum is the mean square), in the field's units squared.  Without
--csv or --plot the table is printed.

example:
  sphex spectrum topo_coef.nc --plot topo_spectrum.png --slope 10:60
  sphex spectrum my_field.nc -v topo --csv topo_power.csv
  sphex spectrum velanthe_gravity.gfc --csv velanthe_degree_variances.csv
"""

#: Fields summarised one by one in the report; more are counted.
LISTED_FIELDS = 8
#: Fields drawn as curves on the plot; more are drawn as their mean and range.
DRAWN_FIELDS = 6


def register(sub: Any) -> None:
    """Add ``spectrum`` to the subcommands."""
    q = add_command(sub, "spectrum",
                    "Degree power spectrum of coefficients or of a gridded variable", EXAMPLE)
    q.add_argument("input", metavar="FILE", help="coefficient file, netCDF grid file with -v, or "
                   "model file (gravity exchange, .shc, sphex model)")
    q.add_argument("-v", "--var", metavar="VAR", help="variable of a grid file")
    q.add_argument("--lmax", type=whole_number, metavar="N", help="degree limit")
    q.add_argument("--plot", metavar="PNG", help="write a log-log plot")
    q.add_argument("--csv", metavar="CSV", help="write the spectrum as CSV")
    q.add_argument("--slope", metavar="L1:L2", type=degree_range,
                   help="fit a power law over degrees L1..L2 (printed, and drawn on the plot)")
    q.add_argument("--overwrite", action="store_true", help="replace PNG/CSV if they exist")
    q.set_defaults(func=run)


def run(a: argparse.Namespace) -> int:
    check_paths([a.input], [a.plot, a.csv], a.overwrite)
    import numpy as np
    import xarray as xr

    from sphex.xr.fields import degree_power

    ds, source = _coefficients_of_input(a)
    power = ds if isinstance(ds, xr.DataArray) else degree_power(ds)  # model files: already
    lmax = power.sizes["degree"] - 1
    if a.slope and a.slope[1] > lmax:
        raise UserError(f"--slope {a.slope[0]}:{a.slope[1]} goes past the highest degree {lmax}")
    labels, table = _power_table(power)
    units = power.attrs.get("units", "")
    lines = [f"spectrum of {source}"] + _mean_square_lines(labels, table, units)
    if a.slope:
        fit = _fit_slope(table.mean(axis=0), *a.slope)
        lines.append(f"  power-law fit over degrees {a.slope[0]}..{a.slope[1]}"
                     f"{' (mean of all fields)' if len(labels) > 1 else ''}: slope {fit[0]:.3f}")
    if a.csv:
        _write_csv(a.csv, a.overwrite, labels, table, units)
        lines.append(f"wrote {a.csv}")
    if a.plot and isinstance(ds, xr.DataArray):  # a model file: signal, error and their crossing
        from sphex.cli.potential import draw_model_spectrum

        draw_model_spectrum(a.plot, a.overwrite, power, Path(a.input).name)
    elif a.plot:
        _draw_power_plot(a.plot, a.overwrite, labels, table, units, a.slope, Path(a.input).name)
    if a.plot:
        lines.append(f"wrote {a.plot}")
    if not a.csv and not a.plot:
        w = max(22, *(len(x) for x in labels)) if labels else 22
        lines.append("degree " + " ".join(f"{x:>{w}}" for x in labels))
        for l in np.arange(lmax + 1):
            lines.append(f"{l:6d} " + " ".join(f"{v:{w}.15g}" for v in table[:, l]))
    say(*lines)
    return 0


def _coefficients_of_input(a: argparse.Namespace) -> tuple[Any, str]:
    """The coefficient Dataset of the input (read, or analysed from a grid file) and what it is."""
    from sphex.cli.potential import is_model_file, model_spectra
    from sphex.xr.coords import check_lmax
    from sphex.xr.fields import analyze
    from sphex.xr.files import open_coefficients

    if is_model_file(a.input):  # degree variances (and error degree variances) of the model
        return model_spectra(a.input, a.lmax)
    if _looks_like_coefficients(a.input):
        ds = open_coefficients(a.input)
        if a.lmax is not None:
            ds = ds.isel(degree=slice(0, a.lmax + 1), order=slice(0, a.lmax + 1))
        return ds, f"coefficients to degree {ds.sizes['degree'] - 1}"
    da, _ = load_variable(a.input, a.var)
    info = grid_of(da, a.input)
    lmax = check_lmax(a.lmax, info.grid, False, f"variable {da.name!r}")
    with progress_bar(count_fields(da, info), "analyze") as bar:
        ds = analyze(da, lmax, progress=bar if bar.enabled else None)
    return ds, f"{da.name!r} on a {info.describe()}"


def _looks_like_coefficients(path: str) -> bool:
    from sphex.xr.coefficients import is_coefficients
    from sphex.xr.tables import is_table_file

    if is_table_file(path):
        return True
    ds = open_input(path)
    try:
        return is_coefficients(ds)
    finally:
        ds.close()


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
        labels.append(" ".join(f"{d}={_coordinate_text(v)}" for d, v in zip(extra, idx)))
    return labels, np.asarray(stacked.values)


def _coordinate_text(v: Any) -> str:
    """A coordinate value for a column label (times to the minute)."""
    import numpy as np

    if isinstance(v, np.datetime64) or hasattr(v, "to_datetime64"):
        return str(np.datetime_as_string(np.datetime64(v, "m")))
    return str(v)


def _mean_square_lines(labels: list[str], table: Any, units: str) -> list[str]:
    """Mean square and RMS of the first fields (the sums of their spectra)."""
    import numpy as np

    lines = []
    for lab, row in zip(labels[:LISTED_FIELDS], table[:LISTED_FIELDS]):
        ms = float(row.sum())
        head = f"  {lab}: " if len(labels) > 1 else "  "
        lines.append(f"{head}mean square {ms:.6g} {units}, rms {np.sqrt(max(ms, 0.0)):.6g}"
                     f"{' ' + _root_units(units) if units else ''}")
    if len(labels) > LISTED_FIELDS:
        lines.append(f"  ... and {len(labels) - LISTED_FIELDS} more fields")
    return lines


def _root_units(units: str) -> str:
    if units.endswith("^2"):
        u = units[:-2]
        return u[1:-1] if u.startswith("(") and u.endswith(")") else u
    return f"sqrt({units})"


def _fit_slope(power, l1: int, l2: int) -> tuple[float, float]:
    from sphex.spectra import spectral_slope

    res = spectral_slope(power, l1, l2)
    return float(res[0]), float(res[1])


def _write_csv(path: str, overwrite: bool, labels: list[str], table: Any, units: str) -> None:
    from sphex.xr.output import atomic_output

    with atomic_output(path, overwrite) as tmp:
        with open(tmp, "w", encoding="utf-8") as f:
            f.write("# degree power: contribution of each degree to the area mean of the "
                    f"squared field{'; units ' + units if units else ''}\n")
            f.write("degree," + ",".join(_csv_cell(x) for x in labels) + "\n")
            for l in range(table.shape[1]):
                f.write(f"{l}," + ",".join(f"{v:.17g}" for v in table[:, l]) + "\n")


def _csv_cell(s: str) -> str:
    return '"' + s.replace('"', '""') + '"' if ("," in s or '"' in s) else s


def _draw_power_plot(path: str, overwrite: bool, labels: list[str], table: Any, units: str,
                     slope: tuple[int, int] | None, name: str) -> None:
    """A log-log plot: one curve per field, or the mean and range of many fields."""
    from sphex import plot

    curves = table if len(labels) <= DRAWN_FIELDS else None
    fig = plot.power_figure(
        list(curves) if curves is not None else [table.mean(axis=0)],
        labels=labels if curves is not None else [f"mean of {len(labels)} fields"],
        band=None if curves is not None else (table.min(axis=0), table.max(axis=0)),
        units=units or None, fit=slope, title=f"Degree power: {name}")
    plot.save(fig, path, overwrite=overwrite)
