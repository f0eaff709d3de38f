"""The demo job on invented data: the fictional icy moon Velanthe.

``sphex demo`` (:func:`run`) reads the two bundled files in ``data_demo/``
(or makes them, when sphex is installed without the repository), and then
does the whole job a user would do with their own files:

1. analyses the topography into coefficients and writes them to netCDF;
2. draws its degree power spectrum with a fitted power law, before and after
   Gaussian smoothing;
3. writes and draws the smoothed topography map, and the isotropy picture
   (how each degree's power is shared among its orders, against an
   isotropic field);
4. analyses a twelve-step surface-temperature series in one batch;
5. turns four steps of its winds into vorticity, divergence, streamfunction,
   velocity potential and the kinetic-energy spectrum, and draws them.

Everything here is synthetic: Velanthe does not exist, and its "data" are
made by :func:`make_topography`, :func:`make_temperature` and
:func:`make_winds` from seeded random numbers and simple formulas.  They say
so in their attributes.
"""
from __future__ import annotations

import contextlib
import os
import sys
import time
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any

import numpy as np

__all__ = ["MOON", "RADIUS_KM", "make_topography", "make_temperature", "make_winds",
           "make_gravity_model",
           "write_demo_data", "run"]

MOON = "Velanthe"
RADIUS_KM = 1350.0
TOPO_FILE = "velanthe_topography.nc"
TEMP_FILE = "velanthe_surface_temperature.nc"
WIND_FILE = "velanthe_winds.nc"
SMOOTH_KM = 200.0
SEED = 20261201

_SYNTHETIC = ("synthetic: invented for the sphex demo by data_demo/make_demo_data.py "
              "(sphex.demo); not an observation or model of any real body")


def _angular_distance(lat: np.ndarray, lon: np.ndarray, lat0: float, lon0: float) -> np.ndarray:
    """Cosine of the angular distance from (lat0, lon0), on a lat x lon mesh (degrees)."""
    la, lo = np.deg2rad(lat)[:, None], np.deg2rad(lon)[None, :]
    a0, o0 = np.deg2rad(lat0), np.deg2rad(lon0)
    return np.sin(la) * np.sin(a0) + np.cos(la) * np.cos(a0) * np.cos(lo - o0)


def _global_attrs(title: str) -> dict:
    return {
        "title": title,
        "Conventions": "CF-1.8",
        "source": _SYNTHETIC,
        "synthetic": "yes",
        "planet_name": f"{MOON} (fictional icy moon)",
        "planet_radius_km": RADIUS_KM,
        "history": "made by data_demo/make_demo_data.py",
    }


