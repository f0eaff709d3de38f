"""Figures: degree power spectra, equirectangular maps, degree-order triangles.

Each function returns a :class:`matplotlib.figure.Figure` built without
pyplot (so it works in scripts, servers and threads alike); :func:`save`
writes it atomically.  The look is sphex's own: warm paper background, ink
text, a small fixed palette, and two colour maps (``relief`` for signed
fields such as topography, ``heat`` for positive ones such as temperature).

Examples
--------
>>> import numpy as np
>>> from sphex import plot
>>> l = np.arange(1, 65)
>>> fig = plot.power_figure([l ** -2.0], labels=["l^-2"], fit=(4, 60))
>>> fig.axes[0].get_xscale()
'log'
"""
from __future__ import annotations

import os
from collections.abc import Sequence
from pathlib import Path
from typing import Any

import numpy as np
from matplotlib import colors as mcolors
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, MultipleLocator

from sphex.xr.output import atomic_output

__all__ = ["PALETTE", "relief", "heat", "power_figure", "map_figure", "triangle_figure", "save"]

PAPER = "#f8f6f1"
INK = "#23252b"
FAINT = "#d9d4c7"
PALETTE = ("#1f4e79", "#c8553d", "#2a9d8f", "#8d6a9f", "#e0a526", "#5c7457")

relief = mcolors.LinearSegmentedColormap.from_list(
    "sphex-relief",
    ["#0d1b3d", "#1f4e79", "#5d8fb5", "#b9d3e1", "#f1ead8", "#d9b77e", "#a8733f", "#5e3b22"])
heat = mcolors.LinearSegmentedColormap.from_list(
    "sphex-heat", ["#14142b", "#3d2c63", "#7b2f6b", "#c2434f", "#ee8a3c", "#f8d77c"])
_amplitude = mcolors.LinearSegmentedColormap.from_list(
    "sphex-amplitude", ["#f8f6f1", "#c9dfd8", "#6fa8a0", "#2f6f86", "#1d3557", "#120d2b"])
_COLOUR_MAPS = {"relief": relief, "heat": heat, "amplitude": _amplitude}

_FIGURE_STYLE = {
    "font.size": 9.5, "axes.titlesize": 11, "axes.labelsize": 9.5,
    "axes.edgecolor": INK, "axes.labelcolor": INK, "xtick.color": INK, "ytick.color": INK,
    "text.color": INK,
}


def _figure(w: float, h: float) -> Figure:
    fig = Figure(figsize=(w, h), facecolor=PAPER, layout="constrained")
    return fig


def _style(ax: Any) -> None:
    ax.set_facecolor("#fffdf8")
    for side in ("top", "right"):
        ax.spines[side].set_visible(False)
    for side in ("left", "bottom"):
        ax.spines[side].set_color(INK)
        ax.spines[side].set_linewidth(0.8)
    ax.tick_params(length=3, width=0.7)


def _as_1d(s: Any) -> np.ndarray:
    return np.asarray(getattr(s, "values", s), dtype=np.float64).reshape(-1)


def _power_law_fit(power: np.ndarray, l1: int, l2: int) -> tuple[float, float]:
    """Slope and log10 intercept of a power-law fit (sphex.spectra.spectral_slope)."""
    from sphex.spectra import spectral_slope

    res = spectral_slope(power, l1, l2)
    return float(res[0]), float(res[1])


