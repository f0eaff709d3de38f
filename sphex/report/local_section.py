"""The localised-spectrum section of the report: the spectrum of one spherical cap.

Asked for with ``--at LAT,LON --cap DEG --window-degree N [--windows K]`` (the
options of ``sphex local-spectrum``): the field (the mean of a series) is
multiplied by the concentration windows of the cap and the spectra of the
windowed fields are averaged (:func:`sphex.localize.local_power`); the page
shows that spectrum with its standard error against the global spectrum and
the global spectrum blurred by the same windows
(:func:`sphex.localize.expected_local_power`), a map with the cap, and the
numbers ``sphex local-spectrum`` prints.  It is not drawn unless asked for:
each window costs one analysis at degree lmax + N.

matplotlib is imported inside the functions.
"""
from __future__ import annotations

import html
from dataclasses import dataclass
from typing import Any

import numpy as np

from sphex.harmonics import Harmonics
from sphex.report.page import Row, _figure_html, _image, _numbers_table

__all__ = ["Region", "check_region", "check_windows", "local_numbers", "local_section"]


@dataclass(frozen=True)
class Region:
    """Where and how to localise: centre (degrees), cap radius (degrees), window degree and,
    optionally, the number of best-concentrated windows (default: all at least 99 %
    concentrated, as in ``sphex local-spectrum``)."""

    lat: float
    lon: float
    cap: float
    window_degree: int
    windows: int | None = None


def check_region(r: Region, lmax: int) -> None:
    """Refuse, in the words of the options, a region that cannot be localised at ``lmax``
    (before any long work).

    Raises
    ------
    ValueError
    """
    if not -90.0 <= r.lat <= 90.0:
        raise ValueError(f"--at: latitude {r.lat:g} is outside -90..90 (write LAT,LON)")
    if not 0.0 < r.cap <= 180.0:
        raise ValueError(f"--cap {r.cap:g} must be in (0, 180] degrees")
    check_windows(r.cap, r.window_degree, r.windows, lmax)


def check_windows(cap: float, window_degree: int, chosen: int | None, lmax: int) -> None:
    """Refuse, in the words of the options, a window degree or count that cannot serve at
    ``lmax`` (shared by the report and ``sphex local-spectrum``).

    Raises
    ------
    ValueError
    """
    from sphex.concentration import DEFAULT_MIN_CONCENTRATION, cap_windows

    if window_degree > lmax:
        raise ValueError(f"--window-degree {window_degree} is above the field's highest degree "
                         f"{lmax}; use at most {lmax // 2} so that some degrees are reliable "
                         "(N <= l <= lmax-N)")
    windows = cap_windows(cap, window_degree)
    total = windows.concentration.size
    if chosen is not None and not 1 <= chosen <= total:
        raise ValueError(f"--windows {chosen}: a window degree of {window_degree} gives "
                         f"{total} windows; choose 1..{total}")
    if chosen is None and windows.count_above(DEFAULT_MIN_CONCENTRATION) == 0:
        raise ValueError(f"no window of a {cap:g}-degree cap up to degree {window_degree} is "
                         f"99% concentrated (the best: {windows.concentration[0]:.1%}); raise "
                         "--window-degree or --cap, or give --windows K")


def _place(lat: float, lon: float) -> str:
    """``31.5°S 124.5°E``."""
    lon = (lon + 180.0) % 360.0 - 180.0
    return (f"{abs(lat):g}\u00b0{'N' if lat >= 0 else 'S'} "
            f"{abs(lon):g}\u00b0{'E' if lon >= 0 else 'W'}")


def local_numbers(local: Any, global_power: np.ndarray, units: str) -> list[Row]:
    """The key numbers of a localised spectrum: the windows, the reliable degrees, the local
    power summed over them against the global power blurred by the same windows."""
    from sphex.localize import expected_local_power

    lo, hi = local.valid_range
    rows = [Row("local_windows", "windows", float(local.n_windows), "",
                f"cap {local.cap_radius_deg:g}\u00b0, window degree {local.lwin}"),
            Row("local_concentration_min", "least concentration", float(local.concentration.min()),
                "", "share of each window's energy inside the cap")]
    if lo <= hi:
        blurred = expected_local_power(global_power, local.cap_radius_deg, local.lwin,
                                       local.n_windows)
        loc, glob = float(local.power[lo:hi + 1].sum()), float(blurred[lo:hi + 1].sum())
        rows += [Row("local_valid_min", "first reliable degree", float(lo), "", "window degree"),
                 Row("local_valid_max", "last reliable degree", float(hi), "",
                     "lmax minus window degree"),
                 Row("local_power", "local power, reliable degrees", loc, units,
                     f"sum over degrees {lo}-{hi}"),
                 Row("local_blurred_global", "global power blurred by the windows", glob, units,
                     f"sum over degrees {lo}-{hi}")]
        if glob > 0:
            rows.append(Row("local_ratio", "local over blurred global", loc / glob, "",
                            "above 1: the region holds more power than the planet's average"))
    return rows


def local_section(h: Harmonics, r: Region, units: str, label: str, values: np.ndarray,
                  lat: np.ndarray, lon: np.ndarray, value_units: str) -> str:
    """The ``local`` section: map with the cap, the localised spectrum, its numbers.

    ``h`` is the field's coefficients (orthonormal), ``units`` those of its power;
    ``values`` on ``lat``, ``lon`` is the field drawn under the cap.
    """
    from sphex import plot
    from sphex.localize import local_power
    from sphex.spectra import degree_power

    local = local_power(h, r.lat, r.lon, r.cap, r.window_degree, r.windows)
    glob = np.asarray(degree_power(h), dtype=float)
    rows = local_numbers(local, glob, units)
    fig = plot.local_spectrum_figure(local, glob, units=units or None,
                                     title=f"Localised spectrum: {label}")
    spectrum = _image(fig, "localised spectrum with its error band beside the global spectrum")
    center = 0.0 if np.nanmin(values) < 0 < np.nanmax(values) else None
    fig = plot.map_figure(values, lat, lon, units=value_units, center=center,
                          cmap="strata" if center == 0.0 else "ember",
                          title=f"The cap: {r.cap:g}\u00b0 around {_place(r.lat, r.lon)}")
    plot.draw_cap(fig.axes[0], r.lat, r.lon, r.cap)
    cap_map = _image(fig, "map of the field with the cap outlined")
    lo, hi = local.valid_range
    reliable = (f"degrees {lo}..{hi} are reliable (window degree to lmax minus window degree)"
                if lo <= hi else "no degree is reliable: lower --window-degree")
    return (f"<p>The spectrum of one region (multitaper, <code>sphex.localize.local_power</code>):"
            f" the field is multiplied by {local.n_windows} concentration windows of a "
            f"{r.cap:g}-degree cap centred at {_place(r.lat, r.lon)} and the "
            f"spectra of the windowed fields are averaged. Each localised degree l blends the "
            f"global degrees l-{local.lwin}..l+{local.lwin}; {html.escape(reliable)}. Compare it "
            "with the global spectrum blurred by the same windows (what the cap would show if "
            "the region were like the rest of the sphere), not with the raw global spectrum.</p>"
            + _numbers_table(rows)
            + _figure_html(spectrum, "Localised spectrum (band: one standard error across the "
                                     "windows; dotted outside the reliable degrees), the global "
                                     "spectrum and the global spectrum blurred by the windows.")
            + _figure_html(cap_map, "The field with the cap outlined (dashed)."))
