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
4. analyses a twelve-step surface-temperature series in one batch.

Everything here is synthetic: Velanthe does not exist, and its "data" are
made by :func:`make_topography` and :func:`make_temperature` from seeded
random numbers and simple formulas.  They say so in their attributes.
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

__all__ = ["MOON", "RADIUS_KM", "make_topography", "make_temperature", "write_demo_data", "run"]

MOON = "Velanthe"
RADIUS_KM = 1350.0
TOPO_FILE = "velanthe_topography.nc"
TEMP_FILE = "velanthe_surface_temperature.nc"
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
        # ortho: power_l = (a_l0^2 + 2 sum |a_lm|^2) / (4 pi) -> per real unit sigma^2
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


def write_demo_data(directory: str | os.PathLike, overwrite: bool = False) -> list[Path]:
    """Write the two demo files into ``directory``; returns their paths."""
    from sphex.xr.output import atomic_output

    d = Path(directory)
    d.mkdir(parents=True, exist_ok=True)
    out = []
    for name, make in ((TOPO_FILE, make_topography), (TEMP_FILE, make_temperature)):
        ds = make()
        enc = {v: {"zlib": True, "complevel": 4} for v in ds.data_vars}
        path = d / name
        with atomic_output(path, overwrite) as tmp:
            ds.to_netcdf(tmp, format="NETCDF4", engine="netcdf4", encoding=enc)
        out.append(path)
    return out


def _bundled_data() -> Path | None:
    here = Path(__file__).resolve().parent.parent / "data_demo"
    if (here / TOPO_FILE).exists() and (here / TEMP_FILE).exists():
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
    }
    if out.exists() and not out.is_dir():
        raise NotADirectoryError(f"--out {str(out)!r} is a file; give a directory")
    existing = [n for n in names.values() if (out / n).exists()]
    if existing and not overwrite:
        raise FileExistsError(f"{str(out)!r} already holds demo results ({existing[0]}, ...); "
                              "pass --overwrite or choose another --out")
    made_dir = not out.exists()
    out.mkdir(parents=True, exist_ok=True)
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
    t0 = time.monotonic()
    data = _bundled_data()
    made = ""
    if data is None:
        data = out / "data"
        write_demo_data(data, overwrite=True)
        made = " (made now; the repository's data_demo/ was not found)"
    print(f"sphex demo: {MOON}, a fictional icy moon of radius {RADIUS_KM:g} km; all data are "
          f"synthetic\n  input data  {data}{made}")
    rows, checks = _topography_products(data, out, names, overwrite)
    rows += _temperature_products(data, out, names, overwrite, progress)
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
