"""Checks of the HTML report: what is on the page, that its numbers are those of the
Python API, that its command line reproduces them, the significance level of the
comparison, and (when a browser can be had) that the page renders."""
from __future__ import annotations

import base64
import io
import os
import re
import shlex
import shutil
import subprocess
import sys
from html.parser import HTMLParser
from pathlib import Path

import numpy as np
import pytest
import xarray as xr

import sphex
import sphex.xr as sxr
from sphex.report import SECTIONS, Region, build_report, png_size, write_report
from sphex.spectra import correlation, correlation_significance, degree_power, spectral_slope

LMAX = 30
RADIUS_KM = 1000.0
DEMO = Path(__file__).resolve().parent.parent / "data_demo"


class PageReader(HTMLParser):
    """Sections, images, key numbers, the command, scripts and outside links of a page."""

    def __init__(self) -> None:
        super().__init__()
        self.sections: list[str] = []
        self.images: list[dict] = []
        self.numbers: dict[str, str] = {}
        self.shown: dict[str, str] = {}
        self.scripts = 0
        self.outside: list[str] = []
        self.command = ""
        self._in_command = False
        self._in_caption = False
        self.captions: list[str] = []
        self._key: str | None = None
        self.text: list[str] = []

    def handle_starttag(self, tag, attrs):
        a = dict(attrs)
        if tag in ("section", "header") and "id" in a:
            self.sections.append(a["id"])
        if tag == "img":
            self.images.append(a)
        if tag == "script":
            self.scripts += 1
        for k in ("src", "href"):
            v = a.get(k) or ""
            if re.match(r"(https?:)?//", v):
                self.outside.append(v)
        if tag == "link":
            self.outside.append(str(a))
        if "data-key" in a:
            self._key = a["data-key"]
            if "data-value" in a:
                self.numbers[a["data-key"]] = a["data-value"]
        if tag == "pre" and a.get("class") == "command":
            self._in_command = True
        if tag == "figcaption":
            self._in_caption = True
            self.captions.append("")

    def handle_endtag(self, tag):
        if tag == "pre":
            self._in_command = False
        if tag in ("td", "strong"):
            self._key = None
        if tag == "figcaption":
            self._in_caption = False

    def handle_data(self, data):
        self.text.append(data)
        if self._in_command:
            self.command += data
        if self._in_caption:
            self.captions[-1] += data
        if self._key is not None:
            self.shown[self._key] = self.shown.get(self._key, "") + data


def read_page(text: str) -> PageReader:
    r = PageReader()
    r.feed(text)
    r.close()
    return r


def _coefficients(rng, steps, lmax=LMAX):
    """Band-limited random fields (power ~ l^-2), with a mean and a degree-1 term."""
    coef = np.zeros((steps, lmax + 1, lmax + 1), dtype=complex)
    for l in range(1, lmax + 1):
        coef[:, l, : l + 1] = (rng.normal(size=(steps, l + 1))
                               + 1j * rng.normal(size=(steps, l + 1))) * 3.0 / l
    coef[..., 0] = coef[..., 0].real
    coef[:, 0, 0] = 250.0 * np.sqrt(4 * np.pi)      # mean 250 K
    coef[:, 1, 1] += 4.0 - 2.0j
    return sphex.Harmonics(coef)


def _dataset(h, name="tsurf"):
    lat = 89.0 - 2.0 * np.arange(90)     # 2-degree cells, north to south: exact to degree 44
    lon = 2.0 * np.arange(180)
    grid = sphex.Grid.from_coords(lat, lon)
    values = sphex.synthesize(h, grid)
    time = np.array(["2030-01-01", "2030-01-02", "2030-01-03"], dtype="datetime64[ns]")
    return xr.Dataset(
        {name: (("time", "lat", "lon"), values[: time.size],
                {"units": "K", "long_name": "surface temperature"})},
        coords={"time": time[: values.shape[0]], "lat": ("lat", lat, {"units": "degrees_north"}),
                "lon": ("lon", lon, {"units": "degrees_east"})},
        attrs={"planet_radius_km": RADIUS_KM})


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    d = tmp_path_factory.mktemp("report")
    rng = np.random.default_rng(16)
    h = _coefficients(rng, 3)
    _dataset(h).to_netcdf(d / "series.nc")
    # the other field: the first plus independent noise of the same spectrum
    other = sphex.Harmonics(h.coef + 0.7 * _coefficients(rng, 3).coef)
    _dataset(other, "t2m").to_netcdf(d / "other.nc")
    return d


