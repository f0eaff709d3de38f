"""Building the report: the sections of the page from a :class:`Subject`, and writing it."""
from __future__ import annotations

import html
import os
from pathlib import Path
from typing import Any

import numpy as np

from sphex import plot
from sphex.harmonics import Harmonics
from sphex.plot.overview import (
    band_power_figure, correlation_figure, cumulative_figure, equal_area_map_figure,
    ratio_figure,
)
from sphex.report.inputs import Progress, Subject, _input_kind, read_subject
from sphex.report.key_numbers import (
    EARTH_RADIUS_KM, SHARES, _squared, default_slope_range, degree_bands, field_rows,
    smoothing_radii, variance_degrees,
)
from sphex.report.page import (
    MAP_COLUMNS, Page, Row, _figure_html, _image, _numbers_table, _version,
    degree_order_picture,
)
from sphex.report.local_section import Region, check_region, local_section
from sphex.report.winds import Wind, read_wind, wind_provenance, wind_sections
from sphex.spectra import correlation, correlation_significance, degree_power, spectral_slope
from sphex.xr.output import atomic_output

__all__ = ["build_report", "write_report"]


def _provenance(s: Subject, lmax: int, version: str) -> list[tuple[str, str]]:
    rows = [("file", str(s.path)), ("variable", s.variable or "(coefficients)"),
            ("input", s.describe), ("degree limit", f"{lmax}"),
            ("normalisation", s.norm), ("units", s.units or "(none stated)")]
    if s.steps:
        rows.append(("steps", f"{len(s.steps)} along {s.step_name}: {s.steps[0]} ... {s.steps[-1]}"))
    if s.radius_km:
        rows.append(("radius", f"{s.radius_km:g} km"))
    rows.append(("sphex version", version))
    return rows


def _thinned(values: np.ndarray, lat: np.ndarray, lon: np.ndarray
             ) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Every k-th row and column of a grid wider than :data:`MAP_COLUMNS`, for drawing."""
    k = -(-lon.size // MAP_COLUMNS)
    if k <= 1:
        return values, lat, lon
    return values[..., ::k, ::k], lat[::k], lon[::k]


def _map_images(s: Subject, values: np.ndarray, lat: np.ndarray, lon: np.ndarray,
                what: str) -> str:
    values, lat, lon = _thinned(values, lat, lon)
    cmap = "strata" if np.nanmin(values) < 0 < np.nanmax(values) else "ember"
    center = 0.0 if cmap == "strata" else None
    label = s.long_name or s.variable or "field"
    ea = _image(equal_area_map_figure(values, lat, lon, units=s.units, label=label, cmap=cmap,
                                      center=center, title=f"{what}: equal-area view"),
                f"{what}, Mollweide projection")
    ll = _image(plot.map_figure(values, lat, lon, units=s.units, label=label, cmap=cmap,
                                center=center, title=f"{what}: latitude-longitude view"),
                f"{what}, latitude-longitude grid")
    return (_figure_html(ea, f"{what} on the Mollweide (equal-area) projection: areas on the "
                             "map are areas on the sphere.")
            + _figure_html(ll, f"{what} on the plain latitude-longitude grid."))


def _display_grid(s: Subject, lmax: int):
    """The grid maps are drawn on: the input's own, or a Gauss grid for coefficients."""
    from sphex.grids import Grid

    return s.grid if s.grid is not None else Grid.gauss(max(lmax, 89))


def _values_on(s: Subject, h: Harmonics, grid: Any) -> np.ndarray:
    from sphex.transform import synthesize

    return np.asarray(synthesize(h, grid))


class _Steps:
    """Counts the steps of the report for the progress callback."""

    def __init__(self, total: int, progress: Progress | None) -> None:
        self.done, self.total, self.progress = 0, total, progress

    def __call__(self) -> None:
        self.done += 1
        if self.progress is not None:
            self.progress(min(self.done, self.total), self.total)


def _spectrum_section(s: Subject, p: np.ndarray, fit: tuple[int, int] | None,
                      slope: float | None) -> str:
    label = "degree variances" if s.kind == "model" else "degree power"
    units = _squared(s.units) if s.kind != "model" else None
    img = _image(plot.power_figure([p], labels=[s.label], units=units or None, fit=fit,
                                   planet_radius_km=s.radius_km, ylabel=label,
                                   title=f"{label.capitalize()}: {s.label}"),
                 f"{label} against degree")
    text = (f"<p>Power-law fit over degrees {fit[0]}-{fit[1]}: slope "
            f"<strong>{slope:.3f}</strong> (least squares in log-log, "
            "<code>sphex.spectra.spectral_slope</code>).</p>" if fit else
            "<p>Too few degrees with positive power for a power-law fit.</p>")
    what = ("Contribution of each degree to the area mean of the squared field; the sum is the "
            "mean square." if s.kind != "model" else
            "Degree variances of the model, in its own normalisation.")
    return f"<p>{what}</p>" + _figure_html(img, f"{label} of {s.label}") + text