def make_topography():
    """Velanthe's topography: 1-degree cells, south to north, longitudes -180..180.

    A tidal bulge (degrees 2), the 2400 km wide Orun impact basin with a
    raised rim, a ridge belt along a great circle, and power-law roughness
    (degree power ~ l^-2.4 from degree 3 to 89) from seeded random
    coefficients.

    Returns
    -------
    xarray.Dataset
        Variable ``topography`` (metres above the 1350 km reference sphere).
    """
    import xarray as xr

    from sphex import Grid, Harmonics, synthesize

    nlat, nlon = 180, 360
    lat = -89.5 + np.arange(nlat)            # south to north, cell centres
    lon = -179.5 + np.arange(nlon)           # starts at the antimeridian
    grid = Grid.from_coords(lat, lon)
    rng = np.random.default_rng(SEED)
    lmax = 89
    coef = np.zeros((lmax + 1, lmax + 1), dtype=complex)
    for l in range(3, lmax + 1):
        power = 9.0e5 * l ** -2.4            # m^2 per degree (area mean of h^2)
        # orthonormal: power_l = (a_l0^2 + 2 sum |a_lm|^2) / (4 pi) -> per real unit sigma^2
        sigma = np.sqrt(4 * np.pi * power / (2 * l + 1))
        re = rng.normal(0.0, sigma / np.sqrt(2), l + 1)
        im = rng.normal(0.0, sigma / np.sqrt(2), l + 1)
        re[0] = rng.normal(0.0, sigma)
        im[0] = 0.0
        coef[l, : l + 1] = re + 1j * im
    # tidal figure: flattened at the poles, elongated towards the parent planet (lon 0)
    coef[2, 0] = -1800.0
    coef[2, 2] = 1100.0
    rough = synthesize(Harmonics(coef), grid)
    # Orun basin: centre (-28 N, 128 E), angular radius ~ 51 deg (1200 km on the surface)
    c = _angular_distance(lat, lon, -28.0, 128.0)
    psi = np.arccos(np.clip(c, -1, 1))
    r0 = 1200.0 / RADIUS_KM
    basin = -3800.0 * np.exp(-(psi / (0.62 * r0)) ** 4) + 1400.0 * np.exp(-((psi - r0) / 0.16) ** 2)
    # a ridge belt following a great circle tilted 35 degrees to the equator
    pole_c = _angular_distance(lat, lon, 55.0, -60.0)     # distance from the belt's pole
    ridge = 1500.0 * np.exp(-(pole_c / 0.05) ** 2) * (0.6 + 0.4 * np.cos(np.deg2rad(3 * lon))[None, :])
    topo = rough + basin + ridge
    topo = topo - grid.integrate(topo) / (4 * np.pi)      # heights above the mean radius
    ds = xr.Dataset(
        {"topography": (("latitude", "longitude"), topo.astype(np.float32),
                        {"long_name": "surface height above the reference sphere",
                         "units": "m", "comment": _SYNTHETIC})},
        coords={"latitude": ("latitude", lat, {"units": "degrees_north"}),
                "longitude": ("longitude", lon, {"units": "degrees_east"})},
        attrs=_global_attrs(f"Topography of {MOON}, a fictional moon (synthetic)"),
    )
    return ds


def make_temperature():
    """Velanthe's surface temperature over one orbit: 12 steps on a Gauss grid.

    Gauss-Legendre latitudes north to south (48 x 96, exact to degree 47),
    longitudes 0..356.25.  The subsolar point circles the moon once per
    18-day orbit and swings 9 degrees north and south; the dark floor of the
    Orun basin runs a few kelvin warmer, and frost-covered high ground is
    colder (4 K per km of the topography, regridded spectrally to this grid).

    Returns
    -------
    xarray.Dataset
        Variable ``surface_temperature`` (K) over ``(time, lat, lon)``.
    """
    import pandas as pd
    import xarray as xr

    from sphex import Grid, regrid

    grid = Grid.gauss(47)
    topo_ds = make_topography()
    topo_grid = Grid.from_coords(topo_ds["latitude"].values, topo_ds["longitude"].values)
    topo = regrid(topo_ds["topography"].values.astype(np.float64), topo_grid, grid)
    lat, lon = np.asarray(grid.lat), np.asarray(grid.lon)
    nt = 12
    hours = np.arange(nt) * 36.0
    times = pd.Timestamp("2101-01-01") + pd.to_timedelta(hours, unit="h")
    basin = np.exp(4.0 * (_angular_distance(lat, lon, -28.0, 128.0) - 1.0))
    out = np.empty((nt, lat.size, lon.size))
    for k in range(nt):
        sub_lon = 360.0 * k / nt
        sub_lat = 9.0 * np.sin(2 * np.pi * k / nt)
        c = _angular_distance(lat, lon, sub_lat, sub_lon - 20.0)   # afternoon lag of 20 deg
        # bright frost on high ground: 4 K colder per km of height
        out[k] = 68.0 + 52.0 * np.exp(2.2 * (c - 1.0)) + 4.0 * basin - 4.0e-3 * topo
    ds = xr.Dataset(
        {"surface_temperature": (("time", "lat", "lon"), out.astype(np.float32),
                                 {"standard_name": "surface_temperature",
                                  "long_name": "surface temperature", "units": "K",
                                  "comment": _SYNTHETIC})},
        coords={"time": ("time", times, {"long_name": "time (fictional calendar)"}),
                "lat": ("lat", lat, {"standard_name": "latitude", "units": "degrees_north"}),
                "lon": ("lon", lon, {"standard_name": "longitude", "units": "degrees_east"})},
        attrs=_global_attrs(f"Surface temperature of {MOON} over one orbit (synthetic)"),
    )
    ds["time"].encoding.update({"units": "hours since 2101-01-01 00:00:00", "calendar": "standard"})
    return ds


