"""The parameter layout: names, factor blocks, vector forms, polynomials, roots and regions.

Expected values are multiplied out or solved by hand beside each check; the stationarity
and invertibility cases are closed forms (the root of ``1 - a B`` is ``1 / a``).
"""

from __future__ import annotations

import ast
import itertools
import math
import re
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from forecastaudit import ModelSpec
from forecastaudit.conventions import (
    ar_polynomial,
    coefficient_names,
    ma_polynomial,
    parameter_names,
    polynomial_roots_modulus,
)
from forecastaudit.layout import (
    BLOCKS,
    Factor,
    ParameterLayout,
    is_stationary_polynomial,
    lag_polynomial_root_moduli,
    lag_polynomial_roots,
    layout_of,
    polynomial_roots,
)

SEASONAL_WITH_MEAN = ModelSpec((2, 1, 1), (1, 1, 1), 12, mean=True)


# ---------------------------------------------------------------------- names and factors
def test_names_and_order_of_a_seasonal_model_with_a_mean():
    layout = layout_of(SEASONAL_WITH_MEAN)
    # Vector order: regular AR, seasonal AR, regular MA, seasonal MA, mu (the order the
    # adapters, the records and tests/test_conventions.py use).
    expected = ("ar_lag1", "ar_lag2", "sar_lag12", "ma_lag1", "sma_lag12", "mu")
    assert layout.coefficient_names == expected
    assert layout.parameter_names == (*expected, "sigma2")
    assert layout.n_coefficients == SEASONAL_WITH_MEAN.n_coefficients == 6
    # The public functions of conventions are the same names, as lists.
    assert coefficient_names(SEASONAL_WITH_MEAN) == list(expected)
    assert parameter_names(SEASONAL_WITH_MEAN) == [*expected, "sigma2"]


def test_second_seasonal_term_is_written_as_its_lag():
    layout = layout_of(ModelSpec((0, 0, 0), (2, 0, 2), 4))
    assert layout.factor("sar").names == ("sar_lag4", "sar_lag8")
    assert layout.factor("sma").lags == (4, 8)


def test_regressor_block_follows_mu():
    layout = ParameterLayout(SEASONAL_WITH_MEAN, regressors=("price", "promotion"))
    assert layout.coefficient_names[-3:] == ("mu", "x_price", "x_promotion")
    assert layout.parameter_names[-1] == "sigma2"
    assert layout.block_names["x"] == ("x_price", "x_promotion")
    assert layout_of(SEASONAL_WITH_MEAN).regressors == ()
    with pytest.raises(TypeError, match="single string"):
        ParameterLayout(SEASONAL_WITH_MEAN, regressors="price")  # type: ignore[arg-type]


def test_factor_signs_steps_and_words():
    layout = layout_of(SEASONAL_WITH_MEAN)
    assert [f.key for f in layout.factors] == ["ar", "sar", "ma", "sma"]
    ar, sar, ma, sma = layout.factors
    assert ar == Factor("ar", False, ("ar_lag1", "ar_lag2"), 1, -1)
    assert sar == Factor("ar", True, ("sar_lag12",), 12, -1)
    assert ma == Factor("ma", False, ("ma_lag1",), 1, 1)
    assert sma == Factor("ma", True, ("sma_lag12",), 12, 1)
    assert (ar.description, ar.region) == ("regular AR", "stationary")
    assert (sma.description, sma.region) == ("seasonal MA", "invertible")
    assert layout.ar_factors == (ar, sar) and layout.ma_factors == (ma, sma)
    assert (layout.ar_degree, layout.ma_degree) == (2 + 12, 1 + 12)
    # AR form: an AR factor's values as they are, an MA factor's negated.
    np.testing.assert_array_equal(ar.ar_form([0.5, 0.2]), [0.5, 0.2])
    np.testing.assert_array_equal(ma.ar_form([0.5]), [-0.5])
    # 1 - 0.3 B^12 and 1 + 0.4 B^12 in their own variable and in B.
    np.testing.assert_array_equal(sar.reduced_polynomial([0.3]), [1.0, -0.3])
    expected = np.zeros(13)
    expected[[0, 12]] = [1.0, 0.4]
    np.testing.assert_array_equal(sma.lag_polynomial([0.4]), expected)
    with pytest.raises(KeyError, match="'ar', 'sar', 'ma' and 'sma'"):
        layout.factor("seasonal")


