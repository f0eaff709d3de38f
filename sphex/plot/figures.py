"""Figures: degree power spectra, equirectangular maps, the isotropy picture.

Each function returns a :class:`matplotlib.figure.Figure` built without
pyplot (so it works in scripts, servers and threads alike); :func:`save`
writes it atomically.  The look is sphex's own: warm paper background, ink
text, a small fixed palette, and three colour maps of its own: ``strata``
(signed fields such as topography: blue below zero, ochre to umber above),
``ember`` (positive fields such as temperature: night blue through red to
pale gold) and ``tilt`` (a diverging scale for ratios drawn on a log scale,
teal below one, copper above).

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
from matplotlib.collections import PolyCollection
from matplotlib.figure import Figure
from matplotlib.ticker import FixedLocator, FuncFormatter, LogLocator, MultipleLocator, NullFormatter

from sphex.xr.output import atomic_output
from sphex.xr.units import typeset_units

__all__ = ["PALETTE", "strata", "ember", "tilt", "power_figure", "map_figure", "isotropy_figure",
           "save"]

PAPER = "#f8f6f1"
INK = "#23252b"
FAINT = "#d9d4c7"
SHADE = "#e6d3a3"
PALETTE = ("#1f4e79", "#c8553d", "#2a9d8f", "#8d6a9f", "#e0a526", "#5c7457")

strata = mcolors.LinearSegmentedColormap.from_list(
    "sphex-strata",
    ["#0d1b3d", "#1f4e79", "#5d8fb5", "#b9d3e1", "#f1ead8", "#d9b77e", "#a8733f", "#5e3b22"])
ember = mcolors.LinearSegmentedColormap.from_list(
    "sphex-ember", ["#14142b", "#3d2c63", "#7b2f6b", "#c2434f", "#ee8a3c", "#f8d77c"])
tilt = mcolors.LinearSegmentedColormap.from_list(
    "sphex-tilt", ["#0f3b3a", "#2a7f78", "#8cc5b8", "#f4efe2", "#e2b07a", "#b0622f", "#5a2514"])
_COLOUR_MAPS = {"strata": strata, "ember": ember, "tilt": tilt}

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
                 fit: tuple[int, int] | None = None, fit_curves: Sequence[int] = (0,),
                 reference: float | None = None, band: tuple[Any, Any] | None = None,
                 planet_radius_km: float | None = None, title: str | None = None,
                 ylabel: str = "degree power", band_label: str = "range over fields",
                 correlation: Any = None, correlation_label: str | None = None,
                 dynamic_range: float = 1e10) -> Figure:
    """Log-log plot of one or more degree spectra.

    Parameters
    ----------
    spectra : array or sequence of arrays (or DataArrays over degree)
        Spectra indexed by degree from 0; degree 0 (the mean) is not drawn on
        the logarithmic axis.
    labels : sequence of str, optional
        Legend entries, one per spectrum.
    units : str, optional
        Units of the spectra as written in files (``"m2"``, ``"m2 s-2"``),
        typeset on the axis.
    fit : (int, int), optional
        Fit a power law over degrees L1..L2 to the spectra ``fit_curves``;
        each fit is drawn dashed in its curve's colour with its slope in the
        legend, and the fitted degrees are shaded (also in the legend).
    fit_curves : sequence of int
        Which spectra to fit (default the first).
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
    correlation : array, optional
        Per-degree correlation of two fields, drawn in a panel below (-1..1).
    correlation_label : str, optional
        Legend entry of the correlation.
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
    bad = [k for k in fit_curves if not 0 <= k < len(curves)]
    if bad:
        raise ValueError(f"fit_curves {bad} name no spectrum; there are {len(curves)}")
    import matplotlib as mpl

    with mpl.rc_context(_FIGURE_STYLE):
        if correlation is None:
            fig = _figure(6.4, 4.3)
            ax = fig.add_subplot()
        else:
            fig = _figure(6.4, 5.6)
            ax, low = fig.subplots(2, 1, sharex=True, gridspec_kw={"height_ratios": (3, 1.2)})
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
        if fit is not None:
            _draw_fits(ax, curves, labels, fit, fit_curves)
        elif reference is not None:
            _draw_reference(ax, curves[0], reference)
        ax.set_yscale("log")
        ax.set_ylabel(ylabel + (f" [{typeset_units(units)}]" if units else ""))
        ax.grid(True, which="major", color=FAINT, lw=0.6)
        ax.grid(True, which="minor", color=FAINT, lw=0.3, alpha=0.6)
        ax.set_axisbelow(True)
        _limit_dynamic_range(ax, curves, dynamic_range)
        lmax = max(c.size for c in curves) - 1
        bottom = ax if correlation is None else low
        if correlation is not None:
            _draw_correlation(low, _as_1d(correlation), correlation_label)
        _degree_axis(bottom, lmax)
        if planet_radius_km:
            _half_wavelength_axis(ax, float(planet_radius_km))
        if labels is not None or fit is not None or reference is not None or band is not None:
            leg = ax.legend(frameon=False, loc="lower left", fontsize=8.5)
            leg.set_zorder(5)
        if title:
            ax.set_title(title, loc="left", fontweight="bold")
    return fig