@pytest.fixture(scope="module")
def page(files):
    text = build_report(files / "series.nc", compare=files / "other.nc", compare_variable="t2m",
                        command="sphex report series.nc --compare other.nc -v2 t2m -o x.html")
    return text, read_page(text)


def _api_numbers(path, var):
    """The key numbers from the Python API: analysis, mean over the steps, spectra."""
    da = xr.open_dataset(path)[var].load()
    h = sxr.to_harmonics(sxr.analyze(da))
    hm = sphex.Harmonics(h.coef.mean(axis=0))
    p = degree_power(hm)
    grid = sxr.find_grid(da).grid
    mean_field = da.mean("time").values
    return p, hm, grid, mean_field


@pytest.mark.reference
def test_every_section_is_on_the_page_and_nothing_from_outside(page):
    text, r = page
    expected = [s for s in SECTIONS if s not in ("model", "local", "winds", "wind-maps")]
    assert sorted(r.sections) == sorted(expected)
    assert r.scripts == 0 and r.outside == []
    assert "<style>" in text and "@media print" in text and "max-width: 100%" in text


def assert_png_images(r: PageReader) -> None:
    """Every image of the page is a PNG data URI of the stated size, with a text."""
    import matplotlib.image as mpimg

    for a in r.images:
        head, _, b64 = a["src"].partition(",")
        assert head == "data:image/png;base64"
        data = base64.b64decode(b64)
        assert png_size(data) == (int(a["width"]), int(a["height"]))
        pixels = mpimg.imread(io.BytesIO(data), format="png")  # decodes as a PNG
        assert pixels.shape[:2] == (int(a["height"]), int(a["width"]))
        assert a["alt"]


@pytest.mark.reference
def test_every_image_is_a_png_of_the_stated_size(page):
    _, r = page
    # maps (2), spectrum, cumulative, degree-order, smoothed (3), series (2), comparison (4)
    assert len(r.images) == 14
    assert_png_images(r)


@pytest.mark.reference
def test_numbers_equal_those_of_the_python_api(files, page):
    _, r = page
    p, hm, grid, mean_field = _api_numbers(files / "series.nc", "tsurf")
    n = {k: float(v) for k, v in r.numbers.items()}
    area = grid.integrate(np.ones_like(mean_field))
    # the mean and the mean square by quadrature of the grid values (Parseval for the rest)
    assert n["mean"] == pytest.approx(grid.integrate(mean_field) / area, rel=1e-12)
    assert n["rms"] == pytest.approx(np.sqrt(grid.integrate(mean_field ** 2) / area), rel=1e-12)
    assert n["variance"] == pytest.approx(p[1:].sum(), rel=1e-12)
    assert n["power_0"] == pytest.approx(p[0], rel=1e-12)
    assert n["power_1"] == pytest.approx(p[1], rel=1e-12)
    assert n["total_power"] == pytest.approx(p.sum(), rel=1e-12)
    # default fit range: the field ends at degree 30 (above it only rounding noise), so
    # from 30/10 = 3 to 30 - 3 = 27
    l1, l2 = 3, 27
    assert n["slope"] == pytest.approx(spectral_slope(p, l1, l2)[0], rel=1e-12)
    assert f"fit over degrees {l1}-{l2}" in "".join(r.text)
    share = np.cumsum(p[1:]) / p[1:].sum()
    for q, key in ((0.5, "degree_50"), (0.9, "degree_90"), (0.99, "degree_99")):
        assert n[key] == int(np.argmax(share >= q)) + 1
    # degree-1 amplitude: the largest value of the degree-1 part on a fine grid
    one = np.zeros_like(hm.coef)
    one[1] = hm.coef[1]
    fine = sphex.Grid.gauss(359)
    assert n["degree1_amplitude"] == pytest.approx(
        np.abs(sphex.synthesize(sphex.Harmonics(one), fine)).max(), rel=1e-4)