def test_no_terms_gives_empty_factors():
    layout = layout_of(ModelSpec())
    assert layout.coefficient_names == ()
    assert layout.parameter_names == ("sigma2",)
    assert all(f.order == 0 for f in layout.factors)
    np.testing.assert_array_equal(layout.ar_polynomial({}), [1.0])
    assert layout.is_stationary({}) and layout.is_invertible({})
    assert layout.min_root_modulus({}) == dict.fromkeys(("ar", "sar", "ma", "sma"), math.inf)


def test_layouts_are_built_once_and_read_only():
    assert layout_of(SEASONAL_WITH_MEAN) is layout_of(ModelSpec.parse(str(SEASONAL_WITH_MEAN)))
    layout = layout_of(SEASONAL_WITH_MEAN)
    with pytest.raises(TypeError):
        layout.block_names["mu"] = ()  # type: ignore[index]
    with pytest.raises(AttributeError):
        layout.coefficient_names = ()  # type: ignore[misc]


# ---------------------------------------------------------------------- blocks and vectors
@st.composite
def specs_and_params(draw: st.DrawFn) -> tuple[ModelSpec, dict[str, float]]:
    p, q, big_p, big_q = (draw(st.integers(0, 2)) for _ in range(4))
    period = draw(st.sampled_from([2, 4, 12]))
    spec = ModelSpec(
        (p, draw(st.integers(0, 1)), q), (big_p, 0, big_q), period, mean=draw(st.booleans())
    )
    value = st.floats(-5.0, 5.0, allow_nan=False)
    params = {name: draw(value) for name in layout_of(spec).coefficient_names}
    params["sigma2"] = draw(st.floats(1e-6, 1e3))
    return spec, params


@settings(max_examples=150, deadline=None)
@given(specs_and_params())
def test_split_join_and_vector_round_trips(case: tuple[ModelSpec, dict[str, float]]):
    spec, params = case
    layout = layout_of(spec)
    blocks = layout.split(params)
    assert list(blocks) == [*BLOCKS, "sigma2"]
    for factor in layout.factors:
        np.testing.assert_array_equal(blocks[factor.key], [params[n] for n in factor.names])
    assert blocks["mu"].size == int(spec.mean) and blocks["x"].size == 0
    joined = layout.join(blocks)
    assert list(joined) == list(layout.parameter_names)
    assert joined == params
    vector = layout.to_vector(params)
    assert vector.shape == (layout.n_coefficients,)
    assert layout.from_vector(vector) == {n: params[n] for n in layout.coefficient_names}
    full = layout.to_vector(params, include_sigma2=True)
    assert layout.from_vector(full, include_sigma2=True) == joined
    # Without sigma2 the split has no sigma2 block, and the join none either.
    coefficients_only = {n: params[n] for n in layout.coefficient_names}
    assert "sigma2" not in layout.split(coefficients_only)
    assert layout.join(layout.split(coefficients_only)) == coefficients_only


def test_join_and_vectors_name_what_is_wrong():
    layout = layout_of(SEASONAL_WITH_MEAN)
    blocks = layout.split(dict.fromkeys(layout.parameter_names, 0.1))
    with pytest.raises(ValueError, match=r"Block 'ar' .* needs 2 values"):
        layout.join({**blocks, "ar": [0.1]})
    with pytest.raises(ValueError, match="Unknown blocks"):
        layout.join({**blocks, "trend": [1.0]})
    with pytest.raises(ValueError, match=r"'sma' \(sma_lag12\) is missing"):
        layout.join({k: v for k, v in blocks.items() if k != "sma"})
    with pytest.raises(ValueError, match="got 2"):
        layout.from_vector([0.1, 0.2])
    with pytest.raises(KeyError, match="sma_lag12"):
        layout.split({"ar_lag1": 0.1})
    with pytest.raises(KeyError):
        layout.to_vector({"ar_lag1": 0.1})