def _cumulative_section(p: np.ndarray, degrees: list[int]) -> str:
    var = p[1:].sum()
    share = np.concatenate([[0.0], np.cumsum(p[1:]) / var])
    img = _image(cumulative_figure(share, list(zip(SHARES, degrees)),
                                   title="Share of the variance by degree"),
                 "cumulative share of the variance")
    items = "".join(f"<li>{100 * f:g} % of the variance lies in degrees 1..<strong>{d}</strong>"
                    "</li>" for f, d in zip(SHARES, degrees))
    return (f"<p>Variance here is the power of degrees 1 and up (the mean, degree 0, left out).</p>"
            f"<ul>{items}</ul>" + _figure_html(img, "Cumulative share of the variance."))


def _smoothed_section(s: Subject, h: Harmonics, grid: Any, lmax: int, vmin: float,
                      vmax: float) -> str:
    from sphex.filters import gaussian

    radius = s.radius_km or EARTH_RADIUS_KM
    assumed = "" if s.radius_km else (f" The input states no radius; {EARTH_RADIUS_KM:g} km "
                                      "(the Earth's mean radius) is assumed.")
    parts = [f"<p>Gaussian smoothing (<code>sphex.filters.gaussian</code>): the weight falls to "
             f"one half at the stated distance on a sphere of radius {radius:g} km.{assumed}</p>"
             '<div class="pair">']
    center = 0.0 if vmin < 0 < vmax else None
    cmap = "strata" if center == 0.0 else "ember"
    for r in smoothing_radii(lmax, radius):
        w = gaussian(r, lmax, radius)
        values, lat, lon = _thinned(_values_on(s, h.filter(w), grid), np.asarray(grid.lat),
                                    np.asarray(grid.lon))
        img = _image(plot.map_figure(values, lat, lon,
                                     units=s.units, cmap=cmap, center=center, vmin=vmin,
                                     vmax=vmax, title=f"Gaussian, half weight at {r:g} km"),
                     f"field smoothed at {r:g} km")
        parts.append(_figure_html(img, f"Smoothed with a {r:g} km Gaussian (same colour scale "
                                       "as the field)."))
    return "".join(parts) + "</div>"


def _series_section(s: Subject, h: Harmonics, bands: list[tuple[int, int]] | None) -> str:
    p = degree_power(s.harmonics)
    pm = degree_power(h)
    first, last = s.steps[0], s.steps[-1]
    img = _image(plot.power_figure([p[0], p[-1], pm],
                                   labels=[f"first step ({first})", f"last step ({last})",
                                           f"time mean of {len(s.steps)} steps"
                                           if "time" in s.step_name else
                                           f"mean of {len(s.steps)} steps"],
                                   units=_squared(s.units) or None,
                                   band=(p.min(axis=0), p.max(axis=0)),
                                   band_label=f"range over {len(s.steps)} steps",
                                   title="Degree power along the series"),
                 "spectra of the first and last steps and of the mean")
    bands = bands or degree_bands(p.shape[-1] - 1)
    band_power = np.array([p[:, a:b + 1].sum(axis=-1) for a, b in bands])
    steps = np.arange(len(s.steps))
    fig = band_power_figure(steps, bands, band_power, units=_squared(s.units) or None,
                            xlabel=f"step along {s.step_name} (0 = {first})",
                            title="Power in degree bands")
    img2 = _image(fig, "power in degree bands along the series")
    rows = "".join(f"<tr><th>degrees {a}-{b}</th>"
                   f'<td class="num" data-key="band_{a}_{b}_first" '
                   f'data-value="{float(band_power[i, 0])!r}">{band_power[i, 0]:.4g}</td>'
                   f'<td class="num" data-key="band_{a}_{b}_last" '
                   f'data-value="{float(band_power[i, -1])!r}">{band_power[i, -1]:.4g}</td></tr>'
                   for i, (a, b) in enumerate(bands))
    table = (f"<table><thead><tr><th>band</th><th>first step</th><th>last step</th></tr></thead>"
             f"<tbody>{rows}</tbody></table>")
    return (f"<p>{len(s.steps)} steps along {html.escape(s.step_name)}, from "
            f"{html.escape(first)} to {html.escape(last)}. The maps, the spectrum and the key "
            "numbers above are of the mean of the steps.</p>"
            + _figure_html(img, "Spectra of the first and last steps and of the mean.")
            + _figure_html(img2, "Power in degree bands, per step.") + table)


