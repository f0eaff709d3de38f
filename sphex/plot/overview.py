"""Figures of the report that the other plot modules lack.

An equal-area (Mollweide) map, the cumulative share of the variance per
degree, the correlation per degree of two fields with its significance
level, the ratio of two spectra, and the power in degree bands over a
series.  Same house style as :mod:`sphex.plot.figures`.
"""
from __future__ import annotations

from collections.abc import Sequence
from typing import Any

import numpy as np
from matplotlib import colors as mcolors
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter

from sphex.xr.units import typeset_units
from sphex.plot.figures import (
    _COLOUR_MAPS, _FIGURE_STYLE, _as_1d, _figure, _style, FAINT, INK, PALETTE,
    PAPER,
)

__all__ = ["equal_area_map_figure", "cumulative_figure", "correlation_figure",
           "ratio_figure", "band_power_figure"]


def _colour_norm(values: np.ndarray, center: float | None, vmin: float | None,
                 vmax: float | None) -> mcolors.Normalize:
    finite = values[np.isfinite(values)]
    lo = float(finite.min()) if vmin is None and finite.size else vmin
    hi = float(finite.max()) if vmax is None and finite.size else vmax
    if center is not None and lo is not None and hi is not None and lo < center < hi:
        return mcolors.TwoSlopeNorm(center, lo, hi)
    return mcolors.Normalize(lo, hi)


def equal_area_map_figure(values: Any, lat: Any, lon: Any, *, units: str | None = None,
                          label: str | None = None, title: str | None = None,
                          cmap: Any = "strata", center: float | None = None,
                          vmin: float | None = None, vmax: float | None = None) -> Figure:
    """A global field on matplotlib's Mollweide (equal-area) projection.

    Parameters
    ----------
    values : 2-D array ``(nlat, nlon)``
    lat, lon : 1-D arrays
        Degrees; any latitude order, any longitude origin (a repeated seam
        column is dropped).
    units, label, title : str, optional
        Colour-bar units and label, title.
    cmap : str or Colormap
        ``"strata"``, ``"ember"``, ``"tilt"`` or a matplotlib colour map.
    center, vmin, vmax : float, optional
        Middle and limits of the colour scale.

    Returns
    -------
    matplotlib.figure.Figure
    """
    v = np.asarray(values, dtype=float)
    lat = np.asarray(lat, dtype=float)
    lon = np.asarray(lon, dtype=float)
    if v.shape != (lat.size, lon.size):
        raise ValueError(f"values of shape {v.shape} do not match lat ({lat.size}) x lon ({lon.size})")
    wrapped = (lon + 180.0) % 360.0 - 180.0
    keep = np.ones(lon.size, bool)
    _, first = np.unique(np.round(wrapped, 9), return_index=True)
    keep[:] = False
    keep[first] = True
    order = np.argsort(wrapped[keep])
    x = np.deg2rad(wrapped[keep][order])
    v = v[:, keep][:, order]
    row = np.argsort(lat)
    y = np.deg2rad(lat[row])
    v = v[row]
    # cell edges; the outer ones close the globe
    xe = np.concatenate([[-np.pi], 0.5 * (x[1:] + x[:-1]), [np.pi]])
    ye = np.concatenate([[-np.pi / 2], 0.5 * (y[1:] + y[:-1]), [np.pi / 2]])
    cm = _COLOUR_MAPS.get(cmap, cmap) if isinstance(cmap, str) else cmap
    import matplotlib as mpl

    with mpl.rc_context(_FIGURE_STYLE):
        fig = _figure(7.2, 4.2)
        ax = fig.add_subplot(projection="mollweide")
        ax.set_facecolor(PAPER)
        mesh = ax.pcolormesh(xe, ye, v, cmap=cm, norm=_colour_norm(v, center, vmin, vmax),
                             shading="flat", rasterized=True)
        ax.grid(True, color="#ffffff", lw=0.4, alpha=0.5)
        ax.tick_params(labelsize=7.5)
        ax.set_xticklabels([])          # longitude labels would sit on the field; the grid stays
        cb = fig.colorbar(mesh, ax=ax, orientation="horizontal", fraction=0.06, pad=0.04,
                          aspect=45, shrink=0.8)
        text = label or ""
        if units:
            text = f"{text} [{typeset_units(units)}]".strip()
        cb.set_label(text)
        cb.outline.set_linewidth(0.5)
        if title:
            ax.set_title(title, loc="left", fontweight="bold")
    return fig


def _degree_axes(fig: Figure, ylabel: str, title: str | None) -> Any:
    ax = fig.add_subplot()
    _style(ax)
    ax.set_xlabel("spherical-harmonic degree l")
    ax.set_ylabel(ylabel)
    ax.grid(True, which="major", color=FAINT, lw=0.6)
    ax.set_axisbelow(True)
    if title:
        ax.set_title(title, loc="left", fontweight="bold")
    return ax