def _random_potential(rng: np.random.Generator, energy: np.ndarray, radius: float,
                      steps: int) -> np.ndarray:
    """Orthonormal coefficients (steps, L+1, L+1) of a streamfunction or velocity potential
    whose flow has ``energy[l]`` (m2 s-2) per degree on average, drifting east by 10 degrees
    a step while a quarter of it is renewed."""
    lmax = energy.size - 1
    coef = np.zeros((steps, lmax + 1, lmax + 1), dtype=complex)
    m = np.arange(lmax + 1)
    for l in range(1, lmax + 1):
        # E_l = l(l+1)/(2 R^2) P_l and P_l = sum over m of |c_lm|^2 (2 - [m=0]) / (4 pi)
        sigma = np.sqrt(4 * np.pi * energy[l] * 2 * radius ** 2 / (l * (l + 1)) / (2 * l + 1))
        first = rng.normal(0, sigma / np.sqrt(2), (2, l + 1))
        coef[0, l, : l + 1] = first[0] + 1j * first[1]
        for k in range(1, steps):
            fresh = rng.normal(0, sigma / np.sqrt(2), (2, l + 1))
            drift = np.exp(-1j * m[: l + 1] * np.deg2rad(10.0))
            coef[k, l, : l + 1] = (np.sqrt(0.75) * coef[k - 1, l, : l + 1] * drift
                                   + np.sqrt(0.25) * (fresh[0] + 1j * fresh[1]))
    coef[..., 0] = coef[..., 0].real * np.sqrt(2)
    return coef


def make_winds():
    """Velanthe's near-surface winds: four steps on a 2.5-degree grid that samples both poles.

    Latitudes north to south (73, both poles), longitudes 0..357.5, the first
    four steps of the temperature series (36 hours apart).  The flow is
    band-limited to degree 36, the grid's exact limit, and made of

    - two westerly jets near 39 degrees north and south, 24 m s-1 at their core
      (streamfunction ``-R U c (mu^3/3 - mu^5/5)``, ``mu = sin(lat)``);
    - a divergent outflow from the subsolar point, which follows the
      temperature series (velocity potential ``-A cos(angle from the subsolar
      point)``, 4 m s-1 at most);
    - rotational eddies with energy ``~ l^-3`` from degree 6 and weaker
      divergent eddies ``~ l^-5/3``, from seeded random coefficients that drift
      east by 10 degrees a step.

    Returns
    -------
    xarray.Dataset
        ``u`` and ``v`` (m s-1) over ``(time, lat, lon)``, with the CF standard
        names ``eastward_wind`` and ``northward_wind``.
    """
    import pandas as pd
    import xarray as xr

    from sphex import Grid, analyze
    from sphex.flow import Flow, synthesize_flow
    from sphex.harmonics import Harmonics

    radius = RADIUS_KM * 1e3
    lat = 90.0 - 2.5 * np.arange(73)
    lon = 2.5 * np.arange(144)
    grid = Grid.from_coords(lat, lon)
    lmax = grid.lmax_exact
    steps = 4
    hours = np.arange(steps) * 36.0
    rng = np.random.default_rng(SEED + 11)
    l = np.arange(lmax + 1, dtype=float)
    l[0] = 1.0
    rot = _random_potential(rng, 10.0 / (1.0 + (l / 6.0) ** 3), radius, steps)
    div = _random_potential(rng, 0.6 * (l / 6.0) ** (-5.0 / 3.0) / (1.0 + 6.0 / l), radius, steps)
    mu = np.sin(np.deg2rad(lat))[:, None] + 0.0 * lon
    jets = -radius * 24.0 / 0.186 * (mu ** 3 / 3 - mu ** 5 / 5)
    rot += analyze(jets, grid, lmax).coef
    for k in range(steps):
        sub_lon = 360.0 * k / 12
        sub_lat = 9.0 * np.sin(2 * np.pi * k / 12)
        outflow = -4.0 * radius * _angular_distance(lat, lon, sub_lat, sub_lon - 20.0)
        div[k] += analyze(outflow, grid, lmax).coef
    flow = Flow(Harmonics(rot, radius=radius), Harmonics(div, radius=radius))
    u, v = synthesize_flow(flow, grid)
    times = pd.Timestamp("2101-01-01") + pd.to_timedelta(hours, unit="h")
    wind = {"units": "m s-1", "comment": _SYNTHETIC}
    ds = xr.Dataset(
        {"u": (("time", "lat", "lon"), u.astype(np.float32),
               {"standard_name": "eastward_wind", "long_name": "eastward wind near the surface",
                **wind}),
         "v": (("time", "lat", "lon"), v.astype(np.float32),
               {"standard_name": "northward_wind", "long_name": "northward wind near the surface",
                **wind})},
        coords={"time": ("time", times, {"long_name": "time (fictional calendar)"}),
                "lat": ("lat", lat, {"standard_name": "latitude", "units": "degrees_north"}),
                "lon": ("lon", lon, {"standard_name": "longitude", "units": "degrees_east"})},
        attrs=_global_attrs(f"Near-surface winds of {MOON} (synthetic)"),
    )
    ds["time"].encoding.update({"units": "hours since 2101-01-01 00:00:00", "calendar": "standard"})
    return ds