def _comparison_section(s: Subject, other: Subject, h1: Harmonics, h2: Harmonics,
                        grid: Any) -> str:
    lmax = min(h1.lmax, h2.lmax)
    a, b = h1.truncate(lmax).to("orthonormal", True), h2.truncate(lmax).to("orthonormal", True)
    p1, p2 = degree_power(a), degree_power(b)
    r = correlation(a, b)
    sig = correlation_significance(lmax)
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.where(p1 > 0, p2 / np.where(p1 > 0, p1, 1.0), np.nan)
    spectra = _image(plot.power_figure([p1, p2], labels=[s.label, other.label],
                                       units=_squared(s.units) or None,
                                       title="Degree power of both fields"), "both spectra")
    corr = _image(correlation_figure(r, sig, title="Correlation per degree"),
                  "correlation per degree")
    rat = _image(ratio_figure(ratio, label="power ratio, other / this field",
                              title="Ratio of the spectra"), "ratio of the spectra")
    diff, lat, lon = _thinned(_values_on(s, Harmonics(a.coef - b.coef, units=a.units), grid),
                              np.asarray(grid.lat), np.asarray(grid.lon))
    dimg = _image(plot.map_figure(diff, lat, lon, units=s.units, cmap="strata", center=0.0,
                                  label=f"{s.label} minus {other.label}",
                                  title="Difference of the fields"), "map of the difference")
    above = int(np.sum(np.abs(r[1:]) > sig[1:]))
    means = " (the means of their steps)" if s.steps or other.steps else ""
    return (f"<p>{html.escape(s.label)} against {html.escape(other.label)} "
            f"({html.escape(other.describe)}){means}, degrees 0..{lmax}.</p>"
            + _figure_html(spectra, "Degree power of both fields.")
            + _figure_html(corr, "Correlation per degree (sphex.spectra.correlation). The shaded "
                                 "band holds 95 % of the correlations of two uncorrelated "
                                 "isotropic fields (sphex.spectra.correlation_significance; "
                                 "about 2/sqrt(2l+1), common practice).")
            + f'<p>Degrees outside the band: <strong data-key="degrees_above">{above}</strong> '
              f"of {lmax}.</p>"
            + _figure_html(rat, f"Ratio of the spectra: power of {other.label} over power of "
                                f"{s.label}, per degree.")
            + _figure_html(dimg, "This field minus the other, synthesised from the difference "
                                 f"of the coefficients to degree {lmax}."))


def _model_rows(s: Subject, p: np.ndarray, slope: tuple[float, int, int] | None,
                degrees: list[int]) -> tuple[list[Row], str]:
    from sphex.potential import crossing_degree, error_degree_variances

    m = s.model
    rows = [Row("name", "model", m.name or Path(s.path).name),
            Row("kind", "kind", m.kind), Row("lmax", "degree limit", float(s.harmonics.lmax))]
    if m.gm is not None:
        rows.append(Row("gm", "GM", float(m.gm), "m^3 s^-2"))
    if s.harmonics.radius:
        rows.append(Row("radius", "reference radius", float(s.harmonics.radius), "m"))
    rows.append(Row("variance", "degree variances, degrees 1..lmax", float(p[1:].sum()),
                    _squared(s.units), ""))
    if slope is not None:
        rows.append(Row("slope", "power-law slope", slope[0], "",
                        f"fit over degrees {slope[1]}-{slope[2]}"))
    for share, deg in zip(SHARES, degrees):
        rows.append(Row(f"degree_{round(100 * share)}", f"{100 * share:g} % of the variance by degree",
                        float(deg), "", "degree 0 left out"))
    body = ""
    if m.sigmas is not None:
        err = error_degree_variances(m)[: s.harmonics.lmax + 1]
        cross = crossing_degree(p, err)
        if cross is not None:
            rows.append(Row("crossing", "error reaches signal at degree", float(cross)))
        img = _image(plot.model_spectrum_figure(p, err, units=_squared(s.units) or None,
                                                title=f"Degree variances: {s.label}"),
                     "degree variances and error degree variances")
        body = _figure_html(img, "Degree variances (signal) and error degree variances of the "
                                 "model; beyond their crossing the model carries no information.")
    else:
        body = "<p>The model file states no standard deviations: no error degree variances.</p>"
    return rows, body


