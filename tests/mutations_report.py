"""Planted bugs in the report's wind and localised-spectrum sections (run by tests/mutations.py)."""
from __future__ import annotations

from _mutation import _m

WINDS = "sphex/report/winds.py"
LOCAL = "sphex/report/local_section.py"
T_WIND = "tests/test_report.py::test_wind_numbers_equal_those_of_the_python_api"
T_LOCAL = "tests/test_report.py::test_local_section_numbers_equal_those_of_the_python_api"
T_LOCAL_CLI = "tests/test_report.py::test_local_section_from_the_command_line"

MUTATIONS = [
    _m("report-wind-energy-of-the-first-step", WINDS,
       'Row("wind_energy", "kinetic energy", float(total.mean()), eu,',
       'Row("wind_energy", "kinetic energy", float(total[0]), eu,', T_WIND),
    _m("report-wind-share-of-the-other-part", WINDS,
       "float(100 * total_rot.mean() / total.mean()), \"%\", \"\")",
       "float(100 * total_div.mean() / total.mean()), \"%\", \"\")", T_WIND),
    _m("report-wind-rms-without-root", WINDS,
       "float(np.sqrt(np.atleast_2d(degree_power(h)).sum(axis=-1)",
       "float((np.atleast_2d(degree_power(h)).sum(axis=-1)", T_WIND),
    _m("report-wind-slope-of-the-total", WINDS,
       "        p = e.mean(axis=0)\n",
       "        p = (rot + div).mean(axis=0)\n", T_WIND),
    _m("report-local-reliable-range-short", LOCAL,
       "loc, glob = float(local.power[lo:hi + 1].sum()), float(blurred[lo:hi + 1].sum())",
       "loc, glob = float(local.power[lo:hi].sum()), float(blurred[lo:hi].sum())", T_LOCAL),
    _m("report-local-blurred-with-all-windows", LOCAL,
       "        blurred = expected_local_power(global_power, local.cap_radius_deg, local.lwin,\n"
       "                                       local.n_windows)",
       "        blurred = expected_local_power(global_power, local.cap_radius_deg, local.lwin)",
       T_LOCAL_CLI),
    _m("report-local-window-count-ignored", LOCAL,
       "local = local_power(h, r.lat, r.lon, r.cap, r.window_degree, r.windows)",
       "local = local_power(h, r.lat, r.lon, r.cap, r.window_degree)", T_LOCAL_CLI),
]
