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
from matplotlib.ticker import FuncFormatter, LogLocator, MultipleLocator, NullFormatter

from sphex.xr.output import atomic_output

__all__ = ["PALETTE", "relief", "heat", "power_figure", "map_figure", "triangle_figure", "save",
           "energy_figure", "wind_map_figure", "cap_outline", "draw_cap", "local_spectrum_figure",
           "model_spectrum_figure"]

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


# ----------------------------------------------------------------------------
# Winds and currents
# ----------------------------------------------------------------------------
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
        ax.set_ylabel("kinetic energy per degree" + (f" [{_pretty_units(units)}]" if units else ""))
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
        ax.quiverkey(q, 0.93, 1.035, ref, f"{ref:g}" + (f" {_pretty_units(text)}" if text else ""),
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


# ---------------------------------------------------------------------------
# localised spectra and the cap they belong to
# ---------------------------------------------------------------------------
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
        ax.set_ylabel(ylabel + (f" [{_pretty_units(units)}]" if units else ""))
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


# ---------------------------------------------------------------------------
# spectra of potential models: signal, error and a rule of thumb
# ---------------------------------------------------------------------------
def model_spectrum_figure(signal: Any, error: Any = None, *, kaula: float | None = None,
                          units: str | None = None, title: str | None = None,
                          ylabel: str = "degree variance") -> Figure:
    """Degree variances of a potential model with its error degree variances.

    Parameters
    ----------
    signal : array or DataArray over degree
        Degree variances (:func:`sphex.potential.degree_variances` or
        :func:`sphex.xr.degree_variances`).
    error : array or DataArray over degree, optional
        Error degree variances of the same model.  The first degree where
        they reach the signal (:func:`sphex.potential.crossing_degree`) is
        marked: beyond it the model carries no information.
    kaula : float, optional
        Draw Kaula's rule ``(2l+1) (kaula / l^2)^2`` (1e-5 for the Earth) as a
        reference line, labelled with its source (Kaula 1966).  Meant for
        fully normalised gravity coefficients of a terrestrial planet.
    units : str, optional
        Units of the variances (``None`` or ``"1"``: dimensionless).
    title, ylabel : str

    Returns
    -------
    matplotlib.figure.Figure
    """
    from sphex.potential import crossing_degree, kaula_rule

    s = _as_1d(signal)
    curves = [s]
    labels = ["degree variances (signal)"]
    e = None
    if error is not None:
        e = _as_1d(error)
        if e.shape != s.shape:
            raise ValueError(f"error has {e.size} degrees, signal {s.size}; they must match")
        curves.append(e)
        labels.append("error degree variances")
    if kaula is not None:
        if not kaula > 0:
            raise ValueError(f"kaula must be a positive constant such as 1e-5, got {kaula!r}")
        curves.append(np.nan_to_num(kaula_rule(s.size - 1, kaula), nan=0.0))
        constant = f"{kaula:g}".replace("e-0", "e-")
        labels.append(f"Kaula's rule, {constant}/l\u00b2 per coefficient (Kaula 1966)")
    fig = power_figure(curves, labels, units=None if units in (None, "", "1") else units,
                       title=title, ylabel=ylabel, dynamic_range=1e30)
    ax = fig.axes[0]
    if kaula is not None:
        ax.lines[-1].set_linestyle((0, (2, 2)))
        ax.lines[-1].set_color(INK)
    ax.legend(frameon=False, loc="best", fontsize=8.5)
    if e is not None:
        cross = crossing_degree(s, e)
        if cross is not None:
            ax.axvline(cross, color=PALETTE[1], lw=0.9, ls=(0, (4, 2)))
            ax.annotate(f"error reaches signal\nat degree {cross}", xy=(cross, s[cross]),
                        xytext=(-24, -40), textcoords="offset points", ha="right", fontsize=8.5,
                        color=PALETTE[1], bbox={"boxstyle": "round,pad=0.25", "fc": PAPER,
                                                "ec": "none", "alpha": 0.9},
                        arrowprops={"arrowstyle": "-", "color": PALETTE[1], "lw": 0.7})
    return fig
