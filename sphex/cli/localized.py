"""``sphex local-spectrum``: the localised (multitaper) degree power of a region."""
from __future__ import annotations

import argparse
import math
import re
from pathlib import Path
from typing import Any

from sphex.cli.shared import (
    UserError, add_command, cap_radius, check_paths, count_fields, grid_of, is_coefficient_file,
    load_variable, progress_bar, say, whole_number,
)

EXAMPLE = """\
The spectrum of one region: the field is multiplied by concentration windows
(Slepian functions of a spherical cap) centred at --at, and the spectra of the
windowed fields are averaged (multitaper; Wieczorek & Simons 2005).  Each
localised degree blends global degrees l-N..l+N (N = --window-degree); the
estimate is reliable for N <= l <= lmax-N, marked in the output.  A larger
--cap or --window-degree gives more windows and a smaller error; a smaller
--window-degree a sharper spectrum.

Latitudes and longitudes in degrees: --at 28S,128E or --at -28,128.

example:
  sphex local-spectrum data_demo/velanthe_topography.nc --at 28S,128E --cap 40 \\
      --window-degree 12 --csv orun_local.csv --plot orun_local.png
  sphex local-spectrum topo_coef.nc --at 10,-45 --cap 20 --window-degree 15 --windows 4
"""


def centre(text: str) -> tuple[float, float]:
    """``LAT,LON`` in degrees; a value may end in N/S (latitude) or E/W (longitude)."""
    parts = [p.strip() for p in text.split(",")]
    if len(parts) != 2:
        raise argparse.ArgumentTypeError(f"{text!r} is not LAT,LON (for example 28S,128E or -28,128)")
    lat = _angle(parts[0], "NS", text)
    lon = _angle(parts[1], "EW", text)
    if not -90.0 <= lat <= 90.0:
        raise argparse.ArgumentTypeError(
            f"latitude {parts[0]!r} in {text!r} is outside -90..90 (write LAT,LON, latitude first)")
    return lat, lon


def _angle(part: str, hemispheres: str, text: str) -> float:
    sign = 1.0
    if part[-1:].upper() in hemispheres:
        sign = 1.0 if part[-1].upper() == hemispheres[0] else -1.0
        part = part[:-1].strip()
    part = part.rstrip("\u00b0")
    try:
        v = float(part)
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"{text!r} is not LAT,LON in degrees (for example 28S,128E or -28,128)") from None
    if not math.isfinite(v):
        raise argparse.ArgumentTypeError(f"{text!r}: give finite degrees")
    return sign * v


def pick(text: str) -> dict[str, int]:
    """``DIM=INDEX[,DIM=INDEX]``: one field out of a file with extra dimensions."""
    out: dict[str, int] = {}
    for item in text.split(","):
        name, sep, index = item.partition("=")
        try:
            out[name.strip()] = int(index)
        except ValueError:
            raise argparse.ArgumentTypeError(f"{text!r} is not DIM=INDEX[,DIM=INDEX]") from None
        if not sep or not name.strip():
            raise argparse.ArgumentTypeError(f"{text!r} is not DIM=INDEX[,DIM=INDEX]")
    return out


