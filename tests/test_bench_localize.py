"""Checks of the rotation and localised-spectrum benchmark's measuring tool (no timing)."""
from __future__ import annotations

import pytest

from sphex.bench import localize


def test_a_small_rotation_case_reports_memory_and_a_round_trip():
    r = localize.run_case("rotate", 63, repeat=1)
    assert r["case"] == "rotate" and r["lmax"] == 63
    assert r["input_bytes"] == 64 * 64 * 16                  # complex (lmax+1)^2 coefficients
    assert r["peak_rss_bytes"] >= r["baseline_rss_bytes"] > 0
    assert r["check"] < 1e-13                                 # rotation then its inverse
    assert r["wall_s"] > 0 and r["cpu_s"] >= 0
    table = localize.format_table([r])
    assert "rotate" in table and "63" in table


def test_unknown_case_is_refused():
    with pytest.raises(ValueError, match="choose rotate or local_power"):
        localize.run_case("spin", 10)
