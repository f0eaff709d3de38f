"""What ``sphex spectrum`` prints and writes: report lines, the table, CSV, plot, isotropy picture.

One rule ties the text to the figure: the *series* of the report are what
the plot draws, and the power-law fits (``--slope``) are made to exactly
those series, on the plot and in the text alike.  They are, for one input,
each of its fields (up to six; more are drawn as their mean, with the range
as a band); for several inputs, each input (its mean over fields when it has
several).  The table (terminal or CSV) holds every field of a single input,
or the series of several.

Imported inside :func:`sphex.cli.spectrum.run` (it imports numpy and the
adapters).
"""
from __future__ import annotations

import re
from pathlib import Path
from typing import Any

import numpy as np

from sphex.xr.fields import degree_power
from sphex.xr.radius import number_text
from sphex.xr.units import product_units, root_units

__all__ = ["Report", "notes_path"]

#: Fields of one input listed in the report; more are counted.
LISTED_FIELDS = 8
#: Fields of one input drawn as curves; more are drawn as their mean and range.
DRAWN_FIELDS = 6
#: Isotropy cells averaging at least this many real coefficients are summarised.
READABLE_CELL = 100

_KIND_TEXT = {
    "power": ("degree power", "contribution of each degree to the area mean of the squared field"),
    "per_coefficient": ("power per coefficient", "degree power divided by the 2l+1 coefficients "
                                                 "of the degree"),
}


def notes_path(csv: str) -> str:
    """The notes file beside a CSV file: ``power.csv`` -> ``power.notes.txt``."""
    p = Path(csv)
    return str(p.with_name(p.stem + ".notes.txt"))


def _plain(text: str) -> str:
    """A CSV column name: letters, digits and ``_ . + -`` only."""
    return re.sub(r"[^A-Za-z0-9_.+-]+", "_", text).strip("_") or "field"


def _coordinate_text(v: Any) -> str:
    """A coordinate value for labels (times to the minute)."""
    if isinstance(v, np.datetime64) or hasattr(v, "to_datetime64"):
        return str(np.datetime_as_string(np.datetime64(v, "m")))
    return str(v)


def _fields(power: Any) -> tuple[list[str], np.ndarray]:
    """Labels ``time 2101-01-01T00:00`` and a (fields, degree) array of a spectrum DataArray."""
    extra = [d for d in power.dims if d != "degree"]
    if not extra:
        return [""], np.asarray(power.values, dtype=float)[None, :]
    stacked = power.stack(__field__=extra).transpose("__field__", "degree")
    labels = []
    for idx in stacked["__field__"].values:
        idx = idx if isinstance(idx, tuple) else (idx,)
        labels.append(" ".join(f"{d} {_coordinate_text(v)}" for d, v in zip(extra, idx)))
    return labels, np.asarray(stacked.values, dtype=float)


def _padded(rows: np.ndarray, n: int) -> np.ndarray:
    """Rows of spectra padded with NaN to ``n`` degrees."""
    out = np.full(rows.shape[:-1] + (n,), np.nan)
    out[..., : rows.shape[-1]] = rows
    return out


