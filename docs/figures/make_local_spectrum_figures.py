"""Make docs/images/orun_local_spectrum.png and docs/images/orun_cap_map.png.

Run from the repository root::

    python docs/figures/make_local_spectrum_figures.py

It reads the bundled demo topography of Velanthe (a fictional moon; the data
are synthetic, made by data_demo/make_demo_data.py), finds its large basin as
the lowest point of the topography smoothed over 600 km, and compares the
localised spectrum of a cap on the basin with the global spectrum.  It prints
the numbers quoted in docs/guide.md.
"""
from __future__ import annotations

from pathlib import Path

import numpy as np
import xarray as xr

import sphex.xr as sxr
from sphex import plot
from sphex.localize import expected_local_power

ROOT = Path(__file__).resolve().parents[2]
DATA = ROOT / "data_demo" / "velanthe_topography.nc"
IMAGES = ROOT / "docs" / "images"
CAP_DEG, WINDOW_DEGREE = 30.0, 15


def main() -> None:
    topo = xr.open_dataset(DATA)["topography"].astype("float64").load()
    broad = sxr.smooth(topo, gaussian_km=600, planet_radius_km=1350)
    where = broad.argmin(dim=["latitude", "longitude"])
    lat, lon = float(topo.latitude[where["latitude"]]), float(topo.longitude[where["longitude"]])
    print(f"lowest point of the 600 km smoothed topography: lat {lat:g}, lon {lon:g}, "
          f"{float(broad.min()):.0f} m")
    coef = sxr.analyze(topo)
    glob = sxr.degree_power(coef)
    local = sxr.local_power(coef, lat, lon, CAP_DEG, WINDOW_DEGREE)
    a = local.attrs
    conc = a["window_concentration"]
    print(f"{int(a['n_windows'])} windows, concentration {conc.min():.4f}..{conc.max():.6f}, "
          f"reliable degrees {int(a['valid_degree_min'])}..{int(a['valid_degree_max'])}")
    blurred = expected_local_power(glob.values, CAP_DEG, WINDOW_DEGREE, int(a["n_windows"]))
    for l in (15, 18, 20, 25, 30, 50, 70, 74):
        print(f"  degree {l}: local {float(local.power[l]):.4g} +- {float(local.power_error[l]):.2g}"
              f" m^2, global {float(glob[l]):.4g} m^2, blurred by the windows {blurred[l]:.4g} m^2")
    fig = plot.local_spectrum_figure(local, glob, title="Orun basin against the whole of Velanthe")
    plot.save(fig, IMAGES / "orun_local_spectrum.png", overwrite=True)
    fig = plot.map_figure(topo, center=0.0, title="Velanthe: the cap of the localised spectrum")
    plot.draw_cap(fig.axes[0], lat, lon, CAP_DEG, label=f"cap {CAP_DEG:g}°")
    plot.save(fig, IMAGES / "orun_cap_map.png", overwrite=True)


if __name__ == "__main__":
    main()
