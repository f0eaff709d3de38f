"""Figures of localised spectra and the outline of the cap they belong to."""
from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter

from sphex.xr.units import typeset_units
from sphex.plot.figures import (
    _as_1d, FAINT, _figure, _FIGURE_STYLE, INK, _lat_label, _lon_label, PALETTE, 
    _style,
)

__all__ = ["cap_outline", "draw_cap", "local_spectrum_figure"]


def cap_outline(lat: float, lon: float, radius_deg: float,
                n_points: int = 361) -> tuple[np.ndarray, np.ndarray]:
    """Points of the small circle at angular distance ``radius_deg`` around a centre.

    Parameters
    ----------
    lat, lon : float
        Centre (degrees).
    radius_deg : float
        Angular radius of the cap, in (0, 180] degrees.
    n_points : int
        Number of points; the first and last coincide (a closed curve).

    Returns
    -------
    (lat, lon) : two ndarrays of degrees
        Latitudes in [-90, 90]; longitudes *unwrapped* (continuous along
        the curve, starting within 180 degrees of ``lon``), so the curve
        never jumps across the date line.  A cap that holds a pole has an
        outline whose longitudes run through a full 360 degrees.

    Notes
    -----
    The destination point at distance :math:`\\delta` along azimuth
    :math:`\\alpha` from :math:`(\\varphi_1, \\lambda_1)` (common practice):
    :math:`\\sin\\varphi = \\sin\\varphi_1\\cos\\delta + \\cos\\varphi_1\\sin\\delta\\cos\\alpha`,
    :math:`\\lambda = \\lambda_1 + \\operatorname{atan2}(\\sin\\alpha\\sin\\delta\\cos\\varphi_1,
    \\cos\\delta - \\sin\\varphi_1\\sin\\varphi)`.

    Examples
    --------
    >>> la, lo = cap_outline(80.0, 170.0, 20.0)
    >>> round(float(la.min()), 9), round(float(lo.max() - lo.min()), 6)   # around the pole
    (60.0, 360.0)
    """
    if not -90.0 <= float(lat) <= 90.0:
        raise ValueError(f"lat must lie in [-90, 90] degrees, got {lat!r} "
                         "(are latitude and longitude swapped?)")
    if not 0.0 < float(radius_deg) <= 180.0:
        raise ValueError(f"radius_deg must lie in (0, 180] degrees, got {radius_deg!r}")
    if int(n_points) < 3:
        raise ValueError(f"n_points must be at least 3, got {n_points!r}")
    phi1, lam1 = np.radians(float(lat)), np.radians(float(lon))
    delta = np.radians(float(radius_deg))
    az = np.linspace(0.0, 2.0 * np.pi, int(n_points))
    sin_phi = np.clip(np.sin(phi1) * np.cos(delta) + np.cos(phi1) * np.sin(delta) * np.cos(az),
                      -1.0, 1.0)
    phi = np.arcsin(sin_phi)
    dlam = np.arctan2(np.sin(az) * np.sin(delta) * np.cos(phi1),
                      np.cos(delta) - np.sin(phi1) * sin_phi)
    # a point at a pole has no longitude: it takes that of the point before it
    # (of the first point off the pole at the start), so the curve runs along the map's edge
    at_pole = np.cos(phi) < 1e-9
    if at_pole.any() and not at_pole.all():
        source = np.maximum.accumulate(np.where(at_pole, -1, np.arange(az.size)))
        source[source < 0] = int(np.flatnonzero(~at_pole)[0])
        dlam = dlam[source]
    lon_deg = np.degrees(np.unwrap(lam1 + dlam))
    return np.degrees(phi), lon_deg


