"""The one registry of fit and search adapters, built-in and third-party.

Adapters are registered under ``(kind, key)``: ``kind`` is ``"fit"`` for estimator adapters
and ``"search"`` for automatic order searches (a library may offer both under one key).
The built-in adapters are imported on first use. Third-party adapters join through the
entry-point group :data:`ENTRY_POINT_GROUP` of their distribution, e.g. in ``pyproject.toml``::

    [project.entry-points."forecastaudit.adapters"]
    inhouse = "inhouse_forecasting.audit_adapter"      # a module whose import registers
    inhouse-kalman = "inhouse_forecasting.audit:KalmanAdapter"   # or an adapter class

A key registered twice by two different classes is refused with an error naming both; an
entry point that cannot be loaded is kept as a problem (see :func:`load_problems`) and the
other adapters stay usable.
"""

from __future__ import annotations

import importlib
import importlib.metadata
from typing import Any, Literal, TypeVar

from forecastaudit.errors import EstimatorError

__all__ = [
    "ENTRY_POINT_GROUP",
    "adapter_class",
    "adapter_packages",
    "available_estimators",
    "available_searches",
    "get_adapter",
    "get_search",
    "load_problems",
    "refresh",
    "register",
    "register_estimator",
    "register_search",
    "register_transient",
]

#: The entry-point group third-party distributions use to add adapters.
ENTRY_POINT_GROUP = "forecastaudit.adapters"

Kind = Literal["fit", "search"]
T = TypeVar("T")

# Imported on first use, in this order (the report's column order).
_BUILT_IN: dict[str, tuple[str, ...]] = {
    "fit": (
        "statsmodels_sarimax",
        "statsmodels_arima",
        "pmdarima_arima",
        "sktime_arima",
        "statsforecast_arima",
    ),
    "search": ("search_pmdarima", "search_statsforecast", "search_sktime"),
}

_REGISTRY: dict[tuple[str, str], type] = {}
#: Adapters made for one audit (an estimator in another environment): found by key, never
#: listed, so that they join only the audits that ask for them.
_TRANSIENT: dict[tuple[str, str], type] = {}
_PROBLEMS: dict[str, str] = {}
#: Registry keys each entry point added, so that a refresh can forget a removed one.
_FROM_ENTRY_POINTS: dict[str, set[tuple[str, str]]] = {}
_loaded = False


class _DefaultProduction(str):
    """The production estimator when none is named: statsmodels-sarimax, or the first
    estimator run when it is not among them. A name passed explicitly, even this one, is
    never swapped for another: it must be among the estimators run (compared by identity,
    so the default can be told from the same name given)."""

    __slots__ = ()

    def __reduce__(self) -> str:
        # Unpickled (in a worker process) it is the same object, so it stays the default.
        return "DEFAULT_PRODUCTION"


#: Default of every ``production`` argument and option.
DEFAULT_PRODUCTION: str = _DefaultProduction("statsmodels-sarimax")


def register(cls: type[T]) -> type[T]:
    """Class decorator adding an adapter class to the registry under ``(cls.kind, cls.key)``.

    Raises
    ------
    EstimatorError
        When the class has no ``key`` or ``kind``, or when another class already holds the
        same key.
    """
    key = getattr(cls, "key", None)
    kind = getattr(cls, "kind", None)
    if not key or kind not in ("fit", "search"):
        raise EstimatorError(
            f"{cls.__name__} cannot be registered: set the class attributes 'key' (a short "
            "name) and 'kind' (inherit from EstimatorAdapter or SearchAdapter)."
        )
    held = _REGISTRY.get((kind, key))
    if held is not None and _qualified(held) != _qualified(cls):
        raise EstimatorError(
            f"The {kind} adapter key {key!r} is already taken by {_qualified(held)}; "
            f"{_qualified(cls)} cannot take it too. Give one of them another key."
        )
    _REGISTRY[(kind, key)] = cls
    return cls


