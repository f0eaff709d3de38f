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


def test_isotropy_figure_draws_the_table_cell_by_cell():
    from sphex.spectra import isotropy_table

    rng = np.random.default_rng(5)
    coef = np.tril(rng.standard_normal((41, 41)) + 1j * rng.standard_normal((41, 41)))
    coef[:, 0] = coef[:, 0].real
    h = sphex.Harmonics(coef)
    table = isotropy_table(h)
    fig = plot.isotropy_figure(sxr.from_harmonics(h), title="t")     # a coefficient Dataset works
    ax = fig.axes[0]
    cells = ax.collections[0]
    np.testing.assert_allclose(np.ma.filled(cells.get_array(), np.nan), table.log2_ratio)
    # each cell spans its degrees [first, last + 1) and its range of m/l
    k = table.find(2, 1)
    box = cells.get_paths()[k].vertices
    assert box[:, 0].min() == 2.0 and box[:, 0].max() == 3.0
    assert box[:, 1].min() == pytest.approx(1 / 3) and box[:, 1].max() == pytest.approx(2 / 3)
    # a diverging scale centred on 0, labelled as ratios
    assert cells.norm.vmin == -cells.norm.vmax
    cax = fig.axes[1]
    fig.canvas.draw()
    assert [t.get_text() for t in cax.get_yticklabels()] == ["1/8", "1/4", "1/2", "1", "2", "4", "8"]
    assert "0 zonal" in [t.get_text() for t in ax.get_yticklabels()]
    # cells of few coefficients carry a dot, and the legend says why
    dots = ax.get_lines()[0].get_xdata()
    assert len(dots) == int(np.sum(table.coefficients < plot.FEW_COEFFICIENTS))
    assert "single draw" in ax.get_legend().get_texts()[0].get_text()


def test_colour_maps_have_names_of_their_own():
    for name in ("strata", "ember", "tilt"):
        assert getattr(plot, name).name == f"sphex-{name}"
    g = sphex.Grid.equiangular(18, 36, "cells")
    v = np.cos(np.deg2rad(g.lat))[:, None] * np.ones(36)
    fig = plot.map_figure(v - 0.2, g.lat, g.lon, cmap="ember", center=0.0)
    assert fig.axes[0].collections[0].get_cmap().name == "sphex-ember"


def test_map_colour_bar_says_when_its_halves_have_different_scales():
    g = sphex.Grid.equiangular(18, 36, "cells")
    v = np.cos(np.deg2rad(g.lat))[:, None] * np.cos(np.deg2rad(g.lon))[None, :]
    lopsided = plot.map_figure(3 * np.maximum(v, 0) + np.minimum(v, 0), g.lat, g.lon, center=0.0,
                               label="h")
    assert "different scales below and above 0" in lopsided.axes[1].get_xlabel()
    even = plot.map_figure(v, g.lat, g.lon, center=0.0, label="h")
    assert even.axes[1].get_xlabel() == "h"


def test_power_figure_labels_degrees_shades_the_fit_and_fits_each_curve():
    l = np.arange(300, dtype=float)
    p = np.zeros(300)
    p[1:] = l[1:] ** -2.0
    fig = plot.power_figure([p, 10 * p], labels=["a", "b"], fit=(10, 200), fit_curves=[0, 1],
                            units="m2 s-2", correlation=np.ones(300), correlation_label="r")
    ax, low = fig.axes[0], fig.axes[1]
    fig.canvas.draw()
    ticks = [t.get_text() for t in low.get_xticklabels() if t.get_text()]
    for want in ("1", "2", "3", "5", "10", "20", "30", "50", "100", "200"):
        assert want in ticks
    texts = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "fitted degrees 10-200" in texts
    assert sum("slope -2.00" in t for t in texts) == 2
    span = [pa for pa in ax.patches if pa.get_label() == "fitted degrees 10-200"][0]
    assert span.get_alpha() >= 0.3                      # visible, not a faint wash
    assert "m² s⁻²" in ax.get_ylabel()
    assert low.get_ylabel() == "correlation" and low.get_ylim() == pytest.approx((-1.05, 1.05))


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