GRAVITY_FILE = "velanthe_gravity.gfc"
GRAVITY_LMAX = 40
#: Velanthe's invented GM (m^3 s^-2): a 1350 km ice-and-rock sphere of mean density 1.9 g/cm^3.
GRAVITY_GM = 1.3068e12
#: Density contrast of the surface ice over the mean density, for the topography's attraction.
_ICE_OVER_MEAN = 0.92 / 1.9
#: Degree where the invented formal errors reach the signal.
_ERROR_DEGREE = 30


def make_gravity_model() -> str:
    """Velanthe's invented gravity model, as the text of a gravity-field exchange file.

    The potential is the attraction of the demo topography (a thin ice shell,
    ``3 (rho_ice / rho_mean) h_lm / ((2l+1) R)`` per fully normalised
    coefficient) compensated at long wavelengths by the factor
    ``l^2 / (l^2 + 36)``, plus seeded noise of the stated formal standard
    deviations, which grow with degree and reach the signal near degree 30.
    Degree 40, with sigmas; the header says it is invented.

    Returns
    -------
    str
    """
    from sphex import Grid, analyze

    topo_ds = make_topography()
    grid = Grid.from_coords(topo_ds["latitude"].values, topo_ds["longitude"].values)
    h = analyze(topo_ds["topography"].values.astype(np.float64), grid, GRAVITY_LMAX)
    C, S = h.to("full", False).cos_sin()
    l = np.arange(GRAVITY_LMAX + 1, dtype=np.float64)[:, None]
    factor = 3.0 * _ICE_OVER_MEAN / ((2 * l + 1) * RADIUS_KM * 1e3) * l**2 / (l**2 + 36.0)
    C, S = C * factor, S * factor
    C[0, 0], C[1], S[1] = 1.0, 0.0, 0.0         # GM defines degree 0; centre of mass at the origin
    rms = np.sqrt(np.sum(C**2 + S**2, axis=1) / (2 * l[:, 0] + 1))
    sigma = rms[_ERROR_DEGREE] * np.exp((l - _ERROR_DEGREE) / 4.0) * np.ones_like(C)
    sigma[:2] = 0.0
    rng = np.random.default_rng(SEED + 12)
    lower = np.tri(GRAVITY_LMAX + 1, dtype=bool)
    sigma_s = np.where(lower & (np.arange(GRAVITY_LMAX + 1) > 0)[None, :], sigma, 0.0)
    sigma = np.where(lower, sigma, 0.0)
    C = C + rng.normal(0.0, 1.0, C.shape) * sigma
    S = S + rng.normal(0.0, 1.0, S.shape) * sigma_s
    lines = [f"{MOON}: an invented gravity field for the sphex demo ({_SYNTHETIC}).",
             "The attraction of the invented demo topography, partly compensated, with invented",
             "formal errors. Not a model of any real body.",
             "begin_of_head",
             "product_type            gravity_field",
             f"modelname               {MOON.upper()}-G{GRAVITY_LMAX}-INVENTED",
             f"earth_gravity_constant  {GRAVITY_GM:.6e}",
             f"radius                  {RADIUS_KM * 1e3:.1f}",
             f"max_degree              {GRAVITY_LMAX}",
             "errors                  formal",
             "norm                    fully_normalized",
             "tide_system             none",
             "key     L    M             C                  S              sigma C     sigma S",
             "end_of_head"]
    for n in range(GRAVITY_LMAX + 1):
        for m in range(n + 1):
            lines.append(f"gfc {n:4d} {m:4d} {C[n, m]: .12e} {S[n, m]: .12e} "
                         f"{sigma[n, m]:.4e} {sigma_s[n, m]:.4e}")
    return "\n".join(lines) + "\n"