def _draw_fits(ax: Any, curves: list[np.ndarray], labels: Sequence[str] | None,
               fit: tuple[int, int], fit_curves: Sequence[int]) -> None:
    """Dashed power-law fits in their curves' colours, and the fitted degrees shaded."""
    l1, l2 = int(fit[0]), int(fit[1])
    for k in fit_curves:
        curve = curves[k]
        if not 1 <= l1 < l2 < curve.size:
            raise ValueError(f"fit range {l1}:{l2} must lie within degrees 1..{curve.size - 1}")
        slope, intercept = _power_law_fit(curve, l1, l2)
        ll = np.geomspace(l1, l2, 50)
        name = f" to {labels[k]}" if labels is not None and len(fit_curves) > 1 else ""
        ax.plot(ll, 10.0 ** intercept * ll ** slope, ls=(0, (5, 3)),
                color=INK if len(fit_curves) == 1 else PALETTE[k % len(PALETTE)], lw=1.1,
                label=f"power law fitted{name}, slope {slope:.2f}")
    ax.axvspan(l1, l2, color=SHADE, alpha=0.45, lw=0, zorder=0,
               label=f"fitted degrees {l1}-{l2}")


def _draw_reference(ax: Any, first: np.ndarray, slope: float) -> None:
    mid = max(1, int(round(np.sqrt(max(first.size - 1, 1)))))
    if first[mid] > 0:
        ll = np.geomspace(1, first.size - 1, 50)
        ax.plot(ll, first[mid] * (ll / mid) ** slope, ls=(0, (5, 3)), color=INK, lw=1.1,
                label=f"reference slope {slope:g}")


def _limit_dynamic_range(ax: Any, curves: list[np.ndarray], dynamic_range: float) -> None:
    peak = max(float(np.nanmax(c[1:])) if c.size > 1 else 0.0 for c in curves)
    positive = [c[1:][c[1:] > 0] for c in curves if c.size > 1]
    low = min((float(np.nanmin(p)) for p in positive if p.size), default=np.inf)
    if peak > 0 and np.isfinite(low) and low < peak / dynamic_range:
        ax.set_ylim(bottom=peak / dynamic_range)


def _draw_correlation(ax: Any, corr: np.ndarray, label: str | None) -> None:
    _style(ax)
    l = np.arange(corr.size)
    ok = (l >= 1) & np.isfinite(corr)
    ax.plot(l[ok], corr[ok], color=PALETTE[2], lw=1.4, label=label)
    ax.axhline(0.0, color=INK, lw=0.6, alpha=0.6)
    ax.set_ylim(-1.05, 1.05)
    ax.yaxis.set_major_locator(FixedLocator([-1, -0.5, 0, 0.5, 1]))
    ax.set_ylabel("correlation")
    ax.grid(True, which="major", color=FAINT, lw=0.6)
    ax.set_axisbelow(True)
    if label:
        ax.legend(frameon=False, loc="lower left", fontsize=8.5)


def _degree_axis(ax: Any, lmax: int) -> None:
    """Logarithmic degree axis labelled at 1, 2, 3, 5 times each power of ten."""
    ax.set_xscale("log")
    ax.set_xlim(0.9, max(lmax, 2) * 1.1)
    ax.xaxis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 3.0, 5.0)))
    ax.xaxis.set_minor_locator(LogLocator(base=10, subs=(4.0, 6.0, 7.0, 8.0, 9.0)))
    ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
    ax.xaxis.set_minor_formatter(NullFormatter())
    ax.set_xlabel("spherical-harmonic degree l")


