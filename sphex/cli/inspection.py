"""``sphex inspect``: what grid each variable of a file is on, or why it is not usable."""
from __future__ import annotations

import argparse
from typing import Any

from sphex.cli.shared import add_command, count_fields, open_input, say

EXAMPLE = """\
example:
  sphex inspect my_field.nc
"""


def register(sub: Any) -> None:
    """Add ``inspect`` to the subcommands."""
    q = add_command(sub, "inspect", "Say what grid each variable of a file is on", EXAMPLE)
    q.add_argument("input", metavar="FILE.nc")
    q.set_defaults(func=run)


def run(a: argparse.Namespace) -> int:
    from sphex.xr.coefficients import is_coefficients
    from sphex.xr.files import open_coefficients
    from sphex.xr.tables import is_table_file

    if is_table_file(a.input):
        ds = open_coefficients(a.input)
        say(f"{a.input}: text coefficient table", *_describe_coefficients(ds))
        return 0
    ds = open_input(a.input)
    try:
        lines = [f"{a.input}:"]
        if is_coefficients(ds):
            lines += _checked_coefficients(a.input, ds)
        else:
            if not ds.data_vars:
                lines.append("  no data variables")
            for name, v in ds.data_vars.items():
                lines.append(_describe_variable(name, v))
            lines += _describe_radius(ds.attrs)
    finally:
        ds.close()
    say(*lines)
    return 0


def _describe_variable(name: Any, v: Any) -> str:
    """Two lines: the variable's dimensions and units, then its grid or why it has none."""
    from sphex.xr.coords import find_grid

    dims = ", ".join(f"{d}: {s}" for d, s in v.sizes.items()) or "scalar"
    units = v.attrs.get("units")
    head = f"  {name} ({dims}){' [' + str(units) + ']' if units else ''}"
    try:
        info = find_grid(v)
    except ValueError as exc:
        reason = str(exc).removeprefix(f"variable {str(name)!r}: ")
        return f"{head}\n    not usable: {reason}"
    extra = [d for d in v.dims if d not in (info.lat_dim, info.lon_dim)]
    batch = f"; {count_fields(v, info)} fields over {', '.join(map(str, extra))}" if extra else ""
    return f"{head}\n    {info.describe()}{batch}"


def _checked_coefficients(path: str, ds) -> list[str]:
    """The description of a coefficient file, or why it is not usable."""
    import warnings

    from sphex.xr.coefficients import as_coefficients
    from sphex.xr.conventions import MissingConventionWarning, conventions_stated

    try:
        with warnings.catch_warnings(record=True) as caught:
            warnings.simplefilter("always", MissingConventionWarning)
            ds = conventions_stated(as_coefficients(ds.load(), path, from_file=True), path)
    except ValueError as exc:
        reason = " ".join(str(exc).split()).removeprefix(f"{path}: ")
        return [f"  coefficients, not usable: {reason}"]
    notes = [f"  note: {' '.join(str(w.message).split()).removeprefix(f'{path}: ')}"
             for w in caught]
    return _describe_coefficients(ds) + notes

def _describe_radius(attrs: dict) -> list[str]:
    """The planet radius the file states, if any (used by smooth, analyze and spectrum)."""
    from sphex.xr.radius import number_text, radius_from_attributes

    found = radius_from_attributes(("the file's", attrs))
    if found is None:
        return []
    return [f"  planet radius {number_text(found[0])} km ({found[1]})"]


def _describe_coefficients(ds) -> list[str]:
    at = ds.attrs
    extra = [d for d in ds["cos_coef"].dims if d not in ("degree", "order")]
    lines = [f"  coefficients of {at.get('field_name', 'a field')!r} to degree {ds.sizes['degree'] - 1}",
             f"  normalisation {at.get('normalization', 'orthonormal')}, phase "
             f"{at.get('phase_convention', 'condon-shortley')}"]
    if "reference_radius" in at:
        from sphex.xr.radius import number_text

        metres = float(at["reference_radius"])
        lines.append(f"  reference radius {number_text(metres / 1e3)} km ({number_text(metres)} m)")
    if "units" in at:
        lines.append(f"  units {at['units']}")
    if extra:
        lines.append("  extra dimensions: " + ", ".join(f"{d} ({ds.sizes[d]})" for d in extra))
    return lines