def cumulative_figure(share: Any, marks: Sequence[tuple[float, int]] = (), *,
                      title: str | None = None) -> Figure:
    """Share of the variance (degree 0 left out) in degrees 1..l, against l.

    Parameters
    ----------
    share : array over degree
        Cumulative share in [0, 1], indexed by degree from 0 (degree 0 is not drawn).
    marks : sequence of (fraction, degree)
        Levels to mark, such as ``(0.9, 17)``: 90 % of the variance lies in degrees 1..17.
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    s = _as_1d(share)
    l = np.arange(s.size)
    import matplotlib as mpl

    with mpl.rc_context(_FIGURE_STYLE):
        fig = _figure(6.4, 3.6)
        ax = _degree_axes(fig, "share of the variance in degrees 1..l", title)
        ax.step(l[1:], s[1:], where="post", color=PALETTE[0], lw=1.6)
        for i, (frac, deg) in enumerate(marks):
            c = PALETTE[(i + 1) % len(PALETTE)]
            ax.axhline(frac, color=c, lw=0.8, ls=(0, (4, 2)))
            ax.plot([deg], [frac], "o", color=c, ms=4)
            ax.annotate(f"{100 * frac:g} % by degree {deg}", (deg, frac), xytext=(6, -12),
                        textcoords="offset points", fontsize=8.5, color=c)
        ax.set_xscale("log")
        ax.set_xlim(0.9, max(s.size - 1, 2) * 1.1)
        ax.set_ylim(0, 1.04)
        ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
    return fig


def correlation_figure(corr: Any, significance: Any, *, level: float = 0.95,
                       title: str | None = None) -> Figure:
    """Correlation per degree of two fields, with the band uncorrelated fields stay inside.

    Parameters
    ----------
    corr : array over degree
        :func:`sphex.spectra.correlation`.
    significance : array over degree
        :func:`sphex.spectra.correlation_significance` at ``level``; drawn as
        a shaded band between its negative and positive values.
    level : float
        The level, for the legend.
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    r = _as_1d(corr)
    c = _as_1d(significance)
    l = np.arange(r.size)
    import matplotlib as mpl

    with mpl.rc_context(_FIGURE_STYLE):
        fig = _figure(6.4, 3.8)
        ax = _degree_axes(fig, "correlation per degree", title)
        ax.fill_between(l[1:], -c[1:], c[1:], color=FAINT, alpha=0.7, lw=0,
                        label=f"{100 * level:g} % level for uncorrelated fields")
        ax.plot(l[1:], r[1:], color=PALETTE[0], lw=1.5, marker="o", ms=2.5, label="correlation")
        ax.axhline(0, color=INK, lw=0.5)
        ax.set_ylim(-1.05, 1.05)
        ax.set_xlim(0.5, max(r.size - 1, 2) + 0.5)
        ax.legend(frameon=False, loc="lower left", fontsize=8.5)
    return fig


def ratio_figure(ratio: Any, *, label: str = "ratio of the spectra",
                 title: str | None = None) -> Figure:
    """Ratio of two degree spectra on a logarithmic axis, with the line of equal power.

    Parameters
    ----------
    ratio : array over degree
        Degree 0 is not drawn; non-positive or undefined values are skipped.
    label : str
        The y-axis label.
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure
    """
    q = _as_1d(ratio)
    l = np.arange(q.size)
    ok = (l >= 1) & np.isfinite(q) & (q > 0)
    import matplotlib as mpl

    with mpl.rc_context(_FIGURE_STYLE):
        fig = _figure(6.4, 3.6)
        ax = _degree_axes(fig, label, title)
        ax.axhline(1.0, color=INK, lw=0.8, ls=(0, (4, 2)))
        ax.plot(l[ok], q[ok], color=PALETTE[1], lw=1.5)
        ax.set_yscale("log")
        ax.set_xlim(0.5, max(q.size - 1, 2) + 0.5)
    return fig


def band_power_figure(steps: Any, bands: Sequence[tuple[int, int]], power: Any, *,
                      units: str | None = None, title: str | None = None,
                      xlabel: str = "step") -> Figure:
    """Power in degree bands along a series (time, level, member).

    Parameters
    ----------
    steps : array
        Positions along the series (numbers or datetimes).
    bands : sequence of (int, int)
        Degree bands, inclusive.
    power : array ``(nbands, nsteps)``
        Sum of the degree power over each band, per step.
    units : str, optional
    title, xlabel : str

    Returns
    -------
    matplotlib.figure.Figure
    """
    p = np.asarray(power, dtype=float)
    import matplotlib as mpl

    with mpl.rc_context(_FIGURE_STYLE):
        fig = _figure(6.4, 3.8)
        ax = fig.add_subplot()
        _style(ax)
        for i, (l1, l2) in enumerate(bands):
            ax.plot(steps, p[i], color=PALETTE[i % len(PALETTE)], lw=1.5, marker="o", ms=3,
                    label=f"degrees {l1}-{l2}")
        ax.set_yscale("log")
        ax.set_xlabel(xlabel)
        ax.set_ylabel("band power" + (f" [{typeset_units(units)}]" if units else ""))
        ax.grid(True, color=FAINT, lw=0.6)
        ax.legend(frameon=False, fontsize=8.5)
        if title:
            ax.set_title(title, loc="left", fontweight="bold")
        if p.size and not np.issubdtype(np.asarray(steps).dtype, np.number):
            fig.autofmt_xdate()
    return fig
