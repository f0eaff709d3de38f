"""The wind section of the report: a horizontal vector field (winds or currents) of a grid file.

When a grid file holds an eastward and a northward component (found by their
CF standard names, as ``sphex flow`` finds them, or named with ``--east`` and
``--north``), :func:`read_wind` analyses them into streamfunction and velocity
potential (:func:`sphex.xr.analyze_flow`) and :func:`wind_sections` makes two
sections of the page: ``winds`` (the key numbers of the kinetic energy and its
spectrum split into rotational and divergent parts, with the reference slopes
-3 and -5/3) and ``wind-maps`` (vorticity with the wind, divergence with the
divergent wind).  The numbers are those of :func:`sphex.spectra.kinetic_energy`
on the :class:`sphex.flow.Flow` of the file, averaged over the steps of a
series as ``sphex flow`` averages them.

matplotlib and xarray are imported inside the functions, so that importing
this module stays cheap.
"""
from __future__ import annotations

import html
import os
import warnings
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

import numpy as np

from sphex.report.key_numbers import default_slope_range
from sphex.report.page import MAP_COLUMNS, Row, _figure_html, _image, _numbers_table

__all__ = ["Wind", "has_wind_components", "read_wind", "wind_numbers", "wind_sections",
           "wind_provenance"]


@dataclass
class Wind:
    """The wind of a grid file, analysed.

    Attributes
    ----------
    path, east, north : str
        The file and the variable names of the eastward and northward components.
    flow : sphex.flow.Flow
        Streamfunction and velocity potential (orthonormal, Condon-Shortley,
        radius in metres); one leading batch axis of ``steps`` entries, or none.
    info : GridInfo
        The components' grid.
    units : str or None
        Units of the components.
    energy_units : str or None
        Units of the kinetic energy (m2 s-2 for components in m s-1).
    per_length_units : str or None
        Units of vorticity and divergence.
    radius_m : float
    radius_source : str
        Where the radius came from (an attribute, or Earth's mean radius assumed).
    medium : str or None
        ``"atmosphere"``, ``"sea_water"`` or None (from the standard names).
    steps : list of str
        Labels of the steps of a series (empty for one field).
    step_name : str
    """

    path: str
    east: str
    north: str
    flow: Any
    info: Any
    units: str | None
    energy_units: str | None
    per_length_units: str | None
    radius_m: float
    radius_source: str
    medium: str | None = None
    steps: list = field(default_factory=list)
    step_name: str = ""

    @property
    def lmax(self) -> int:
        return int(self.flow.psi.lmax)

    @property
    def what(self) -> str:
        return {"atmosphere": "wind", "sea_water": "current"}.get(self.medium or "", "flow")


def has_wind_components(ds: Any) -> bool:
    """Whether any variable of ``ds`` carries a CF standard name of a horizontal component."""
    from sphex.xr.flow_components import EAST_STANDARD_NAMES, NORTH_STANDARD_NAMES

    names = set(EAST_STANDARD_NAMES.values()) | set(NORTH_STANDARD_NAMES.values())
    return any(str(v.attrs.get("standard_name", "")) in names for v in ds.data_vars.values())


