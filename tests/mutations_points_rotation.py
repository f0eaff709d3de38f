"""Planted bugs of points, least squares, rotation and localised spectra (run by tests/mutations.py).

Each entry is a careless edit a developer could make in these modules, with the few
tests that should notice it, fastest first.  Run only these with
``python tests/mutations.py --only points- --only lsq- --only rot- --only loc-``
(the ``kpoints-`` and ``krot-`` ones recompile the kernels: slow).
"""
from __future__ import annotations

from _mutation import _m

PTS = "sphex/points.py"
KPTS = "sphex/kernels/points.py"
LSQ = "sphex/least_squares.py"
ROT = "sphex/rotation.py"
KROT = "sphex/kernels/rotation.py"
CONC = "sphex/concentration.py"
LOC = "sphex/localize.py"
SPEC = "sphex/spectra.py"

T_PTS = "tests/test_points.py"
T_ROT = "tests/test_rotation.py"
T_LOC = "tests/test_localize.py"
T_SPEC = "tests/test_spectra.py"

EVAL_SCIPY = T_PTS + "::test_evaluate_matches_scipy_sph_harm_y"
GRAD_SCIPY = T_PTS + "::test_evaluate_gradient_matches_scipy_derivatives"
ADJOINT = T_PTS + "::test_adjoint_identity"
POINT_MASS = T_PTS + "::test_point_mass_potential_evaluated_and_fitted_back"
FIT = T_PTS + "::test_fit_recovers_band_limited_field"
MONTE_CARLO = T_PTS + "::test_posterior_sigmas_match_monte_carlo_scatter"
CG_CONDITION = T_PTS + "::test_condition_estimate_of_conjugate_gradients_matches_dense"
MASKED = T_PTS + "::test_fit_masked_recovers_low_degree_field_under_a_30_percent_cap"
DAMPING = T_PTS + "::test_damping_and_prior_shrink_toward_zero"
POLES_2700 = T_PTS + "::test_evaluate_degree_2700_next_to_poles_against_mpmath"
NORMAL_EQUATIONS = T_PTS + "::test_weighted_damped_fit_matches_numpy_normal_equations"
DATA_UNITS = T_PTS + "::test_iterative_fit_does_not_depend_on_the_data_units"

SYMPY_D = T_ROT + "::test_wigner_small_d_matches_sympy"
SYMPY_PRODUCT = T_ROT + "::test_rotation_equals_sympy_d_matrix_product"
RESAMPLE = T_ROT + "::test_rotate_then_synthesize_equals_resampling_at_rotated_points"
POLAR_TURN = T_ROT + "::test_turn_about_the_polar_axis_is_a_longitude_shift"
ROT_TO = T_ROT + "::test_rotation_to_brings_the_pole_to_the_point"
CONVENTIONS = T_ROT + "::test_every_convention_rotates_the_same_field"
ROT_BATCH = T_ROT + "::test_batch_equals_fields_one_by_one"
ROT_INVERSE = T_ROT + "::test_rotation_then_inverse_is_identity_at_degree_1000"
ROT_1500 = T_ROT + "::test_rotated_zonal_degrees_match_reference_to_degree_1500"

SHANNON = T_LOC + "::test_concentrations_sum_to_the_shannon_number"
BEST_WINDOW = T_LOC + "::test_best_window_of_a_20_degree_cap_at_lwin_20_matches_scipy_eigenproblem"
CAP_QUAD = T_LOC + "::test_windows_orthogonal_over_the_cap_scipy_quad"
WINDOW_SIGN = T_LOC + "::test_window_sign_and_harmonics_round_trip"
SYMPY_3J = T_LOC + "::test_squared_3j_matches_sympy"
COUPLING = T_LOC + "::test_coupling_matrix_conserves_power"
UNBIASED = T_LOC + "::test_multitaper_estimate_is_unbiased_for_a_stationary_field"
TURNED_CAP = T_LOC + "::test_localised_spectrum_is_the_same_wherever_the_cap_is_turned_to"
ADMITTANCE = T_LOC + "::test_admittance_of_a_scaled_field_returns_the_transfer_function"
SELF_CROSS = T_LOC + "::test_cross_power_of_a_field_with_itself_is_its_power"
WINDOWED_QUADRATURE = T_LOC + "::test_local_power_at_the_pole_is_the_power_of_each_windowed_field_at_every_degree"

