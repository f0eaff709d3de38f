"""Make the guide's pictures of Velanthe's invented gravity model.

Run from the repository root::

    python docs/figures/make_gravity_figures.py

It reads data_demo/velanthe_gravity.gfc (invented, made by
data_demo/make_demo_data.py), draws its degree variances with its error
degree variances, and computes geoid heights (whole model) and gravity
anomalies (below the degree where the errors reach the signal) on a
Gauss-Legendre grid exact to degree 89 with sphex.xr.gravity_fields:
docs/images/velanthe_gravity_spectrum.png, velanthe_geoid.png and
velanthe_gravity_anomaly.png. It prints the numbers quoted in docs/guide.md.
"""
from __future__ import annotations

from pathlib import Path

import matplotlib

matplotlib.use("Agg")

import sphex.xr  # noqa: E402
from sphex import plot  # noqa: E402
from sphex.potential import crossing_degree  # noqa: E402

ROOT = Path(__file__).resolve().parents[2]
MODEL = ROOT / "data_demo" / "velanthe_gravity.gfc"
IMAGES = ROOT / "docs" / "images"


def main() -> None:
    model = sphex.xr.open_model(MODEL)
    signal = sphex.xr.degree_variances(model)
    error = sphex.xr.error_degree_variances(model)
    cross = crossing_degree(signal.values, error.values)
    plot.save(plot.model_spectrum_figure(signal, error,
                                         title="Velanthe (invented): degree variances"),
              IMAGES / "velanthe_gravity_spectrum.png", overwrite=True)
    geoid = sphex.xr.gravity_fields(model, "gauss:89", quantities="geoid", normal="sphere")
    anomaly = sphex.xr.gravity_fields(model, "gauss:89", quantities="anomaly", normal="sphere",
                                      lmax=cross - 1)
    mgal = anomaly["anomaly"] * 1e5
    mgal.attrs = {"units": "mGal", "long_name": "gravity anomaly"}
    plot.save(plot.map_figure(geoid["geoid"], cmap="strata", center=0.0,
                              title=f"Velanthe (invented): geoid height, degrees 0-{model.lmax}"),
              IMAGES / "velanthe_geoid.png", overwrite=True)
    plot.save(plot.map_figure(mgal, cmap="strata", center=0.0,
                              title=f"Velanthe (invented): gravity anomaly, degrees 0-{cross - 1}"),
              IMAGES / "velanthe_gravity_anomaly.png", overwrite=True)
    g = geoid["geoid"]
    print(f"error reaches signal at degree {cross}")
    print(f"geoid: {float(g.min()):.1f} to {float(g.max()):.1f} m; anomaly to degree {cross - 1}: "
          f"{float(mgal.min()):.1f} to {float(mgal.max()):.1f} mGal")


if __name__ == "__main__":
    main()