def _half_wavelength_axis(ax: Any, radius_km: float) -> None:
    """Top axis: half-wavelength pi R / sqrt(l (l + 1)) in km (common practice)."""
    def to_km(l: np.ndarray) -> np.ndarray:
        l = np.maximum(np.asarray(l, dtype=float), 1e-3)
        return np.pi * radius_km / np.sqrt(l * (l + 1))

    def to_degree(km: np.ndarray) -> np.ndarray:
        x = np.pi * radius_km / np.maximum(np.asarray(km, dtype=float), 1e-9)
        return 0.5 * (np.sqrt(1.0 + 4.0 * x * x) - 1.0)

    top = ax.secondary_xaxis("top", functions=(to_km, to_degree))
    top.xaxis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 5.0)))
    top.xaxis.set_minor_formatter(NullFormatter())
    top.set_xlabel("half-wavelength [km]")
    top.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))


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
               title: str | None = None, cmap: Any = "strata", center: float | None = None,
               vmin: float | None = None, vmax: float | None = None,
               label: str | None = None) -> Figure:
    """Equirectangular map of a global field, north up and east to the right.

    Latitudes are drawn south to north whatever their order in the data, and
    longitudes increase eastward from the data's first longitude (a repeated
    seam column is dropped), with lat/lon ticks and a colour bar.

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
        ``"strata"``, ``"ember"``, ``"tilt"`` or any matplotlib colour map.
    center : float, optional
        Value at the middle of the colour map (for signed fields, e.g. 0).
        When the data reach further on one side of it than on the other, the
        two halves of the colour bar have different scales and its label
        says so.
    vmin, vmax : float, optional
        Colour limits.
    label : str, optional
        Colour-bar label (default the DataArray's long_name or name).

    Returns
    -------
    matplotlib.figure.Figure
    """
    values, lat, lon, units, label = _map_values(field, lat, lon, units, label)
    order = np.argsort(lat)
    lat, values = lat[order], values[order]
    # longitudes: unwrap to ascending, drop a repeated seam column
    lon_u = lon[0] + np.concatenate([[0.0], np.cumsum((np.diff(lon) + 180) % 360 - 180)])
    if lon_u.size > 2 and abs(lon_u[-1] - lon_u[0] - 360) < 1e-6:
        lon_u, values = lon_u[:-1], values[:, :-1]
    if lon_u.size > 1 and lon_u[1] < lon_u[0]:
        lon_u, values = lon_u[::-1], values[:, ::-1]
    cm = _COLOUR_MAPS.get(cmap, cmap) if isinstance(cmap, str) else cmap
    norm, note = _map_norm(values, center, vmin, vmax)
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
            text = f"{text} [{typeset_units(units)}]" if text else f"[{typeset_units(units)}]"
        cb.set_label(text + note)
        cb.outline.set_linewidth(0.5)
        if title:
            ax.set_title(title, loc="left", fontweight="bold")
    return fig


def _map_values(field: Any, lat: Any, lon: Any, units: str | None, label: str | None
                ) -> tuple[np.ndarray, np.ndarray, np.ndarray, str | None, str | None]:
    """Values, latitudes, longitudes, units and label of what :func:`map_figure` draws."""
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
    return values, lat, lon, units, label


def _map_norm(values: np.ndarray, center: float | None, vmin: float | None,
              vmax: float | None) -> tuple[mcolors.Normalize, str]:
    """The colour normalisation, and a note for the colour bar when its halves differ in scale."""
    finite = values[np.isfinite(values)]
    lo = float(finite.min()) if vmin is None and finite.size else vmin
    hi = float(finite.max()) if vmax is None and finite.size else vmax
    if center is not None and lo is not None and hi is not None and lo < center < hi:
        below, above = center - lo, hi - center
        note = ""
        if max(below, above) > 1.1 * min(below, above):
            note = f"  (different scales below and above {center:g})"
        return mcolors.TwoSlopeNorm(center, lo, hi), note
    return mcolors.Normalize(lo, hi), ""


#: Cells averaging fewer real coefficients than this are marked as single draws.
FEW_COEFFICIENTS = 16
#: The isotropy picture's colour scale runs over log2 ratios -LIMIT..LIMIT.
ISOTROPY_LIMIT = 3.0