@pytest.mark.reference
def test_comparison_numbers(files, page):
    text, r = page
    p, hm, _, _ = _api_numbers(files / "series.nc", "tsurf")
    _, hm2, _, _ = _api_numbers(files / "other.nc", "t2m")
    rr = correlation(hm, hm2)
    above = int(np.sum(np.abs(rr[1:]) > correlation_significance(hm.lmax)[1:]))
    assert int(r.shown["degrees_above"]) == above
    assert above >= hm.lmax - 3          # the fields share most of their power
    assert "series.nc (tsurf) against other.nc (t2m)" in text


def test_series_section_states_first_and_last_step(page):
    text, _ = page
    assert "3 steps along time, from 2030-01-01T00:00 to 2030-01-03T00:00" in text


def _run(*args, cwd):
    env = dict(os.environ, PYTHONWARNINGS="ignore")
    env.pop("SPHEX_DEBUG", None)
    return subprocess.run([sys.executable, "-m", "sphex.cli", *map(str, args)],
                          capture_output=True, text=True, cwd=cwd, env=env, timeout=600)


@pytest.mark.reference
def test_command_line_on_the_page_reproduces_its_numbers(files):
    res = _run("report", "series.nc", "-v", "tsurf", "--slope", "2:20", "--bands", "1:3,4:30",
               "-o", "a.html", cwd=files)
    assert res.returncode == 0, res.stderr
    first = read_page((files / "a.html").read_text(encoding="utf-8"))
    assert first.command == "sphex report series.nc -v tsurf --slope 2:20 --bands 1:3,4:30 -o a.html"
    p, _, _, _ = _api_numbers(files / "series.nc", "tsurf")
    assert float(first.numbers["slope"]) == pytest.approx(spectral_slope(p, 2, 20)[0], rel=1e-12)
    # band power of the first and last steps
    da = xr.open_dataset(files / "series.nc")["tsurf"].load()
    steps = degree_power(sxr.to_harmonics(sxr.analyze(da)))
    for (a, b) in ((1, 3), (4, 30)):
        assert float(first.numbers[f"band_{a}_{b}_first"]) == pytest.approx(
            steps[0, a:b + 1].sum(), rel=1e-12)
        assert float(first.numbers[f"band_{a}_{b}_last"]) == pytest.approx(
            steps[-1, a:b + 1].sum(), rel=1e-12)
    (files / "a.html").rename(files / "a_first.html")
    words = shlex.split(first.command)
    assert words[:2] == ["sphex", "report"]
    again = _run(*words[1:], cwd=files)
    assert again.returncode == 0, again.stderr
    second = read_page((files / "a.html").read_text(encoding="utf-8"))
    assert second.numbers == first.numbers and len(first.numbers) == 15


@pytest.mark.reference
def test_command_line_errors_are_one_line(files):
    (files / "exists.html").write_text("keep")
    res = _run("report", "series.nc", "-o", "exists.html", cwd=files)
    assert res.returncode == 2 and len(res.stderr.strip().splitlines()) == 1
    assert "--overwrite" in res.stderr and (files / "exists.html").read_text() == "keep"
    res = _run("report", "series.nc", "-v2", "t2m", "-o", "b.html", cwd=files)
    assert res.returncode == 2 and "--compare" in res.stderr and "Traceback" not in res.stderr
    res = _run("report", "series.nc", "--slope", "5:99", "-o", "b.html", cwd=files)
    assert res.returncode == 2 and "1..44" in res.stderr
    res = _run("report", "series.nc", "--bands", "1:3,7:5", "-o", "b.html", cwd=files)
    assert res.returncode == 2 and "'7:5'" in res.stderr and len(res.stderr.splitlines()) == 1
    assert not (files / "b.html").exists()


@pytest.mark.reference
def test_coefficient_file_input(files, tmp_path):
    h = _coefficients(np.random.default_rng(3), 1)
    single = sphex.Harmonics(h.coef[0], units="K").to(norm="full", condon_shortley=False)
    sxr.write_harmonics(single, tmp_path / "coef.nc")
    calls = []
    text = build_report(tmp_path / "coef.nc", lmax=20, progress=lambda d, t: calls.append((d, t)))
    assert calls[-1] == (8, 8) and [d for d, _ in calls] == sorted(d for d, _ in calls)
    r = read_page(text)
    p = degree_power(single.truncate(20))
    assert float(r.numbers["total_power"]) == pytest.approx(p.sum(), rel=1e-12)
    assert float(r.numbers["mean"]) == pytest.approx(250.0, rel=1e-12)
    assert "normalisation" in text and ">full<" in text
    assert {"maps", "smoothed", "spectrum"} <= set(r.sections) and "series" not in r.sections


