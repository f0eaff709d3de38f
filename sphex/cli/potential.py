"""``sphex gravity`` and ``sphex geomagnetic``: a published coefficient model in, a netCDF
grid of physical quantities out."""
from __future__ import annotations

import argparse
from typing import Any

from sphex.cli.shared import (
    UserError, add_command, add_output_arguments, check_paths, grid_file, say, whole_number,
)

#: Quantity names of sphex.potential (kept here so that building the parser imports nothing).
GRAVITY_CHOICES = ("geoid", "height_anomaly", "anomaly", "disturbance", "radial_gradient",
                   "deflection_north", "deflection_east")
MAGNETIC_CHOICES = ("north", "east", "down", "horizontal", "total", "declination", "inclination")

CAUTION = """\
caution: geoid heights and gravity values from sphex are not certified for
surveying, engineering or navigation; the official products of the responsible
agencies and licensed practice come first."""

GRAVITY_EXAMPLE = f"""\
MODEL is a gravity-field exchange file (keyword header ending with
end_of_head, then gfc rows; gzipped is fine) or a sphex netCDF model file.
Quantities (spherical approximation; SI units, deflections in arcseconds):
geoid (m), height_anomaly (m), anomaly and disturbance (m s-2),
radial_gradient (s-2), deflection_north and deflection_east. The normal field
(grs80 or wgs84 for the Earth; sphere, the model's own GM/r, for other bodies;
or none) is removed first; --surface ellipsoid reads the grid's
latitudes as geodetic and --height as ellipsoidal height.

{CAUTION}

example:
  sphex gravity velanthe_gravity.gfc --grid gauss:89 --quantity geoid anomaly --normal sphere -o velanthe_geoid.nc
"""

GEOMAGNETIC_EXAMPLE = """\
MODEL is a spherical-harmonic coefficient text file of the geomagnetic
reference-field community (.shc; gzipped is fine) or a sphex netCDF model
file. Components: north (X), east (Y), down (Z), horizontal (H), total (F) in
tesla; declination (D) and inclination (I) in degrees. --epoch chooses a
decimal year (interpolated linearly between the file's epochs); without it
every epoch of the file is written along a dimension epoch.

example:
  sphex geomagnetic field.shc --epoch 2022.5 --grid gauss:60 --height 450000 --component total declination -o field.nc
"""


def register(sub: Any) -> None:
    """Add ``gravity`` and ``geomagnetic`` to the subcommands."""
    q = add_command(sub, "gravity", "Gravity quantities of a coefficient model on a grid "
                    "(not certified for surveying, engineering or navigation)", GRAVITY_EXAMPLE)
    _common(q)
    q.add_argument("--quantity", nargs="+", choices=GRAVITY_CHOICES, default=["geoid"],
                   metavar="Q", help="one or more of: " + ", ".join(GRAVITY_CHOICES)
                   + " (default geoid)")
    q.add_argument("--normal", choices=("grs80", "wgs84", "sphere", "none"), default="grs80",
                   help="normal field removed: grs80 (default) or wgs84 for the Earth; sphere "
                        "(the model's own GM/r) for other bodies; none removes nothing")
    q.add_argument("--gm", type=float, metavar="M3S2",
                   help="GM in m^3 s^-2, for a model file that does not state it")
    add_output_arguments(q)
    q.set_defaults(func=run_gravity)

    q = add_command(sub, "geomagnetic", "Magnetic field components of a coefficient model on a "
                    "grid", GEOMAGNETIC_EXAMPLE)
    _common(q)
    q.add_argument("--component", nargs="+", choices=MAGNETIC_CHOICES,
                   default=["north", "east", "down"], metavar="C",
                   help="one or more of: " + ", ".join(MAGNETIC_CHOICES)
                   + " (default north east down)")
    q.add_argument("--epoch", type=float, metavar="YEAR",
                   help="decimal year (.shc models with epochs)")
    add_output_arguments(q)
    q.set_defaults(func=run_geomagnetic)


def _common(q: argparse.ArgumentParser) -> None:
    q.add_argument("model", metavar="MODEL", help="model file")
    q.add_argument("--grid", required=True, metavar="GRID",
                   help="netCDF file whose coordinates define the grid, gauss:LMAX, or "
                        "equiangular:NLATxNLON:LAYOUT")
    q.add_argument("--height", type=float, default=0.0, metavar="METRES",
                   help="height above the reference sphere (or ellipsoid), default 0")
    q.add_argument("--surface", choices=("sphere", "ellipsoid"), default="sphere",
                   help="sphere: geocentric latitudes (default); ellipsoid: geodetic latitudes "
                        "and ellipsoidal heights")
    q.add_argument("--lmax", type=whole_number, metavar="N",
                   help="use the model up to this degree only")


def _open(a: argparse.Namespace, kind: str, epoch=None):
    from sphex.xr.models import open_model

    model = open_model(a.model, epoch)
    if model.kind != kind:
        other = "geomagnetic" if model.kind == "magnetic" else "gravity"
        raise UserError(f"{a.model} is a {model.kind} model: use 'sphex {other}' for it")
    if a.lmax is not None:
        if a.lmax > model.lmax:
            raise UserError(f"--lmax {a.lmax} is above the model's degree {model.lmax}; give "
                            f"--lmax {model.lmax} or less")
        import dataclasses

        sigmas = None if model.sigmas is None else model.sigmas.truncate(a.lmax)
        model = dataclasses.replace(model, harmonics=model.harmonics.truncate(a.lmax),
                                    sigmas=sigmas)
    return model