def isotropy_figure(source: Any, *, title: str | None = None, degree_step: float = 1.25,
                    fraction_bins: int = 8) -> Figure:
    """Is the field isotropic?  Each degree's power shared among its orders, against isotropy.

    Degree runs to the right (logarithmic), m/l upward from 0 (zonal, m = 0)
    to 1 (sectoral, m = l).  Each cell is coloured by log2 of the share of
    its degrees' power its orders carry, divided by the share an isotropic
    field gives them (:func:`sphex.spectra.isotropy_table`): the neutral
    middle colour is isotropic, copper cells hold more than their share
    (twice it at +1), teal cells less.  Cells averaging fewer than
    :data:`FEW_COEFFICIENTS` real coefficients carry a dot: they are single
    chi-squared draws, not shares, and vary wildly even for an isotropic
    field.

    Parameters
    ----------
    source : IsotropyTable, Harmonics or coefficient Dataset
        A table, or coefficients to make one from (a batch is pooled).
    title : str, optional
    degree_step, fraction_bins
        Binning, as in :func:`sphex.spectra.isotropy_table` (coefficients only).

    Returns
    -------
    matplotlib.figure.Figure
    """
    from sphex.spectra import IsotropyTable, isotropy_table

    table = source
    if not isinstance(source, IsotropyTable):
        if hasattr(source, "data_vars"):
            from sphex.xr import to_harmonics

            source = to_harmonics(source)
        table = isotropy_table(source, degree_step=degree_step, fraction_bins=fraction_bins)
    x0, x1 = table.degree_first.astype(float), table.degree_last + 1.0
    y0, y1 = table.fraction_low, table.fraction_high
    boxes = np.stack([np.stack([x0, y0], -1), np.stack([x1, y0], -1),
                      np.stack([x1, y1], -1), np.stack([x0, y1], -1)], axis=1)
    import matplotlib as mpl

    with mpl.rc_context(_FIGURE_STYLE):
        fig = _figure(6.8, 4.4)
        ax = fig.add_subplot()
        ax.set_facecolor(PAPER)
        cells = PolyCollection(boxes, cmap=tilt.with_extremes(bad=PAPER),
                               norm=mcolors.Normalize(-ISOTROPY_LIMIT, ISOTROPY_LIMIT),
                               edgecolors=PAPER, linewidths=0.4)
        cells.set_array(np.ma.masked_invalid(table.log2_ratio))
        ax.add_collection(cells)
        few = table.coefficients < FEW_COEFFICIENTS
        if few.any():
            ax.plot(np.sqrt(x0[few] * x1[few]), 0.5 * (y0[few] + y1[few]), ls="none",
                    marker="o", ms=2.2, color=INK, alpha=0.55,
                    label=f"cell of fewer than {FEW_COEFFICIENTS} coefficients: a single draw, "
                          "not a share")
            ax.legend(frameon=False, loc="upper center", bbox_to_anchor=(0.5, -0.13),
                      fontsize=8, handletextpad=0.3)
        ax.set_xscale("log")
        ax.set_xlim(float(x0.min()), float(x1.max()))
        ax.set_ylim(0.0, 1.0)
        ax.xaxis.set_major_locator(LogLocator(base=10, subs=(1.0, 2.0, 3.0, 5.0)))
        ax.xaxis.set_minor_formatter(NullFormatter())
        ax.xaxis.set_major_formatter(FuncFormatter(lambda v, _: f"{v:g}"))
        ax.yaxis.set_major_locator(FixedLocator([0, 0.25, 0.5, 0.75, 1.0]))
        ax.yaxis.set_major_formatter(FuncFormatter(
            lambda v, _: {0.0: "0 zonal", 1.0: "1 sectoral"}.get(round(v, 6), f"{v:g}")))
        ax.set_xlabel("spherical-harmonic degree l (a cell starts at its lowest degree)")
        ax.set_ylabel("order / degree, m/l")
        for s in ax.spines.values():
            s.set_color(INK)
            s.set_linewidth(0.7)
        cb = fig.colorbar(cells, ax=ax, fraction=0.05, pad=0.02, extend="both")
        ticks = np.arange(-ISOTROPY_LIMIT, ISOTROPY_LIMIT + 1)
        cb.set_ticks(ticks)
        cb.set_ticklabels([_ratio_text(t) for t in ticks])
        cb.set_label("share of the degree's power / isotropic share")
        cb.outline.set_linewidth(0.5)
        if title:
            ax.set_title(title, loc="left", fontweight="bold")
    return fig


def _ratio_text(log2_value: float) -> str:
    """``-2`` -> ``1/4``, ``0`` -> ``1``, ``3`` -> ``8`` (colour-bar labels of a log2 scale)."""
    k = int(round(log2_value))
    return f"1/{2 ** -k}" if k < 0 else f"{2 ** k}"


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