def power_figure(spectra: Any, labels: Sequence[str] | None = None, *, units: str | None = None,
                 fit: tuple[int, int] | None = None, reference: float | None = None,
                 band: tuple[Any, Any] | None = None, planet_radius_km: float | None = None,
                 title: str | None = None, ylabel: str = "degree power",
                 band_label: str = "range over fields", dynamic_range: float = 1e10) -> Figure:
    """Log-log plot of one or more degree power spectra.

    Parameters
    ----------
    spectra : array or sequence of arrays (or DataArrays over degree)
        Spectra indexed by degree from 0; degree 0 (the mean) is not drawn on
        the logarithmic axis.
    labels : sequence of str, optional
        Legend entries, one per spectrum.
    units : str, optional
        Units of the power (for example ``"m^2"``), shown on the axis.
    fit : (int, int), optional
        Fit a power law to the first spectrum over degrees L1..L2 and draw it
        dashed, with its slope in the legend.
    reference : float, optional
        Draw a power-law line of this slope through the first spectrum's middle
        (when no ``fit`` is given).
    band : (array, array), optional
        Lower and upper spectra of a shaded band (for example min and max over
        a time series), drawn behind the first spectrum.
    planet_radius_km : float, optional
        Add a top axis of half-wavelength (km) on a sphere of this radius:
        pi R / sqrt(l (l + 1)).
    title, ylabel : str
        Title and y-axis label.
    band_label : str
        Legend entry of the band.
    dynamic_range : float
        The y axis shows at most this ratio below the largest power, so that a
        spectrum falling to rounding noise does not squash the others.

    Returns
    -------
    matplotlib.figure.Figure
    """
    if isinstance(spectra, np.ndarray) and spectra.ndim == 1 or hasattr(spectra, "dims"):
        spectra = [spectra]
    curves = [_as_1d(s) for s in spectra]
    if not curves:
        raise ValueError("power_figure needs at least one spectrum")
    if labels is not None and len(labels) != len(curves):
        raise ValueError(f"{len(labels)} labels for {len(curves)} spectra")
    import matplotlib as mpl

    with mpl.rc_context(_FIGURE_STYLE):
        fig = _figure(6.4, 4.3)
        ax = fig.add_subplot()
        _style(ax)
        if band is not None:
            lo, hi = _as_1d(band[0]), _as_1d(band[1])
            l = np.arange(lo.size)
            ax.fill_between(l[1:], lo[1:], hi[1:], color=PALETTE[0], alpha=0.16, lw=0,
                            label=band_label)
        for i, p in enumerate(curves):
            l = np.arange(p.size)
            ok = (l >= 1) & (p > 0)
            ax.plot(l[ok], p[ok], color=PALETTE[i % len(PALETTE)], lw=1.6 if i == 0 else 1.3,
                    label=None if labels is None else labels[i], solid_capstyle="round")
        first = curves[0]
        if fit is not None:
            l1, l2 = int(fit[0]), int(fit[1])
            if not 1 <= l1 < l2 < first.size:
                raise ValueError(f"fit range {l1}:{l2} must lie within degrees 1..{first.size - 1}")
            k, b = _power_law_fit(first, l1, l2)
            ll = np.geomspace(l1, l2, 50)
            ax.plot(ll, 10.0 ** b * ll ** k, ls=(0, (5, 3)), color=INK, lw=1.1,
                    label=f"power law, slope {k:.2f} (degrees {l1}-{l2})")
            ax.axvspan(l1, l2, color=FAINT, alpha=0.25, lw=0)
        elif reference is not None:
            l = np.arange(first.size)
            mid = max(1, int(round(np.sqrt(max(first.size - 1, 1)))))
            if first[mid] > 0:
                ll = np.geomspace(1, first.size - 1, 50)
                ax.plot(ll, first[mid] * (ll / mid) ** reference, ls=(0, (5, 3)), color=INK,
                        lw=1.1, label=f"reference slope {reference:g}")
        ax.set_xscale("log")
        ax.set_yscale("log")
        ax.set_xlabel("spherical-harmonic degree l")
        ax.set_ylabel(ylabel + (f" [{_pretty_units(units)}]" if units else ""))
        ax.grid(True, which="major", color=FAINT, lw=0.6)
        ax.grid(True, which="minor", color=FAINT, lw=0.3, alpha=0.6)
        ax.set_axisbelow(True)
        peak = max(float(np.nanmax(c[1:])) if c.size > 1 else 0.0 for c in curves)
        low = min(float(np.nanmin(np.where(c[1:] > 0, c[1:], np.inf))) for c in curves if c.size > 1)
        if peak > 0 and np.isfinite(low) and low < peak / dynamic_range:
            ax.set_ylim(bottom=peak / dynamic_range)
        lmax = max(c.size for c in curves) - 1
        ax.set_xlim(0.9, max(lmax, 2) * 1.1)
        ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
        if planet_radius_km:
            r = float(planet_radius_km)

            def to_km(l: np.ndarray) -> np.ndarray:
                l = np.maximum(np.asarray(l, dtype=float), 1e-3)
                return np.pi * r / np.sqrt(l * (l + 1))

            top = ax.secondary_xaxis("top", functions=(to_km, to_km))
            top.set_xlabel("half-wavelength [km]")
            top.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
        if labels is not None or fit is not None or reference is not None or band is not None:
            leg = ax.legend(frameon=False, loc="lower left", fontsize=8.5)
            leg.set_zorder(5)
        if title:
            ax.set_title(title, loc="left", fontweight="bold")
    return fig


def _pretty_units(units: str) -> str:
    """``m^2`` -> ``m²`` for axis labels (files keep the plain form)."""
    return str(units).replace("^2", "\u00b2").replace("^3", "\u00b3").replace("^-1", "\u207b\u00b9")


def _edges(x: np.ndarray, lo: float | None = None, hi: float | None = None) -> np.ndarray:
    mid = 0.5 * (x[1:] + x[:-1])
    first = x[0] - (mid[0] - x[0]) if x.size > 1 else x[0] - 0.5
    last = x[-1] + (x[-1] - mid[-1]) if x.size > 1 else x[-1] + 0.5
    e = np.concatenate([[first], mid, [last]])
    if lo is not None:
        e = np.clip(e, lo, hi)
    return e