def write_demo_data(directory: str | os.PathLike, overwrite: bool = False) -> list[Path]:
    """Write the demo files (topography, temperature, winds, gravity model) into
    ``directory``; returns their paths."""
    from sphex.xr.output import atomic_output

    d = Path(directory)
    d.mkdir(parents=True, exist_ok=True)
    out = []
    with atomic_output(d / GRAVITY_FILE, overwrite) as tmp:
        Path(tmp).write_text(make_gravity_model(), encoding="ascii")
    out.append(d / GRAVITY_FILE)
    for name, make in ((TOPO_FILE, make_topography), (TEMP_FILE, make_temperature),
                       (WIND_FILE, make_winds)):
        ds = make()
        enc = {v: {"zlib": True, "complevel": 4} for v in ds.data_vars}
        path = d / name
        with atomic_output(path, overwrite) as tmp:
            ds.to_netcdf(tmp, format="NETCDF4", engine="netcdf4", encoding=enc)
        out.append(path)
    return out


def _bundled_data() -> Path | None:
    here = Path(__file__).resolve().parent.parent / "data_demo"
    if all((here / name).exists() for name in (TOPO_FILE, TEMP_FILE, WIND_FILE)):
        return here
    return None


@contextlib.contextmanager
def _quiet_progress(total: int, label: str) -> Iterator[Callable[[int, int], None]]:
    """Stands in for a progress bar when the caller shows none."""
    yield lambda done, total: None


