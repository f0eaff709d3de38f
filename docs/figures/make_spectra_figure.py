"""Make docs/figures/spectra_gaussian.png: degree power before and after Gaussian smoothing.

Run from the repository root::

    python docs/figures/make_spectra_figure.py

It reads the bundled demo topography of Velanthe (a fictional moon; the data
are synthetic, made by data_demo/make_demo_data.py), expands it, smooths it
with an 80 km Gaussian filter and draws both degree power spectra beside the
filter's weights. It prints the numbers quoted in docs/spectra-and-filters.md.
"""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import xarray as xr  # noqa: E402

import sphex  # noqa: E402
from sphex.filters import gaussian  # noqa: E402
from sphex.spectra import degree_power, spectral_slope  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
DATA = ROOT / "data_demo" / "velanthe_topography.nc"
OUT = Path(__file__).resolve().parent / "spectra_gaussian.png"

RADIUS_KM = 1350.0      # Velanthe's reference radius (fictional)
SMOOTH_KM = 80.0        # half-weight distance of the Gaussian filter

# colours of this figure
INK, RAW, SMOOTH, WEIGHT, GRIDLINE = "#22313f", "#3d7ea6", "#d9822b", "#5c946e", "#d8dde3"


def main() -> None:
    ds = xr.open_dataset(DATA)
    topo = ds["topography"].values.astype(float)                    # metres
    grid = sphex.Grid.from_coords(ds["latitude"].values, ds["longitude"].values)
    h = sphex.analyze(topo, grid, radius=RADIUS_KM * 1e3, units="m")  # lmax = 89

    w = gaussian(SMOOTH_KM, h.lmax, RADIUS_KM)
    smooth = h.filter(w)

    p_raw, p_smooth = degree_power(h), degree_power(smooth)
    slope, intercept = spectral_slope(p_raw, 3, h.lmax)
    l = h.degrees()

    print(f"grid: {grid.kind}, {grid.nlat} x {grid.nlon}, lmax = {h.lmax}")
    print(f"RMS height: {np.sqrt(p_raw.sum()):.1f} m before, {np.sqrt(p_smooth.sum()):.1f} m after")
    print(f"power-law slope over degrees 3..{h.lmax}: {slope:.3f}")
    print(f"Gaussian weight at degree 10: {w[10]:.4f}, at degree {h.lmax}: {w[-1]:.3e}")

    plt.rcParams.update({"font.size": 9.5, "axes.edgecolor": INK, "axes.labelcolor": INK,
                         "xtick.color": INK, "ytick.color": INK, "text.color": INK})
    fig, (ax, axw) = plt.subplots(1, 2, figsize=(9.2, 3.9), width_ratios=[1.7, 1.0],
                                  constrained_layout=True)
    k = l >= 1
    ax.loglog(l[k], p_raw[k], color=RAW, lw=1.8, marker="o", ms=2.6,
              label="topography as given")
    ax.loglog(l[k], p_smooth[k], color=SMOOTH, lw=1.8, marker="o", ms=2.6,
              label=f"after {SMOOTH_KM:g} km Gaussian")
    fit = 10.0 ** intercept * l[3:].astype(float) ** slope
    ax.loglog(l[3:], fit, color=INK, lw=0.9, ls=(0, (5, 3)),
              label=f"fit $\\propto l^{{{slope:.2f}}}$ (degrees 3-{h.lmax})")
    ax.set_xlabel("degree $l$")
    ax.set_ylabel("degree power $P_l$  [m$^2$]")
    ax.set_ylim(p_smooth[k].min() / 3, p_raw[k].max() * 3)
    ax.grid(True, which="major", color=GRIDLINE, lw=0.7)
    ax.legend(frameon=False, loc="lower left")
    ax.set_title("Velanthe (synthetic): degree power of the topography", loc="left",
                 fontsize=10)

    axw.plot(l, w, color=WEIGHT, lw=2.0)
    half = np.searchsorted(-w, -0.5)
    axw.axhline(0.5, color=GRIDLINE, lw=0.9)
    axw.annotate(f"$w_l = 1/2$ near $l = {half}$", (half, 0.5), xytext=(half + 8, 0.68),
                 arrowprops={"arrowstyle": "-", "color": INK, "lw": 0.7})
    axw.set_xlabel("degree $l$")
    axw.set_ylabel("filter weight $w_l$")
    axw.set_xlim(0, h.lmax)
    axw.set_ylim(0, 1.04)
    axw.grid(True, color=GRIDLINE, lw=0.7)
    axw.set_title(f"Gaussian weights, {SMOOTH_KM:g} km on R = {RADIUS_KM:g} km", loc="left",
                  fontsize=10)
    for a in (ax, axw):
        for side in ("top", "right"):
            a.spines[side].set_visible(False)
    fig.savefig(OUT, dpi=130)
    print(f"wrote {OUT.relative_to(ROOT)}")


if __name__ == "__main__":
    main()