def register(sub: Any) -> None:
    """Add ``local-spectrum`` to the subcommands."""
    q = add_command(sub, "local-spectrum",
                    "Localised (multitaper) degree power spectrum of a region, with errors", EXAMPLE)
    q.add_argument("input", metavar="FILE", help="coefficient file, or netCDF grid file (-v)")
    q.add_argument("-v", "--var", metavar="VAR", help="variable of a grid file")
    q.add_argument("--at", type=centre, required=True, metavar="LAT,LON",
                   help="centre of the region in degrees (28S,128E or -28,128)")
    q.add_argument("--cap", type=cap_radius, required=True, metavar="DEG",
                   help="angular radius of the region, in (0, 180] degrees")
    q.add_argument("--window-degree", type=whole_number, required=True, metavar="N",
                   help="highest degree of the windows (the spectral resolution)")
    q.add_argument("--windows", type=whole_number, metavar="K",
                   help="use the K best-concentrated windows (default: all at least 99%% "
                        "concentrated in the cap)")
    q.add_argument("--pick", type=pick, metavar="DIM=I",
                   help="one field of a file with extra dimensions, by index (time=0)")
    q.add_argument("--lmax", type=whole_number, metavar="N", help="degree limit")
    q.add_argument("--csv", metavar="CSV",
                   help="write degree, global power (raw and blurred by the windows), local power, "
                        "its error, valid")
    q.add_argument("--plot", metavar="PNG", help="write the local spectrum beside the global one")
    q.add_argument("--overwrite", action="store_true", help="replace CSV/PNG if they exist")
    # let "--at -28,128" through as a value: argparse takes a word starting with '-' for an
    # option unless it looks like a negative number, so widen its notion of one to "-N,..."
    q._negative_number_matcher = re.compile(r"^-\d+$|^-\d*\.\d+$|^-[\d.]+[NSns]?,")
    q.set_defaults(func=run)


def run(a: argparse.Namespace) -> int:
    check_paths([a.input], [a.plot, a.csv], a.overwrite)
    ds, source = _one_field(a)
    lmax = ds.sizes["degree"] - 1
    _check_windows(a, lmax)
    from sphex.xr.fields import degree_power
    from sphex.xr.localize import local_power

    lat, lon = a.at
    local = local_power(ds, lat, lon, a.cap, a.window_degree, a.windows)
    glob = degree_power(ds)
    rows = _rows(local, glob)
    lines = _summary(source, rows, local)
    if a.csv:
        _write_csv(a.csv, a.overwrite, rows)
        lines.append(f"wrote {a.csv}")
    if a.plot:
        from sphex import plot

        fig = plot.local_spectrum_figure(local, glob,
                                         title=f"Localised spectrum: {Path(a.input).name}")
        plot.save(fig, a.plot, overwrite=a.overwrite)
        lines.append(f"wrote {a.plot}")
    if not a.csv and not a.plot:
        names = ("global_power", "blurred_global_power", "local_power", "local_power_error")
        lines.append(f"{'degree':>6} " + " ".join(f"{n:>22}" for n in names) + " valid")
        for row in rows:
            lines.append(f"{row[0]:6d} " + " ".join(f"{v:22.15g}" for v in row[1:5])
                         + f" {row[5]:5d}")
    say(*lines)
    return 0


def _one_field(a: argparse.Namespace) -> tuple[Any, str]:
    """The coefficient Dataset of one field of the input (read, or analysed from a grid file)
    and what it is."""
    from sphex.xr.coords import check_lmax
    from sphex.xr.fields import analyze
    from sphex.xr.files import open_coefficients

    chosen = a.pick or {}
    where = ", ".join(f"{d}={i}" for d, i in chosen.items())
    if is_coefficient_file(a.input):
        ds = open_coefficients(a.input)
        _check_pick(ds, chosen, a.input)
        ds = ds.isel(chosen)
        if a.lmax is not None:
            ds = ds.isel(degree=slice(0, a.lmax + 1), order=slice(0, a.lmax + 1))
        _refuse_many(ds, a.input, ("degree", "order"))
        source = f"coefficients to degree {ds.sizes['degree'] - 1}" + (f" ({where})" if where else "")
    else:
        da, _ = load_variable(a.input, a.var)
        _check_pick(da, chosen, a.input)
        da = da.isel(chosen)
        info = grid_of(da, a.input)
        _refuse_many(da, a.input, (info.lat_dim, info.lon_dim))
        lmax = check_lmax(a.lmax, info.grid, False, f"variable {da.name!r}")
        with progress_bar(count_fields(da, info), "analyze") as bar:
            ds = analyze(da, lmax, progress=bar if bar.enabled else None)
        source = f"{da.name!r}" + (f" ({where})" if where else "") + f" on a {info.describe()}"
    extra = [d for d in ds["cos_coef"].dims if d not in ("degree", "order")]
    return (ds.isel({d: 0 for d in extra}) if extra else ds), source