@pytest.mark.reference
def test_model_file_input(tmp_path):
    from sphex.demo import make_gravity_model
    from sphex.potential import crossing_degree, degree_variances, error_degree_variances

    (tmp_path / "moon.gfc").write_text(make_gravity_model())
    text = build_report(tmp_path / "moon.gfc")
    r = read_page(text)
    assert "model" in r.sections and "error degree variances" in text
    from sphex.models import open_model

    model = open_model(tmp_path / "moon.gfc")
    dv, ev = degree_variances(model), error_degree_variances(model)
    assert int(float(r.numbers["crossing"])) == crossing_degree(dv, ev)
    assert float(r.numbers["variance"]) == pytest.approx(dv[1:].sum(), rel=1e-12)
    assert float(r.numbers["gm"]) == model.gm
    # the default fit stops below the crossing (35): degrees 0..34, so 34/10 = 3 to 34 - 3 = 31
    assert crossing_degree(dv, ev) == 35 and "fit over degrees 3-31" in text
    assert float(r.numbers["slope"]) == pytest.approx(spectral_slope(dv, 3, 31)[0], rel=1e-12)


@pytest.mark.reference
def test_significance_level_against_reference_and_monte_carlo():
    from scipy.stats import beta, norm

    lmax = 120
    sig = correlation_significance(lmax)
    l = np.arange(1, lmax + 1)
    # r^2 of an isotropic field against any other is Beta(1/2, l) (scipy.stats.beta)
    assert np.allclose(sig[1:], np.sqrt(beta.ppf(0.95, 0.5, l)), rtol=1e-10)
    # large degrees: z_0.975 / sqrt(2l+1), the common-practice 2/sqrt(2l+1) (scipy.stats.norm)
    big = correlation_significance(2000)[2000]
    assert big * np.sqrt(4001) == pytest.approx(norm.ppf(0.975), rel=1e-3)
    # Monte Carlo: independent random fields with unlike spectra, seeded
    rng = np.random.default_rng(2026)
    trials, above = 40, 0
    for _ in range(trials):
        a = _coefficients(rng, 1, lmax)
        b = sphex.Harmonics(_coefficients(rng, 1, lmax).coef * (1.0 + np.arange(lmax + 1))[:, None])
        above += int(np.sum(np.abs(correlation(a, b)[0, 1:]) > sig[1:]))
    fraction = above / (trials * lmax)
    # 4800 independent degrees: binomial standard error sqrt(0.05 * 0.95 / 4800) = 0.0031;
    # the tolerance 0.013 is four of them
    assert fraction == pytest.approx(0.05, abs=0.013)


@pytest.mark.reference
def test_write_report_is_atomic_and_refuses_to_overwrite(tmp_path):
    write_report("<p>one</p>", tmp_path / "r.html")
    with pytest.raises(FileExistsError):
        write_report("<p>two</p>", tmp_path / "r.html")
    write_report("<p>two</p>", tmp_path / "r.html", overwrite=True)
    assert (tmp_path / "r.html").read_text() == "<p>two</p>"
    assert [p.name for p in tmp_path.iterdir()] == ["r.html"]


# ---------------------------------------------------------------------------
# in a browser
# ---------------------------------------------------------------------------
def _browser() -> str | None:
    for name in ("chromium", "chromium-browser", "google-chrome"):
        found = shutil.which(name)
        if found:
            return found
    return None


def _chromium(browser, url, tmp, extra):
    args = [browser, "--headless", "--no-sandbox", "--disable-gpu", "--disable-quic",
            "--no-first-run", "--disable-background-networking", "--disable-component-update",
            "--disable-sync", f"--user-data-dir={tmp / 'profile'}", "--enable-logging=stderr",
            "--v=0", *extra, url]
    return subprocess.run(args, capture_output=True, text=True, timeout=180)


