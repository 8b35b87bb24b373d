"""NaturalSplineBasis against R's ``splines::ns`` basis, and the defining properties of natural splines.

Reference values: ``splines::ns`` and ``predict.ns`` in base R (R Core Team, R: A Language and Environment
for Statistical Computing), frozen in ``tests/reference/glm_reference.json`` by
``tests/reference/glm_reference.R`` (section "ns() basis values"). Tolerance 1e-10 absolute on basis
values (they lie in [-1, 2] inside the boundary; both programs evaluate the same piecewise cubics, so
only rounding differs) and 1e-12 relative on knots (quantiles of the same values, type 7 in R, "linear"
in numpy).
"""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np
import pytest
from scipy.interpolate import BSpline

from airhealth.errors import SpecificationError
from airhealth.model.bases.splines import NaturalSplineBasis

REFERENCE = json.loads((Path(__file__).resolve().parent / "reference" / "glm_reference.json").read_text())
CASES = {case["name"]: case for case in REFERENCE["ns_bases"]}
ABS_TOL = 1e-10


def _basis_for(case: dict) -> NaturalSplineBasis:
    x = np.asarray(case["x"], dtype=float)
    if case["df"] is None:
        return NaturalSplineBasis.from_values(x, knots=np.asarray(case["interior_knots"]), intercept=case["intercept"])
    return NaturalSplineBasis.from_values(x, df=case["df"], intercept=case["intercept"])


@pytest.mark.parametrize("name", sorted(CASES))
def test_knots_match_r(name):
    case = CASES[name]
    basis = _basis_for(case)
    np.testing.assert_allclose(basis.interior_knots, case["interior_knots"], rtol=1e-12, atol=0)
    np.testing.assert_allclose(basis.boundary_knots, case["boundary_knots"], rtol=1e-12, atol=0)


@pytest.mark.parametrize("name", sorted(CASES))
def test_basis_matches_r_at_the_data(name):
    case = CASES[name]
    got = _basis_for(case).evaluate(np.asarray(case["x"]))
    want = np.asarray(case["basis"], dtype=float)
    assert got.shape == want.shape
    np.testing.assert_allclose(got, want, atol=ABS_TOL, rtol=0)


@pytest.mark.parametrize("name", sorted(n for n, c in CASES.items() if "newx" in c))
def test_basis_matches_r_predict_including_beyond_the_boundary(name):
    # predict.ns extrapolates linearly beyond the boundary knots; some new values lie outside.
    case = CASES[name]
    newx = np.asarray(case["newx"], dtype=float)
    lo, hi = case["boundary_knots"]
    assert (newx < lo).any() and (newx > hi).any()
    got = _basis_for(case).evaluate(newx)
    np.testing.assert_allclose(got, np.asarray(case["new_basis"]), atol=ABS_TOL, rtol=0)


def test_r_cases_cover_the_options():
    assert {c["intercept"] for c in CASES.values()} == {True, False}
    assert any(c["df"] is None for c in CASES.values())  # knots given explicitly
    assert any(c["df"] == 1 for c in CASES.values())  # no interior knot


# --- defining properties (no outside reference needed) --------------------------------------------


@pytest.fixture
def wave_basis() -> NaturalSplineBasis:
    x = np.asarray(CASES["wave_df6"]["x"], dtype=float)
    return NaturalSplineBasis.from_values(x, df=6)


def test_linear_beyond_the_boundary_and_zero_curvature_at_it(wave_basis):
    lo, hi = wave_basis.boundary_knots
    for side, direction in ((lo, -1.0), (hi, 1.0)):
        pts = side + direction * np.array([0.0, 1.0, 2.0, 5.0])
        values = wave_basis.evaluate(pts)
        # equal steps give equal increments (linear), for each column
        steps = np.diff(values[:3], axis=0)
        np.testing.assert_allclose(steps[0], steps[1], atol=1e-12)
        np.testing.assert_allclose(values[3] - values[0], 5 * steps[0], atol=1e-11)
    # second derivative of every natural-spline column is zero at both boundary knots
    t = wave_basis._knot_vector()
    spline = BSpline(t, wave_basis._projection(), 3)
    np.testing.assert_allclose(spline.derivative(2)(np.array([lo, hi])), 0.0, atol=1e-10)


