"""matplotlib figures in the project's own look.

``figures``  the house style, spectra, maps, the isotropy picture, saving
``winds``    kinetic-energy spectra and maps of winds and currents
``local``    cap outlines and localised spectra
``models``   spectra of potential models with their formal errors
``overview`` the report's own figures: Mollweide map, cumulative power, correlation with its
             significance band, ratio of spectra, band power along a series

Every figure function is re-exported here: ``from sphex import plot``, then
``plot.power_figure(...)``.
"""
from __future__ import annotations

from sphex.plot.figures import (
    FEW_COEFFICIENTS, PALETTE, ember, isotropy_figure, map_figure, power_figure, save, strata,
    tilt,
)
from sphex.plot.local import cap_outline, draw_cap, local_spectrum_figure
from sphex.plot.models import model_spectrum_figure
from sphex.plot.overview import (
    band_power_figure, correlation_figure, cumulative_figure, equal_area_map_figure, ratio_figure,
)
from sphex.plot.winds import energy_figure, wind_map_figure

__all__ = ["FEW_COEFFICIENTS", "PALETTE", "strata", "ember", "tilt", "power_figure", "map_figure", "isotropy_figure",
           "save",
           "energy_figure", "wind_map_figure", "cap_outline", "draw_cap", "local_spectrum_figure",
           "model_spectrum_figure", "equal_area_map_figure", "cumulative_figure",
           "correlation_figure", "ratio_figure", "band_power_figure"]