def _lat_label(v: float, _: Any = None) -> str:
    if abs(v) < 1e-9:
        return "0°"
    return f"{abs(v):g}°{'N' if v > 0 else 'S'}"


def _lon_label(v: float, _: Any = None) -> str:
    w = (v + 180.0) % 360.0 - 180.0
    if abs(w) < 1e-9:
        return "0°"
    if abs(abs(w) - 180) < 1e-9:
        return "180°"
    return f"{abs(w):g}°{'E' if w > 0 else 'W'}"


def map_figure(field: Any, lat: Any = None, lon: Any = None, *, units: str | None = None,
               title: str | None = None, cmap: Any = "relief", center: float | None = None,
               vmin: float | None = None, vmax: float | None = None,
               label: str | None = None) -> Figure:
    """Equirectangular map of a global field with lat/lon ticks and a colour bar.

    Parameters
    ----------
    field : 2-D array or xarray.DataArray
        Values ``(nlat, nlon)``; a DataArray brings its own coordinates,
        units and name (a single field: select one time step first).
    lat, lon : 1-D arrays, optional
        Coordinates in degrees (required for a plain array).
    units : str, optional
        Colour-bar units (default the DataArray's ``units`` attribute).
    title : str, optional
    cmap : str or Colormap
        ``"relief"``, ``"heat"``, ``"amplitude"`` or any matplotlib colour map.
    center : float, optional
        Value at the middle of the colour map (for signed fields, e.g. 0).
    vmin, vmax : float, optional
        Colour limits.
    label : str, optional
        Colour-bar label (default the DataArray's long_name or name).

    Returns
    -------
    matplotlib.figure.Figure
    """
    if hasattr(field, "dims"):
        from sphex.xr import find_grid

        info = find_grid(field)
        extra = [d for d in field.dims if d not in (info.lat_dim, info.lon_dim)]
        if any(field.sizes[d] != 1 for d in extra):
            raise ValueError(f"map_figure draws one field; select one along {', '.join(map(str, extra))}")
        da = field.squeeze(extra, drop=True) if extra else field
        da = da.transpose(info.lat_dim, info.lon_dim)
        lat = np.asarray(da[info.lat_name].values, dtype=float)
        lon = np.asarray(da[info.lon_name].values, dtype=float)
        units = units if units is not None else da.attrs.get("units")
        label = label if label is not None else da.attrs.get("long_name", da.name)
        values = np.asarray(da.values, dtype=float)
    else:
        if lat is None or lon is None:
            raise ValueError("map_figure needs lat and lon for a plain array")
        values = np.asarray(field, dtype=float)
        lat, lon = np.asarray(lat, dtype=float), np.asarray(lon, dtype=float)
    if values.shape != (lat.size, lon.size):
        raise ValueError(f"field shape {values.shape} does not match lat ({lat.size}) x lon ({lon.size})")
    order = np.argsort(lat)
    lat, values = lat[order], values[order]
    # longitudes: unwrap to ascending, drop a repeated seam column
    lon_u = lon[0] + np.concatenate([[0.0], np.cumsum((np.diff(lon) + 180) % 360 - 180)])
    if lon_u.size > 2 and abs(lon_u[-1] - lon_u[0] - 360) < 1e-6:
        lon_u, values = lon_u[:-1], values[:, :-1]
    if lon_u.size > 1 and lon_u[1] < lon_u[0]:
        lon_u, values = lon_u[::-1], values[:, ::-1]
    cm = _COLOUR_MAPS.get(cmap, cmap) if isinstance(cmap, str) else cmap
    finite = values[np.isfinite(values)]
    lo = float(finite.min()) if vmin is None and finite.size else vmin
    hi = float(finite.max()) if vmax is None and finite.size else vmax
    if center is not None and lo is not None and hi is not None and lo < center < hi:
        norm: mcolors.Normalize = mcolors.TwoSlopeNorm(center, lo, hi)
    else:
        norm = mcolors.Normalize(lo, hi)
    import matplotlib as mpl

    with mpl.rc_context(_FIGURE_STYLE):
        fig = _figure(7.2, 4.3)
        ax = fig.add_subplot()
        ax.set_facecolor(PAPER)
        x_e = _edges(lon_u)
        y_e = _edges(lat, -90.0, 90.0)
        mesh = ax.pcolormesh(x_e, y_e, values, cmap=cm, norm=norm, shading="flat",
                             rasterized=True)
        ax.set_xlim(x_e[0], x_e[-1])
        ax.set_ylim(-90, 90)
        ax.set_aspect("equal")
        ax.yaxis.set_major_locator(MultipleLocator(30))
        ax.xaxis.set_major_locator(MultipleLocator(60))
        ax.yaxis.set_major_formatter(FuncFormatter(_lat_label))
        ax.xaxis.set_major_formatter(FuncFormatter(_lon_label))
        ax.grid(True, color="#ffffff", lw=0.4, alpha=0.45)
        for s in ax.spines.values():
            s.set_color(INK)
            s.set_linewidth(0.7)
        ax.tick_params(length=2.5, width=0.6)
        cb = fig.colorbar(mesh, ax=ax, orientation="horizontal", fraction=0.06, pad=0.02,
                          aspect=45, shrink=0.8)
        text = str(label) if label is not None else ""
        if units:
            text = f"{text} [{_pretty_units(units)}]" if text else f"[{_pretty_units(units)}]"
        cb.set_label(text)
        cb.outline.set_linewidth(0.5)
        if title:
            ax.set_title(title, loc="left", fontweight="bold")
    return fig