# ---------------------------------------------------------------------- polynomials
def test_expanded_ar_polynomial_hand_multiplied():
    # (1 - 0.5B)(1 - 0.3B^12) = 1 - 0.5B - 0.3B^12 + 0.15B^13   (multiplied out by hand)
    layout = layout_of(ModelSpec((1, 0, 0), (1, 0, 0), 12))
    params = {"ar_lag1": 0.5, "sar_lag12": 0.3}
    expected = np.zeros(14)
    expected[[0, 1, 12, 13]] = [1.0, -0.5, -0.3, 0.15]
    np.testing.assert_allclose(layout.ar_polynomial(params), expected, atol=1e-15)
    np.testing.assert_array_equal(layout.ar_polynomial(params), ar_polynomial(layout.spec, params))
    a, b = layout.expanded_coefficients(params)
    np.testing.assert_allclose(a, -expected[1:], atol=1e-15)
    np.testing.assert_array_equal(b, [])
    factors = layout.factor_polynomials(params)
    np.testing.assert_array_equal(factors["ar"], [1.0, -0.5])
    assert factors["sar"].size == 13 and factors["sar"][12] == -0.3


def test_expanded_ma_polynomial_hand_multiplied():
    # (1 + 0.4B)(1 - 0.6B^4) = 1 + 0.4B - 0.6B^4 - 0.24B^5   (multiplied out by hand)
    layout = layout_of(ModelSpec((0, 0, 1), (0, 0, 1), 4))
    params = {"ma_lag1": 0.4, "sma_lag4": -0.6}
    expected = [1.0, 0.4, 0.0, 0.0, -0.6, -0.24]
    np.testing.assert_allclose(layout.ma_polynomial(params), expected, atol=1e-15)
    np.testing.assert_array_equal(layout.ma_polynomial(params), ma_polynomial(layout.spec, params))


# ---------------------------------------------------------------------- roots
def test_subnormal_trailing_coefficient_gives_modulus_two_everywhere():
    # 1 - 0.5 B - 1e-310 B^2: the subnormal term is zero for every purpose, root B = 2.
    # numpy.roots on the untrimmed polynomial divides by 1e-310 and raises LinAlgError.
    from forecastaudit.diagnosis.diagnose import diagnose
    from forecastaudit.diagnosis.tolerances import Tolerances
    from forecastaudit.estimate import Estimate
    from forecastaudit.reference.likelihood import evaluate
    from forecastaudit.reference.parameterisation import pull_inside, to_unconstrained

    spec = ModelSpec((2, 0, 0))
    params = {"ar_lag1": 0.5, "ar_lag2": 1e-310, "sigma2": 1.0}
    layout = layout_of(spec)
    np.testing.assert_allclose(np.abs(layout.roots(params)["ar"]), [2.0])
    np.testing.assert_allclose(layout.root_moduli(params)["ar"], [2.0])
    assert layout.min_root_modulus(params)["ar"] == pytest.approx(2.0)
    np.testing.assert_allclose(np.abs(polynomial_roots(spec, params)["ar"]), [2.0])
    np.testing.assert_allclose(polynomial_roots_modulus(ar_polynomial(spec, params)), [2.0])
    np.testing.assert_allclose(lag_polynomial_root_moduli([1.0, -0.5, -1e-310]), [2.0])
    assert layout.is_stationary(params)
    # The same for an MA factor.
    ma_spec = ModelSpec((0, 0, 2))
    ma_params = {"ma_lag1": -0.5, "ma_lag2": 1e-310, "sigma2": 1.0}
    assert layout_of(ma_spec).min_root_modulus(ma_params)["ma"] == pytest.approx(2.0)
    assert layout_of(ma_spec).is_invertible(ma_params)
    # And through every user of the roots: none raises.
    cases = [  # spec, params, the same with the factor outside its region, factor key
        (spec, params, {**params, "ar_lag1": 1.5}, "ar"),
        (ma_spec, ma_params, {**ma_params, "ma_lag1": -1.5}, "ma"),
    ]
    for case_spec, case_params, outside, key in cases:
        moved, flag = pull_inside(case_spec, outside)
        assert flag and layout_of(case_spec).min_root_modulus(moved)[key] > 1.0
        assert np.all(np.isfinite(to_unconstrained(case_spec, case_params)))
        assert math.isfinite(evaluate(np.sin(np.arange(40.0)), case_spec, case_params).loglike)
        reference = Estimate(
            "reference", "r", "r", "0", "ok", spec=case_spec, params=case_params, n_w=40, k=3
        )
        errors = dict.fromkeys(case_params, 0.1)
        findings = diagnose(case_spec, {}, {}, reference, errors, Tolerances())
        assert not [f for f in findings if f.kind == "near-boundary"]