def run(out_dir: str | os.PathLike = "sphex-demo-output", overwrite: bool = False, *,
        progress: Callable[[int, str], Any] | None = None) -> int:
    """Run the demo; print what was written where.  Returns 0.

    Parameters
    ----------
    out_dir : path-like
        Directory for the results (made if missing).
    overwrite : bool
        Replace results already there; otherwise existing results are an error
        and nothing is written.
    progress : callable, optional
        ``progress(total, label)`` makes a progress display for the batch
        analysis: a context manager that yields a ``(done, total)`` callback
        (the command line passes its terminal bar).  Default: none shown.

    Raises
    ------
    FileExistsError
        If results exist in ``out_dir`` and ``overwrite`` is false.
    """
    out = Path(out_dir)
    names = {
        "coef": "velanthe_topography_coef.nc",
        "map": "topography_map.png",
        "smooth_nc": f"topography_smoothed_{SMOOTH_KM:g}km.nc",
        "smooth_png": f"topography_smoothed_{SMOOTH_KM:g}km.png",
        "spectrum": "topography_spectrum.png",
        "isotropy": "topography_isotropy.png",
        "temp_coef": "velanthe_temperature_coef.nc",
        "temp_spectrum": "temperature_spectra.png",
        "temp_map": "temperature_map_first_step.png",
        "wind_flow": "velanthe_wind_flow.nc",
        "wind_vorticity": "winds_vorticity.png",
        "wind_potential": "winds_velocity_potential.png",
        "wind_energy": "winds_energy_spectrum.png",
        "report": "velanthe_topography_report.html",
        "wind_report": "velanthe_winds_report.html",
    }
    if out.exists() and not out.is_dir():
        raise NotADirectoryError(f"--out {str(out)!r} is a file; give a directory")
    existing = [n for n in names.values() if (out / n).exists()]
    if existing and not overwrite:
        raise FileExistsError(f"{str(out)!r} already holds demo results ({existing[0]}, ...); "
                              "pass --overwrite or choose another --out")
    made_dir = not out.exists()
    out.mkdir(parents=True, exist_ok=True)
    from sphex.xr.output import check_output_path

    check_output_path(out / names["coef"], overwrite)  # a writable folder, before any work
    before = set(out.iterdir())
    try:
        return _make_products(out, names, overwrite, progress or _quiet_progress)
    except BaseException:
        # a failed or interrupted demo takes back the files it added
        for p in set(out.iterdir()) - before:
            if p.is_file():
                p.unlink(missing_ok=True)
            elif p.is_dir() and p.name == "data":
                for q in p.iterdir():
                    q.unlink(missing_ok=True)
                p.rmdir()
        if made_dir and not any(out.iterdir()):
            out.rmdir()
        raise


def _make_products(out: Path, names: dict[str, str], overwrite: bool,
                   progress: Callable[[int, str], Any]) -> int:
    """The demo's work: both data sets analysed, drawn and written; a summary printed."""
    from sphex.compiling import DEMO_BESIDE, compile_beside

    t0 = time.monotonic()
    data = _bundled_data()
    made = ""
    if data is None:
        data = out / "data"
        write_demo_data(data, overwrite=True)
        made = " (made now; the repository's data_demo/ was not found)"
    print(f"sphex demo: {MOON}, a fictional icy moon of radius {RADIUS_KM:g} km; all data are "
          f"synthetic\n  input data  {data}{made}")
    # a first run compiles the kernels of the winds in a second process meanwhile, so
    # everything that needs no wind kernel comes first
    beside = compile_beside(DEMO_BESIDE)
    try:
        rows, checks = _topography_products(data, out, names, overwrite)
        rows += _temperature_products(data, out, names, overwrite, progress)
        report = _report_product(data, out, names, overwrite, "topography")
        if beside is not None:
            beside.close()
        rows += _wind_products(data, out, names, overwrite)
    finally:
        if beside is not None:
            beside.stop()
    rows += report + _report_product(data, out, names, overwrite, "winds")
    w = max(len(k) for k, _ in rows)
    for k, v in rows:
        print(f"  {k:<{w}}  {v}")
    print(checks)
    print(f"  done in {time.monotonic() - t0:.1f} s")
    sys.stdout.flush()
    return 0


