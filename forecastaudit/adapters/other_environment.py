"""An estimator run inside another Python environment, in a subprocess.

:func:`environment_adapter` makes the adapter of one library (a built-in adapter key, e.g.
``statsmodels-sarimax``) in one environment made by ``forecastaudit environment create``
(:mod:`forecastaudit.environments`). Its key is ``<library>@<environment>``; its engine is
the library's own (another version of one engine is not independent evidence); its version
is the one installed in the environment, and every estimate's ``provenance`` carries that
environment's interpreter and package versions.

The fit runs in the environment's interpreter, started in isolated mode on the stand-alone
worker :mod:`forecastaudit.adapters.environment_worker` (run by path; it needs only numpy and
the library), which keeps the library's fitted object and answers fit, forecast and
likelihood requests as JSON lines. The worker returns the library's native values; they are
turned into the canonical convention here, by the same code as the built-in adapter, so the
two columns differ only by what the two library versions do. The subprocess ends with the
adapter instance.
"""

from __future__ import annotations

import json
import subprocess
import warnings
import weakref
from pathlib import Path
from types import SimpleNamespace
from typing import Any, ClassVar

import numpy as np

from forecastaudit.adapters import _statespace
from forecastaudit.adapters.protocol import (
    Capabilities,
    EstimatorAdapter,
    FitOutput,
    FitRequest,
    ForecastOutput,
)
from forecastaudit.errors import EnvironmentSetupError, EstimatorError
from forecastaudit.estimate import Estimate
from forecastaudit.spec import ModelSpec

__all__ = ["SUPPORTED", "EnvironmentAdapter", "environment_adapter"]

#: Built-in adapter keys the worker can run in another environment, with their package.
SUPPORTED: dict[str, str] = {
    "statsmodels-sarimax": "statsmodels",
    "statsforecast": "statsforecast",
}

WORKER = Path(__file__).with_name("environment_worker.py")
_PREFIX = "InEnvironment_"
_CLASSES: dict[str, type] = {}


class _Session:
    """One worker subprocess in one environment."""

    def __init__(self, interpreter: Path, environment: str) -> None:
        self.environment = environment
        try:
            self.process = subprocess.Popen(
                [str(interpreter), "-I", str(WORKER)],
                stdin=subprocess.PIPE,
                stdout=subprocess.PIPE,
                stderr=subprocess.PIPE,
                text=True,
                bufsize=1,
            )
        except OSError as exc:
            raise EnvironmentSetupError(
                f"The interpreter of the environment {environment} ({interpreter}) could not "
                f"start: {exc}. Create the environment again."
            ) from exc
        self._finalizer = weakref.finalize(self, _stop, self.process)

    def call(self, message: dict[str, Any]) -> dict[str, Any]:
        """Send one request and read its answer; re-raise the library's warnings here."""
        process = self.process
        assert process.stdin is not None and process.stdout is not None
        try:
            process.stdin.write(json.dumps(message, allow_nan=False) + "\n")
            process.stdin.flush()
            line = process.stdout.readline()
        except (BrokenPipeError, OSError):
            line = ""
        if not line:
            error = process.stderr.read() if process.stderr is not None else ""
            raise RuntimeError(
                f"the worker in the environment {self.environment} stopped without answering"
                + (f": {error.strip()[-2000:]}" if error.strip() else "")
            )
        answer = json.loads(line)
        for item in answer.get("warnings", []):
            category = type(str(item["category"]), (UserWarning,), {})
            filename, _, lineno = str(item.get("source", "")).rpartition(":")
            warnings.warn_explicit(
                str(item["message"]),
                category,
                filename or "environment",
                int(lineno) if lineno.isdigit() else 0,
            )
        if answer.get("output"):
            print(answer["output"])
        if not answer.get("ok"):
            raise RuntimeError(
                f"{answer.get('error', 'unknown error')} (in the environment {self.environment})"
            )
        return answer

    def close(self) -> None:
        self._finalizer()


def _stop(process: subprocess.Popen) -> None:
    try:
        if process.stdin is not None and process.poll() is None:
            process.stdin.write('{"op": "close"}\n')
            process.stdin.flush()
            process.stdin.close()
        process.wait(timeout=5)
    except Exception:  # a worker that does not stop when asked is stopped
        process.kill()


class _Fitted:
    """Where a fitted object lives: its worker session and its id there."""

    def __init__(self, session: _Session, fit_id: str, residuals: np.ndarray) -> None:
        self.session = session
        self.fit_id = fit_id
        self.residuals = residuals


def _real(value: Any) -> float:
    if value is None:
        return float("nan")
    if value in ("inf", "-inf"):
        return float(value)
    return float(value)


def sarimax_parameter_names(spec: ModelSpec) -> list[str]:
    """statsmodels SARIMAX's parameter names for ``spec`` (``trend='c'`` with a mean), in
    its order; the worker checks them against the model it builds."""
    names = ["intercept"] if spec.mean else []
    names += [f"ar.L{i}" for i in range(1, spec.p + 1)]
    names += [f"ar.S.L{spec.m * i}" for i in range(1, spec.P + 1)]
    names += [f"ma.L{i}" for i in range(1, spec.q + 1)]
    names += [f"ma.S.L{spec.m * i}" for i in range(1, spec.Q + 1)]
    return [*names, "sigma2"]


