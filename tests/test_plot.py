"""Checks of the figures in sphex.plot (what they draw, not how they look)."""
from __future__ import annotations

import numpy as np
import pytest
import xarray as xr

import sphex
import sphex.xr as sxr
from sphex import plot


def test_power_figure_is_log_log_with_the_fitted_slope():
    l = np.arange(65, dtype=float)
    p = np.zeros(65)
    p[1:] = 4.0 * l[1:] ** -2.5          # an exact power law: the fit must give -2.50
    q = 0.5 * p
    fig = plot.power_figure([p, q], labels=["a", "b"], units="m^2", fit=(4, 60),
                            planet_radius_km=6371.0, title="t")
    ax = fig.axes[0]
    assert ax.get_xscale() == "log" and ax.get_yscale() == "log"
    texts = [t.get_text() for t in ax.get_legend().get_texts()]
    assert texts[:2] == ["a", "b"]
    assert "slope -2.50" in texts[2]
    fit_line = ax.get_lines()[2]
    x, y = fit_line.get_data()
    np.testing.assert_allclose(y, 4.0 * x ** -2.5, rtol=1e-10)
    assert "m²" in ax.get_ylabel()
    # degree 0 is not drawn on the log axis
    assert ax.get_lines()[0].get_xdata()[0] == 1
    # the top axis converts degree to half-wavelength pi R / sqrt(l(l+1)) (common practice)
    assert any("half-wavelength" in a.get_xlabel() for a in fig.axes[0].child_axes)


def test_power_figure_rejects_a_fit_outside_the_spectrum():
    with pytest.raises(ValueError, match="fit range"):
        plot.power_figure(np.ones(10), fit=(3, 20))
    with pytest.raises(ValueError, match="labels"):
        plot.power_figure([np.ones(10)], labels=["a", "b"])


def test_map_figure_has_geographic_ticks_and_a_unit_colour_bar():
    g = sphex.Grid.equiangular(36, 72, "cells")
    v = np.cos(np.deg2rad(g.lat))[:, None] * np.sin(np.deg2rad(g.lon))[None, :]
    da = xr.DataArray(v, dims=("lat", "lon"), coords={"lat": g.lat, "lon": g.lon},
                      name="h", attrs={"units": "m", "long_name": "height"})
    fig = plot.map_figure(da, center=0.0, title="map")
    ax, cax = fig.axes[0], fig.axes[1]
    assert ax.get_xlim() == pytest.approx((-2.5, 357.5))     # cell edges around lon 0..355
    assert ax.get_ylim() == pytest.approx((-90.0, 90.0))
    fig.canvas.draw()
    ylabels = [t.get_text() for t in ax.get_yticklabels()]
    xlabels = [t.get_text() for t in ax.get_xticklabels()]
    assert "30°N" in ylabels and "60°S" in ylabels and "0°" in ylabels
    assert "60°E" in xlabels and "120°W" in xlabels
    assert cax.get_xlabel() == "height [m]"
    # the mesh holds the values south to north (the grid is stored north to south)
    mesh = ax.collections[0]
    np.testing.assert_allclose(np.asarray(mesh.get_array()).reshape(36, 72), v[::-1])
    with pytest.raises(ValueError, match="select one"):
        plot.map_figure(xr.concat([da, da], "time"))


def test_triangle_figure_places_cosines_above_and_sines_below():
    c = np.zeros((4, 4))
    s = np.zeros((4, 4))
    c[3, 2], s[3, 2], c[1, 0] = 10.0, 0.1, 1.0
    h = sphex.Harmonics.from_cos_sin(c, s)
    fig = plot.triangle_figure(h)
    img = np.asarray(fig.axes[0].images[0].get_array())     # rows: order -3..3, columns: degree
    assert img.shape == (7, 4)
    assert img[3 + 2, 3] == pytest.approx(1.0)       # log10 |C_32| = 1
    assert img[3 - 2, 3] == pytest.approx(-1.0)      # log10 |S_32| = -1
    assert img[3 + 0, 1] == pytest.approx(0.0)       # log10 |C_10| = 0
    assert np.ma.is_masked(img[3 + 3, 2]) or np.isnan(img[3 + 3, 2])   # m > l: empty
    # a coefficient Dataset works too
    ds = sxr.from_harmonics(h)
    fig2 = plot.triangle_figure(ds)
    img2 = fig2.axes[0].images[0].get_array()
    np.testing.assert_array_equal(np.ma.filled(img2, np.nan), np.ma.filled(img, np.nan))


def test_save_writes_png_atomically_and_refuses_to_overwrite(tmp_path):
    fig = plot.power_figure(np.arange(10.0) + 1)
    path = tmp_path / "p.png"
    plot.save(fig, path)
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    with pytest.raises(FileExistsError):
        plot.save(fig, path)
    assert path.read_bytes() == data
    plot.save(fig, path, overwrite=True)
    assert sorted(p.name for p in tmp_path.iterdir()) == ["p.png"]


def test_power_figure_reference_line_has_the_given_slope_and_band_is_drawn():
    p = 1.0 / (1.0 + np.arange(50.0)) ** 2
    fig = plot.power_figure(p, reference=-3.0, band=(0.5 * p, 2 * p), band_label="spread")
    ax = fig.axes[0]
    x, y = ax.get_lines()[-1].get_data()
    slope = np.polyfit(np.log(x), np.log(y), 1)[0]
    assert slope == pytest.approx(-3.0, abs=1e-12)
    texts = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "spread" in texts and "reference slope -3" in texts