@pytest.mark.slow
@pytest.mark.parametrize("width,height", [(1280, 900), (390, 844)])
@pytest.mark.reference
def test_page_renders_in_a_browser(page, tmp_path, width, height):
    import matplotlib.image as mpimg

    browser = _browser()
    if browser is None:
        pytest.skip("no headless browser: install Chromium (apt-get install chromium; .ci/run "
                    "tries) to run this check")
    text, _ = page
    (tmp_path / "page.html").write_text(text, encoding="utf-8")
    url = (tmp_path / "page.html").as_uri()
    shot = tmp_path / "shot.png"
    res = _chromium(browser, url, tmp_path, [f"--window-size={width},{height}",
                                             f"--screenshot={shot}"])
    assert shot.exists(), res.stderr[-2000:]
    assert "Uncaught" not in res.stderr and "ERROR:CONSOLE" not in res.stderr
    pixels = mpimg.imread(shot)
    assert pixels.shape[:2] == (height, width)
    # a blank page is one colour: the header, table and text give a clear spread
    assert float(pixels[..., :3].var()) > 1e-3
    dom = _chromium(browser, url, tmp_path, ["--dump-dom"])
    assert '<section id="comparison">' in dom.stdout and "Key numbers" in dom.stdout
    assert "Uncaught" not in dom.stderr and "ERROR:CONSOLE" not in dom.stderr
    if os.environ.get("SPHEX_KEEP_SCREENSHOTS"):
        shutil.copy(shot, os.path.join(os.environ["SPHEX_KEEP_SCREENSHOTS"],
                                       f"report_{width}x{height}.png"))


@pytest.mark.reference
def test_comparison_refuses_fields_in_other_units(files, tmp_path):
    ds = xr.open_dataset(files / "other.nc").load()
    ds["t2m"].attrs["units"] = "degC"
    ds.to_netcdf(tmp_path / "celsius.nc")
    with pytest.raises(ValueError, match="convert one"):
        build_report(files / "series.nc", compare=tmp_path / "celsius.nc")


@pytest.mark.reference
def test_wide_grids_are_drawn_thinned():
    from sphex.report.build import MAP_COLUMNS, _thinned

    lat, lon = np.linspace(-89.9, 89.9, 1200), np.arange(2400) * 0.15
    v, la, lo = _thinned(np.zeros((3, 1200, 2400)), lat, lon)
    # 2400 columns over at most 1080: every third cell
    assert v.shape == (3, 400, 800) and lo.size <= MAP_COLUMNS and lo[1] - lo[0] == pytest.approx(0.45)
    v, la, lo = _thinned(np.zeros((90, 180)), lat[:90], lon[:180])
    assert v.shape == (90, 180)


# ---------------------------------------------------------------------------
# winds and localised spectra
# ---------------------------------------------------------------------------
WIND_SECTIONS = ["provenance", "winds", "wind-maps"]


@pytest.fixture(scope="module")
def wind_page():
    text = build_report(DEMO / "velanthe_winds.nc", command="sphex report velanthe_winds.nc -o w.html")
    return text, read_page(text)


def _api_wind():
    """The demo's winds through the Python API: sphex.flow and sphex.spectra.kinetic_energy."""
    from sphex.flow import analyze_flow
    from sphex.spectra import kinetic_energy

    with xr.open_dataset(DEMO / "velanthe_winds.nc") as ds:
        u, v = (ds[k].values.astype(float) for k in ("u", "v"))
        grid = sphex.Grid.from_coords(ds["lat"].values, ds["lon"].values)
        radius = float(ds.attrs["planet_radius_km"]) * 1e3
    flow = analyze_flow(u, v, grid, radius=radius)
    rot, div = kinetic_energy(flow)
    return u, v, grid, flow, rot, div


def test_wind_page_has_the_wind_sections_only(wind_page):
    text, r = wind_page
    assert r.sections == WIND_SECTIONS
    assert r.scripts == 0 and r.outside == []
    # energy spectrum; maps of vorticity, divergence, streamfunction, velocity potential
    assert len(r.images) == 5
    assert_png_images(r)
    assert "u (eastward), v (northward)" in text and "1350 km (attribute planet_radius_km" in text
    caption = next(c for c in r.captions if c.startswith("Kinetic energy per degree"))
    assert "reference slopes -3 and -5/3" in caption and "not fitted" in caption
    assert any(c.startswith("Vorticity (colours) with the wind") for c in r.captions)
    assert any(c.startswith("Divergence (colours) with the divergent wind") for c in r.captions)
    assert any(c.startswith("Velocity potential (colours) with the divergent wind")
               for c in r.captions)
    assert "181 x 360 equiangular-poles grid" in text