class EnvironmentAdapter(EstimatorAdapter):
    """Base class of the adapters made by :func:`environment_adapter` (not registered)."""

    environment_name: ClassVar[str]
    library: ClassVar[str]
    folder: ClassVar[str | None] = None
    module = "forecastaudit.adapters.environment_worker"

    def __init__(self) -> None:
        self._session: _Session | None = None

    # ------------------------------------------------------------------ where it runs
    def _environment(self) -> Any:
        from forecastaudit.environments import get_environment

        # Its description only: the interpreter is checked by availability() before each
        # fit (and started by an audit that names the environment, before it fits).
        return get_environment(self.environment_name, self.folder, check=False)

    def version(self) -> str | None:
        """The library's version in the environment (None when it is not there)."""
        try:
            return self._environment().version_of(self.package)
        except EnvironmentSetupError:
            return None

    def availability(self) -> str | None:
        """None when the environment exists, its interpreter is an executable file and it
        holds the library; otherwise why not, and how to fix it."""
        from forecastaudit.environments import interpreter_problem

        try:
            environment = self._environment()
        except EnvironmentSetupError as exc:
            return str(exc)
        # Not started here (this is asked before every fit); a worker already running is
        # proof enough, and one that cannot start says so when it is started.
        problem = None if self._session is not None else interpreter_problem(environment, run=False)
        if problem is not None:
            return f"the environment {self.environment_name} is broken: {problem}"
        if environment.version_of(self.package) is None:
            return f"{self.package} is not installed in the environment {self.environment_name}"
        return None

    def provenance(self) -> dict[str, Any]:
        """The environment's interpreter and package versions, for each estimate."""
        try:
            environment = self._environment()
        except EnvironmentSetupError as exc:
            return {
                "origin": "environment",
                "environment": self.environment_name,
                "problem": str(exc),
            }
        return {
            "origin": "environment",
            "environment": environment.name,
            "path": str(environment.path),
            "python": environment.python,
            "packages": {
                name: environment.version_of(name)
                for name in ("numpy", "scipy", "pandas", self.package)
                if environment.version_of(name) is not None
            },
            "requested": list(environment.requested),
            "created": environment.created,
        }

    def _worker(self) -> _Session:
        if self._session is None:
            self._session = _Session(self._environment().interpreter, self.environment_name)
        return self._session

    def fit(self, y: np.ndarray | FitRequest, spec: ModelSpec | None = None) -> Estimate:
        """As :meth:`EstimatorAdapter.fit`, with the estimate marked as made elsewhere."""
        estimate = super().fit(y, spec)
        estimate.origin = "environment"
        estimate.provenance = self.provenance()
        return estimate

    # ------------------------------------------------------------------ the library
    def _message(self, request: FitRequest) -> dict[str, Any]:
        spec = request.spec
        return {
            "library": self.library,
            "y": [float(v) for v in request.y],
            "order": list(spec.order),
            "seasonal": list(spec.seasonal),
            "period": spec.period,
            "mean": spec.mean,
        }

    def _fit(self, request: FitRequest) -> FitOutput:
        session = self._worker()
        answer = session.call({"op": "fit", **self._message(request)})
        if self.library == "statsforecast":
            out = self._statsforecast_fit(request, session, answer)
        else:
            out = self._statsmodels_fit(request, session, answer)
        out.notes.append(
            f"Fitted in the environment {self.environment_name} with {self.package} "
            f"{self.version()}."
        )
        return out

    def _statsmodels_fit(
        self, request: FitRequest, session: _Session, answer: dict[str, Any]
    ) -> FitOutput:
        # The worker's native values, in the shape the built-in adapter's translation reads.
        init = answer.get("approximate_diffuse_variance")
        result = SimpleNamespace(
            model=SimpleNamespace(
                param_names=list(answer["param_names"]),
                simple_differencing=answer["simple_differencing"],
                use_exact_diffuse=answer["use_exact_diffuse"],
                ssm=SimpleNamespace(
                    initialization=SimpleNamespace(approximate_diffuse_variance=init),
                    _initialization=answer.get("initialization"),
                ),
                _get_init_kwds=lambda: dict(answer["init_kwds"]),
            ),
            params=np.array([_real(v) for v in answer["params"]]),
            scale=_real(answer["scale"]),
            llf=_real(answer["llf"]),
            nobs_effective=answer["nobs_effective"],
            df_model=answer["df_model"],
            aic=_real(answer["aic"]),
            aicc=_real(answer["aicc"]),
            bic=_real(answer["bic"]),
            loglikelihood_burn=answer["loglikelihood_burn"],
            mle_retvals=answer["mle_retvals"],
            mle_settings=answer["mle_settings"],
        )
        residuals = np.array([_real(v) for v in answer["resid"]])
        return _statespace.to_fit_output(
            result,
            request.spec,
            "intercept",
            options={"environment": {"name": self.environment_name}},
            native=_Fitted(session, str(answer["fit"]), residuals),
        )

    def _statsforecast_fit(
        self, request: FitRequest, session: _Session, answer: dict[str, Any]
    ) -> FitOutput:
        from forecastaudit.adapters.statsforecast_arima import fit_output

        raw = answer["model_"]
        fit = {
            **{k: _real(raw[k]) for k in ("sigma2", "loglik", "aic", "aicc", "bic")},
            "coef": {str(k): _real(v) for k, v in raw["coef"].items()},
            "mask": [bool(v) for v in raw["mask"]],
            "nobs": int(raw["nobs"]),
            "code": int(raw["code"]),
        }
        residuals = np.array([_real(v) for v in answer["residuals"]])
        out = fit_output(
            fit,
            dict(answer["options"]),
            request.spec,
            native=_Fitted(session, str(answer["fit"]), residuals),
        )
        out.options = {"environment": {"name": self.environment_name}, **out.options}
        return out

    def _forecast(self, native: _Fitted, steps: int, levels: tuple[float, ...]) -> ForecastOutput:
        answer = native.session.call(
            {
                "op": "forecast",
                "library": self.library,
                "fit": native.fit_id,
                "steps": steps,
                "levels": list(levels),
            }
        )

        def array(values: list[Any]) -> np.ndarray:
            return np.array([_real(v) for v in values])

        if self.library == "statsforecast":
            from forecastaudit.adapters.statsforecast_arima import forecast_output

            out = {k: array(v) for k, v in answer["out"].items()}
            return forecast_output(out, levels, _real(answer["sigma2"]), native.residuals)
        return ForecastOutput(
            mean=array(answer["mean"]),
            lower={float(k): array(v) for k, v in answer["lower"].items()},
            upper={float(k): array(v) for k, v in answer["upper"].items()},
            se=array(answer["se"]),
            interval_method=_statespace.INTERVAL_METHOD,
            sigma2_used=_real(answer["sigma2_used"]),
            residuals=native.residuals,
        )

    def _loglike_at(self, request: FitRequest, params: dict[str, float]) -> float:
        if self.library == "statsforecast":
            from forecastaudit.adapters.statsforecast_arima import _native_coefficients

            points: dict[str, Any] = {"fixed": [_native_coefficients(request.spec, params)]}
        else:
            names = sarimax_parameter_names(request.spec)
            vector = _statespace.native_vector(names, request.spec, params)
            points = {"names": names, "vectors": [vector.tolist()]}
        answer = self._worker().call({"op": "loglike", **self._message(request), **points})
        return _real(answer["values"][0])


