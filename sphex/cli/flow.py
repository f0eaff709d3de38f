"""``sphex flow``: vorticity, divergence, streamfunction, velocity potential and the
kinetic-energy spectrum of a wind or current file."""
from __future__ import annotations

import argparse
import math
from typing import Any

from sphex.cli.shared import (
    add_command, add_output_arguments, check_paths, chunk_spec, say, whole_number,
)

EXAMPLE = """\
Reads the eastward and northward components u and v (the variables whose CF
standard_name is eastward_wind / northward_wind or eastward_sea_water_velocity /
northward_sea_water_velocity, or those named with --east and --north),
analyses them into streamfunction psi and velocity potential chi, and writes on
the same grid: vorticity and divergence (s-1 for winds in m s-1),
streamfunction and velocity potential (m2 s-1), the eastward and northward
components of the rotational and of the divergent part of the flow, and the
kinetic-energy spectrum per degree (kinetic_energy_rotational,
kinetic_energy_divergent; m2 s-2).  Nothing is differenced on the grid, so the
poles are as exact as the equator.  Time, level and member axes are kept; a
long series is streamed a block of steps at a time.

The sphere's radius is --radius (in km; 6371km and 6371008.8m are read too),
else the file's planet_radius_km attribute, else Earth's mean radius 6371.0088
km (the command says which).  --spectrum writes the energy per degree as CSV
(columns: the file's other dimensions, degree, rotational, divergent, total);
--plot draws it log-log with reference slopes -3 and -5/3 (mean of the fields
when there are several).

example:
  sphex flow winds.nc -o winds_flow.nc --spectrum winds_energy.csv --plot winds_energy.png
  sphex flow currents.nc --east uo --north vo --radius 6371 -o currents_flow.nc
"""

#: Largest radius (km) accepted: nothing round with winds is larger than the Sun.
LARGEST_RADIUS_KM = 1.0e6


def register(sub: Any) -> None:
    """Add ``flow`` to the subcommands."""
    q = add_command(sub, "flow", "Vorticity, divergence, streamfunction, velocity potential and "
                                 "energy spectrum of winds or currents", EXAMPLE)
    q.add_argument("input", metavar="IN.nc", help="netCDF file with the eastward and northward "
                                                  "components on one global grid")
    q.add_argument("--east", metavar="VAR", help="eastward component (default: found by its CF "
                                                 "standard_name)")
    q.add_argument("--north", metavar="VAR", help="northward component (default: found by its CF "
                                                  "standard_name)")
    q.add_argument("--lmax", type=whole_number, metavar="N",
                   help="highest degree (default: the grid's exact limit)")
    q.add_argument("--radius", type=radius_km, metavar="KM",
                   help="sphere radius in km (or with a unit: 6371km, 6371008.8m); default the "
                        "file's planet_radius_km attribute, else Earth's mean radius")
    q.add_argument("--rotation-rate", type=rotation_rate, metavar="RAD_PER_S",
                   help="planet's rotation rate: also write absolute_vorticity, the vorticity "
                        "plus 2 Omega sin(lat) (Earth: 7.292115e-5)")
    q.add_argument("--spectrum", metavar="CSV", help="write the kinetic-energy spectrum as CSV")
    q.add_argument("--plot", metavar="PNG", help="draw the kinetic-energy spectrum (log-log)")
    q.add_argument("--chunks", type=chunk_spec, metavar="DIM=N",
                   help="fields per chunk when streaming a long series (default: about 16 MiB of a "
                        "component per chunk along time)")
    q.add_argument("--scheduler", metavar="ADDRESS",
                   help="run on this dask.distributed scheduler instead of threads in this process")
    add_output_arguments(q, "output netCDF file of the gridded diagnostics (and the spectrum)")
    q.set_defaults(func=run)


def radius_km(text: str) -> float:
    """A sphere radius: a number of km, or a number with the unit km or m; returns km."""
    t = text.strip().lower()
    scale = 1.0
    if t.endswith("km"):
        t = t[:-2]
    elif t.endswith("m"):
        t, scale = t[:-1], 1e-3
    try:
        value = float(t) * scale
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a radius: give km (6371), or a number "
                                         "with km or m (6371km, 6371008.8m)") from None
    if not 0 < value < float("inf"):
        raise argparse.ArgumentTypeError(f"{text!r} must be a positive radius")
    if value > LARGEST_RADIUS_KM:
        raise argparse.ArgumentTypeError(
            f"{text!r} is {value:g} km, larger than the Sun; the radius is in km "
            f"(6371), or add the unit m for metres (6371008.8m)")
    return value