def test_root_routine_never_raises():
    assert lag_polynomial_roots([1.0]).size == 0
    assert lag_polynomial_roots([]).size == 0
    assert lag_polynomial_roots([0.0, 0.0]).size == 0
    # A coefficient below machine epsilon relative to the largest is dropped.
    np.testing.assert_allclose(lag_polynomial_root_moduli([1.0, -0.5, 1e-17]), [2.0])
    # Non-finite coefficients: NaN roots, one per nominal degree, no exception.
    assert np.all(np.isnan(lag_polynomial_roots([1.0, math.nan, 0.2])))
    assert lag_polynomial_roots([1.0, math.inf]).size == 1
    layout = layout_of(ModelSpec((1, 0, 0)))
    assert math.isnan(layout.min_root_modulus({"ar_lag1": math.nan})["ar"])
    assert not layout.is_stationary({"ar_lag1": math.nan})


def test_roots_are_in_each_factors_own_variable():
    # 1 - 0.25 B^2 (regular, order 2): roots +-2. 1 + 0.25 B^12 in B^12: root -4.
    layout = layout_of(ModelSpec((2, 0, 0), (0, 0, 1), 12))
    roots = layout.roots({"ar_lag1": 0.0, "ar_lag2": 0.25, "sma_lag12": 0.25})
    np.testing.assert_allclose(np.sort(roots["ar"].real), [-2.0, 2.0])
    np.testing.assert_allclose(roots["sma"], [-4.0])
    assert roots["sar"].size == 0 and roots["ma"].size == 0


# ---------------------------------------------------------------------- regions
def test_stationarity_of_known_cases():
    layout = layout_of(ModelSpec((1, 0, 0)))
    assert layout.is_stationary({"ar_lag1": 0.5})  # root 2
    assert not layout.is_stationary({"ar_lag1": 1.2})  # root 1/1.2, inside the circle
    assert not layout.is_stationary({"ar_lag1": 1.0})  # unit root
    assert layout.min_root_modulus({"ar_lag1": 0.5})["ar"] == pytest.approx(2.0)
    seasonal = layout_of(ModelSpec((0, 0, 0), (1, 0, 0), 12))
    assert not seasonal.is_stationary({"sar_lag12": -1.0})


def test_invertibility_of_known_cases():
    layout = layout_of(ModelSpec((0, 0, 1)))
    # 1 - B: root exactly on the unit circle, not invertible.
    assert not layout.is_invertible({"ma_lag1": -1.0})
    assert layout.min_root_modulus({"ma_lag1": -1.0})["ma"] == pytest.approx(1.0)
    assert layout.is_invertible({"ma_lag1": -0.5})  # root 2
    assert layout.is_stationary({"ma_lag1": -1.0})  # an MA model has no AR factor to fail


