"""Make the demo data files for sphex: the fictional icy moon Velanthe.

Run from the repository root::

    .venv/bin/python data_demo/make_demo_data.py            # (re)writes the files here
    python data_demo/make_demo_data.py --out DIR                # somewhere else

The data are invented (seeded random numbers and simple formulas in
``sphex.demo``) and say so in their attributes; Velanthe does not exist.

- ``velanthe_topography.nc``: ``topography`` (m) on 1-degree cells, latitudes
  south to north, longitudes from -179.5 (CF units attributes only).
- ``velanthe_surface_temperature.nc``: ``surface_temperature`` (K), 12 time
  steps on a 48 x 96 Gauss-Legendre grid, latitudes north to south, longitudes
  from 0 (CF standard_name attributes).
- ``velanthe_winds.nc``: ``u`` and ``v`` (m s-1, CF standard names
  ``eastward_wind`` / ``northward_wind``), 4 time steps on a 73 x 144 grid
  with both poles (2.5 degrees), latitudes north to south, longitudes 0..357.5.
- ``velanthe_gravity.gfc``: an invented degree-40 gravity model in the
  gravity-field exchange format (keyword header, ``gfc`` rows with formal
  standard deviations); its header says it is invented.
"""
from __future__ import annotations

import argparse
from pathlib import Path

from sphex.demo import write_demo_data


def main() -> None:
    p = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    p.add_argument("--out", default=str(Path(__file__).resolve().parent),
                   help="directory for the files (default: this script's directory)")
    args = p.parse_args()
    for path in write_demo_data(args.out, overwrite=True):
        print(f"wrote {path} ({path.stat().st_size / 1024:.0f} KiB)")


if __name__ == "__main__":
    main()
