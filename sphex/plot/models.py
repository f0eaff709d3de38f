"""Figures of potential models: degree variances with their formal errors and a rule of thumb."""
from __future__ import annotations

from typing import Any

import numpy as np
from matplotlib.figure import Figure

from sphex.plot.figures import (
    _as_1d, INK, PALETTE, PAPER, power_figure,
)

__all__ = ["model_spectrum_figure"]


def model_spectrum_figure(signal: Any, error: Any = None, *, kaula: float | None = None,
                          units: str | None = None, title: str | None = None,
                          ylabel: str = "degree variance") -> Figure:
    """Degree variances of a potential model with its error degree variances.

    Parameters
    ----------
    signal : array or DataArray over degree
        Degree variances (:func:`sphex.potential.degree_variances` or
        :func:`sphex.xr.degree_variances`).
    error : array or DataArray over degree, optional
        Error degree variances of the same model.  The first degree where
        they reach the signal (:func:`sphex.potential.crossing_degree`) is
        marked: beyond it the model carries no information.
    kaula : float, optional
        Draw Kaula's rule ``(2l+1) (kaula / l^2)^2`` (1e-5 for the Earth) as a
        reference line, labelled with its source (Kaula 1966).  Meant for
        fully normalised gravity coefficients of a terrestrial planet.
    units : str, optional
        Units of the variances (``None`` or ``"1"``: dimensionless).
    title, ylabel : str

    Returns
    -------
    matplotlib.figure.Figure
    """
    from sphex.potential import crossing_degree, kaula_rule

    s = _as_1d(signal)
    curves = [s]
    labels = ["degree variances (signal)"]
    e = None
    if error is not None:
        e = _as_1d(error)
        if e.shape != s.shape:
            raise ValueError(f"error has {e.size} degrees, signal {s.size}; they must match")
        curves.append(e)
        labels.append("error degree variances")
    if kaula is not None:
        if not kaula > 0:
            raise ValueError(f"kaula must be a positive constant such as 1e-5, got {kaula!r}")
        curves.append(np.nan_to_num(kaula_rule(s.size - 1, kaula), nan=0.0))
        constant = f"{kaula:g}".replace("e-0", "e-")
        labels.append(f"Kaula's rule, {constant}/l\u00b2 per coefficient (Kaula 1966)")
    fig = power_figure(curves, labels, units=None if units in (None, "", "1") else units,
                       title=title, ylabel=ylabel, dynamic_range=1e30)
    ax = fig.axes[0]
    if kaula is not None:
        ax.lines[-1].set_linestyle((0, (2, 2)))
        ax.lines[-1].set_color(INK)
    ax.legend(frameon=False, loc="best", fontsize=8.5)
    if e is not None:
        cross = crossing_degree(s, e)
        if cross is not None:
            ax.axvline(cross, color=PALETTE[1], lw=0.9, ls=(0, (4, 2)))
            ax.annotate(f"error reaches signal\nat degree {cross}", xy=(cross, s[cross]),
                        xytext=(-24, -40), textcoords="offset points", ha="right", fontsize=8.5,
                        color=PALETTE[1], bbox={"boxstyle": "round,pad=0.25", "fc": PAPER,
                                                "ec": "none", "alpha": 0.9},
                        arrowprops={"arrowstyle": "-", "color": PALETTE[1], "lw": 0.7})
    return fig
