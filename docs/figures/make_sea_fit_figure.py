"""Make docs/images/sea_temperature_fit.png: a field with gaps fitted by least squares.

Run from the repository root::

    python docs/figures/make_sea_fit_figure.py [--write-file velanthe_sea_temperature.nc]

It takes the first step of the bundled surface temperature of Velanthe (a
fictional moon; the data are synthetic, made by data_demo/make_demo_data.py),
keeps it only where the demo topography, regridded onto the temperature's
grid, lies below 0 m (the "seas"), and fits coefficients to degree 47 from
the seas alone: without damping, with damping 1e-2 (as ``sphex analyze
--missing fit --damping 1e-2``), and with a power-law prior (damping 1e-3).  It draws the
masked field and the degree power of the complete field beside the fits and
their errors, and prints the numbers quoted in docs/guide.md.
"""
from __future__ import annotations

import argparse
import warnings
from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import xarray as xr  # noqa: E402

import sphex.xr as sxr  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
TOPOGRAPHY = ROOT / "data_demo" / "velanthe_topography.nc"
TEMPERATURE = ROOT / "data_demo" / "velanthe_surface_temperature.nc"
OUT = ROOT / "docs" / "images" / "sea_temperature_fit.png"

LMAX = 47
LEVEL_M = 0.0           # cells whose topography is at or above this level are "land", missing
DAMPING = 1e-2          # plain damping, as on the command line
PRIOR_DAMPING = 1e-3    # damping with the power-law prior (chosen from 1e-2, 1e-3, 1e-4)

INK, FULL, DAMPED, PRIOR, GRIDLINE = "#22313f", "#22313f", "#d9822b", "#3d7ea6", "#d8dde3"


def sea_field() -> tuple[xr.DataArray, xr.DataArray]:
    """The complete temperature of the first step, and the same with the land missing."""
    topo = xr.open_dataset(TOPOGRAPHY)["topography"]
    temp = xr.open_dataset(TEMPERATURE)["surface_temperature"].isel(time=0).astype(float)
    land = sxr.regrid(topo, like=temp) >= LEVEL_M
    sea = temp.where(~land)
    sea.name = "sea_temperature"
    sea.attrs = dict(temp.attrs, comment="surface temperature where the topography lies below "
                     f"{LEVEL_M:g} m; NaN over land (synthetic)")
    return temp, sea


def prior_variances(lmax: int) -> np.ndarray:
    """Per-degree prior variance of an orthonormal coefficient: degree power 100 l^-3 K^2
    (read off the complete field's spectrum) spread over 2l+1 coefficients; degree 0 free."""
    l = np.arange(lmax + 1, dtype=float)
    with np.errstate(divide="ignore"):
        power = 100.0 * l ** -3.0
    variance = 4 * np.pi * power / (2 * l + 1)
    variance[0] = np.inf
    return variance


def fit(sea: xr.DataArray, **kwargs) -> tuple[xr.Dataset, list[str]]:
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        ds = sxr.analyze(sea, LMAX, missing="fit", **kwargs)
    return ds, [str(w.message) for w in caught]


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--write-file", metavar="PATH", help="also write the masked field")
    args = parser.parse_args()
    temp, sea = sea_field()
    if args.write_file:
        sea.to_dataset().to_netcdf(args.write_file)
    gap = sea.isnull().values
    weights = np.cos(np.deg2rad(temp["lat"].values))[:, None] * np.ones(gap.shape)
    print(f"missing: {gap.mean():.1%} of the cells, {np.sum(weights * gap) / weights.sum():.1%} "
          "of the area (cos-latitude weights)")
    complete = sxr.analyze(temp, LMAX)
    power_full = sxr.degree_power(complete).values
    cases = {"no damping": fit(sea), f"damping {DAMPING:g}": fit(sea, damping=DAMPING),
             "power-law prior": fit(sea, damping=PRIOR_DAMPING, prior=prior_variances(LMAX))}
    rows = {}
    for label, (ds, messages) in cases.items():
        back = sxr.synthesize(ds, like=temp).values
        gap_rms = float(np.sqrt(np.sum(weights * gap * (back - temp.values) ** 2)
                                / np.sum(weights * gap)))
        difference = ds.copy()
        difference[sxr.COS] = ds[sxr.COS] - complete[sxr.COS]
        difference[sxr.SIN] = ds[sxr.SIN] - complete[sxr.SIN]
        rows[label] = (sxr.degree_power(ds).values, sxr.degree_power(difference).values)
        print(f"{label}: {int(ds.attrs['fit_iterations'])} iterations, condition estimate "
              f"{ds.attrs['fit_condition_estimate']:.3g}, residual rms over the seas "
              f"{ds.attrs['fit_residual_rms']:.3g} K, rms error under the land {gap_rms:.3g} K"
              + (f"; warning: {messages[0][:90]}..." if messages else ""))
    draw(sea, power_full, rows)
    print(f"wrote {OUT}")


def draw(sea: xr.DataArray, power_full: np.ndarray, rows: dict) -> None:
    fig, (ax_map, ax_power) = plt.subplots(1, 2, figsize=(11.5, 4.2),
                                           gridspec_kw={"width_ratios": [1.25, 1]})
    fig.patch.set_facecolor("white")
    lon = sea["lon"].values
    lat = sea["lat"].values
    ax_map.set_facecolor("#b9b2a6")                     # land: the missing cells
    mesh = ax_map.pcolormesh(lon, lat, sea.values, cmap="magma", shading="nearest")
    cb = fig.colorbar(mesh, ax=ax_map, orientation="horizontal", pad=0.14, fraction=0.06)
    cb.set_label("surface temperature over the seas [K]; grey: land, missing", color=INK)
    ax_map.set_title("Velanthe, first step: observed only below 0 m (synthetic)", loc="left",
                     color=INK, fontsize=10)
    ax_map.set_xticks(np.arange(0, 361, 60))
    ax_map.set_yticks(np.arange(-90, 91, 30))
    ax_map.set_xlabel("longitude [deg E]", color=INK)
    ax_map.set_ylabel("latitude [deg N]", color=INK)

    degrees = np.arange(1, power_full.size)
    ax_power.loglog(degrees, power_full[1:], color=FULL, lw=2.0, label="complete field")
    colours = {f"damping {DAMPING:g}": DAMPED, "power-law prior": PRIOR}
    for label, colour in colours.items():
        fitted, error = rows[label]
        ax_power.loglog(degrees, fitted[1:], color=colour, lw=1.4, label=f"fit, {label}")
        ax_power.loglog(degrees, error[1:], color=colour, lw=1.0, ls="--",
                        label=f"error (fit - complete), {label}")
    ax_power.set_xlabel("degree l", color=INK)
    ax_power.set_ylabel("degree power [K^2]", color=INK)
    ax_power.set_title(f"Degree power, fits to degree {LMAX} from the seas", loc="left",
                       color=INK, fontsize=10)
    ax_power.grid(True, which="major", color=GRIDLINE, lw=0.6)
    ax_power.legend(fontsize=7.5, frameon=False, loc="lower left")
    for ax in (ax_map, ax_power):
        ax.tick_params(colors=INK, labelsize=8)
    fig.tight_layout()
    fig.savefig(OUT, dpi=130)


if __name__ == "__main__":
    main()
