"""``sphex sample``: coefficients (a coefficient file or a published model) at the points of a CSV file."""
from __future__ import annotations

import argparse
import csv
import math
import re
from pathlib import Path
from typing import Any

from sphex.cli.shared import (
    UserError, add_command, add_output_arguments, check_paths, positive_number, progress_bar, say,
    whole_number,
)

EXAMPLE = """\
POINTS.csv has a header line and one point per row: a latitude and a
longitude column in degrees (named lat/latitude and lon/long/lng/longitude,
any case, units in brackets allowed) and optionally a height column in metres
above the reference sphere (height/alt/altitude/elevation).  The series is
summed exactly at each point.  OUT.csv repeats every input column and adds
one column of values per field (named after the field, or --name).

Heights matter only for potential fields: a model file (gravity-field
exchange file, geomagnetic .shc) gives the potential at each point's height,
GM/r sum (R/r)^l V_l in m2 s-2 for gravity, R sum (R/r)^(l+1) V_l for
magnetism; coefficients from a file are continued to the heights only with
--continue (degree l times (R/r)^(l+1), R their reference radius).
Otherwise a height column is carried along unused.

example:
  sphex analyze data_demo/velanthe_topography.nc -v topography --lmax 60 -o topo_coef.nc
  sphex sample topo_coef.nc stations.csv -o stations_topography.csv
"""

LAT_NAMES = ("lat", "latitude", "lats", "lat_deg", "latitude_deg", "lat_degrees",
             "latitude_degrees", "lat_degrees_north", "latitude_degrees_north", "phi")
LON_NAMES = ("lon", "long", "lng", "longitude", "lons", "lon_deg", "longitude_deg", "lon_degrees",
             "longitude_degrees", "lon_degrees_east", "longitude_degrees_east", "lambda")
HEIGHT_NAMES = ("height", "h", "alt", "altitude", "elevation", "elev", "height_m", "alt_m",
                "altitude_m", "elevation_m", "elev_m")

#: Points evaluated per step of the progress bar.
POINTS_PER_STEP = 100_000


def register(sub: Any) -> None:
    """Add ``sample`` to the subcommands."""
    q = add_command(sub, "sample", "Values of coefficients at the points of a CSV file", EXAMPLE)
    q.add_argument("input", metavar="COEF", help="coefficient file (netCDF or text table) or a "
                   "model file (gravity-field exchange file, .shc)")
    q.add_argument("points", metavar="POINTS.csv", help="CSV file with lat, lon[, height] columns")
    q.add_argument("--lmax", type=whole_number, metavar="N", help="truncate to this degree first")
    q.add_argument("--epoch", type=positive_number, metavar="YEAR",
                   help="decimal year, for models given at several epochs (.shc)")
    q.add_argument("--name", metavar="NAME", help="name of the value column (default: the field's)")
    q.add_argument("--continue", dest="continue_", action="store_true",
                   help="the coefficients are a potential field: continue it to each point's "
                        "height (needs their reference radius)")
    add_output_arguments(q, "output CSV file")
    q.set_defaults(func=run)


# ---------------------------------------------------------------------------
# the points file
# ---------------------------------------------------------------------------
def _plain_name(header: str) -> str:
    """'Latitude (deg)' -> 'latitude'; 'alt [m]' -> 'alt_m'; 'lon-deg' -> 'lon_deg'."""
    text = header.strip().lower()
    unit = re.search(r"[\(\[]\s*([^\)\]]*)\s*[\)\]]\s*$", text)
    text = re.sub(r"[\(\[][^\)\]]*[\)\]]\s*$", "", text).strip()
    text = re.sub(r"[\s\-]+", "_", text)
    if unit and unit.group(1).strip() in ("m", "metres", "meters"):
        text += "_m"
    if unit and unit.group(1).strip() in ("km", "kilometres", "kilometers"):
        text += "_km"
    return text


def _find_column(header: list[str], names: tuple[str, ...], what: str, path: str,
                 required: bool) -> int | None:
    plain = [_plain_name(h) for h in header]
    hits = [k for k, p in enumerate(plain) if p in names]
    if len(hits) > 1:
        listed = ", ".join(repr(header[k]) for k in hits)
        raise UserError(f"{path}: several columns could be the {what} ({listed}); keep one")
    if not hits:
        if what == "height" and any(p.endswith("_km") and p[:-3] in HEIGHT_NAMES for p in plain):
            raise UserError(f"{path}: the height column is in km; give heights in metres "
                            "(a column named height, in m)")
        if required:
            listed = ", ".join(repr(h) for h in header) or "none"
            raise UserError(f"{path} has no {what} column (columns: {listed}); name one "
                            f"{names[0]} or {names[1]}")
        return None
    return hits[0]


