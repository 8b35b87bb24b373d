"""Every lag structure has one label that states its options: different structures never share a label,
and ``parse_lag`` reads every label back to an equal structure (so a label is also a command-line lag)."""

from __future__ import annotations

import json

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import airhealth
from airhealth.cli.main import main
from airhealth.errors import DataWarning, SpecificationError
from airhealth.model.bases.distributed_lags import PolynomialLag, SplineLag, UnconstrainedLag
from airhealth.model.bases.exposure_lag import (
    ExposureLagBasis,
    LinearResponse,
    SplineResponse,
    ThresholdResponse,
    parse_exposure_lag,
)
from airhealth.model.bases.lag_structures import MovingAverage, SingleDay, number_text, parse_lag

MAX_LAG = 40

# ---------------------------------------------------------------------------- strategies for every structure


@st.composite
def lag_range(draw, min_width: int = 1) -> tuple[int, int]:
    first = draw(st.integers(0, MAX_LAG - min_width))
    last = draw(st.integers(first + min_width, MAX_LAG))
    return first, last


@st.composite
def moving_averages(draw) -> MovingAverage:
    first, last = draw(lag_range(min_width=0))
    width = last - first + 1
    return MovingAverage(first, last, draw(st.none() | st.integers(1, width)))


def _knots(low: float, high: float, most: int) -> st.SearchStrategy[tuple[float, ...]]:
    inside = st.floats(low, high, exclude_min=True, exclude_max=True, allow_nan=False, allow_infinity=False)
    return st.lists(inside, min_size=1, max_size=most, unique=True).map(lambda ks: tuple(sorted(ks)))


@st.composite
def spline_lags(draw) -> SplineLag:
    first, last = draw(lag_range(min_width=2))
    n_lags = last - first + 1
    if draw(st.booleans()):
        knots = draw(_knots(first, last, min(4, n_lags - 2)))
        return SplineLag(first, last, knots=knots)
    return SplineLag(first, last, draw(st.integers(2, n_lags)), knot_spacing=draw(st.sampled_from(["even", "log"])))


@st.composite
def polynomial_lags(draw) -> PolynomialLag:
    first, last = draw(lag_range())
    return PolynomialLag(first, last, draw(st.integers(0, last - first)))


plain_structures = st.one_of(
    st.integers(0, MAX_LAG).map(SingleDay),
    moving_averages(),
    lag_range().map(lambda r: UnconstrainedLag(*r)),
    polynomial_lags(),
    spline_lags(),
)

finite = st.floats(-1e6, 1e6, allow_nan=False, allow_infinity=False)
responses = st.one_of(
    st.just(LinearResponse()),
    st.integers(1, 6).map(lambda df: SplineResponse(df=df)),
    st.lists(finite, min_size=1, max_size=4, unique=True).map(lambda ks: SplineResponse(knots=tuple(sorted(ks)))),
    st.builds(ThresholdResponse, finite, st.sampled_from(["above", "below"])),
)
exposure_lag_bases = st.builds(ExposureLagBasis, responses, plain_structures)
structures = st.one_of(plain_structures, exposure_lag_bases)

# ---------------------------------------------------------------------------------------------- properties


@settings(max_examples=400, deadline=None)
@given(structures)
def test_every_label_reads_back_to_an_equal_structure(structure):
    assert parse_lag(structure.label) == structure
    # the label is what tables and the command line show; it reads back the same with other spacing and case
    assert parse_lag(f"  {structure.label.upper()} ") == structure


@settings(max_examples=400, deadline=None)
@given(structures, structures)
def test_different_structures_never_share_a_label(a, b):
    assert (a.label == b.label) == (a == b)


@pytest.mark.parametrize(
    ("a", "b"),
    [
        (MovingAverage(0, 3), MovingAverage(0, 3, min_count=1)),
        (MovingAverage(0, 3, min_count=1), MovingAverage(0, 3, min_count=2)),
        (SingleDay(2), MovingAverage(2, 2)),
        (SplineLag(0, 21, 4), SplineLag(0, 21, 4, knot_spacing="log")),
        (SplineLag(0, 21, 4), SplineLag(0, 21, knots=(7, 14))),  # same basis, different specification
        (SplineLag(0, 21, knots=(2.5,)), SplineLag(0, 21, knots=(2.5000001,))),
        (ExposureLagBasis(ThresholdResponse(30.00001), "0"), ExposureLagBasis(ThresholdResponse(30.000012), "0")),
        (ExposureLagBasis(LinearResponse(), "0-3"), MovingAverage(0, 3)),
        (ExposureLagBasis(LinearResponse(), "0-3"), ExposureLagBasis(LinearResponse(), "0-3 min 1")),
    ],
)
def test_structures_that_differ_only_in_an_option_have_different_labels(a, b):
    # the near-collisions a rounding or option-blind label would merge ("%g" gives 30.00001 for both
    # thresholds; the old moving-average label ignored min_count)
    assert a != b and a.label != b.label
    assert parse_lag(a.label) == a and parse_lag(b.label) == b


