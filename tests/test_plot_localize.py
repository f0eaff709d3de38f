"""Checks of the figures of localised spectra: the cap outline's geometry and the spectrum figure."""
from __future__ import annotations

import numpy as np
import pytest

from sphex import Harmonics, plot
from sphex.localize import expected_local_power, local_power
from sphex.spectra import degree_power


def haversine_deg(lat1, lon1, lat2, lon2):
    """Great-circle distance in degrees by the haversine formula (common practice)."""
    p1, p2 = np.radians(lat1), np.radians(lat2)
    dp, dl = p2 - p1, np.radians(np.asarray(lon2) - np.asarray(lon1))
    a = np.sin(dp / 2) ** 2 + np.cos(p1) * np.cos(p2) * np.sin(dl / 2) ** 2
    return np.degrees(2 * np.arcsin(np.sqrt(np.clip(a, 0.0, 1.0))))


@pytest.mark.parametrize("lat,lon,radius", [
    (-28.0, 128.0, 40.0),       # mid-latitudes
    (10.0, 175.0, 20.0),        # across the date line
    (-5.0, -178.0, 12.0),       # across the date line from the west
    (82.0, 30.0, 15.0),         # holds the north pole
    (-89.0, -60.0, 5.0),        # near the south pole, holds it
    (60.0, 0.0, 30.0),          # touches the pole
    (0.0, 90.0, 120.0),         # larger than a hemisphere
])
@pytest.mark.reference
def test_outline_points_are_at_the_cap_radius(lat, lon, radius):
    la, lo = plot.cap_outline(lat, lon, radius)
    np.testing.assert_allclose(haversine_deg(lat, lon, la, lo), radius, atol=1e-9)
    assert np.all(np.abs(la) <= 90.0)
    # unwrapped: no step along the curve jumps across the date line (a step through a pole
    # itself may turn by up to 180 degrees of longitude: the pole is the map's top edge)
    away = (np.abs(la[1:]) < 89.999) & (np.abs(la[:-1]) < 89.999)
    assert np.abs(np.diff(lo))[away].max() < 10.0
    # closed curve: first and last point coincide (up to a whole turn in longitude; a point
    # at a pole has any longitude)
    assert la[0] == pytest.approx(la[-1], abs=1e-12)
    turn = lo[-1] - lo[0]
    assert abs(la[0]) > 89.999 or min(abs(turn), abs(abs(turn) - 360.0)) < 1e-9


@pytest.mark.reference
def test_outline_around_a_pole_spans_all_longitudes_and_others_do_not():
    la, lo = plot.cap_outline(80.0, 170.0, 20.0)
    assert lo.max() - lo.min() == pytest.approx(360.0, abs=1e-9)
    assert la.min() == pytest.approx(60.0, abs=1e-9)          # 80 - 20 on the centre's meridian
    assert la.max() == pytest.approx(80.0, abs=1e-9)          # over the pole: 180 - 80 - 20
    la, lo = plot.cap_outline(10.0, 175.0, 20.0)
    assert lo.max() - lo.min() < 60.0
    assert lo.max() > 180.0                                   # continues east past the date line
    assert la.max() == pytest.approx(30.0, abs=1e-9) and la.min() == pytest.approx(-10.0, abs=1e-9)


def test_cap_outline_refuses_bad_input():
    with pytest.raises(ValueError, match="lat must lie"):
        plot.cap_outline(91.0, 0.0, 10.0)
    with pytest.raises(ValueError, match="radius_deg"):
        plot.cap_outline(0.0, 0.0, 0.0)
    with pytest.raises(ValueError, match="radius_deg"):
        plot.cap_outline(0.0, 0.0, 181.0)


def test_draw_cap_on_a_map_keeps_the_limits_and_shows_both_sides_of_the_date_line():
    lat = np.linspace(-89.5, 89.5, 36)
    lon = np.linspace(-175.0, 175.0, 36)
    fig = plot.map_figure(np.zeros((36, 36)), lat, lon)
    ax = fig.axes[0]
    limits = ax.get_xlim(), ax.get_ylim()
    plot.draw_cap(ax, 10.0, 175.0, 20.0, label="cap")
    assert (ax.get_xlim(), ax.get_ylim()) == limits
    xs = np.concatenate([ln.get_xdata() for ln in ax.lines])
    lo, hi = limits[0]
    shown = xs[(xs >= lo) & (xs <= hi)]
    assert shown.min() < -150.0 and shown.max() > 170.0       # pieces on both edges


def test_local_spectrum_figure_draws_the_global_and_local_curves(rng):
    lmax = 30
    c = np.tril(rng.standard_normal((lmax + 1, lmax + 1)) + 1j * rng.standard_normal((lmax + 1, lmax + 1)))
    c[:, 0] = c[:, 0].real
    h = Harmonics(c)
    loc = local_power(h, 20.0, 40.0, 40.0, 8)
    glob = degree_power(h)
    fig = plot.local_spectrum_figure(loc, glob, title="t")
    ax = fig.axes[0]
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert labels[0] == "global spectrum" and "window degree 8" in labels[1]
    assert labels[2] == "global, blurred by the windows"
    # the dashed curve is the global spectrum blurred by the same windows, on the reliable degrees
    dashed = [ln for ln in ax.lines if ln.get_label() == labels[2]][0]
    expected = expected_local_power(glob, 40.0, 8, n_windows=loc.n_windows)
    y = np.asarray(dashed.get_ydata(), dtype=float)
    inside = np.isfinite(y)
    np.testing.assert_array_equal(np.flatnonzero(inside), np.arange(8, lmax - 8 + 1))
    np.testing.assert_allclose(y[inside], expected[inside], rtol=1e-14)
    assert ax.get_xscale() == "log" and ax.get_yscale() == "log"
    with pytest.raises(ValueError, match="labels"):
        plot.local_spectrum_figure(loc, glob, labels=["a", "b"])