def build_report(path: str | os.PathLike, *, variable: str | None = None,
                 compare: str | os.PathLike | None = None, compare_variable: str | None = None,
                 lmax: int | None = None, slope: tuple[int, int] | None = None,
                 bands: list[tuple[int, int]] | None = None,
                 command: str = "", progress: Progress | None = None,
                 east: str | None = None, north: str | None = None,
                 region: Region | None = None) -> str:
    """The HTML report of a field, a wind, a coefficient file or a model, as text.

    Parameters
    ----------
    path : path-like
        Input: netCDF grid file, coefficient file or model file.
    variable : str, optional
        Variable of a grid file.
    compare : path-like, optional
        A second grid or coefficient file to compare with (both spectra,
        correlation per degree with its 95 % level, ratio, difference map).
    compare_variable : str, optional
        Variable of ``compare``.
    lmax : int, optional
        Degree limit (default: the grid's exact limit or the file's degrees).
    slope : (int, int), optional
        Degrees of the power-law fit (default :func:`default_slope_range`).
    bands : list of (int, int), optional
        Degree bands (inclusive) whose power a series shows per step (default
        :func:`degree_bands`).
    command : str
        The command line that made the page, shown in its header.
    progress : callable, optional
        ``progress(done, total)`` as the parts of the page are made.
    east, north : str, optional
        The eastward and northward components of a wind or current in a grid
        file (default: found by their CF standard names).  When the file holds
        them, the page has the sections ``winds`` and ``wind-maps``; without
        ``variable`` it is a page about the wind alone.
    region : Region, optional
        A spherical cap whose localised spectrum the section ``local`` shows
        (not drawn unless asked for: it costs one analysis per window).

    Returns
    -------
    str
        The page, self-contained (no scripts, no network).

    Raises
    ------
    ValueError
        An unusable input, ``lmax`` or ``slope``.
    """
    kind = _input_kind(str(path))
    if (east is not None or north is not None) and kind != "grid":
        raise ValueError(f"--east and --north name the wind components of a grid file; {path} is "
                         f"a {'model' if kind == 'model' else 'coefficient'} file: leave them out")
    wind = read_wind(path, east, north, lmax) if kind == "grid" else None
    if wind is not None and variable is None:
        return _wind_page(wind, compare=compare, slope=slope, bands=bands, region=region,
                          command=command, progress=progress)
    s = read_subject(path, variable, lmax)
    if region is not None and s.kind == "model":
        raise ValueError("--at localises a field, not a model's potential coefficients: write "
                         "the quantity you want on a grid with 'sphex gravity' or 'sphex "
                         "geomagnetic' and report that file")
    other = None
    if compare is not None:
        other = read_subject(compare, compare_variable, lmax)
        if other.kind == "model" or s.kind == "model":
            raise ValueError("--compare takes two grid or coefficient files, not model files; "
                             "compare models with 'sphex spectrum'")
        if s.units and other.units and s.units != other.units:
            raise ValueError(f"{path} is in {s.units!r} and {compare} in {other.units!r}; "
                             "convert one to the other's units before comparing")
    tick = _Steps(8 + (region is not None) + 2 * (wind is not None), progress)
    h = s.mean_harmonics
    p = degree_power(h) if s.kind != "model" else _model_variances(s)
    top = p.size - 1
    if top < 1:
        raise ValueError(f"{path}: a report needs degrees above 0; give --lmax of 1 or more")
    fit = slope if slope is not None else default_slope_range(p[: _signal_degrees(s, p)])
    if fit is not None and not 1 <= fit[0] < fit[1] <= top:
        raise ValueError(f"--slope {fit[0]}:{fit[1]} must lie within degrees 1..{top}")
    k = spectral_slope(p, *fit)[0] if fit is not None else None
    for a, b in bands or ():
        if not 1 <= a <= b <= top:
            raise ValueError(f"--bands {a}:{b} must lie within degrees 1..{top}")
    if region is not None:
        check_region(region, top)
    degrees = variance_degrees(p)
    version = _version()
    what = "model" if s.kind == "model" else ("mean of the steps" if s.steps else "field")
    page = Page(title=f"sphex report: {s.label}",
                lead=s.long_name or "field",
                provenance=_provenance(s, top, version), command=command or "(built from Python)")
    sl = (k, fit[0], fit[1]) if fit is not None else None
    tick()
    if s.kind == "model":
        rows, body = _model_rows(s, p, sl, degrees)
        page.sections["model"] = body
    else:
        rows = field_rows(h, s.units, sl, degrees)
    page.sections["numbers"] = (f"<p>Of the {what}, from its coefficients to degree {top}.</p>"
                                + _numbers_table(rows))
    page.sections["spectrum"] = _spectrum_section(s, p, fit, k)
    tick()
    page.sections["cumulative"] = _cumulative_section(p, degrees)
    page.sections["degree-order"] = (
        "<p>Amplitude of each coefficient, by degree and order.</p>"
        + _figure_html(degree_order_picture(h, f"Coefficients: {s.label}"),
                       "log10 of the coefficient amplitudes by degree and order."))
    tick()
    if s.kind != "model":
        grid = _display_grid(s, top)
        values = s.mean_values if s.values is not None else _values_on(s, h, grid)
        lat, lon = np.asarray(grid.lat), np.asarray(grid.lon)
        page.sections["maps"] = _map_images(s, values, lat, lon, what.capitalize())
        tick()
        page.sections["smoothed"] = _smoothed_section(s, h, grid, top, float(np.nanmin(values)),
                                                      float(np.nanmax(values)))
        tick()
        if s.steps:
            page.sections["series"] = _series_section(s, h, bands)
        tick()
        if other is not None:
            page.sections["comparison"] = _comparison_section(s, other, h, other.mean_harmonics,
                                                              grid)
        if region is not None:
            thin, la, lo = _thinned(values, lat, lon)
            page.sections["local"] = local_section(h, region, _squared(s.units), s.label, thin,
                                                   la, lo, s.units)
            tick()
        if wind is not None:
            page.sections.update(wind_sections(wind, tick))
    else:
        page.sections["maps"] = ("<p>A model file holds potential coefficients; draw its "
                                 "quantities with <code>sphex gravity</code> or <code>sphex "
                                 "geomagnetic</code>.</p>")
    tick()
    tick()
    return page.render(version)