def _write(ds, a: argparse.Namespace, command: str) -> None:
    import shlex
    import sys

    from sphex.xr.fields import append_history
    from sphex.xr.files import write_dataset

    line = "sphex " + command + " " + " ".join(shlex.quote(w) for w in sys.argv[2:])
    ds.attrs["history"] = append_history(ds.attrs, line.strip())
    write_dataset(ds, a.output, a.overwrite)


def _grid(spec: str):
    from sphex.cli.shared import target_grid

    return target_grid(spec)


def run_gravity(a: argparse.Namespace) -> int:
    check_paths([a.model, grid_file(a.grid)], [a.output], a.overwrite)
    from sphex.xr.potential import gravity_fields

    model = _open(a, "gravity")
    like = _grid(a.grid)
    if model.gm is not None and a.gm is not None:
        raise UserError(f"{a.model} states GM = {model.gm!r}; drop --gm")
    gm = model.gm if model.gm is not None else a.gm
    if a.normal in ("grs80", "wgs84") and gm is not None:
        from sphex.normal_field import normal_field

        if not 0.9 < normal_field(a.normal).gm / gm < 1.1:
            raise UserError(f"{a.model}: GM {gm:.6g} m^3 s^-2 is not the Earth's; the normal "
                            f"field {a.normal} belongs to another body: use --normal sphere")
    ds = gravity_fields(model, like, height=a.height, quantities=a.quantity,
                        normal=None if a.normal == "none" else a.normal, gm=a.gm,
                        surface=a.surface)
    _write(ds, a, "gravity")
    shape = " x ".join(str(n) for n in ds[a.quantity[0]].shape)
    say(f"wrote {a.output}: {', '.join(a.quantity)} of {model.name or a.model} "
        f"(degree {model.lmax}) on a {shape} grid at {a.height:g} m",
        "not certified for surveying, engineering or navigation; official products come first")
    return 0


def run_geomagnetic(a: argparse.Namespace) -> int:
    check_paths([a.model, grid_file(a.grid)], [a.output], a.overwrite)
    from sphex.xr.potential import magnetic_fields

    model = _open(a, "magnetic", a.epoch)
    like = _grid(a.grid)
    ds = magnetic_fields(model, like, height=a.height, components=a.component,
                         surface=a.surface)
    _write(ds, a, "geomagnetic")
    shape = " x ".join(str(n) for n in ds[a.component[0]].shape)
    say(f"wrote {a.output}: {', '.join(a.component)} of {model.name or a.model} "
        f"(degree {model.lmax}) on a {shape} grid at {a.height:g} m")
    return 0


# ---------------------------------------------------------------------------
# model files as inputs of `sphex spectrum`
# ---------------------------------------------------------------------------
def is_model_file(path: str) -> bool:
    """Whether ``path`` is read as a potential model: a sphex netCDF model file (attribute
    ``model_kind``) or a text file that is not a coefficient table (an exchange file)."""
    from pathlib import Path

    from sphex.xr.models import is_netcdf_head
    from sphex.xr.tables import is_table_file

    p = Path(path)
    if not p.is_file():
        return False
    with open(p, "rb") as f:
        head = f.read(1024)
    if is_netcdf_head(p, head):
        from sphex.cli.shared import open_input

        ds = open_input(path)
        try:
            return "model_kind" in ds.attrs
        finally:
            ds.close()
    return not is_table_file(path)


def model_spectra(path: str, lmax: int | None):
    """Degree variances of a model file, and its error degree variances when it has sigmas, as
    one DataArray over (``series``, ``degree``), and a line saying what it is."""
    import xarray as xr

    from sphex.xr.models import open_model
    from sphex.xr.potential import degree_variances, error_degree_variances

    model = open_model(path)
    if model.harmonics.batch_shape:
        raise UserError(f"{path} holds {model.harmonics.batch_shape[0]} epochs: the spectrum "
                        "takes one model (write one epoch with 'sphex geomagnetic --epoch')")
    series = [degree_variances(model)]
    if model.sigmas is not None:
        series.append(error_degree_variances(model))
    if lmax is not None:
        if lmax > model.lmax:
            raise UserError(f"--lmax {lmax} is above the model's degree {model.lmax}")
        series = [s.isel(degree=slice(0, lmax + 1)) for s in series]
    names = [str(s.name).replace("_", " ") for s in series]
    out = xr.concat(series, dim=xr.DataArray(names, dims="series", name="series"))
    out.attrs = dict(series[0].attrs)
    if out.attrs.get("units") == "1":
        out.attrs["units"] = ""  # dimensionless: the report prints no unit
    what = (f"{model.kind} model {model.name or path} to degree {model.lmax} "
            f"({series[0].attrs['normalization']} coefficients)")
    return out, what


def draw_model_spectrum(path: str, overwrite: bool, spectra, name: str) -> None:
    """The plot of ``sphex spectrum MODEL --plot``: degree variances, error degree variances
    (when the model has them) and the degree where they cross."""
    from sphex import plot

    error = spectra.isel(series=1) if spectra.sizes["series"] > 1 else None
    fig = plot.model_spectrum_figure(spectra.isel(series=0), error,
                                     units=spectra.attrs.get("units") or None,
                                     title=f"Degree variances: {name}")
    plot.save(fig, path, overwrite=overwrite)