class PointTable:
    """The rows of a points CSV file, its header and the columns used."""

    def __init__(self, path: str):
        import numpy as np

        self.path = path
        p = Path(path)
        if not p.is_file():
            raise UserError(f"{path}: no such file")
        with open(p, newline="", encoding="utf-8-sig") as f:
            lines = [(n, line) for n, line in enumerate(f, 1)
                     if line.strip() and not line.lstrip().startswith("#")]
        if not lines:
            raise UserError(f"{path} is empty: expected a header line (lat,lon[,height]) and rows")
        dialect = _dialect(lines[0][1])
        records = list(csv.reader((line for _, line in lines), dialect))
        self.header = [h.strip() for h in records[0]]
        self.rows = records[1:]
        self.line_numbers = [n for n, _ in lines[1:]]
        self.delimiter = dialect.delimiter
        if not self.rows:
            raise UserError(f"{path} has a header but no points")
        for row, n in zip(self.rows, self.line_numbers):
            if len(row) != len(self.header):
                raise UserError(f"{path}, line {n}: {len(row)} fields but the header has "
                                f"{len(self.header)}; every row needs one value per column")
        self.lat_column = _find_column(self.header, LAT_NAMES, "latitude", path, True)
        self.lon_column = _find_column(self.header, LON_NAMES, "longitude", path, True)
        self.height_column = _find_column(self.header, HEIGHT_NAMES, "height", path, False)
        self.lat = self._numbers(self.lat_column, "latitude")
        self.lon = self._numbers(self.lon_column, "longitude")
        self.height = None if self.height_column is None else self._numbers(self.height_column, "height")
        outside = np.flatnonzero(np.abs(self.lat) > 90.0)
        if outside.size:
            k = int(outside[0])
            raise UserError(f"{path}, line {self.line_numbers[k]}: latitude {self.lat[k]:g} is "
                            f"outside [-90, 90] ({outside.size} row(s) in all); are the latitude "
                            "and longitude columns swapped, or in radians?")

    def _numbers(self, column: int, what: str):
        import numpy as np

        out = np.empty(len(self.rows))
        for k, row in enumerate(self.rows):
            text = row[column].strip()
            try:
                value = float(text)
            except ValueError:
                value = None
            if value is None or not math.isfinite(value):
                shown = repr(text) if text else "empty"
                raise UserError(f"{self.path}, line {self.line_numbers[k]}: the {what} "
                                f"({self.header[column]!r}) is {shown}, not a finite number; "
                                "fix or drop that row")
            out[k] = value
        return out

    def describe(self, height_used: bool) -> str:
        used = [f"latitude from {self.header[self.lat_column]!r}",
                f"longitude from {self.header[self.lon_column]!r}"]
        if self.height_column is None:
            used.append("no height column (points on the reference sphere)")
        elif height_used:
            used.append(f"height (m above the reference sphere) from "
                        f"{self.header[self.height_column]!r}")
        else:
            used.append(f"height column {self.header[self.height_column]!r} not used (points on "
                        "the reference sphere; --continue continues a potential field to it)")
        return f"{len(self.rows)} point{'s' if len(self.rows) != 1 else ''}: " + ", ".join(used)


def _dialect(header_line: str):
    """The CSV dialect of the file: comma unless the header uses semicolons or tabs."""
    class Dialect(csv.excel):
        pass

    counts = {d: header_line.count(d) for d in (",", ";", "\t")}
    Dialect.delimiter = max(counts, key=counts.get) if any(counts.values()) else ","
    return Dialect


# ---------------------------------------------------------------------------
# the coefficients
# ---------------------------------------------------------------------------
_NETCDF_MAGIC = (b"CDF\x01", b"CDF\x02", b"CDF\x05", b"\x89HDF\r\n\x1a\n")


def _open_source(path: str, epoch: float | None, lmax: int | None):
    """(coefficient Dataset or PotentialModel, a line saying what it is)."""
    from sphex.xr.files import open_coefficients
    from sphex.xr.tables import is_table_file

    p = Path(path)
    if not p.is_file():
        raise UserError(f"{path}: no such file")
    with open(p, "rb") as f:
        head = f.read(8)
    if head.startswith(_NETCDF_MAGIC) or is_table_file(p):
        try:
            ds = open_coefficients(path)
        except ValueError:
            if head.startswith(_NETCDF_MAGIC):
                raise
            ds = None      # a text model file whose name looks like a table
        if ds is not None:
            if epoch is not None:
                raise UserError(f"--epoch applies to model files with epochs; {path} is a "
                                "coefficient file")
            return _truncated_dataset(ds, lmax, path), \
                f"coefficients to degree {ds.sizes['degree'] - 1}"
    from sphex.models import open_model

    model = open_model(path, epoch)
    if lmax is not None:
        if lmax > model.lmax:
            raise UserError(f"--lmax {lmax} is above the model's highest degree {model.lmax}")
        model = _truncated_model(model, lmax)
    return model, f"{model.kind} model {model.name!r} to degree {model.lmax}"


def _truncated_dataset(ds, lmax: int | None, path: str):
    top = ds.sizes["degree"] - 1
    if lmax is None:
        return ds
    if lmax > top:
        raise UserError(f"--lmax {lmax} is above the coefficients' highest degree {top} ({path})")
    ds = ds.isel(degree=slice(0, lmax + 1), order=slice(0, lmax + 1))
    ds.attrs["lmax"] = lmax
    return ds


