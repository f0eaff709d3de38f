"""Planted bugs of the adapters (sphex/xr) and the command line (sphex/cli) for tests/mutations.py.

Run them with ``python tests/mutations.py --only adapt-``.  Each names the few tests that
should notice (single tests where the file is slow: the command-line files run subprocesses).
"""
from __future__ import annotations

from _mutation import _m

COORDS = "sphex/xr/coords.py"
CONV = "sphex/xr/conventions.py"
COEF = "sphex/xr/coefficients.py"
DAMAGE = "sphex/xr/damage.py"
MISSING = "sphex/xr/missing.py"
STREAM = "sphex/xr/streaming.py"
SCALE = "sphex/xr/scaleout.py"
FIELDS = "sphex/xr/fields.py"
UNITS = "sphex/xr/units.py"
RADIUS = "sphex/xr/radius.py"
FLOW = "sphex/xr/flow.py"
FLOWC = "sphex/xr/flow_components.py"
POT = "sphex/xr/potential.py"
POINTS = "sphex/xr/points.py"
OUTPUT = "sphex/xr/output.py"
CLI_SHARED = "sphex/cli/shared.py"
CLI_RADIUS = "sphex/cli/radius.py"
CLI_FIELDS = "sphex/cli/fields.py"

T_COORDS = "tests/test_xr_coords.py"
T_COEF = "tests/test_xr_coefficients.py"
T_FIELDS = "tests/test_xr_fields.py"
T_UNITS = "tests/test_xr_units.py"
T_STREAM = "tests/test_xr_streaming.py"
T_FLOW = "tests/test_xr_flow.py"
T_POT = "tests/test_xr_potential.py"
T_POINTS = "tests/test_xr_points.py"
T_CLI = "tests/test_cli.py"