class Report:
    """The spectra of the inputs, and everything ``spectrum`` prints and writes about them.

    Parameters
    ----------
    inputs : list of SpectrumInput
    kind : {"power", "per_coefficient"}
    slope : (int, int) or None
        Degrees of the power-law fits.
    cross : bool
        Whether to compute the cross power and correlation of the two inputs.
    """

    def __init__(self, inputs: list, kind: str, slope: tuple[int, int] | None,
                 cross: bool) -> None:
        self.inputs = inputs
        self.kind = kind
        self.slope = slope
        self.powers = [degree_power(i.coef) for i in inputs]
        spectra = [degree_power(i.coef, kind=kind) for i in inputs]
        self.units = spectra[0].attrs.get("units", "")
        self.nl = max(s.sizes["degree"] for s in spectra)
        self._make_columns(spectra)
        self._make_series(spectra)
        self.cross = self._cross() if cross else None

    # -- what is tabulated and drawn -------------------------------------------------------
    def _make_columns(self, spectra: list) -> None:
        """Table columns: every field of one input, or one series per input."""
        self.columns: list[tuple[str, str, np.ndarray]] = []   # (label, CSV name, values)
        if len(self.inputs) == 1:
            inp = self.inputs[0]
            labels, rows = _fields(spectra[0])
            for lab, row in zip(labels, rows):
                self.columns.append((lab or inp.name, _plain(lab or inp.name), _padded(row, self.nl)))
            return
        for inp, spec in zip(self.inputs, spectra):
            labels, rows = _fields(spec)
            label, name = inp.name, _plain(inp.name)
            if len(rows) > 1:
                label, name = f"{inp.name} (mean of {len(rows)} fields)", f"{name}_mean"
            self.columns.append((label, name, _padded(rows.mean(axis=0), self.nl)))
        names = [c[1] for c in self.columns]
        for k, (label, name, values) in enumerate(self.columns):   # same variable in two files
            if names.count(name) > 1:
                stem = Path(self.inputs[k].path).stem
                self.columns[k] = (f"{label} ({stem})", _plain(f"{name}_{stem}"), values)

    def _make_series(self, spectra: list) -> None:
        """The series drawn and fitted, and the band of a many-field input."""
        self.band = None
        if len(self.inputs) == 1 and len(self.columns) > DRAWN_FIELDS:
            rows = np.stack([c[2] for c in self.columns])
            self.series = [(f"{self.inputs[0].name}: mean of {len(rows)} fields",
                            rows.mean(axis=0))]
            self.band = (rows.min(axis=0), rows.max(axis=0))
        else:
            self.series = [(label, values) for label, _, values in self.columns]

    def _cross(self) -> tuple[np.ndarray, np.ndarray, str]:
        """Cross power (of the chosen kind) and correlation per degree of the two inputs."""
        from sphex.spectra import correlation, cross_power
        from sphex.xr.coefficients import to_harmonics

        h1, h2 = (to_harmonics(i.coef) for i in self.inputs)
        for inp, h in zip(self.inputs, (h1, h2)):
            if h.batch_shape:
                raise ValueError(f"--cross compares two single fields; {inp.name!r} in {inp.path} "
                                 f"has {int(np.prod(h.batch_shape))}")
        x = cross_power(h1, h2)
        if self.kind == "per_coefficient":
            x = x / (2.0 * np.arange(x.size) + 1.0)
        u1 = self.inputs[0].coef.attrs.get("units", "")
        u2 = self.inputs[1].coef.attrs.get("units", "")
        units = product_units(u1, u2) if u1 and u2 else ""
        return _padded(x, self.nl), _padded(correlation(h1, h2), self.nl), units

    # -- text ---------------------------------------------------------------------------
    def summary_lines(self) -> list[str]:
        """What each input is, its fields' mean square and variance, the fits, the correlation."""
        lines = []
        for inp, power in zip(self.inputs, self.powers):
            lines.append(f"spectrum of {inp.name!r} ({inp.path}: {inp.what})")
            lines += self._variance_lines(inp, power)
        if self.slope:
            lines += self._fit_lines()
        if self.cross is not None:
            corr = self.cross[1][1:]
            ok = np.isfinite(corr)
            if ok.any():
                worst = int(np.nanargmin(corr)) + 1
                lines.append(f"  correlation of {self.columns[0][0]!r} and {self.columns[1][0]!r} "
                             f"per degree: mean {np.nanmean(corr):.3f} over degrees 1.."
                             f"{corr.size}, lowest {np.nanmin(corr):.3f} at degree {worst}")
        return lines

    def _variance_lines(self, inp: Any, power: Any) -> list[str]:
        units = power.attrs.get("units", "")
        root = root_units(units) if units else ""
        labels, rows = _fields(power)
        out = []
        for k, (lab, row) in enumerate(zip(labels[:LISTED_FIELDS], rows[:LISTED_FIELDS])):
            ms, var = float(row.sum()), float(row[1:].sum())
            text = (f"mean square {ms:.6g} {units}, rms {np.sqrt(max(ms, 0.0)):.6g} {root}; "
                    f"variance without degree 0 {var:.6g} {units}, standard deviation "
                    f"{np.sqrt(max(var, 0.0)):.6g} {root}")
            text = re.sub(r" +([,;]|$)", r"\1", text)
            out.append(f"  {lab + ': ' if lab else ''}{text}")
            if inp.grid_variance is not None:
                g = float(inp.grid_variance[k])
                share = max(0.0, 1.0 - var / g) if g > 0 else 0.0
                out.append(f"    share of the grid's variance above degree {row.size - 1}: "
                           f"{100 * share:.2f} %")
        if len(labels) > LISTED_FIELDS:
            out.append(f"  ... and {len(labels) - LISTED_FIELDS} more fields")
        return out

    def _fit_lines(self) -> list[str]:
        from sphex.spectra import spectral_slope

        l1, l2 = self.slope
        out = [f"  power-law fits over degrees {l1}..{l2} to the {_KIND_TEXT[self.kind][0]} of "
               "each series the plot draws:"]
        for label, values in self.series:
            top = int(np.flatnonzero(np.isfinite(values))[-1])
            if l2 > top:
                raise ValueError(f"--slope {l1}:{l2} goes past the highest degree {top} of {label!r}")
            out.append(f"    {label}: slope {float(spectral_slope(values[: top + 1], l1, l2)[0]):.3f}")
        return out

    def table_lines(self) -> list[str]:
        """The whole table, one row per degree."""
        names, cols = self._table()
        w = max(22, *(len(n) for n in names))
        lines = ["degree " + " ".join(f"{n:>{w}}" for n in names)]
        for l in range(self.nl):
            cells = (f"{v:{w}.15g}" if np.isfinite(v) else f"{'-':>{w}}" for v in cols[:, l])
            lines.append(f"{l:6d} " + " ".join(cells))
        return lines

    def _table(self) -> tuple[list[str], np.ndarray]:
        names = [c[1] for c in self.columns]
        cols = [c[2] for c in self.columns]
        if self.cross is not None:
            names += ["cross_power", "correlation"]
            cols += [self.cross[0], self.cross[1]]
        return names, np.stack(cols)

    # -- files --------------------------------------------------------------------------
    def write_csv(self, path: str, overwrite: bool) -> None:
        """``degree,<columns>`` with plain names, and a notes file saying what they are."""
        from sphex.xr.output import atomic_output

        names, cols = self._table()
        with atomic_output(path, overwrite) as tmp:
            with open(tmp, "w", encoding="utf-8") as f:
                f.write("degree," + ",".join(names) + "\n")
                for l in range(self.nl):
                    f.write(f"{l}," + ",".join(f"{v:.17g}" if np.isfinite(v) else ""
                                               for v in cols[:, l]) + "\n")
        with atomic_output(notes_path(path), overwrite) as tmp:
            tmp.write_text("\n".join(self._notes(path, names)) + "\n", encoding="utf-8")

    def _notes(self, path: str, names: list[str]) -> list[str]:
        what, meaning = _KIND_TEXT[self.kind]
        lines = [f"{Path(path).name}: written by sphex spectrum", "columns:",
                 "  degree: spherical-harmonic degree l"]
        units = f"in {self.units}" if self.units else "no units stated"
        for label, name, _ in self.columns:
            lines.append(f"  {name}: {what} of {label} ({meaning}), {units}")
        if self.cross is not None:
            lines.append(f"  cross_power: cross {what} of {self.columns[0][0]} and "
                         f"{self.columns[1][0]}, in {self.cross[2] or 'their units'}")
            lines.append("  correlation: cross power / sqrt(power 1 x power 2), per degree, "
                         "between -1 and 1")
        lines.append("inputs:")
        lines += [f"  {i.path}: {i.name!r}, {i.what}" for i in self.inputs]
        lines.append("empty cells: degrees above an input's highest degree")
        return lines

    def write_plot(self, path: str, overwrite: bool, radius: Any) -> None:
        from sphex import plot

        what = _KIND_TEXT[self.kind][0]
        title = ", ".join(lab for lab, _, _ in self.columns) if len(self.inputs) > 1 else \
            self.inputs[0].name
        corr = None if self.cross is None else self.cross[1]
        fig = plot.power_figure(
            [v for _, v in self.series], labels=[lab for lab, _ in self.series],
            units=self.units or None, fit=self.slope, fit_curves=range(len(self.series)),
            band=self.band, band_label="range over the fields",
            planet_radius_km=None if radius is None else radius.km,
            title=f"{what[0].upper() + what[1:]}: {title}", ylabel=what, correlation=corr,
            correlation_label=None if corr is None else
            f"correlation of {self.columns[0][0]} and {self.columns[1][0]}")
        plot.save(fig, path, overwrite=overwrite)

    def write_isotropy(self, path: str, overwrite: bool) -> list[str]:
        """Draw the isotropy picture of the one input; the report lines that go with it."""
        from sphex import plot
        from sphex.spectra import isotropy_table
        from sphex.xr.coefficients import to_harmonics

        inp = self.inputs[0]
        table = isotropy_table(to_harmonics(inp.coef))
        plot.save(plot.isotropy_figure(table, title=f"Isotropy of {inp.name}"), path,
                  overwrite=overwrite)
        lines = [f"wrote {path}: isotropy picture ({table.ratio.size} cells; 0 = isotropic share)"]
        readable = np.flatnonzero((table.coefficients >= READABLE_CELL) & np.isfinite(table.ratio))
        if readable.size:
            lr = table.log2_ratio[readable]
            k = readable[int(np.argmax(np.abs(lr)))]
            lines.append(
                f"  cells of {READABLE_CELL}+ coefficients: log2(share / isotropic share) from "
                f"{lr.min():+.2f} to {lr.max():+.2f}; farthest from isotropy: degrees "
                f"{table.degree_first[k]}-{table.degree_last[k]}, m/l "
                f"{number_text(round(table.fraction_low[k], 3))}-"
                f"{number_text(round(table.fraction_high[k], 3))}, "
                f"{table.ratio[k]:.2f} x the isotropic share")
        else:
            lines.append(f"  no cell averages {READABLE_CELL} or more coefficients (the degrees are "
                         "too few): read the picture as single draws")
        return lines