MUTATIONS = [
    # ------------------------------------------------------------------ points.py
    _m("points-negative-orders-not-doubled", PTS,
       "t[:, 1:, :] *= 2.0", "t[:, 1:, :] *= 1.0", EVAL_SCIPY),
    _m("points-continuation-ratio-inverted", PTS,
       "q = (reference_radius / r)[points.order]", "q = (r / reference_radius)[points.order]",
       POINT_MASS),
    _m("points-continuation-exponent-l-not-l-plus-1", PTS,
       "return factors.xq, factors.sq, factors.q2, factors.q",
       "return factors.xq, factors.sq, factors.q2, None", POINT_MASS),
    _m("points-gradient-times-radius", PTS,
       "scale = 1.0 if h.radius is None else 1.0 / h.radius",
       "scale = 1.0 if h.radius is None else h.radius", GRAD_SCIPY),
    _m("points-adjoint-order-weight-missing", PTS,
       "coef[:, :, 1:] *= 2.0", "coef[:, :, 1:] *= 1.0", ADJOINT, FIT),
    _m("points-design-rows-weight-not-square-root", PTS,
       "basis.col_sin, np.sqrt(w[idx]), A)", "basis.col_sin, w[idx], A)", MONTE_CARLO),
    _m("points-posterior-sigma-without-sqrt", PTS,
       "posterior = np.sqrt(np.sum(inverse ** 2, axis=1))", "posterior = np.sum(inverse ** 2, axis=1)",
       MONTE_CARLO),
    _m("points-residual-rms-unweighted", PTS,
       "rms = np.sqrt(np.sum(w * residual ** 2, axis=-1) / np.sum(w))",
       "rms = np.sqrt(np.mean(residual ** 2, axis=-1))", FIT, MONTE_CARLO,
       NORMAL_EQUATIONS),
    # ------------------------------------------------------------ least_squares.py
    _m("lsq-real-form-without-sqrt2", LSQ,
       "scale = np.where(self._m > 0, 1.0 / math.sqrt(2.0), 1.0)\n        coef[:, self._l, self._m]",
       "scale = np.where(self._m > 0, 1.0, 1.0)\n        coef[:, self._l, self._m]", FIT),
    _m("lsq-damping-scale-not-squared", LSQ,
       "return d * scale ** 2 / var[basis.degree]", "return d * scale / var[basis.degree]", DAMPING,
       NORMAL_EQUATIONS),
    _m("lsq-prior-indexed-by-order", LSQ,
       "return d * scale ** 2 / var[basis.degree]", "return d * scale ** 2 / var[basis.order]", DAMPING),
    _m("lsq-cg-absolute-stopping-test", LSQ,
       "cg(recorder.operator, rhs, rtol=tol, atol=0.0,", "cg(recorder.operator, rhs, rtol=0.0, atol=tol,",
       FIT, DATA_UNITS),
    _m("lsq-lanczos-off-diagonal-without-sqrt", LSQ,
       "off = np.sqrt(np.abs(beta[: k - 1])) / alpha[: k - 1]", "off = beta[: k - 1] / alpha[: k - 1]",
       CG_CONDITION),
    _m("lsq-masked-adjoint-order-weight-missing", LSQ,
       "a[..., 1:] *= 2.0", "a[..., 1:] *= 1.0", MASKED),
    # ------------------------------------------------------------- kernels/points.py
    _m("kpoints-adjoint-phase-sign", KPTS,
       "gi[kk, j] = -f * sph[jj]", "gi[kk, j] = f * sph[jj]", ADJOINT),
    _m("kpoints-continuation-second-coefficient-without-q2", KPTS,
       "t = al * xl[j] * P[j] - cl * q2[j0 + j] * Q[j]", "t = al * xl[j] * P[j] - cl * Q[j]", POINT_MASS),
    _m("kpoints-gradient-derivative-sin-power", KPTS,
       "se[j] = s[jj] if m == 0 else s[jj] * s[jj]", "se[j] = s[jj]", GRAD_SCIPY),
    _m("kpoints-design-rows-without-sqrt2", KPTS,
       "fc = root2 * scale[j] * math.cos(m * phi[j])", "fc = scale[j] * math.cos(m * phi[j])", FIT),
    _m("kpoints-evaluation-keeps-scaled-sums", KPTS,
       "nscaled -= 1\n                                for kk in range(K):\n"
       "                                    Fr[kk, j] = 0.0\n                                    Fi[kk, j] = 0.0\n",
       "nscaled -= 1\n", POLES_2700),
    # ------------------------------------------------------------------ rotation.py
    _m("rot-euler-alpha-gamma-swapped", ROT,
       "_turn_phase(gamma, lmax, degrees)\n    middle", "_turn_phase(alpha, lmax, degrees)\n    middle",
       SYMPY_PRODUCT),
    _m("rot-turn-phase-sign", ROT,
       "return np.exp(-1j * turn)", "return np.exp(1j * turn)", POLAR_TURN, SYMPY_PRODUCT),
    _m("rot-phase-convention-ignored", ROT,
       "phase_sign = np.where(m % 2 == 1, -1.0, 1.0) if not work.condon_shortley else np.ones(lmax + 1)",
       "phase_sign = np.ones(lmax + 1)", CONVENTIONS),
    _m("rot-small-d-indices-swapped", ROT,
       "return np.ascontiguousarray(d.real)", "return np.ascontiguousarray(d.real.T)", SYMPY_D),
    _m("rot-inverse-angles-not-reversed", ROT,
       "return (-gamma, -beta, -alpha)", "return (-alpha, -beta, -gamma)", ROT_INVERSE),
    _m("rot-rotation-to-latitude-for-colatitude", ROT,
       "return (lon, 90.0 - lat, 0.0)", "return (lon, lat, 0.0)", ROT_TO),
    # ---------------------------------------------------------- kernels/rotation.py
    _m("krot-row-recursion-coefficient", KROT,
       "q = math.sqrt((l - n - 1.0) * (l + n + 2.0)) * p\n    return p, q",
       "q = math.sqrt((l - n - 1.0) * (l + n + 1.0)) * p\n    return p, q", SYMPY_PRODUCT),
    _m("krot-real-field-doubling-lost", KROT,
       "yre[f, i] = 2.0 * v.real\n                yim[f, i] = 2.0 * v.imag",
       "yre[f, i] = v.real\n                yim[f, i] = v.imag", SYMPY_PRODUCT),
    _m("krot-batch-transposed-entry-sign", KROT,
       "ze[f, ni] += sign_e * se", "ze[f, ni] += se", ROT_BATCH),
    _m("krot-rescale-forgets-row-above", KROT,
       "                row[i] *= INV_SCALE\n                upper[i] *= INV_SCALE\n",
       "                row[i] *= INV_SCALE\n", ROT_INVERSE, ROT_1500),
    # ------------------------------------------------------------- concentration.py
    _m("conc-commuting-operator-band-limit", CONC,
       "(lo * (lo + 2.0) - lwin * (lwin + 2.0))", "(lo * (lo + 2.0) - lwin * (lwin + 1.0))",
       BEST_WINDOW, CAP_QUAD),
    _m("conc-cap-weights-not-halved", CONC,
       "return cap_colat, w * (u0 / 2.0)", "return cap_colat, w * u0", SHANNON),
    _m("conc-shannon-number-off-by-one", CONC,
       "shannon=(lwin + 1) ** 2 * u0 / 2.0", "shannon=lwin ** 2 * u0 / 2.0", SHANNON),
    _m("conc-windows-sorted-worst-first", CONC,
       "np.lexsort((order < 0, np.abs(order), -conc))", "np.lexsort((order < 0, np.abs(order), conc))",
       BEST_WINDOW),
    # ------------------------------------------------------------------ localize.py
    _m("loc-to-pole-euler-order", LOC,
       "return rotate(h, 0.0, lat - 90.0, -lon)", "return rotate(h, -lon, lat - 90.0, 0.0)", TURNED_CAP),
    _m("loc-taper-normalised-to-4pi", LOC,
       "scale = math.sqrt(4.0 * math.pi)  # unit mean square", "scale = 4.0 * math.pi  # unit mean square",
       UNBIASED),
    _m("loc-product-grid-too-coarse", LOC,
       "grid = Grid.gauss(lmax + lwin)", "grid = Grid.gauss(lmax)", TURNED_CAP, UNBIASED,
       WINDOWED_QUADRATURE),
    _m("loc-coupling-without-2l-plus-1", LOC,
       "M *= (2.0 * np.arange(lmax_out + 1) + 1.0)[:, None]", "M *= (np.arange(lmax_out + 1) + 1.0)[:, None]",
       COUPLING),
    _m("loc-multitaper-sum-not-mean", LOC,
       "means = [s.mean(axis=0) for s in spectra]", "means = [s.sum(axis=0) for s in spectra]",
       SELF_CROSS, UNBIASED),
    _m("loc-jackknife-factor", LOC,
       "error = np.sqrt((K - 1) / K * ", "error = np.sqrt(1.0 / K * ", SELF_CROSS),
    _m("loc-correlation-without-sqrt", LOC,
       "den = np.sqrt(a * b)", "den = a * b", ADMITTANCE,
       T_LOC + "::test_local_correlation_is_the_cross_power_over_the_root_of_the_powers"),
    _m("loc-valid-range-off-by-one", LOC,
       "valid_range=(windows.lwin, lmax - windows.lwin)", "valid_range=(windows.lwin, lmax - windows.lwin + 1)",
       UNBIASED, ADMITTANCE),
    # ------------------------------------------------------------------- spectra.py
    _m("spectra-significance-degrees-of-freedom", SPEC,
       "betaincinv(0.5, (n[1:] - 1.0) / 2.0, float(level))", "betaincinv(0.5, n[1:] / 2.0, float(level))",
       T_SPEC + "::test_correlation_significance_checks_its_arguments",
       T_SPEC + "::test_correlation_significance_against_student_t_and_the_hat_box_theorem"),
    _m("spectra-significance-without-sqrt", SPEC,
       "out[1:] = np.sqrt(betaincinv(", "out[1:] = (betaincinv(",
       T_SPEC + "::test_correlation_significance_checks_its_arguments",
       T_SPEC + "::test_correlation_significance_against_student_t_and_the_hat_box_theorem"),
    _m("spectra-isotropy-share-of-order-zero", SPEC,
       "weight = np.where(m == 0, 1.0, 2.0)                  # cosine and sine for m > 0",
       "weight = np.where(m == 0, 2.0, 2.0)                  # cosine and sine for m > 0",
       T_SPEC + "::test_isotropy_table_of_single_harmonics_has_the_exact_ratios",
       T_SPEC + "::test_isotropy_table_is_the_same_in_every_convention_and_pools_a_batch"),
]
