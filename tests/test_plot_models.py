"""Checks of the model-spectrum figure of sphex.plot and of sphex.potential.crossing_degree."""
from __future__ import annotations

import numpy as np
import pytest

from sphex import plot
from sphex.potential import crossing_degree, kaula_rule


def test_crossing_degree_by_hand():
    signal = np.array([1.0, 0.0, 1e-6, 1e-8, 1e-10, 1e-12])
    error = np.array([0.0, 0.0, 1e-12, 1e-10, 1e-10, 1e-9])
    assert crossing_degree(signal, error) == 4  # equal at 4 counts as reached
    assert crossing_degree(signal, error * 1e-6) is None
    with pytest.raises(ValueError, match="one length"):
        crossing_degree(signal, error[:3])


@pytest.mark.reference
def test_model_spectrum_figure_marks_the_crossing_and_labels_kaula(tmp_path):
    l = np.arange(61, dtype=float)
    signal = np.where(l >= 2, (2 * l + 1) * (1e-5 / np.maximum(l, 1) ** 2) ** 2, 0.0)
    error = 1e-21 * (2 * l + 1) * np.exp(l / 6.0)
    error[:2] = 0.0
    cross = crossing_degree(signal, error)
    assert cross is not None and 2 < cross < 60
    fig = plot.model_spectrum_figure(signal, error, kaula=1e-5, title="test")
    ax = fig.axes[0]
    texts = [t.get_text() for t in ax.get_legend().get_texts()]
    assert any("Kaula 1966" in t for t in texts)
    assert any("error degree variances" in t for t in texts)
    vertical = [ln for ln in ax.lines if np.allclose(ln.get_xdata(), cross)]
    assert vertical, "the crossing degree is marked by a vertical line"
    assert any(f"degree {cross}" in t.get_text() for t in ax.texts)
    # the Kaula line is kaula_rule's values
    kaula_line = ax.lines[2]
    x, y = kaula_line.get_xdata(), kaula_line.get_ydata()
    np.testing.assert_allclose(y, kaula_rule(60)[np.asarray(x, int)], rtol=1e-12)
    path = plot.save(fig, tmp_path / "spectrum.png")
    assert path.stat().st_size > 1000
    with pytest.raises(ValueError, match="must match"):
        plot.model_spectrum_figure(signal, error[:10])
