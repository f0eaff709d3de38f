"""Planted bugs of the long-series throughput work (the task function of a streamed
analysis, its dask graph, and the passes over its values) for tests/mutations.py.

Run them with ``python tests/mutations.py --only thru-``.
"""
from __future__ import annotations

from _mutation import _m

FIELDS = "sphex/xr/fields.py"
HARM = "sphex/harmonics.py"
LIMITS = "sphex/limits.py"
RINGS = "sphex/rings.py"
TRANS = "sphex/transform.py"

T_FIELDS = "tests/test_xr_fields.py"
T_STREAM = "tests/test_xr_streaming.py"
T_HOSTILE = "tests/test_hostile_inputs.py"
T_TRANS = "tests/test_transform.py"

MUTATIONS = [
    # ------------------------------------------------- the task function of a chunk
    _m("thru-task-missing-fields-not-named", FIELDS,
       "            refuse_missing_in_block(block, i, pos, batch, where)\n            raise failed",
       "            raise failed", T_FIELDS),
    _m("thru-task-cos-sin-into-swapped-blocks", FIELDS,
       "h.cos_sin(out=(c_out[i:i + step], s_out[i:i + step]))",
       "h.cos_sin(out=(s_out[i:i + step], c_out[i:i + step]))", T_STREAM),
    _m("thru-task-cos-sin-into-the-first-block", FIELDS,
       "h.cos_sin(out=(c_out[i:i + step], s_out[i:i + step]))",
       "h.cos_sin(out=(c_out[:step], s_out[:step]))",
       "tests/test_xr_fields.py::test_analysis_reported_in_steps_fills_every_step_of_its_output"),
    _m("thru-lazy-cos-and-sin-swapped", FIELDS,
       "    return (xr.DataArray(both[0], dims=dims, coords=coords),\n"
       "            xr.DataArray(both[1], dims=dims, coords=coords))",
       "    return (xr.DataArray(both[1], dims=dims, coords=coords),\n"
       "            xr.DataArray(both[0], dims=dims, coords=coords))", T_STREAM),
    _m("thru-lazy-field-positions-not-passed", FIELDS,
       "        args += [pos.transpose(*others).data, batch]",
       "        args += [np.asarray(0), None]", T_FIELDS),
    _m("thru-lazy-coordinates-dropped", FIELDS,
       "coords = {k: v for k, v in da.coords.items() if not set(v.dims) & set(core)}",
       "coords = {}", T_STREAM),
    # ----------------------------------------------------------- the real form
    _m("thru-cos-sin-sine-overflow-unchecked", HARM,
       "if not (all_finite(C) and all_finite(S)) and", "if not all_finite(C) and", T_HOSTILE),
    # ------------------------------------------------- finiteness in one pass
    _m("thru-finite-sum-inf-taken-as-finite", LIMITS,
       "    if np.isfinite(total):\n        return True",
       "    if not np.isnan(total):\n        return True", T_HOSTILE),
    _m("thru-finite-overflowing-sum-refused", LIMITS,
       "    return math.isfinite(peak_magnitude(a))\n\n\ndef binary_exponent",
       "    return False\n\n\ndef binary_exponent", T_HOSTILE),
    # ------------------------------------- one peak for the check and the scaling
    _m("thru-peak-of-check-not-used-for-scaling", TRANS,
       "arr, e, peak = scaled_input(arr, peak)", "arr, e, peak = scaled_input(arr, 1.0)",
       T_HOSTILE),
    _m("thru-check-lets-inf-through", RINGS,
       "if peak is not None and not np.isfinite(peak):",
       "if peak is not None and np.isnan(peak):",
       "tests/test_transform.py::test_nan_and_inf_are_named_with_their_place_before_any_work"),
]