def _truncated_model(model, lmax: int):
    import dataclasses

    sigmas = None if model.sigmas is None else model.sigmas.truncate(lmax)
    return dataclasses.replace(model, harmonics=model.harmonics.truncate(lmax), sigmas=sigmas)


# ---------------------------------------------------------------------------
# the command
# ---------------------------------------------------------------------------
def run(a: argparse.Namespace) -> int:
    check_paths([a.input, a.points], [a.output], a.overwrite)
    table = PointTable(a.points)
    source, what = _open_source(a.input, a.epoch, a.lmax)
    radius = _point_radius(source, table, a.input, a.continue_)
    values = _sample(source, table, radius)
    columns, name = _value_columns(values, a.name, table)
    units = values.attrs.get("units")
    _write_csv(a.output, a.overwrite, table, columns)
    say(f"read  {a.input}: {what}",
        f"read  {a.points}: {table.describe(radius is not None)}",
        f"wrote {a.output}: {len(columns)} value column{'s' if len(columns) != 1 else ''} "
        f"({', '.join(columns)}){f' in {units}' if units else ''}")
    return 0


def _point_radius(source, table: PointTable, path: str, continue_: bool):
    """Radius of each point (metres) from the height column, or None on the reference sphere."""
    from sphex.models import PotentialModel

    if continue_ and table.height is None:
        raise UserError(f"--continue needs a height column in {table.path} (height, in metres "
                        "above the reference sphere)")
    if table.height is None or not (continue_ or isinstance(source, PotentialModel)):
        return None
    reference = source.radius if isinstance(source, PotentialModel) else \
        source.attrs.get("reference_radius")
    if reference is None:
        raise UserError(f"{path} states no reference radius, so a height has no meaning; write "
                        "the coefficients with sphex analyze --radius METRES, or drop the "
                        "height column")
    radius = float(reference) + table.height
    if radius.min() <= 0:
        k = int(radius.argmin())
        raise UserError(f"{table.path}, line {table.line_numbers[k]}: height {table.height[k]:g} m "
                        f"puts the point below the centre (reference radius {float(reference):g} m)")
    return radius


def _sample(source, table: PointTable, radius):
    """The values at the points as a DataArray (batch dims, then ``point``), with progress."""
    import numpy as np
    import xarray as xr

    from sphex.xr.points import evaluate

    n = len(table.lat)
    parts = []
    steps = max(1, -(-n // POINTS_PER_STEP))
    with progress_bar(steps, "sample") as bar:
        for start in range(0, n, POINTS_PER_STEP):
            part = slice(start, start + POINTS_PER_STEP)
            parts.append(evaluate(source, lat=table.lat[part], lon=table.lon[part],
                                  radius=None if radius is None else radius[part]))
            bar.update(1)
    out = xr.concat(parts, dim="point") if len(parts) > 1 else parts[0]
    if not np.all(np.isfinite(out.values)):
        raise UserError("the values are not all finite: check the coefficients for NaN")
    return out


def _value_columns(values, name: str | None, table: PointTable) -> tuple[dict, str]:
    """Columns of values: one per field, named ``NAME`` or ``NAME_<coordinates>``."""
    import numpy as np

    base = name or values.name or "value"
    batch = [d for d in values.dims if d != "point"]
    data = np.asarray(values.transpose(*batch, "point").values).reshape((-1, values.sizes["point"]))
    if not batch:
        labels = [base]
    else:
        stacked = values.stack(__field__=batch)["__field__"].values
        labels = []
        for idx in stacked:
            idx = idx if isinstance(idx, tuple) else (idx,)
            labels.append(base + "_" + "_".join(_coordinate_text(v) for v in idx))
    clash = sorted(set(labels) & set(table.header))
    if clash:
        raise UserError(f"{table.path} already has a column {clash[0]!r}; name the values "
                        "another way with --name")
    return dict(zip(labels, data)), base


def _coordinate_text(v: Any) -> str:
    import numpy as np

    if hasattr(v, "to_datetime64"):          # pandas Timestamp, as xarray's stack gives
        v = v.to_datetime64()
    if isinstance(v, np.datetime64):
        text = str(np.datetime_as_string(v, unit="m")).replace("T00:00", "")
    elif isinstance(v, (float, np.floating)):
        text = f"{float(v):g}"
    else:
        text = str(v)
    return re.sub(r"[\s,;\"]+", "_", text)


def _write_csv(path: str, overwrite: bool, table: PointTable, columns: dict) -> None:
    """Input columns as they were, then the values (shortest text that reads back exactly)."""
    from sphex.xr.output import atomic_output

    names = list(columns)
    data = [columns[k].tolist() for k in names]
    with atomic_output(path, overwrite) as tmp:
        with open(tmp, "w", newline="", encoding="utf-8") as f:
            writer = csv.writer(f, delimiter=table.delimiter, lineterminator="\n")
            writer.writerow(table.header + names)
            for k, row in enumerate(table.rows):
                writer.writerow(row + [repr(col[k]) for col in data])