MUTATIONS = [
    # --------------------------------------------------------------- coords
    _m("adapt-coords-longitude-wrap-not-applied", COORDS,
       "    dw = (np.diff(lon_a) + 180.0) % 360.0 - 180.0\n", "    dw = np.diff(lon_a)\n", T_COORDS),
    _m("adapt-coords-seam-column-gets-last-column", COORDS,
       "put[int(p)] = c if c < n_a else 0", "put[int(p)] = c if c < n_a else n_a - 1", T_COORDS),
    _m("adapt-coords-description-order-inverted", COORDS,
       'order = "north to south" if g.north_first else "south to north"',
       'order = "south to north" if g.north_first else "north to south"', T_COORDS),
    _m("adapt-coords-descending-longitudes-not-reversed", COORDS,
       "reverse = bool(np.median(dw) < 0)", "reverse = False", T_COORDS),
    # ---------------------------------------------------------- conventions
    _m("adapt-conventions-phase-word-none-read-as-phase", CONV,
       'PHASES = {"condon-shortley": True, "none": False}',
       'PHASES = {"condon-shortley": True, "none": True}', T_COEF),
    _m("adapt-conventions-phase-flag-written-inverted", CONV,
       '"condon_shortley_phase": np.int8(1 if cs else 0),\n        "lmax"',
       '"condon_shortley_phase": np.int8(0 if cs else 1),\n        "lmax"',
       T_COEF),
    _m("adapt-conventions-labels-used-as-positions", CONV,
       'take[dim] = np.argsort(labels, kind="stable")', "take[dim] = np.asarray(labels)", T_COEF),
    # --------------------------------------------------------------- damage
    _m("adapt-damage-last-record-counted-whole", DAMAGE,
       "end = max(end, begin + (numrecs - 1) * recsize + nbytes)",
       "end = max(end, begin + numrecs * recsize)",
       "tests/test_hostile_inputs.py::test_classic_header_promises_the_size_the_library_writes"),
    _m("adapt-damage-short-file-accepted", DAMAGE,
       "if expected is not None and actual < expected:", "if expected is not None and actual < expected // 2:",
       "tests/test_hostile_inputs.py::test_files_cut_short_are_refused_as_damaged"),
    # -------------------------------------------------------------- missing
    _m("adapt-missing-task-positions-not-mapped", MISSING,
       "        if pos is not None:\n            idx = np.broadcast_to(pos, batch).reshape(-1)[idx]\n", "",
       T_FIELDS),
    _m("adapt-missing-only-all-missing-fields-named", MISSING,
       "per_field = ~finite.all(axis=axes)", "per_field = ~finite.any(axis=axes)", T_FIELDS),
    # ------------------------------------------------------------ streaming
    _m("adapt-streaming-chunk-one-short", STREAM,
       'spec[d] = min(whole_number(n, f"chunks {d}", 1), int(da.sizes[d]))',
       'spec[d] = min(whole_number(n, f"chunks {d}", 1) - 1, int(da.sizes[d]))', T_STREAM),
    _m("adapt-scaleout-default-block-one-more", SCALE,
       "return max(1, int(target // max(int(field_bytes), 1)))",
       "return max(1, int(target // max(int(field_bytes), 1)) + 1)", T_STREAM),
    # --------------------------------------------------------------- fields
    _m("adapt-fields-gaussian-ignores-planet-radius", FIELDS,
       "w = filters.gaussian(float(gaussian_km), lmax, float(planet_radius_km))",
       "w = filters.gaussian(float(gaussian_km), lmax, 6371.0)", T_FIELDS),
    _m("adapt-fields-power-units-not-squared", FIELDS,
       'p.attrs["units"] = squared_units(units) if squared else units', 'p.attrs["units"] = units',
       T_FIELDS),
    _m("adapt-fields-columns-not-mapped-back", FIELDS,
       "out = np.asarray(_synthesize(h, info.grid))[..., list(info.put)]",
       "out = np.asarray(_synthesize(h, info.grid))", T_FIELDS, T_COORDS),
    # ---------------------------------------------------------------- units
    _m("adapt-units-division-exponent-not-negated", UNITS,
       "zip(parts, (1, -1))", "zip(parts, (1, 1))", T_UNITS),
    _m("adapt-units-odd-exponent-rooted", UNITS,
       "if factors is None or any(e % 2 for _, e in factors):", "if factors is None:", T_UNITS),
    _m("adapt-radius-reference-radius-metres-read-as-km", RADIUS,
       'else v / 1e3\n', "else v\n", T_UNITS),
    # ----------------------------------------------------------------- flow
    _m("adapt-flow-coriolis-with-cosine", FLOW,
       "coriolis = 2.0 * rotation * np.sin(np.radians(", "coriolis = 2.0 * rotation * np.cos(np.radians(",
       T_FLOW),
    _m("adapt-flow-standard-names-give-north-as-east", FLOWC,
       "            return e[0], n[0]\n", "            return n[0], e[0]\n", T_FLOW),
    _m("adapt-flow-swapped-components-not-refused", FLOWC,
       'if east.startswith("northward") or north.startswith("eastward"):', "if False:", T_FLOW),
    # ------------------------------------------------------ potential, points
    _m("adapt-potential-columns-not-mapped-back", POT,
       "variables[name] = (dims, np.asarray(array)[..., list(info.put)], var_attrs)",
       "variables[name] = (dims, np.asarray(array), var_attrs)", T_POT),
    _m("adapt-points-potential-without-radius", POINTS,
       "factor = model.gm / model.radius", "factor = model.gm", T_POINTS),
    # ------------------------------------------------------- output files
    _m("adapt-output-overwrite-check-inverted", OUTPUT,
       "if p.exists() and not overwrite:", "if p.exists() and overwrite:",
       f"{T_CLI}::test_existing_output_is_left_byte_identical"),
    _m("adapt-output-rename-skipped", OUTPUT,
       "                os.link(tmp, final)\n", "                pass\n", T_COEF),
    # --------------------------------------------------------- command line
    _m("adapt-cli-user-error-status-1", CLI_SHARED,
       "EXIT_USER_ERROR = 2", "EXIT_USER_ERROR = 1",
       f"{T_CLI}::test_user_errors_exit_2_with_one_line_and_no_output"),
    _m("adapt-cli-memory-error-reported-as-bug", CLI_SHARED,
       "    if isinstance(exc, MemoryError):\n", "    if isinstance(exc, OverflowError):\n",
       "tests/test_faults.py::test_memory_and_permission_failures_are_user_errors"),
    _m("adapt-cli-cap-limit-off", CLI_SHARED,
       "    if v > 180:\n", "    if v > 360:\n",
       f"{T_CLI}::test_user_errors_exit_2_with_one_line_and_no_output"),
    _m("adapt-cli-radius-metres-factor", CLI_RADIUS,
       '(("km", 1.0), ("m", 1e-3))', '(("km", 1.0), ("m", 1e3))',
       f"{T_CLI}::test_radius_may_carry_km_or_m"),
]