@pytest.mark.reference
def test_wind_numbers_equal_those_of_the_python_api(wind_page):
    _, r = wind_page
    n = {k: float(v) for k, v in r.numbers.items()}
    u, v, grid, flow, rot, div = _api_wind()
    total = (rot + div).sum(axis=-1)
    assert n["wind_energy"] == pytest.approx(total.mean(), rel=1e-12)
    assert n["wind_energy_rotational"] == pytest.approx(rot.sum(axis=-1).mean(), rel=1e-12)
    assert n["wind_energy_divergent"] == pytest.approx(div.sum(axis=-1).mean(), rel=1e-12)
    assert n["wind_rotational_share"] == pytest.approx(100 * rot.sum() / (rot + div).sum(),
                                                       rel=1e-12)
    assert n["wind_rotational_share"] + n["wind_divergent_share"] == pytest.approx(100.0)
    assert n["wind_energy_first"] == pytest.approx(total[0], rel=1e-12)
    assert n["wind_energy_last"] == pytest.approx(total[-1], rel=1e-12)
    # the kinetic energy is the area mean of (u^2 + v^2)/2 by the grid's quadrature (Parseval
    # for vector fields, common practice; the demo's winds are band-limited to the grid's exact
    # degree 36 and stored in float32: agreement to about 1e-7)
    area = grid.integrate(np.ones(grid.shape))
    by_quadrature = np.mean([grid.integrate((u[i] ** 2 + v[i] ** 2) / 2) / area
                             for i in range(u.shape[0])])
    assert n["wind_energy"] == pytest.approx(by_quadrature, rel=1e-6)
    # RMS vorticity and divergence: the fields synthesised on the grid, squared, integrated
    for key, h in (("wind_rms_vorticity", flow.vorticity()),
                   ("wind_rms_divergence", flow.divergence())):
        field = sphex.synthesize(h, grid)
        ms = np.mean([grid.integrate(field[i] ** 2) / area for i in range(field.shape[0])])
        assert n[key] == pytest.approx(np.sqrt(ms), rel=1e-10)
    # slopes over the default fit range: 36/10 = 4 to 36 - 4 = 32
    assert n["wind_slope_rotational"] == pytest.approx(
        spectral_slope(rot.mean(axis=0), 4, 32)[0], rel=1e-12)
    assert n["wind_slope_divergent"] == pytest.approx(
        spectral_slope(div.mean(axis=0), 4, 32)[0], rel=1e-12)
    assert n["wind_radius"] == 1350.0


def test_wind_sections_join_a_scalar_report_of_one_component():
    text = build_report(DEMO / "velanthe_winds.nc", variable="u")
    r = read_page(text)
    assert {"maps", "numbers", "spectrum", "series", "winds", "wind-maps"} <= set(r.sections)
    assert "local" not in r.sections and "model" not in r.sections
    _, _, _, _, rot, div = _api_wind()
    assert float(r.numbers["wind_energy"]) == pytest.approx((rot + div).sum(axis=-1).mean(),
                                                            rel=1e-12)


def test_no_wind_or_local_sections_for_other_inputs(page, tmp_path):
    from sphex.demo import make_gravity_model

    _, r = page
    assert not {"winds", "wind-maps", "local"} & set(r.sections)
    assert not any(k.startswith(("wind_", "local_")) for k in r.numbers)
    (tmp_path / "moon.gfc").write_text(make_gravity_model())
    model = read_page(build_report(tmp_path / "moon.gfc"))
    assert not {"winds", "wind-maps", "local"} & set(model.sections)
    with pytest.raises(ValueError, match="--east and --north name the wind components of a grid"):
        build_report(tmp_path / "moon.gfc", east="u", north="v")
    with pytest.raises(ValueError, match="--at localises a field"):
        build_report(tmp_path / "moon.gfc", region=Region(0.0, 0.0, 30.0, 10))