@settings(max_examples=200, deadline=None)
@given(st.lists(st.floats(-1.5, 1.5, allow_nan=False), min_size=1, max_size=12))
def test_step_down_test_agrees_with_root_moduli(ar: list[float]):
    # Away from the unit circle, the step-down test and the roots give one answer.
    moduli = lag_polynomial_root_moduli([1.0, *(-a for a in ar)])
    if moduli.size and abs(float(np.min(moduli)) - 1.0) < 1e-6:
        return
    assert is_stationary_polynomial(ar) == bool(np.all(moduli > 1.0))


# ---------------------------------------------------------------------- one owner
# Files allowed to build canonical names from pieces: the layout, and the adapters, where
# each library's native names are mapped to canonical ones and back.
ALLOWED = ("forecastaudit/layout.py", "forecastaudit/adapters/")
_ROOT = Path(__file__).resolve().parents[1]
# A text piece that ends like this, directly before a formatted value, starts a name.
_NAME_PIECE = re.compile(r"(_lag|(?<![A-Za-z0-9_])x_)$")


def _name_building(tree: ast.AST) -> list[int]:
    """Lines that build ``ar_lag1``-style or ``x_<column>`` names from pieces."""
    hits = []
    for node in ast.walk(tree):
        if isinstance(node, ast.JoinedStr):  # f"ar_lag{i}", f"{prefix}_lag{i}", f"x_{c}"
            parts = node.values
            for before, after in itertools.pairwise(parts):
                text_before = before.value if isinstance(before, ast.Constant) else None
                text_after = after.value if isinstance(after, ast.Constant) else None
                if isinstance(text_before, str) and isinstance(after, ast.FormattedValue):
                    if _NAME_PIECE.search(text_before):
                        hits.append(node.lineno)
                if isinstance(text_after, str) and isinstance(before, ast.FormattedValue):
                    if text_after.startswith("_lag"):
                        hits.append(node.lineno)
        elif isinstance(node, ast.BinOp) and isinstance(node.op, ast.Add | ast.Mod):
            # "ar_lag" + str(i), "ar_lag%d" % i
            left = node.left
            if isinstance(left, ast.Constant) and isinstance(left.value, str):
                if _NAME_PIECE.search(left.value) or "_lag%" in left.value:
                    hits.append(node.lineno)
        elif isinstance(node, ast.Call) and isinstance(node.func, ast.Attribute):
            target = node.func.value
            if node.func.attr == "format" and isinstance(target, ast.Constant):
                if "_lag{" in str(target.value) or str(target.value).startswith("x_{"):
                    hits.append(node.lineno)
            if node.func.attr in ("startswith", "endswith") and node.args:
                # Walking names by their text ("k.startswith('ar_lag')") is the same
                # knowledge written again.
                text = ast.unparse(node.args[0])
                if "_lag" in text:
                    hits.append(node.lineno)
    return sorted(set(hits))


def test_only_the_layout_builds_canonical_names():
    offenders = []
    for path in sorted((_ROOT / "forecastaudit").rglob("*.py")):
        relative = path.relative_to(_ROOT).as_posix()
        if relative.startswith(ALLOWED):
            continue
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=relative)
        offenders += [f"{relative}:{line}" for line in _name_building(tree)]
    assert not offenders, (
        "Canonical names are built outside forecastaudit/layout.py; ask layout_of(spec) for "
        f"them instead: {offenders}"
    )


def test_the_name_check_finds_what_it_looks_for():
    sources = [
        'names = [f"ar_lag{i}" for i in range(3)]',
        'name = f"{prefix}_lag{lag}"',
        'name = f"x_{column}"',
        'name = "sma_lag" + str(12)',
        'name = "ma_lag%d" % 1',
        'name = "ar_lag{}".format(1)',
        'found = [k for k in params if k.startswith(f"{prefix}_lag")]',
    ]
    for source in sources:
        assert _name_building(ast.parse(source)), source
    fine = ['"""Coefficients sar_lag{m} in prose."""', 'x = f"max_{n}"', 'y = f"lag {i}"']
    for source in fine:
        assert not _name_building(ast.parse(source)), source
