"""The reference likelihood: forecastaudit's own exact Gaussian likelihood and fit.

Every estimate, whichever library produced it, is re-scored here on one definition: the
exact Gaussian log-likelihood of the differenced series ``w = (1-B)^d (1-B^m)^D y`` under the
canonical model (see :mod:`forecastaudit.conventions`)::

    phi(B) Phi(B^m) (w_t - mu) = theta(B) Theta(B^m) e_t,     e_t ~ N(0, sigma2),

with the ``2 pi`` constant included and ``n_w = n - d - mD`` observations. The code is
written from the definition and the published algorithms cited in each function; no
estimator's filter is called. One published method per function:

* :func:`arma_autocovariances` -- Brockwell & Davis, the "third method".
* :func:`gaussian_loglike` -- dense Cholesky of the Toeplitz covariance, or the banded
  covariance after Ansley's (1979) AR transformation, both exact.
* :func:`log_jacobian` -- the change of variables from the transformed to the original scale.
* :func:`pacf_to_ar` / :func:`ar_to_pacf` -- Durbin-Levinson recursion and its inverse, the
  partial-autocorrelation parameterisation of Barndorff-Nielsen & Schou (1973), Jones
  (1980) and Monahan (1984).
* :func:`fit_reference` -- maximum of the profiled likelihood from several starts, one of
  them our own conditional-least-squares fit; standard errors from a central-difference
  Hessian.
* :func:`profile_line` / :func:`profile_grid` -- the likelihood along a line and on a grid.

One published method per module: :mod:`.likelihood` (autocovariances, the exact likelihood
by two paths, the Jacobian of a transform), :mod:`.parameterisation` (partial
autocorrelations), :mod:`.fit` (the multi-start fit and standard errors), :mod:`.profiles`
and :mod:`.predictor` (the best linear predictor and its forecasts).
"""

from forecastaudit.reference.fit import (
    CLS_LABEL,
    ReferenceFit,
    StartResult,
    conditional_least_squares,
    fit_reference,
)
from forecastaudit.reference.likelihood import (
    DENSE_THRESHOLD,
    ReferenceLikelihood,
    arma_autocovariances,
    evaluate,
    gaussian_loglike,
    log_jacobian,
)
from forecastaudit.reference.parameterisation import (
    ar_to_pacf,
    from_unconstrained,
    pacf_to_ar,
    pacf_to_unconstrained,
    pull_inside,
    to_unconstrained,
    unconstrained_to_pacf,
)
from forecastaudit.reference.predictor import (
    FORECAST_CONDITION_MAX,
    ReferenceForecast,
    best_linear_forecast,
)
from forecastaudit.reference.profiles import profile_grid, profile_line

__all__ = [
    "CLS_LABEL",
    "DENSE_THRESHOLD",
    "FORECAST_CONDITION_MAX",
    "ReferenceFit",
    "ReferenceForecast",
    "ReferenceLikelihood",
    "StartResult",
    "ar_to_pacf",
    "arma_autocovariances",
    "best_linear_forecast",
    "conditional_least_squares",
    "evaluate",
    "fit_reference",
    "from_unconstrained",
    "gaussian_loglike",
    "log_jacobian",
    "pacf_to_ar",
    "pacf_to_unconstrained",
    "profile_grid",
    "profile_line",
    "pull_inside",
    "to_unconstrained",
    "unconstrained_to_pacf",
]