def register_transient(cls: type[T]) -> type[T]:
    """Make an adapter class findable by its key without listing it among the estimators.

    For adapters an audit makes on request (an estimator in another Python environment):
    :func:`adapter_class` finds them, :func:`available_estimators` does not list them.

    Raises
    ------
    EstimatorError
        When a listed adapter holds the key already.
    """
    key, kind = getattr(cls, "key", None), getattr(cls, "kind", None)
    _load()
    if (kind, key) in _REGISTRY:
        raise EstimatorError(f"The {kind} adapter key {key!r} is taken by a registered adapter.")
    _TRANSIENT[(str(kind), str(key))] = cls
    return cls


#: Decorators kept under the names the adapters use.
register_estimator = register
register_search = register


def _qualified(cls: type) -> str:
    return f"{cls.__module__}.{cls.__qualname__}"


def _load() -> None:
    """Import the built-in adapters, then every entry point of :data:`ENTRY_POINT_GROUP`."""
    global _loaded
    if _loaded:
        return
    _loaded = True
    for kind in ("fit", "search"):
        for name in _BUILT_IN[kind]:
            importlib.import_module(f"forecastaudit.adapters.{name}")
    for entry in importlib.metadata.entry_points(group=ENTRY_POINT_GROUP):
        before = set(_REGISTRY)
        try:
            loaded = entry.load()
            if isinstance(loaded, type):
                register(loaded)
            _FROM_ENTRY_POINTS.setdefault(entry.name, set()).update(set(_REGISTRY) - before)
        except Exception as exc:  # a broken third-party adapter must not stop the others
            _PROBLEMS[entry.name] = (
                f"entry point {entry.name!r} ({entry.value}) of group {ENTRY_POINT_GROUP!r} "
                f"could not be loaded: {type(exc).__name__}: {exc}"
            )


def refresh() -> None:
    """Read the entry points again: adapters of distributions that appeared since are added,
    those whose entry point is gone are forgotten (built-in adapters stay)."""
    global _loaded
    _loaded = False
    _PROBLEMS.clear()
    for keys in _FROM_ENTRY_POINTS.values():
        for key in keys:
            _REGISTRY.pop(key, None)
    _FROM_ENTRY_POINTS.clear()
    _load()


def load_problems() -> dict[str, str]:
    """Third-party entry points that could not be loaded, with the reason."""
    _load()
    return dict(_PROBLEMS)


def _keys(kind: Kind) -> list[str]:
    """Keys of one kind: the built-in adapters in their fixed order, then the others."""
    _load()
    built_in = [f"forecastaudit.adapters.{name}" for name in _BUILT_IN[kind]]

    def position(item: tuple[int, str]) -> tuple[int, int]:
        index, key = item
        module = _REGISTRY[(kind, key)].__module__
        return (built_in.index(module) if module in built_in else len(built_in), index)

    keys = [key for k, key in _REGISTRY if k == kind]
    return [key for _, key in sorted(enumerate(keys), key=position)]


def available_estimators() -> list[str]:
    """Keys of every registered estimator (fit) adapter, built-in ones first."""
    return _keys("fit")


def available_searches() -> list[str]:
    """Keys of every registered order-search adapter, built-in ones first."""
    return _keys("search")


def adapter_packages() -> list[str]:
    """The distributions every registered adapter (fit and search) calls, in order, once."""
    _load()
    return list(dict.fromkeys(str(getattr(cls, "package", "")) for cls in _REGISTRY.values()))


def adapter_class(key: str, kind: Kind = "fit") -> type:
    """The registered adapter class for ``key``.

    Raises
    ------
    EstimatorError
        For an unknown key, listing the known ones.
    """
    _load()
    try:
        return _REGISTRY[(kind, key)]
    except (KeyError, TypeError):
        transient = _TRANSIENT.get((kind, key)) if isinstance(key, str) else None
        if transient is not None:
            return transient
        what, plural = (
            ("estimator", "estimators") if kind == "fit" else ("order search", "searches")
        )
        known = ", ".join(_keys(kind)) or "none"
        raise EstimatorError(
            f"Unknown {what} {key!r}; known {plural}: {known}. Run 'forecastaudit estimators' "
            "to list them with their versions."
        ) from None


def get_adapter(key: str) -> Any:
    """An estimator adapter instance for ``key`` (see :func:`adapter_class`)."""
    return adapter_class(key, "fit")()


def get_search(key: str) -> Any:
    """An order-search adapter instance for ``key`` (see :func:`adapter_class`)."""
    return adapter_class(key, "search")()