def _topography_products(data: Path, out: Path, names: dict[str, str],
                         overwrite: bool) -> tuple[list[tuple[str, str]], str]:
    """Coefficients, smoothed field, maps, spectrum and isotropy picture of the
    topography; the summary rows and the line of checks."""
    import xarray as xr

    import sphex.xr as sxr
    from sphex import plot
    from sphex.spectra import spectral_slope

    with xr.open_dataset(data / TOPO_FILE) as f:
        topo = f["topography"].load()
    info = sxr.find_grid(topo)
    coef = sxr.analyze(topo, radius=RADIUS_KM * 1e3)
    sxr.write_harmonics(coef, out / names["coef"], overwrite)
    back = sxr.synthesize(coef, like=topo)
    lmax = coef.sizes["degree"] - 1
    smoothed = sxr.smooth(topo, gaussian_km=SMOOTH_KM, planet_radius_km=RADIUS_KM)
    smoothed.attrs["long_name"] = f"surface height, Gaussian-smoothed ({SMOOTH_KM:g} km)"
    sxr.write_dataset(smoothed.astype(np.float32).to_dataset(), out / names["smooth_nc"], overwrite)
    p_raw = sxr.degree_power(coef)
    p_smooth = sxr.degree_power(sxr.analyze(smoothed))
    fit = (8, 80)
    slope = float(spectral_slope(np.asarray(p_raw), *fit)[0])

    plot.save(plot.map_figure(topo, center=0.0, cmap="strata",
                              title=f"{MOON}: topography (synthetic)"),
              out / names["map"], overwrite=overwrite)
    vmin, vmax = float(topo.min()), float(topo.max())
    plot.save(plot.map_figure(smoothed, center=0.0, cmap="strata", vmin=vmin, vmax=vmax,
                              title=f"{MOON}: topography after Gaussian smoothing, "
                                    f"half weight at {SMOOTH_KM:g} km"),
              out / names["smooth_png"], overwrite=overwrite)
    plot.save(plot.power_figure([p_raw, p_smooth],
                                labels=["topography", f"smoothed, {SMOOTH_KM:g} km Gaussian"],
                                units=p_raw.attrs.get("units"), fit=fit,
                                planet_radius_km=RADIUS_KM,
                                title=f"{MOON}: degree power of the topography"),
              out / names["spectrum"], overwrite=overwrite)
    plot.save(plot.isotropy_figure(coef, title=f"{MOON}: is the topography isotropic?"),
              out / names["isotropy"], overwrite=overwrite)

    err = float(abs(back - topo.astype(np.float64)).max())
    rms = float(np.sqrt(p_raw.sum()))
    rows = [
        ("topography", f"{info.describe()}"),
        ("coefficients", f"{out / names['coef']}  (degrees 0..{lmax}, orthonormal, radius {RADIUS_KM:g} km)"),
        ("map", str(out / names["map"])),
        ("smoothed map", f"{out / names['smooth_png']}  (data: {out / names['smooth_nc']})"),
        ("spectrum plot", f"{out / names['spectrum']}  (power-law slope {slope:.2f} over degrees {fit[0]}-{fit[1]})"),
        ("isotropy", str(out / names["isotropy"])),
    ]
    checks = (f"  checks: rms height {rms:.1f} m; synthesis of the coefficients back onto the input "
              f"grid differs from the input by at most {err:.2g} m: the part of the input above "
              f"degree {lmax}, which its grid cannot carry exactly")
    return rows, checks


def _temperature_products(data: Path, out: Path, names: dict[str, str], overwrite: bool,
                          progress: Callable[[int, str], Any]) -> list[tuple[str, str]]:
    """Coefficients, spectra and first map of the temperature series; the summary rows."""
    import xarray as xr

    import sphex.xr as sxr
    from sphex import plot

    with xr.open_dataset(data / TEMP_FILE) as f:
        temp = f["surface_temperature"].load()
    tinfo = sxr.find_grid(temp)
    with progress(temp.sizes["time"], "sphex demo") as bar:
        tcoef = sxr.analyze(temp, progress=bar)
    sxr.write_harmonics(tcoef, out / names["temp_coef"], overwrite)
    tp = sxr.degree_power(tcoef)
    hours = (temp.time.values - temp.time.values[0]) / np.timedelta64(1, "h")
    steps = [0, 3, 6, 9]
    plot.save(plot.power_figure(
        [tp.isel(time=k) for k in steps],
        labels=[f"step {k}, hour {hours[k]:g} of the orbit" for k in steps],
        band_label=f"range over all {temp.sizes['time']} steps",
        units=tp.attrs.get("units"), planet_radius_km=RADIUS_KM,
        band=(tp.min("time"), tp.max("time")),
        title=f"{MOON}: degree power of surface temperature"),
        out / names["temp_spectrum"], overwrite=overwrite)
    plot.save(plot.map_figure(temp.isel(time=0), cmap="ember",
                              title=f"{MOON}: surface temperature, first step (synthetic)"),
              out / names["temp_map"], overwrite=overwrite)
    return [
        ("temperature", f"{temp.sizes['time']} steps on a {tinfo.describe()}"),
        ("coefficients", str(out / names["temp_coef"])),
        ("spectra plot", str(out / names["temp_spectrum"])),
        ("map", str(out / names["temp_map"])),
    ]