def read_wind(path: str | os.PathLike, east: str | None = None, north: str | None = None,
              lmax: int | None = None) -> Wind | None:
    """The wind of a grid file, or None when the file has no components (and none are named).

    Parameters
    ----------
    path : path-like
        A netCDF grid file.
    east, north : str, optional
        The components' variable names (both or neither); default the variables
        with the CF standard names ``eastward_wind`` / ``northward_wind`` or
        ``eastward_sea_water_velocity`` / ``northward_sea_water_velocity``.
    lmax : int, optional
        Degree limit (default the grid's exact limit).

    Returns
    -------
    Wind or None

    Raises
    ------
    ValueError
        Components named but not there, ambiguous standard names, components
        on different grids, missing values, ``lmax`` above the exact limit.
    """
    import sphex.xr as sxr
    from sphex.xr.coords import check_lmax
    from sphex.xr.files import open_netcdf
    from sphex.xr.flow_components import (
        RadiusAssumedWarning, component_pair, components_units, derived_units, find_components,
        flow_medium, flow_radius,
    )
    from sphex.report.inputs import _step_labels

    path = str(path)
    ds = open_netcdf(path)
    try:
        if east is None and north is None and not has_wind_components(ds):
            return None
        e, n = find_components(ds, east, north, ("--east", "--north"))
        u, v = ds[e].load(), ds[n].load()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", RadiusAssumedWarning)   # said on the page instead
            radius, source = flow_radius(None, u, v, ds)
    finally:
        ds.close()
    try:
        u, v, info = component_pair(u, v)
    except ValueError as exc:
        raise ValueError(f"{path}: {exc}") from None
    lmax = check_lmax(lmax, info.grid, False, f"variable {e!r}")
    coef = sxr.analyze_flow(u, v, lmax, radius)
    flow = sxr.to_flow(coef)
    extra = [str(d) for d in u.dims if d not in (info.lat_dim, info.lon_dim)]
    steps = _step_labels(u, extra)
    if len(extra) > 1 or (steps and flow.batch_shape != (len(steps),)):
        from sphex.flow import Flow
        from sphex.harmonics import Harmonics

        def flat(h: Any) -> Any:
            return Harmonics(h.coef.reshape((-1,) + h.coef.shape[-2:]), norm=h.norm,
                             condon_shortley=h.condon_shortley, radius=h.radius, units=h.units)

        flow = Flow(flat(flow.psi), flat(flow.chi))
    units = derived_units(components_units(u, v))
    if "assumed" in source:
        source = ("Earth's mean radius, assumed: the file states no planet_radius_km; the "
                  "vorticity and divergence scale as 1/R")
    return Wind(path, e, n, flow, info, units["component"], units["energy"],
                units["per_length"], float(radius), source, flow_medium(u, v, None), steps,
                " ".join(extra))


def wind_provenance(w: Wind) -> list[tuple[str, str]]:
    """The header lines of a page about a wind."""
    rows = [("file", w.path), ("components", f"{w.east} (eastward), {w.north} (northward)"),
            ("input", w.info.describe()), ("degree limit", f"{w.lmax}"),
            ("units", w.units or "(none stated)"),
            ("radius", f"{w.radius_m / 1e3:.10g} km ({w.radius_source})")]
    if w.steps:
        rows.append(("steps", f"{len(w.steps)} along {w.step_name}: {w.steps[0]} ... "
                              f"{w.steps[-1]}"))
    return rows


def _energies(w: Wind) -> tuple[np.ndarray, np.ndarray]:
    """Rotational and divergent kinetic energy per degree, per step: ``(steps, lmax + 1)``."""
    from sphex.spectra import kinetic_energy

    rot, div = kinetic_energy(w.flow)
    return np.atleast_2d(rot), np.atleast_2d(div)