def draw_cap(ax: Any, lat: float, lon: float, radius_deg: float, *, color: str = INK,
             label: str | None = None, centre: bool = True, n_points: int = 361) -> list[Any]:
    """Draw a cap's outline (and its centre) on an equirectangular map axis.

    Works on the axes of :func:`map_figure` whatever their longitude range
    (-180..180 or 0..360): the unwrapped outline of :func:`cap_outline` is
    drawn three times, shifted by -360, 0 and +360 degrees, and the axis
    clips what lies outside, so a cap across the date line shows on both
    edges and a cap around a pole spans the map.  The axis limits are kept.

    Parameters
    ----------
    ax : matplotlib Axes
        A map axis in degrees (x longitude, y latitude).
    lat, lon, radius_deg : float
        The cap, as in :func:`cap_outline`.
    color : str
    label : str, optional
        Legend entry of the outline.
    centre : bool
        Mark the centre with a small cross.
    n_points : int
        Points on the outline.

    Returns
    -------
    list of matplotlib artists
    """
    la, lo = cap_outline(lat, lon, radius_deg, n_points)
    xlim, ylim = ax.get_xlim(), ax.get_ylim()
    artists = []
    for k, shift in enumerate((-360.0, 0.0, 360.0)):
        halo, = ax.plot(lo + shift, la, color="#ffffff", lw=2.6, alpha=0.7, solid_capstyle="round",
                        zorder=4)
        line, = ax.plot(lo + shift, la, color=color, lw=1.3, ls=(0, (6, 2.5)), zorder=5,
                        label=label if shift == 0.0 else None)
        artists += [halo, line]
        if centre:
            mark, = ax.plot([float(lon) + shift], [float(lat)], marker="+", ms=7, mew=1.4,
                            color=color, zorder=5, ls="none")
            artists.append(mark)
    ax.set_xlim(xlim)
    ax.set_ylim(ylim)
    return artists


def _local_parts(local: Any) -> dict[str, Any]:
    """Power, error, valid range and a description of one localised spectrum (a Dataset of
    sphex.xr.local_power or a sphex.localize.LocalSpectrum)."""
    if hasattr(local, "data_vars"):
        if "power" not in local.data_vars or "power_error" not in local.data_vars:
            raise ValueError("a localised spectrum Dataset needs power and power_error "
                             "(from sphex.xr.local_power)")
        extra = [d for d in local["power"].dims if d != "degree"]
        if any(local.sizes[d] != 1 for d in extra):
            raise ValueError(f"local_spectrum_figure draws one field per spectrum; select one along "
                             f"{', '.join(map(str, extra))}")
        a = local.attrs
        return {"power": _as_1d(local["power"]), "error": _as_1d(local["power_error"]),
                "valid": (int(a["valid_degree_min"]), int(a["valid_degree_max"])),
                "lat": float(a["centre_lat"]), "lon": float(a["centre_lon"]),
                "cap": float(a["cap_radius_deg"]), "lwin": int(a["window_degree"]),
                "n": int(a["n_windows"]), "units": local["power"].attrs.get("units")}
    if tuple(np.shape(local.power)[:-1]):
        raise ValueError("local_spectrum_figure draws one field per spectrum; select one first")
    return {"power": _as_1d(local.power), "error": _as_1d(local.error),
            "valid": tuple(local.valid_range), "lat": local.lat, "lon": local.lon,
            "cap": local.cap_radius_deg, "lwin": local.lwin, "n": local.n_windows, "units": None}


def _blurred_global(global_power: np.ndarray, p: dict[str, Any]) -> np.ndarray:
    """The global spectrum blurred by the windows of one localised spectrum, on its degrees."""
    from sphex.localize import expected_local_power

    size = p["power"].size
    g = np.zeros(size)
    g[: min(size, global_power.size)] = global_power[:size]
    return expected_local_power(g, p["cap"], p["lwin"], n_windows=p["n"])


def _cap_text(p: dict[str, Any]) -> str:
    return (f"cap {p['cap']:g}° at {_lat_label(p['lat'])} {_lon_label(p['lon'])}, "
            f"window degree {p['lwin']}, {p['n']} window{'s' if p['n'] != 1 else ''}")


