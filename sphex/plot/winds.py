"""Figures of winds and currents: kinetic-energy spectra and maps with the flow as arrows."""
from __future__ import annotations

from typing import Any

import numpy as np
from matplotlib import colors as mcolors
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, LogLocator, NullFormatter

from sphex.xr.units import typeset_units
from sphex.plot.figures import (
    _as_1d, FAINT, _figure, _FIGURE_STYLE, INK, map_figure, PALETTE, _style,
)

__all__ = ["energy_figure", "wind_map_figure"]


#: Signed colour map for vorticity and divergence: deep blue, paper at zero, brick red.
_swirl = mcolors.LinearSegmentedColormap.from_list(
    "sphex-swirl",
    ["#14284b", "#2f5f8a", "#8fb3cf", "#f8f6f1", "#e6b49a", "#b8553a", "#5c1a14"])

#: The reference slopes of a kinetic-energy spectrum: exponent, legend text, line style.
_ENERGY_REFERENCES = ((-3.0, "-3", (0, (6, 3))), (-5.0 / 3.0, "-5/3", (0, (1.5, 2.5))))


def _half_wavelength_axis(ax: Any, planet_radius_km: float) -> None:
    """A top axis of half-wavelength pi R / sqrt(l (l + 1)) in km on a sphere of this radius."""
    r = float(planet_radius_km)

    def to_km(l: np.ndarray) -> np.ndarray:
        l = np.maximum(np.asarray(l, dtype=float), 1e-3)
        return np.pi * r / np.sqrt(l * (l + 1))

    top = ax.secondary_xaxis("top", functions=(to_km, to_km))
    top.set_xlabel("half-wavelength [km]")
    top.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))


def energy_figure(rotational: Any, divergent: Any, *, units: str | None = None,
                  planet_radius_km: float | None = None, title: str | None = None,
                  note: str | None = None, dynamic_range: float = 1e8) -> Figure:
    """Log-log kinetic-energy spectrum: rotational and divergent parts, their sum, reference slopes.

    Parameters
    ----------
    rotational, divergent : array or DataArray over degree
        Kinetic energy per unit mass of each degree from 0
        (:func:`sphex.spectra.kinetic_energy`, :func:`sphex.xr.kinetic_energy`);
        degree 0 (always zero) is not drawn.
    units : str, optional
        Units of the energy (for example ``"m2 s-2"``).
    planet_radius_km : float, optional
        Adds a top axis of half-wavelength in km.
    title : str, optional
    note : str, optional
        A line under the legend (for example "mean of 12 fields").
    dynamic_range : float
        The y axis shows at most this ratio below the largest energy.

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    The two dashed lines are reference slopes, ``l^-3`` and ``l^-5/3``,
    drawn through the total at a degree near ``sqrt(2 lmax)`` and above it;
    they are guides to the eye for reading the slope of the spectrum, not fits.

    Examples
    --------
    >>> import numpy as np
    >>> l = np.arange(64.0)
    >>> fig = energy_figure(np.r_[0, l[1:] ** -3.0], np.r_[0, 0.1 * l[1:] ** (-5 / 3)])
    >>> [t.get_text() for t in fig.axes[0].get_legend().get_texts()][-2:]
    ['reference slope -3', 'reference slope -5/3']
    """
    rot, div = _as_1d(rotational), _as_1d(divergent)
    if rot.shape != div.shape or rot.size < 3:
        raise ValueError(f"energy_figure needs two spectra of one length >= 3 (degrees 0..lmax), "
                         f"got {rot.size} and {div.size} values")
    total = rot + div
    lmax = rot.size - 1
    l = np.arange(rot.size)
    import matplotlib as mpl

    with mpl.rc_context(_FIGURE_STYLE):
        fig = _figure(6.4, 4.4)
        ax = fig.add_subplot()
        _style(ax)
        for values, label, colour, width in ((total, "total", INK, 1.2),
                                             (rot, "rotational (from psi)", PALETTE[0], 1.8),
                                             (div, "divergent (from chi)", PALETTE[1], 1.8)):
            ok = (l >= 1) & (values > 0)
            ax.plot(l[ok], values[ok], color=colour, lw=width, label=label, solid_capstyle="round")
        pivot = int(min(max(2, round(np.sqrt(2.0 * lmax))), lmax - 1))
        if total[pivot] > 0:
            ll = np.geomspace(pivot, lmax, 40)
            for slope, text, style in _ENERGY_REFERENCES:
                line = 2.5 * total[pivot] * (ll / pivot) ** slope
                ax.plot(ll, line, ls=style, color=INK, lw=1.0, alpha=0.85,
                        label=f"reference slope {text}")
                ax.annotate(text, (ll[-1], line[-1]), xytext=(3, 0), textcoords="offset points",
                            va="center", fontsize=8.5, color=INK)
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlabel("spherical-harmonic degree l")
        ax.set_ylabel("kinetic energy per degree" + (f" [{typeset_units(units)}]" if units else ""))
        ax.grid(True, which="major", color=FAINT, lw=0.6)
        ax.grid(True, which="minor", color=FAINT, lw=0.3, alpha=0.6)
        ax.set_axisbelow(True)
        positive = total[1:][total[1:] > 0]
        if positive.size:
            peak = float(positive.max())
            ax.set_ylim(bottom=max(float(np.concatenate([rot[1:][rot[1:] > 0],
                                                         div[1:][div[1:] > 0]]).min()) * 0.5,
                                   peak / dynamic_range), top=peak * 8)
        ax.set_xlim(0.9, lmax * 1.25)
        ax.xaxis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
        ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
        ax.xaxis.set_minor_formatter(NullFormatter())
        if planet_radius_km:
            _half_wavelength_axis(ax, planet_radius_km)
        leg = ax.legend(frameon=False, loc="lower left", fontsize=8.5, title=note,
                        title_fontsize=8.5)
        leg.set_zorder(5)
        if title:
            ax.set_title(title, loc="left", fontweight="bold")
    return fig