def _wind_page(w: Wind, *, compare: Any, slope: Any, bands: Any, region: Region | None,
               command: str, progress: Progress | None) -> str:
    """The page of a wind alone (a grid file with the components and no ``variable``)."""
    for given, option in ((compare, "--compare"), (slope, "--slope"), (bands, "--bands"),
                          (region, "--at")):
        if given is not None:
            raise ValueError(f"{option} applies to a scalar field, and {w.path} is read as the "
                             f"{w.what} ({w.east}, {w.north}): choose a variable with -v (for "
                             f"example -v {w.east})")
    tick = _Steps(2, progress)
    version = _version()
    page = Page(title=f"sphex report: {Path(w.path).name} ({w.east}, {w.north})",
                lead={"wind": "horizontal wind", "current": "horizontal current"}.get(
                    w.what, "horizontal flow"),
                provenance=wind_provenance(w) + [("sphex version", version)],
                command=command or "(built from Python)")
    page.sections.update(wind_sections(w, tick))
    return page.render(version)


def _signal_degrees(s: Subject, p: np.ndarray) -> int:
    """Number of degrees (from 0) a default fit may use: all, or for a model with standard
    deviations those below the degree where the errors reach the signal."""
    if s.kind != "model" or s.model.sigmas is None:
        return p.size
    from sphex.potential import crossing_degree, error_degree_variances

    cross = crossing_degree(p, error_degree_variances(s.model)[: p.size])
    return p.size if cross is None else int(cross)


def _model_variances(s: Subject) -> np.ndarray:
    """Degree variances of a model in its own normalisation: sum over m of C^2 + S^2."""
    from sphex.potential import degree_variances

    return np.asarray(degree_variances(s.model)[: s.harmonics.lmax + 1], dtype=float)


def write_report(page: str, path: str | os.PathLike, overwrite: bool = False) -> Path:
    """Write the page atomically (temporary file, then rename).

    Parameters
    ----------
    page : str
        From :func:`build_report`.
    path : path-like
    overwrite : bool
        Replace an existing file.

    Returns
    -------
    pathlib.Path
    """
    with atomic_output(path, overwrite) as tmp:
        Path(tmp).write_text(page, encoding="utf-8")
    return Path(path)