def wind_numbers(w: Wind) -> list[Row]:
    """The key numbers of the wind (means over the steps of a series).

    ``wind_energy`` is the area mean of (u^2 + v^2)/2, the sum over degrees of
    :func:`sphex.spectra.kinetic_energy`; its parts and shares; the RMS
    vorticity and divergence (square roots of the sums of their degree power);
    power-law slopes of both parts over the default fit range.
    """
    from sphex.spectra import degree_power, spectral_slope

    rot, div = _energies(w)
    total_rot, total_div = rot.sum(axis=-1), div.sum(axis=-1)
    total = total_rot + total_div
    mean = " mean over the steps" if w.steps else ""
    eu = w.energy_units or ""
    rows = [Row("wind_energy", "kinetic energy", float(total.mean()), eu,
                f"area mean of (u^2 + v^2)/2;{mean}".rstrip(";")),
            Row("wind_energy_rotational", "rotational part", float(total_rot.mean()), eu,
                "from the streamfunction psi"),
            Row("wind_energy_divergent", "divergent part", float(total_div.mean()), eu,
                "from the velocity potential chi")]
    if total.mean() > 0:
        rows += [Row("wind_rotational_share", "rotational share",
                     float(100 * total_rot.mean() / total.mean()), "%", ""),
                 Row("wind_divergent_share", "divergent share",
                     float(100 * total_div.mean() / total.mean()), "%", "")]
    if w.steps:
        rows += [Row("wind_energy_first", "kinetic energy, first step", float(total[0]), eu,
                     w.steps[0]),
                 Row("wind_energy_last", "kinetic energy, last step", float(total[-1]), eu,
                     w.steps[-1])]
    pu = w.per_length_units or ""
    for key, name, h in (("wind_rms_vorticity", "RMS vorticity", w.flow.vorticity()),
                         ("wind_rms_divergence", "RMS divergence", w.flow.divergence())):
        rows.append(Row(key, name, float(np.sqrt(np.atleast_2d(degree_power(h)).sum(axis=-1)
                                                 .mean())), pu,
                        "root mean square over the sphere" + (" and the steps" if w.steps
                                                               else "")))
    for key, name, e in (("wind_slope_rotational", "power-law slope, rotational part", rot),
                         ("wind_slope_divergent", "power-law slope, divergent part", div)):
        p = e.mean(axis=0)
        fit = default_slope_range(p)
        if fit is not None:
            rows.append(Row(key, name, float(spectral_slope(p, *fit)[0]), "",
                            f"fit over degrees {fit[0]}-{fit[1]}"))
    rows.append(Row("wind_radius", "radius of the sphere", w.radius_m / 1e3, "km",
                    w.radius_source))
    return rows


def _scaled(values: np.ndarray, units: str | None) -> tuple[np.ndarray, str]:
    """Values scaled by a power of ten so that the colour bar reads 1..1000, and their units."""
    top = float(np.nanmax(np.abs(values))) if values.size else 0.0
    if not top > 0 or 1e-2 <= top < 1e4:
        return values, units or ""
    k = int(np.floor(np.log10(top)))
    sup = str(k).translate(str.maketrans("-0123456789", "\u207b\u2070\u00b9\u00b2\u00b3"
                                                         "\u2074\u2075\u2076\u2077\u2078\u2079"))
    return values / 10.0 ** k, f"10{sup} {units or ''}".strip()


