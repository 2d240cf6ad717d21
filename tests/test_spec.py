"""ModelSpec: validation, equality, text form (common practice for a spec object, no source)."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

import forecastaudit
from forecastaudit import ModelSpec, SpecError

# ---------------------------------------------------------------------- construction


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"order": (-1, 0, 0)}, r"first entry of order .* must not be negative, got -1"),
        ({"order": (0, 1, -2)}, r"third entry of order .* must not be negative"),
        ({"seasonal": (0, -1, 0), "period": 12}, r"second entry of seasonal .* not be negative"),
        ({"order": (1.5, 0, 0)}, r"first entry of order .* must be a whole number, got 1.5"),
        ({"order": ("1", 0, 0)}, r"must be a whole number, got '1'"),
        ({"order": (True, 0, 0)}, r"must be a whole number, got True"),
        ({"order": (float("inf"), 0, 0)}, r"must be a whole number, got inf"),
        ({"order": (float("nan"), 0, 0)}, r"must be a whole number, got nan"),
        ({"order": (1, 0)}, r"order .* must have three entries, got 2"),
        ({"order": 1}, r"order .* must be a tuple of three integers"),
        ({"order": "011"}, r"order .* must be a tuple of three integers, got the text '011'"),
        ({"seasonal": (0, 1, 1)}, r"Seasonal terms \(0, 1, 1\) need a period: pass period=m"),
        ({"seasonal": (1, 0, 0), "period": 1}, r"need a period of at least 2, got 1"),
        ({"seasonal": (0, 0, 1), "period": 0}, r"need a period of at least 2, got 0"),
        ({"period": 0}, r"period must be at least 1, got 0"),
        ({"period": 12.5}, r"period must be a whole number, got 12.5"),
        ({"period": float("nan")}, r"period must be a whole number, got nan"),
        ({"period": "12"}, r"period must be a whole number, got '12'"),
        ({"mean": 1}, r"mean must be True or False, got 1"),
        ({"transform": "sqrt"}, r"Unknown transform 'sqrt'. Use None, 'log', or a Box-Cox"),
        ({"transform": ("yeo-johnson", 1.0)}, r"Unknown transform"),
        ({"transform": ("boxcox", float("nan"))}, r"Box-Cox lambda must be a finite number"),
        ({"transform": ("boxcox", float("inf"))}, r"Box-Cox lambda must be a finite number"),
        ({"transform": ("boxcox", "half")}, r"Box-Cox lambda must be a finite number"),
        ({"transform": ("boxcox", True)}, r"Box-Cox lambda must be a finite number"),
        ({"transform": "boxcox(1.2.3)"}, r"Box-Cox lambda in 'boxcox\(1.2.3\)' is not a number"),
        ({"exog": "price"}, r"exog must be a tuple of column names, not a single string"),
        ({"regressors": "price"}, r"regressors must be a tuple of column names, not a single"),
        ({"regressors": ("a b",)}, r"Regressor column 'a b' cannot be used"),
        ({"regressors": ("a", "a")}, r"Regressor columns \['a'\] are named more than once"),
        ({"regressors": ("a",), "exog": ("b",)}, r"regressors=\('a',\) and exog=\('b',\) differ"),
    ],
)
def test_invalid_specs_raise_spec_error_with_the_problem_named(kwargs, message):
    with pytest.raises(SpecError, match=message):
        ModelSpec(**kwargs)


def test_spec_error_is_the_package_error_and_a_value_error():
    with pytest.raises(forecastaudit.ForecastAuditError):
        ModelSpec(order=(-1, 0, 0))
    with pytest.raises(ValueError):
        ModelSpec(order=(-1, 0, 0))


def test_numpy_scalars_and_whole_floats_are_accepted_and_stored_as_int():
    spec = ModelSpec(
        order=np.array([0, 1, 1]), seasonal=(0.0, 1.0, 1.0), period=np.int64(12), mean=np.True_
    )
    assert spec.order == (0, 1, 1) and all(type(v) is int for v in spec.order)
    assert spec.seasonal == (0, 1, 1) and all(type(v) is int for v in spec.seasonal)
    assert spec.period == 12 and type(spec.period) is int
    assert spec.mean is True
    assert spec == ModelSpec((0, 1, 1), (0, 1, 1), 12, mean=True)


def test_exog_none_is_no_exog():
    assert ModelSpec(exog=None).exog == ()


def test_period_without_seasonal_terms_is_allowed():
    spec = ModelSpec(order=(1, 0, 0), period=12)
    assert spec.period == 12 and spec.m == 12 and spec.lost_to_differencing == 0


# ---------------------------------------------------------------------- equality and views


def test_equal_specs_are_equal_and_hash_alike():
    a = ModelSpec((0, 1, 1), (0, 1, 1), 12, transform="log")
    b = ModelSpec(order=[0, 1, 1], seasonal=[0, 1, 1], period=12, transform=" LOG ")
    assert a == b and hash(a) == hash(b)
    assert a != ModelSpec((0, 1, 1), (0, 1, 1), 12)
    assert a != ModelSpec((0, 1, 1), (0, 1, 1), 12, mean=True, transform="log")


def test_boxcox_zero_is_log():
    # Box-Cox with lambda 0 is the log transform (Box & Cox 1964, JRSS B 26: the limit
    # (y^lambda - 1)/lambda -> ln y as lambda -> 0).
    assert ModelSpec(transform=("boxcox", 0)) == ModelSpec(transform="log")
    assert ModelSpec(transform="boxcox(0.0)").transform == "log"
    assert ModelSpec(transform=("boxcox", 0.5)) == ModelSpec(transform="boxcox(0.5)")
    assert ModelSpec(transform=("boxcox", 1)).transform == "boxcox(1.0)"
    assert ModelSpec(transform="none").transform is None


def test_properties_of_the_airline_model():
    spec = ModelSpec((0, 1, 1), (0, 1, 1), 12, transform="log")
    assert (spec.p, spec.d, spec.q, spec.P, spec.D, spec.Q, spec.m) == (0, 1, 1, 0, 1, 1, 12)
    assert spec.n_differences == 2
    assert spec.lost_to_differencing == 13  # d + m D = 1 + 12
    assert spec.n_coefficients == 2
    assert spec.boxcox_lambda == 0.0
    assert spec.minimum_length() == 13 + 2 + 3
    assert ModelSpec((2, 0, 1), (1, 0, 1), 4, mean=True).n_coefficients == 6
    assert ModelSpec(transform=("boxcox", -0.5)).boxcox_lambda == -0.5
    assert ModelSpec().boxcox_lambda is None
    assert ModelSpec().m == 1


def test_to_dict_and_with_period():
    spec = ModelSpec((1, 1, 0), mean=True, transform=("boxcox", 0.25))
    assert spec.to_dict() == {
        "text": "ARIMA(1,1,0) +mean +boxcox(0.25)",
        "order": [1, 1, 0],
        "seasonal": [0, 0, 0],
        "period": None,
        "mean": True,
        "transform": "boxcox(0.25)",
        "regressors": [],
        "exog": [],
    }
    seasonal = ModelSpec(seasonal=(0, 1, 1), period=12)
    assert seasonal.with_period(4) == ModelSpec(seasonal=(0, 1, 1), period=4)
    with pytest.raises(SpecError, match="need a period"):
        seasonal.with_period(None)


# ---------------------------------------------------------------------- text form


def test_text_form_of_known_specs():
    assert str(ModelSpec((0, 1, 1), (0, 1, 1), 12)) == "ARIMA(0,1,1)x(0,1,1)12"
    assert str(ModelSpec((1, 0, 0), mean=True)) == "ARIMA(1,0,0) +mean"
    assert str(ModelSpec((1, 0, 0), period=7)) == "ARIMA(1,0,0)x(0,0,0)7"
    assert str(ModelSpec((0, 1, 1), (0, 1, 1), 12, True, "log")) == (
        "ARIMA(0,1,1)x(0,1,1)12 +mean +log"
    )
    assert "[" not in str(ModelSpec((0, 1, 1), (0, 1, 1), 12))


def test_parse_accepts_spacing_and_case():
    spec = ModelSpec.parse("  arima( 0 , 1 , 1 ) X ( 0,1,1 ) 12   +MEAN   +Log ")
    assert spec == ModelSpec((0, 1, 1), (0, 1, 1), 12, mean=True, transform="log")
    assert ModelSpec.parse("ARIMA(1,0,0)+mean") == ModelSpec((1, 0, 0), mean=True)
    assert ModelSpec.parse("ARIMA(0,1,1) +boxcox(0)").transform == "log"
    assert ModelSpec.parse("ARIMA(0,1,1) +boxcox(-1.5e-1)").boxcox_lambda == -0.15


@pytest.mark.parametrize(
    ("text", "message"),
    [
        ("SARIMA(0,1,1)", r"Cannot read the model 'SARIMA\(0,1,1\)'. Write it as ARIMA\(p,d,q\)"),
        ("ARIMA(0,1)", r"Cannot read the model"),
        ("ARIMA(0,-1,1)", r"Cannot read the model"),
        ("", r"Cannot read the model ''"),
        ("ARIMA(0,1,1)x(0,1,1)", r"seasonal part .* has no period: write the period"),
        ("ARIMA(0,1,1)[12]", r"Unexpected '\[12\]'"),
        ("ARIMA(0,1,1) mean", r"Unexpected 'mean'"),
        ("ARIMA(0,1,1) +drift", r"Unknown marker '\+drift'.*known markers are \+mean"),
        ("ARIMA(0,1,1) +log +boxcox(0.5)", r"names more than one transform"),
        ("ARIMA(0,1,1)x(1,0,0)1", r"need a period of at least 2, got 1"),
        ("ARIMA(0,1,1) +boxcox(.)", r"Box-Cox lambda in 'boxcox\(.\)' is not a number"),
    ],
)
def test_parse_errors(text, message):
    with pytest.raises(SpecError, match=message):
        ModelSpec.parse(text)


def test_parse_rejects_non_text():
    with pytest.raises(SpecError, match="must be a string, got int"):
        ModelSpec.parse(12)  # type: ignore[arg-type]


_small = st.integers(min_value=0, max_value=4)
_transforms = st.one_of(
    st.none(),
    st.just("log"),
    st.tuples(st.just("boxcox"), st.floats(-5, 5, allow_nan=False, allow_infinity=False)),
    st.floats(-3, 3, allow_nan=False).map(lambda lam: f"boxcox({lam!r})"),
)


@st.composite
def specs(draw):
    order = (draw(_small), draw(_small), draw(_small))
    seasonal = (draw(_small), draw(st.integers(0, 2)), draw(_small))
    if any(seasonal):
        period = draw(st.integers(min_value=2, max_value=400))
    else:
        period = draw(st.one_of(st.none(), st.integers(min_value=1, max_value=400)))
    return ModelSpec(
        order=order,
        seasonal=seasonal,
        period=period,
        mean=draw(st.booleans()),
        transform=draw(_transforms),
    )


@given(specs())
def test_text_form_round_trips(spec):
    text = str(spec)
    assert ModelSpec.parse(text) == spec
    assert str(ModelSpec.parse(text)) == text
    assert spec.to_dict()["text"] == text
    assert ModelSpec(**{k: v for k, v in spec.to_dict().items() if k != "text"}) == spec