def _wind_products(data: Path, out: Path, names: dict[str, str],
                   overwrite: bool) -> list[tuple[str, str]]:
    """Flow diagnostics of the winds, maps of vorticity and divergence with the wind, and the
    kinetic-energy spectrum; the summary rows."""
    import xarray as xr

    import sphex.xr as sxr
    from sphex import plot
    from sphex.spectra import spectral_slope

    with xr.open_dataset(data / WIND_FILE) as f:
        u, v = f["u"].load(), f["v"].load()
    info = sxr.find_grid(u)
    flow = sxr.flow_fields(u, v, radius=RADIUS_KM * 1e3, spectrum=True)
    sxr.write_dataset(flow, out / names["wind_flow"], overwrite)
    first = flow.isel(time=0)
    plot.save(plot.wind_map_figure(first["vorticity"] * 1e6, u.isel(time=0), v.isel(time=0),
                                   units="10^-6 s-1", label="relative vorticity",
                                   title=f"{MOON}: vorticity and wind, first step (synthetic)"),
              out / names["wind_vorticity"], overwrite=overwrite)
    plot.save(plot.wind_map_figure(first["velocity_potential"] / 1e6, first["eastward_divergent"],
                                   first["northward_divergent"], units="10^6 m2 s-1",
                                   label="velocity potential",
                                   title=f"{MOON}: velocity potential and divergent wind, first step"),
              out / names["wind_potential"], overwrite=overwrite)
    rot = flow["kinetic_energy_rotational"].mean("time")
    div = flow["kinetic_energy_divergent"].mean("time")
    units = flow["kinetic_energy_rotational"].attrs.get("units")
    plot.save(plot.energy_figure(rot, div, units=units, planet_radius_km=RADIUS_KM,
                                 note=f"mean of {u.sizes['time']} steps",
                                 title=f"{MOON}: kinetic energy per degree of the winds"),
              out / names["wind_energy"], overwrite=overwrite)
    lmax = flow.sizes["degree"] - 1
    slope = float(spectral_slope(np.asarray(rot), 8, lmax)[0])
    share = float(rot.sum() / (rot.sum() + div.sum()))
    return [
        ("winds", f"{u.sizes['time']} steps on a {info.describe()}"),
        ("flow fields", f"{out / names['wind_flow']}  (vorticity, divergence, streamfunction, "
                        "velocity potential, rotational and divergent winds)"),
        ("vorticity map", str(out / names["wind_vorticity"])),
        ("potential map", str(out / names["wind_potential"])),
        ("energy spectrum", f"{out / names['wind_energy']}  (rotational {100 * share:.0f} % of the "
                            f"kinetic energy; its slope over degrees 8-{lmax}: {slope:.2f})"),
    ]


def _report_product(data: Path, out: Path, names: dict[str, str], overwrite: bool,
                    which: str) -> list[tuple[str, str]]:
    """The HTML report of the topography or of the winds (``which``; what ``sphex report``
    writes); its summary row."""
    import shlex

    from sphex.report import build_report, write_report

    again = ["--overwrite"] if overwrite else []
    if which == "topography":
        target = out / names["report"]
        command = shlex.join(["sphex", "report", str(data / TOPO_FILE), "-v", "topography",
                              "-o", str(target)] + again)
        write_report(build_report(data / TOPO_FILE, variable="topography", command=command),
                     target, overwrite)
        return [("report", f"{target}  (one self-contained HTML page; open it in a browser)")]
    winds = out / names["wind_report"]
    command = shlex.join(["sphex", "report", str(data / WIND_FILE), "-o", str(winds)] + again)
    write_report(build_report(data / WIND_FILE, command=command), winds, overwrite)
    return [("wind report", f"{winds}  (kinetic energy, vorticity and divergence of the winds)")]