def wind_map_figure(field: Any, east: Any, north: Any, *, arrows: int = 28,
                    title: str | None = None, cmap: Any = None, center: float | None = 0.0,
                    units: str | None = None, label: str | None = None,
                    arrow_units: str | None = None) -> Figure:
    """Map of a field (vorticity, divergence, speed) with the flow drawn as arrows over it.

    Parameters
    ----------
    field : xarray.DataArray
        One gridded field (see :func:`map_figure`).
    east, north : xarray.DataArray
        The flow's components on the same grid (one field each).
    arrows : int
        About this many arrows along the equator (rows and columns thinned alike).
    title : str, optional
    cmap : str or Colormap, optional
        Default a signed map centred on ``center``.
    center : float or None
        Value at the middle of the colour map (0 for vorticity and divergence).
    units, label : str, optional
        Colour-bar units and label (default from ``field``).
    arrow_units : str, optional
        Units of the reference arrow (default the ``units`` of ``east``).

    Returns
    -------
    matplotlib.figure.Figure
        The arrows point along the flow on the equirectangular map (east right,
        north up); a reference arrow gives their scale.
    """
    fig = map_figure(field, units=units, title=title, cmap=_swirl if cmap is None else cmap,
                     center=center, label=label)
    ax = fig.axes[0]
    info_lat, info_lon, e, n = _flow_on_map(east, north)
    step = max(1, int(round(info_lon.size / max(int(arrows), 1))))
    rows = np.arange(step // 2, info_lat.size, step)
    cols = np.arange(0, info_lon.size, step)
    x, y = np.meshgrid(info_lon[cols], info_lat[rows])
    ue, vn = e[np.ix_(rows, cols)], n[np.ix_(rows, cols)]
    speed = float(np.hypot(ue, vn).max()) if ue.size else 0.0
    q = ax.quiver(x, y, ue, vn, color=INK, alpha=0.8, width=0.0022, headwidth=3.6,
                  headlength=4.2, pivot="middle", zorder=3)
    if speed > 0:
        ref = float(f"{speed / 2:.1g}")
        text = arrow_units if arrow_units is not None else getattr(east, "attrs", {}).get("units")
        ax.quiverkey(q, 0.93, 1.035, ref, f"{ref:g}" + (f" {typeset_units(text)}" if text else ""),
                     labelpos="W", coordinates="axes", color=INK, fontproperties={"size": 8.5})
    return fig


def _flow_on_map(east: Any, north: Any) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """Latitudes, unwrapped longitudes (as :func:`map_figure` draws them) and both components."""
    from sphex.xr import find_grid

    info = find_grid(east)
    arrays = []
    for c in (east, north):
        extra = [d for d in c.dims if d not in (info.lat_dim, info.lon_dim)]
        if any(c.sizes[d] != 1 for d in extra):
            raise ValueError(f"wind_map_figure draws one field; select one along "
                             f"{', '.join(map(str, extra))}")
        c = c.squeeze(extra, drop=True) if extra else c
        arrays.append(np.asarray(c.transpose(info.lat_dim, info.lon_dim).values, dtype=float))
    lat = np.asarray(east[info.lat_name].values, dtype=float)
    lon = np.asarray(east[info.lon_name].values, dtype=float)
    lon_u = lon[0] + np.concatenate([[0.0], np.cumsum((np.diff(lon) + 180) % 360 - 180)])
    return lat, lon_u, arrays[0], arrays[1]