def _display_grid(w: Wind) -> Any:
    """The grid the maps are drawn on: the file's own when it has 360 to 1080 columns; a
    1-degree grid with both poles for coarser files (the synthesis of the coefficients, exact
    between the nodes, draws smooth maps) and a Gauss grid of at most 1080 columns for wider
    ones (the images are about 800 pixels wide)."""
    from sphex.grids import Grid

    g = w.info.grid
    if g.nlon < 360:
        return Grid.equiangular(181, 360, "poles")
    return g if g.nlon <= MAP_COLUMNS else Grid.gauss(min(w.lmax, MAP_COLUMNS // 2 - 1))


#: The maps of the flow: what is drawn, its long name, which units, which part as arrows.
_MAPS = (("vorticity", "relative vorticity", "per_length", "whole"),
         ("divergence", "divergence", "per_length", "divergent"),
         ("streamfunction", "streamfunction psi", "potential", "rotational"),
         ("velocity potential", "velocity potential chi", "potential", "divergent"))


def _wind_maps(w: Wind) -> str:
    """Vorticity with the flow, divergence with its divergent part, streamfunction with the
    rotational part and velocity potential with the divergent part (the first step of a
    series), drawn as arrows."""
    import xarray as xr

    from sphex import plot
    from sphex.flow import Flow, synthesize_flow
    from sphex.harmonics import Harmonics
    from sphex.transform import synthesize
    from sphex.xr.flow_components import derived_units

    def first(h: Harmonics) -> Harmonics:
        if not h.batch_shape:
            return h
        return Harmonics(h.coef[0], norm=h.norm, condon_shortley=h.condon_shortley,
                         radius=h.radius, units=h.units)

    flow = Flow(first(w.flow.psi), first(w.flow.chi))
    grid = _display_grid(w)
    coords = {"lat": ("lat", np.asarray(grid.lat), {"units": "degrees_north"}),
              "lon": ("lon", np.asarray(grid.lon), {"units": "degrees_east"})}

    def gridded(values: np.ndarray, units: str | None) -> Any:
        return xr.DataArray(values, dims=("lat", "lon"), coords=coords,
                            attrs={"units": units} if units else {})

    parts = {"whole": flow, "rotational": flow.rotational(), "divergent": flow.divergent()}
    arrows = {k: synthesize_flow(f, grid) for k, f in parts.items()}
    fields = {"vorticity": flow.vorticity(), "divergence": flow.divergence(),
              "streamfunction": flow.psi, "velocity potential": flow.chi}
    units = derived_units(w.units)
    when = f", first step ({w.steps[0]})" if w.steps else ""
    figures = []
    for name, long_name, which, part in _MAPS:
        values, shown = _scaled(np.asarray(synthesize(fields[name], grid)), units[which])
        what = f"the {w.what}" if part == "whole" else f"the {part} {w.what}"
        east, north = arrows[part]
        fig = plot.wind_map_figure(gridded(values, shown), gridded(east, w.units),
                                   gridded(north, w.units), units=shown, label=long_name,
                                   title=f"{name.capitalize()} and {what}")
        figures.append(_figure_html(_image(fig, f"map of the {name} with {what} as arrows"),
                                    f"{name.capitalize()} (colours) with {what} as arrows"
                                    f"{when}."))
    g = w.info.grid
    drawn = ("on the file's grid" if grid is g else
             f"on a {grid.nlat} x {grid.nlon} {grid.kind} grid (the band-limited field between "
             "the file's nodes, not an interpolation)" if grid.nlon > g.nlon else
             f"on a {grid.nlat} x {grid.nlon} {grid.kind} grid (fewer points than the file)")
    series = (f" The maps show the first of {len(w.steps)} steps ({html.escape(w.steps[0])}): "
              "a mean over the steps would blur systems that move." if w.steps else "")
    return (f"<p>All four fields come from the coefficients of psi and chi, nothing differenced "
            f"on the grid; they are drawn {html.escape(drawn)}.{series}</p>"
            '<div class="pair">' + "".join(figures) + "</div>")


def _energy_section(w: Wind, rows: list[Row]) -> str:
    from sphex import plot

    rot, div = _energies(w)
    note = f"mean of {len(w.steps)} steps" if w.steps else None
    fig = plot.energy_figure(rot.mean(axis=0), div.mean(axis=0), units=w.energy_units,
                             planet_radius_km=w.radius_m / 1e3, note=note,
                             title=f"Kinetic energy per degree: {Path(w.path).name}")
    img = _image(fig, "kinetic energy per degree, rotational and divergent parts")
    mean = (f" Spectra and numbers are means over the {len(w.steps)} steps along "
            f"{html.escape(w.step_name)}." if w.steps else "")
    return (f"<p>The {w.what} ({html.escape(w.east)}, {html.escape(w.north)}) as streamfunction "
            "psi and velocity potential chi (<code>sphex.flow.analyze_flow</code>); the kinetic "
            "energy of each degree splits into a rotational part (from psi) and a divergent part "
            "(from chi), which sum to the area mean of (u<sup>2</sup> + v<sup>2</sup>)/2 "
            f"(<code>sphex.spectra.kinetic_energy</code>), degrees 0..{w.lmax}.{mean}</p>"
            + _numbers_table(rows)
            + _figure_html(img, "Kinetic energy per degree: rotational and divergent parts and "
                                "their sum. The dashed and dotted lines are reference slopes -3 "
                                "and -5/3, drawn to guide the eye, not fitted."))


def wind_sections(w: Wind, tick: Any = None) -> dict[str, str]:
    """The ``winds`` and ``wind-maps`` sections of the page (``tick()`` after each)."""
    out = {"winds": _energy_section(w, wind_numbers(w))}
    if tick is not None:
        tick()
    out["wind-maps"] = _wind_maps(w)
    if tick is not None:
        tick()
    return out
