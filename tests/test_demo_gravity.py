"""Checks of Velanthe's invented gravity model: the bundled file is what the demo data script
makes, it reads as a model with sigmas, and it says it is invented."""
from __future__ import annotations

from pathlib import Path

import numpy as np

from sphex import demo
from sphex.models import open_model
from sphex.potential import crossing_degree, degree_variances, error_degree_variances

BUNDLED = Path(__file__).resolve().parent.parent / "data_demo" / demo.GRAVITY_FILE


def test_bundled_gravity_model_is_what_the_script_makes(tmp_path):
    fresh = demo.make_gravity_model()
    shipped = BUNDLED.read_text()
    assert "invented" in shipped.splitlines()[0] and "Not a model of any real body" in shipped
    (tmp_path / "fresh.gfc").write_text(fresh)
    a, b = open_model(tmp_path / "fresh.gfc"), open_model(BUNDLED)
    # printed with 13 significant digits: a last-digit change of the kernels' rounding is allowed
    np.testing.assert_allclose(a.harmonics.coef, b.harmonics.coef, rtol=0, atol=1e-17)
    np.testing.assert_allclose(a.sigmas.coef, b.sigmas.coef, rtol=1e-4, atol=0)


def test_gravity_model_reads_with_its_constants_and_errors():
    m = open_model(BUNDLED)
    assert m.name == "VELANTHE-G40-INVENTED" and m.lmax == demo.GRAVITY_LMAX
    assert m.gm == demo.GRAVITY_GM and m.radius == demo.RADIUS_KM * 1e3
    assert m.errors == "formal" and m.sigmas is not None
    assert BUNDLED.stat().st_size < 100_000
    # the errors reach the signal above degree 30 (where the script sets them equal in RMS;
    # the noise added to the coefficients moves the crossing by a few degrees)
    cross = crossing_degree(degree_variances(m), error_degree_variances(m))
    assert cross is not None and 30 <= cross <= 38