def test_wind_page_refuses_scalar_options(tmp_path):
    with pytest.raises(ValueError, match=r"--at applies to a scalar field.*-v u"):
        build_report(DEMO / "velanthe_winds.nc", region=Region(0.0, 0.0, 30.0, 8))
    with pytest.raises(ValueError, match=r"--compare applies to a scalar field"):
        build_report(DEMO / "velanthe_winds.nc", compare=DEMO / "velanthe_winds.nc")
    with pytest.raises(ValueError, match="no variable 'wind_u'"):
        build_report(DEMO / "velanthe_winds.nc", east="wind_u", north="v")


@pytest.mark.reference
def test_local_section_numbers_equal_those_of_the_python_api(files):
    from sphex.localize import expected_local_power, local_power

    region = Region(-20.0, 40.0, 40.0, 8)
    text = build_report(files / "series.nc", region=region)
    r = read_page(text)
    assert "local" in r.sections and not {"winds", "wind-maps"} & set(r.sections)
    # the 14 images of a series page without --compare less the comparison's 4, plus the
    # localised spectrum and the map with the cap
    assert len(r.images) == 12
    assert_png_images(r)
    n = {k: float(v) for k, v in r.numbers.items()}
    p, hm, _, _ = _api_numbers(files / "series.nc", "tsurf")
    local = local_power(hm, -20.0, 40.0, 40.0, 8)
    lo, hi = 8, 44 - 8
    assert local.valid_range == (lo, hi)
    assert (n["local_valid_min"], n["local_valid_max"]) == (lo, hi)
    assert n["local_windows"] == local.n_windows
    assert n["local_concentration_min"] == pytest.approx(local.concentration.min(), rel=1e-12)
    assert n["local_power"] == pytest.approx(local.power[lo:hi + 1].sum(), rel=1e-10)
    blurred = expected_local_power(p, 40.0, 8, local.n_windows)[lo:hi + 1].sum()
    assert n["local_blurred_global"] == pytest.approx(blurred, rel=1e-10)
    assert n["local_ratio"] == pytest.approx(local.power[lo:hi + 1].sum() / blurred, rel=1e-10)
    assert "20\u00b0S 40\u00b0E" in text


@pytest.mark.reference
def test_local_section_from_the_command_line(files):
    res = _run("report", "series.nc", "-v", "tsurf", "--at", "-20,40", "--cap", "40",
               "--window-degree", "8", "--windows", "4", "-o", "loc.html", cwd=files)
    assert res.returncode == 0, res.stderr
    r = read_page((files / "loc.html").read_text(encoding="utf-8"))
    assert r.command == ("sphex report series.nc -v tsurf --at -20,40 --cap 40 "
                         "--window-degree 8 --windows 4 -o loc.html")
    from sphex.localize import expected_local_power, local_power

    p, hm, _, _ = _api_numbers(files / "series.nc", "tsurf")
    local = local_power(hm, -20.0, 40.0, 40.0, 8, 4)
    assert float(r.numbers["local_windows"]) == 4
    assert float(r.numbers["local_power"]) == pytest.approx(local.power[8:37].sum(), rel=1e-10)
    # the blurred global spectrum of the same 4 windows (not of all concentrated ones)
    blurred = expected_local_power(p, 40.0, 8, 4)[8:37].sum()
    assert float(r.numbers["local_blurred_global"]) == pytest.approx(blurred, rel=1e-10)


def test_local_and_wind_options_errors_are_one_line(files):
    for args, words in ((["--cap", "30"], "--at LAT,LON"),
                        (["--at", "10,20", "--cap", "30"], "--at needs --window-degree N"),
                        (["--at", "10,20", "--cap", "30", "--window-degree", "60"],
                         "above the field's highest degree 44"),
                        (["--at", "10,20", "--cap", "30", "--window-degree", "8",
                          "--windows", "99"], "choose 1.."),
                        (["--east", "u"], "give both --east and --north")):
        res = _run("report", "series.nc", "-v", "tsurf", *args, "-o", "c.html", cwd=files)
        assert res.returncode == 2, (args, res.stderr)
        assert words in res.stderr and len(res.stderr.strip().splitlines()) == 1
        assert "Traceback" not in res.stderr
    assert not (files / "c.html").exists()