def _encode(library: str, environment: str, folder: str | None) -> str:
    return _PREFIX + json.dumps([library, environment, folder]).encode().hex()


def environment_adapter(
    environment: str, library: str = "statsmodels-sarimax", folder: str | None = None
) -> type[EnvironmentAdapter]:
    """The adapter class of ``library`` run inside ``environment``.

    The class is importable by its name from this module (worker processes of the audit
    rebuild it from the name), so it can be sent to them like any adapter class.

    The environments folder is fixed when the class is made (``folder``, else
    ``$FORECASTAUDIT_ENVIRONMENTS`` or the default at that moment), so worker processes
    started before the variable was set still look in the same folder.

    Raises
    ------
    EstimatorError
        When ``library`` cannot be run in another environment.
    """
    from forecastaudit.environments import environments_folder

    folder = str(environments_folder(folder))
    if library not in SUPPORTED:
        raise EstimatorError(
            f"{library!r} cannot run in another environment yet; those that can: "
            f"{', '.join(SUPPORTED)}."
        )
    qualname = _encode(library, environment, folder)
    if qualname in _CLASSES:
        return _CLASSES[qualname]  # type: ignore[return-value]
    from forecastaudit.adapters.registry import adapter_class

    base = adapter_class(library)
    cls = type(
        qualname,
        (EnvironmentAdapter,),
        {
            "__module__": __name__,
            "__qualname__": qualname,
            "__doc__": f"{base.description} in the environment {environment}.",
            "key": f"{library}@{environment}",
            "engine": base.engine,
            "package": SUPPORTED[library],
            "description": f"{base.description} in the environment {environment}",
            "capabilities": Capabilities(
                mean_differences=base.capabilities.mean_differences,
                forecast=True,
                own_loglike=True,
            ),
            "environment_name": environment,
            "library": library,
            "folder": folder,
        },
    )
    _CLASSES[qualname] = cls
    return cls  # type: ignore[return-value]


def __getattr__(name: str) -> Any:
    """Rebuild an adapter class from its name (how pickle finds it in a worker process)."""
    if name.startswith(_PREFIX):
        try:
            library, environment, folder = json.loads(bytes.fromhex(name[len(_PREFIX) :]))
        except ValueError:
            raise AttributeError(name) from None
        return environment_adapter(environment, library, folder)
    raise AttributeError(name)