def rotation_rate(text: str) -> float:
    """A rotation rate in rad s-1: finite, nonzero (negative for a retrograde rotation)."""
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"{text!r} is not a rotation rate in rad s-1 (Earth: "
                                         "7.292115e-5)") from None
    if not (math.isfinite(value) and value != 0):
        raise argparse.ArgumentTypeError(f"{text!r} must be a finite, nonzero rate in rad s-1")
    return value


def run(a: argparse.Namespace) -> int:
    """Check every output first, stream the diagnostics, then write the spectrum and its plot."""
    import warnings
    from pathlib import Path

    from sphex.xr.flow_components import RadiusAssumedWarning

    check_paths([a.input], [a.output, a.spectrum, a.plot], a.overwrite)
    from sphex.cli.progress import announce_kernel_preparation
    from sphex.xr.flow_streaming import stream_flow

    announce_kernel_preparation("flow", kernels=("scalar", "vector"))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", RadiusAssumedWarning)    # said in the report instead
        r = stream_flow(a.input, a.output, a.east, a.north, lmax=a.lmax,
                        radius=None if a.radius is None else a.radius * 1e3,
                        planetary_rotation=a.rotation_rate, chunks=a.chunks,
                        scheduler=a.scheduler, overwrite=a.overwrite,
                        options=("--east", "--north"))
    lines = _report(a, r)
    if a.spectrum:
        _write_csv(a.spectrum, a.overwrite, r.energy)
        lines.append(f"wrote {a.spectrum}: kinetic energy per degree"
                     f"{_units_text(r.energy)}, one row per field and degree")
    if a.plot:
        _draw(a.plot, a.overwrite, r, Path(a.input).name)
        lines.append(f"wrote {a.plot}")
    say(*lines)
    return 0


def _units_text(energy: Any) -> str:
    units = energy["kinetic_energy_rotational"].attrs.get("units")
    return f" in {units}" if units else ""


def _report(a: argparse.Namespace, r: Any) -> list[str]:
    """The lines saying what was read, which radius was used, what was written."""
    import numpy as np

    kind = {"atmosphere": " (winds)", "sea_water": " (sea-water currents)"}.get(r.medium, "")
    if r.radius_source == "given":
        where = "--radius"
    elif "assumed" in r.radius_source:
        where = ("Earth's mean radius, assumed: no --radius and no planet_radius_km attribute; "
                 "give --radius for another planet")
    else:
        where = r.radius_source
    rot = np.asarray(r.energy["kinetic_energy_rotational"].values)
    div = np.asarray(r.energy["kinetic_energy_divergent"].values)
    total_rot = rot.sum(axis=-1).mean()
    total_div = div.sum(axis=-1).mean()
    total = total_rot + total_div
    share = f", rotational {100 * total_rot / total:.1f} %, divergent {100 * total_div / total:.1f} %" \
        if total > 0 else ""
    mean = " (mean over the fields)" if r.fields > 1 else ""
    extra = ", absolute_vorticity" if "absolute_vorticity" in r.variables else ""
    return [
        f"read  {a.input}: {r.east!r} and {r.north!r}{kind} on a {r.grid}, "
        f"{r.fields} field{'s' if r.fields != 1 else ''}",
        f"radius {r.radius / 1e3:.10g} km ({where})",
        f"wrote {a.output}: vorticity, divergence, streamfunction, velocity_potential{extra}, "
        f"the rotational and divergent components and the kinetic-energy spectrum; degrees "
        f"0..{r.lmax}",
        f"kinetic energy{mean}: {total:.6g}{_units_text(r.energy).replace(' in ', ' ')}{share}",
    ]


def _write_csv(path: str, overwrite: bool, energy: Any) -> None:
    """The spectra as CSV with plain column names and no comment lines."""
    from sphex.xr.flow_streaming import energy_table
    from sphex.xr.output import atomic_output

    header, rows = energy_table(energy)
    with atomic_output(path, overwrite) as tmp:
        with open(tmp, "w", encoding="utf-8") as f:
            f.write(",".join(header) + "\n")
            for row in rows:
                f.write(",".join(v if isinstance(v, str) else
                                 str(v) if isinstance(v, int) else f"{v:.17g}" for v in row) + "\n")


def _draw(path: str, overwrite: bool, r: Any, name: str) -> None:
    """The log-log spectrum of the mean over the fields."""
    from sphex import plot

    rot = r.energy["kinetic_energy_rotational"]
    div = r.energy["kinetic_energy_divergent"]
    units = rot.attrs.get("units")
    extra = [d for d in rot.dims if d != "degree"]
    note = f"mean of {r.fields} fields" if r.fields > 1 else None
    if extra:
        rot, div = rot.mean(extra), div.mean(extra)
    fig = plot.energy_figure(rot, div, units=units,
                             planet_radius_km=r.radius / 1e3, note=note,
                             title=f"Kinetic energy per degree: {name}")
    plot.save(fig, path, overwrite=overwrite)