def _refuse_many(obj: Any, path: str, core: tuple) -> None:
    many = {d: n for d, n in obj.sizes.items() if d not in core and n > 1}
    if many:
        sizes = ", ".join(f"{d}={n}" for d, n in many.items())
        first = next(iter(many))
        raise UserError(f"{path} holds {math.prod(many.values())} fields ({sizes}); "
                        f"local-spectrum works on one: choose it with --pick {first}=0")


def _check_pick(obj: Any, chosen: dict[str, int], path: str) -> None:
    for d, i in chosen.items():
        if d not in obj.dims or d in ("degree", "order"):
            listed = ", ".join(str(x) for x in obj.dims if x not in ("degree", "order"))
            raise UserError(f"--pick {d}={i}: {path} has no dimension {d!r} to pick from "
                            f"(its dimensions: {listed or 'none'})")
        if not -obj.sizes[d] <= i < obj.sizes[d]:
            raise UserError(f"--pick {d}={i}: index out of range 0..{obj.sizes[d] - 1}")


def _check_windows(a: argparse.Namespace, lmax: int) -> None:
    """Window degree and count in the words of the options (before any long work)."""
    from sphex.report.local_section import check_windows

    try:
        check_windows(a.cap, a.window_degree, a.windows, lmax)
    except ValueError as exc:
        raise UserError(str(exc)) from None


def _rows(local: Any, glob: Any) -> list[tuple[int, float, float, float, float, int]]:
    """(degree, global, blurred global, local, local error, valid) per degree."""
    import numpy as np

    from sphex.localize import expected_local_power

    power = np.asarray(local["power"].values)
    error = np.asarray(local["power_error"].values)
    valid = np.asarray(local["valid"].values)
    g = np.asarray(glob.values)
    at = local.attrs
    blurred = expected_local_power(g, float(at["cap_radius_deg"]), int(at["window_degree"]),
                                   int(at["n_windows"]))
    return [(l, float(g[l]), float(blurred[l]), float(power[l]), float(error[l]), int(valid[l]))
            for l in range(power.size)]


def _summary(source: str, rows: list, local: Any) -> list[str]:
    import numpy as np

    at = local.attrs
    lo, hi = int(at["valid_degree_min"]), int(at["valid_degree_max"])
    conc = np.asarray(at["window_concentration"])
    units = local["power"].attrs.get("units", "")
    lines = [f"local spectrum of {source}",
             f"  centre {at['centre_lat']:g}, {at['centre_lon']:g} (lat, lon), cap radius "
             f"{at['cap_radius_deg']:g} deg, window degree {int(at['window_degree'])}",
             f"  {int(at['n_windows'])} windows, concentration {conc.min():.4f} to {conc.max():.6f}"]
    if lo <= hi:
        loc = sum(r[3] for r in rows[lo:hi + 1])
        blurred = sum(r[2] for r in rows[lo:hi + 1])
        text = f"  reliable degrees {lo}..{hi}: local power {loc:.6g} {units}"
        if blurred > 0:
            text += (f", global blurred by the windows {blurred:.6g} {units} "
                     f"(ratio {loc / blurred:.3g})")
        lines.append(text)
    else:
        lines.append(f"  no reliable degree: lmax {hi + int(at['window_degree'])} is below twice the "
                     "window degree; lower --window-degree")
    return lines


def _write_csv(path: str, overwrite: bool, rows: list) -> None:
    from sphex.xr.output import atomic_output

    with atomic_output(path, overwrite) as tmp:
        with open(tmp, "w", encoding="utf-8") as f:
            f.write("degree,global_power,blurred_global_power,local_power,local_power_error,valid\n")
            for l, g, b, p, e, v in rows:
                f.write(f"{l},{g:.17g},{b:.17g},{p:.17g},{e:.17g},{v}\n")