def triangle_figure(coef: Any, *, units: str | None = None, title: str | None = None,
                    floor: float | None = None) -> Figure:
    """Degree-order picture of coefficient amplitudes, log10 |C_lm| and |S_lm|.

    Degree runs to the right; cosine coefficients C_lm are drawn above the
    axis at order +m, sine coefficients S_lm below it at -m, so the picture is
    a triangle with its point at degree 0.

    Parameters
    ----------
    coef : Harmonics or coefficient Dataset (single field)
    units : str, optional
        Units of the coefficients (default from ``coef``).
    title : str, optional
    floor : float, optional
        Smallest amplitude shown (default: 1e-12 of the largest).

    Returns
    -------
    matplotlib.figure.Figure
    """
    if hasattr(coef, "data_vars"):
        from sphex.xr import to_harmonics

        units = units if units is not None else coef.attrs.get("units")
        coef = to_harmonics(coef)
    if tuple(coef.batch_shape):
        raise ValueError("triangle_figure draws one field; select one first")
    units = units if units is not None else coef.units
    c, s = (np.abs(np.asarray(a, dtype=float)) for a in coef.cos_sin())
    lmax = coef.lmax
    img = np.full((2 * lmax + 1, lmax + 1), np.nan)
    l_idx, m_idx = np.tril_indices(lmax + 1)
    img[lmax + m_idx, l_idx] = c[l_idx, m_idx]
    pos = m_idx > 0
    img[lmax - m_idx[pos], l_idx[pos]] = s[l_idx[pos], m_idx[pos]]
    top = np.nanmax(img) if np.isfinite(img).any() and np.nanmax(img) > 0 else 1.0
    floor = top * 1e-12 if floor is None else floor
    with np.errstate(divide="ignore", invalid="ignore"):
        logimg = np.log10(np.maximum(img, floor))
    logimg[np.isnan(img)] = np.nan
    import matplotlib as mpl

    with mpl.rc_context(_FIGURE_STYLE):
        fig = _figure(6.4, 5.0)
        ax = fig.add_subplot()
        ax.set_facecolor(PAPER)
        cm = _amplitude.with_extremes(bad=PAPER)
        im = ax.imshow(logimg, origin="lower", cmap=cm, aspect="auto", interpolation="nearest",
                       extent=(-0.5, lmax + 0.5, -lmax - 0.5, lmax + 0.5))
        ax.axhline(0, color=INK, lw=0.5, alpha=0.5)
        ax.set_xlabel("degree l")
        ax.set_ylabel("order m")
        kw = {"transform": ax.transAxes, "fontsize": 9, "color": INK, "ha": "left"}
        ax.text(0.02, 0.96, "cosine coefficients C_lm  (order +m)", va="top", **kw)
        ax.text(0.02, 0.04, "sine coefficients S_lm  (order -m)", va="bottom", **kw)
        ax.yaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{abs(v):g}"))
        for s_ in ("top", "right"):
            ax.spines[s_].set_visible(False)
        cb = fig.colorbar(im, ax=ax, fraction=0.05, pad=0.02)
        cb.set_label("log10 |coefficient|" + (f"  [{_pretty_units(units)}]" if units else ""))
        cb.outline.set_linewidth(0.5)
        if title:
            ax.set_title(title, loc="left", fontweight="bold")
    return fig


def save(fig: Figure, path: str | os.PathLike, *, overwrite: bool = False, dpi: int = 150) -> Path:
    """Write a figure atomically (format from the file suffix, default PNG).

    Parameters
    ----------
    fig : Figure
    path : path-like
    overwrite : bool
        Replace an existing file.
    dpi : int

    Returns
    -------
    pathlib.Path
    """
    fmt = Path(path).suffix.lstrip(".").lower() or "png"
    with atomic_output(path, overwrite) as tmp:
        fig.savefig(tmp, format=fmt, dpi=dpi, facecolor=fig.get_facecolor(),
                    bbox_inches="tight", pad_inches=0.12)
    return Path(path)