@pytest.mark.parametrize(
    ("structure", "label"),
    [
        (SingleDay(0), "0"),
        (MovingAverage(0, 3), "0-3"),
        (MovingAverage(0, 3, min_count=1), "0-3 min 1"),
        (MovingAverage(0, 3, min_count=4), "0-3"),  # every day needed: the default rule, the default label
        (UnconstrainedLag(0, 5), "dl0-5"),
        (PolynomialLag(0, 7, 3), "dl0-7:poly3"),
        (SplineLag(0, 21, 4), "dl0-21:spline4"),
        (SplineLag(0, 21, 4, knot_spacing="log"), "dl0-21:spline4:log"),
        (SplineLag(0, 21, knots=(2, 5.5, 10)), "dl0-21:spline:knots=2,5.5,10"),
        (ExposureLagBasis(SplineResponse(df=3), "dl0-21:spline4"), "spline(df=3) x dl0-21:spline4"),
        (ExposureLagBasis(ThresholdResponse(-2.5, side="below"), "0-3 min 2"), "below(-2.5) x 0-3 min 2"),
        (ExposureLagBasis(SplineResponse(knots=(10, 20.25)), "1"), "spline(knots=10,20.25) x 1"),
    ],
)
def test_default_options_keep_short_labels_and_others_are_spelled_out(structure, label):
    assert structure.label == label
    assert str(structure) == label


def test_numbers_in_labels_read_back_exactly():
    for value in (7.0, -3.0, 2.5, 30.000012, 1e-5, 0.1 + 0.2, 123456.789):
        assert float(number_text(value)) == value
    assert number_text(7.0) == "7" and number_text(-0.0) == "0"


def test_a_bound_exposure_lag_basis_keeps_the_label_of_its_specification():
    import numpy as np

    x = np.random.default_rng(1).gamma(4.0, 5.0, 200)
    basis = ExposureLagBasis(SplineResponse(df=3), "dl0-5")
    assert basis.bind(x).label == basis.label == "spline(df=3) x dl0-5"


# ------------------------------------------------------------------------------------------- bad strings


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("0-3 min 0", r"min_count must be a whole number of days between 1 and 4 for lags 0-3, got 0"),
        ("0-3 min 5", r"min_count must be a whole number of days between 1 and 4 for lags 0-3, got 5"),
        ("2 min 1", r"lag '2 min 1': a single day has no minimum count of days; 'min' belongs to a moving"),
        ("dl0-5 min 3", r"distributed lag 'dl0-5 min 3': a distributed lag has one coefficient per lag"),
        ("dl0-21:spline4:even", r"distributed lag 'dl0-21:spline4:even' is not understood"),
        ("wiggly(3) x 0-3", r"exposure-lag basis 'wiggly\(3\) x 0-3': exposure-response 'wiggly\(3\)' is not"),
        ("above(hot) x 0", r"exposure-lag basis 'above\(hot\) x 0': 'hot' is not a number"),
        ("linear x 0 x 1", r"write one exposure-response, ' x ', and one lag"),
        ("linear x spline(df=3)", r"lag 'spline\(df=3\)' is not understood"),
    ],
)
def test_bad_lag_strings_name_the_string_and_the_valid_forms(text, message):
    with pytest.raises(SpecificationError, match=message):
        parse_lag(text)


def test_exposure_lag_strings_need_the_separator():
    with pytest.raises(SpecificationError, match=r"exposure-lag basis 'linear' is not understood"):
        parse_exposure_lag("linear")


@pytest.mark.parametrize("bad", [1.5, True, "1"])
def test_min_count_must_be_a_whole_number(bad):
    with pytest.raises(SpecificationError, match=rf"min_count must be a whole number .* got {bad!r}"):
        MovingAverage(0, 3, min_count=bad)


def test_knot_spacing_is_checked_and_named():
    with pytest.raises(SpecificationError, match=r"knot_spacing='logarithmic' is not a valid choice; use one of"):
        SplineLag(0, 21, 4, knot_spacing="logarithmic")
    with pytest.raises(SpecificationError, match=r"either directly or with knot_spacing='log', not both"):
        SplineLag(0, 21, knot_spacing="log", knots=(3, 9))


# ------------------------------------------------------------------------------ labels as keys and CLI lags


@pytest.fixture(scope="module")
def two_years():
    data = airhealth.load_sample()
    return data[data["date"] < "2012-01-01"].reset_index(drop=True)


def test_compare_keeps_structures_apart_that_differ_only_in_min_count(two_years):
    with pytest.warns(DataWarning, match="different days"):  # each structure on its own days
        table = airhealth.compare(
            two_years,
            lags=["0-3", "0-3 min 1"],
            common_days=False,
            outcome="deaths_all",
            exposure="pm25",
            temperature="temperature",
        )
    assert table["lag"].tolist() == ["0-3", "0-3 min 1"]
    strict, lenient = table["n_days"].tolist()
    assert lenient > strict  # the lenient rule keeps days with some of the window missing


def test_the_command_line_accepts_a_label_as_its_lag(two_years, tmp_path, capsys):
    path = tmp_path / "two_years.csv"
    two_years.to_csv(path, index=False)
    args = ["fit", str(path), "--outcome", "deaths_all", "--exposure", "pm25", "--temperature", "temperature"]
    assert main([*args, "--lag", "0-3 min 1", "--json"]) == 0
    record = json.loads(capsys.readouterr().out)
    assert record["lag"] == "0-3 min 1"
    python = airhealth.fit(
        two_years, "deaths_all", "pm25", lag=MovingAverage(0, 3, min_count=1), temperature="temperature"
    )
    assert record["n_days"] == python.n_days
    assert record["coef"] == pytest.approx(python.effect().coef, rel=1e-12)  # the same fit, printed as JSON