def local_spectrum_figure(local: Any, global_power: Any = None, *,
                          labels: Sequence[str] | None = None, units: str | None = None,
                          title: str | None = None, ylabel: str = "degree power",
                          global_label: str = "global spectrum", blurred: bool = True) -> Figure:
    """Localised spectra with their error bands beside the global spectrum (log-log).

    Each localised spectrum is drawn as a line with a band of plus and
    minus one standard error (its spread across the windows); inside its
    reliable degrees (``window degree .. lmax - window degree``) the line is
    solid, outside dotted and pale.  The global spectrum is the ink line;
    with ``blurred``, the global spectrum blurred by each localised
    spectrum's windows (:func:`sphex.localize.expected_local_power`: what
    the localised spectrum would be, on average, if the region were like the
    whole planet) is drawn dashed over the reliable degrees.  That is the
    curve to compare a localised spectrum with.

    Parameters
    ----------
    local : Dataset, LocalSpectrum, or a sequence of them
        From :func:`sphex.xr.local_power` (one field) or
        :func:`sphex.localize.local_power`.
    global_power : array or DataArray over degree, optional
        The global degree power of the same field (for example
        :func:`sphex.xr.degree_power`).
    labels : sequence of str, optional
        Legend entries of the localised spectra (default: cap, centre,
        window degree and number of windows).
    units : str, optional
        Units of the power (default from the Dataset).
    title, ylabel, global_label : str
    blurred : bool
        Also draw the blurred global spectrum (needs ``global_power``).

    Returns
    -------
    matplotlib.figure.Figure
    """
    items = list(local) if isinstance(local, (list, tuple)) else [local]
    if not items:
        raise ValueError("local_spectrum_figure needs at least one localised spectrum")
    parts = [_local_parts(x) for x in items]
    if labels is not None and len(labels) != len(parts):
        raise ValueError(f"{len(labels)} labels for {len(parts)} localised spectra")
    units = units if units is not None else parts[0]["units"]
    import matplotlib as mpl

    with mpl.rc_context(_FIGURE_STYLE):
        fig = _figure(6.4, 4.3)
        ax = fig.add_subplot()
        _style(ax)
        tops, lows = [], []
        if global_power is not None:
            g = _as_1d(global_power)
            l = np.arange(g.size)
            ok = (l >= 1) & (g > 0)
            ax.plot(l[ok], g[ok], color=INK, lw=1.5, label=global_label, zorder=3)
            tops.append(g[ok].max(initial=0.0))
        for i, p in enumerate(parts):
            colour = PALETTE[(i + 1) % len(PALETTE)] if global_power is not None else PALETTE[i % len(PALETTE)]
            power, err = p["power"], np.nan_to_num(p["error"], nan=0.0)
            l = np.arange(power.size)
            lo_v, hi_v = p["valid"]
            inside = (l >= max(lo_v, 1)) & (l <= hi_v) & (power > 0)
            outside = (l >= 1) & (power > 0) & ~inside
            lower = np.where(power - err > 0, power - err, power / 10.0)
            ax.fill_between(l[inside], lower[inside], (power + err)[inside], color=colour,
                            alpha=0.22, lw=0, zorder=2)
            text = labels[i] if labels is not None else _cap_text(p)
            ax.plot(np.where(inside, l, np.nan), np.where(inside, power, np.nan), color=colour,
                    lw=1.6, label=text, zorder=4)
            ax.plot(np.where(outside, l, np.nan), np.where(outside, power, np.nan), color=colour,
                    lw=1.0, ls=(0, (1, 2)), alpha=0.6, zorder=4)
            if inside.any():
                tops.append(float((power + err)[inside].max()))
                lows.append(float(lower[inside].min()))
            if global_power is not None and blurred:
                expected = _blurred_global(_as_1d(global_power), p)
                keep = inside & (expected > 0)
                ax.plot(np.where(keep, l, np.nan), np.where(keep, expected, np.nan),
                        color=INK if len(parts) == 1 else colour, lw=1.1, ls=(0, (5, 3)),
                        zorder=3, label="global, blurred by the windows" if i == 0 else None)
        ax.set_xscale("log")
        ax.set_yscale("log")
        lmax = max(p["power"].size for p in parts) - 1
        ax.set_xlim(0.9, max(lmax, 2) * 1.1)
        if tops and lows:
            ax.set_ylim(max(min(lows) / 3.0, max(tops) / 1e10), max(tops) * 3.0)
        ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
        ax.set_xlabel("spherical-harmonic degree l")
        ax.set_ylabel(ylabel + (f" [{typeset_units(units)}]" if units else ""))
        ax.grid(True, which="major", color=FAINT, lw=0.6)
        ax.grid(True, which="minor", color=FAINT, lw=0.3, alpha=0.6)
        ax.set_axisbelow(True)
        ax.text(0.99, 0.98, "band: ±1 standard error across windows\ndotted: outside the "
                "reliable degrees", transform=ax.transAxes, ha="right", va="top", fontsize=7.5,
                color=INK, alpha=0.75)
        leg = ax.legend(frameon=False, loc="lower left", fontsize=8.5)
        leg.set_zorder(5)
        if title:
            ax.set_title(title, loc="left", fontweight="bold")
    return fig