def test_continuous_at_the_boundary(wave_basis):
    lo, hi = wave_basis.boundary_knots
    eps = 1e-9
    inside = wave_basis.evaluate(np.array([lo + eps, hi - eps]))
    outside = wave_basis.evaluate(np.array([lo - eps, hi + eps]))
    np.testing.assert_allclose(inside, outside, atol=1e-8)


def test_missing_values_give_missing_rows_and_do_not_move_the_knots():
    x = np.asarray(CASES["small_df3"]["x"], dtype=float)
    with_nan = np.insert(x, [2, 5], np.nan)
    basis = NaturalSplineBasis.from_values(with_nan, df=3)
    np.testing.assert_allclose(basis.interior_knots, CASES["small_df3"]["interior_knots"], rtol=1e-12)
    values = basis.evaluate(with_nan)
    assert np.isnan(values[[2, 6]]).all()
    np.testing.assert_allclose(np.delete(values, [2, 6], axis=0), CASES["small_df3"]["basis"], atol=ABS_TOL)


def test_without_intercept_the_basis_vanishes_at_the_lower_boundary_and_spans_no_constant(wave_basis):
    lo, _ = wave_basis.boundary_knots
    np.testing.assert_allclose(wave_basis.evaluate(np.array([lo])), 0.0, atol=1e-14)
    x = np.linspace(*wave_basis.boundary_knots, 50)
    with_constant = np.column_stack([np.ones(50), wave_basis.evaluate(x)])
    assert np.linalg.matrix_rank(with_constant) == wave_basis.df + 1


def test_intercept_basis_reproduces_any_straight_line():
    # natural cubic splines contain all linear functions (Hastie, Tibshirani & Friedman 2009, ESL 5.2.1)
    x = np.linspace(0.0, 10.0, 41)
    basis = NaturalSplineBasis.from_values(x, df=5, intercept=True)
    b = basis.evaluate(x)
    line = 3.0 - 0.7 * x
    coef, *_ = np.linalg.lstsq(b, line, rcond=None)
    np.testing.assert_allclose(b @ coef, line, atol=1e-10)
    far = np.array([-20.0, 30.0])
    np.testing.assert_allclose(basis.evaluate(far) @ coef, 3.0 - 0.7 * far, atol=1e-9)


def test_df_counts_columns():
    x = np.arange(100.0)
    assert NaturalSplineBasis.from_values(x, df=4).evaluate(x).shape == (100, 4)
    assert NaturalSplineBasis.from_values(x, df=4, intercept=True).evaluate(x).shape == (100, 4)
    assert len(NaturalSplineBasis.from_values(x, df=4).interior_knots) == 3
    assert len(NaturalSplineBasis.from_values(x, df=4, intercept=True).interior_knots) == 2


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"values": np.array([1.0, 1.0, 1.0]), "df": 3}, "two distinct"),
        ({"values": np.array([np.nan, 2.0]), "df": 2}, "two distinct"),
        ({"values": np.arange(10.0)}, "either df or knots"),
        ({"values": np.arange(10.0), "df": 0}, "df must be at least 1"),
        ({"values": np.arange(10.0), "knots": np.array([4.0, 2.0])}, "increasing"),
        ({"values": np.arange(10.0), "knots": np.array([12.0])}, "inside the boundary"),
    ],
)
def test_bad_spline_specifications_are_named(kwargs, message):
    with pytest.raises(SpecificationError, match=message):
        NaturalSplineBasis.from_values(**kwargs)
