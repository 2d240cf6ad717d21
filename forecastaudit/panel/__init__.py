"""Panels: one specification audited on many series, with causes counted across them.

>>> import forecastaudit as fa
>>> result = fa.audit_panel(table, "ARIMA(0,1,1)x(0,1,1)12 +log", id_column="hospital",
...                         out="panel-output")                      # doctest: +SKIP
>>> result.summary.head()                                             # doctest: +SKIP
>>> print("\\n".join(result.cause_sentences()))                       # doctest: +SKIP
"""

from forecastaudit.panel.api import DEFAULT_SERIES_TIME_LIMIT, audit_panel, independent_estimators
from forecastaudit.panel.data import PanelSeries, looks_like_panel, read_panel
from forecastaudit.panel.result import PanelResult
from forecastaudit.panel.store import STORE_NAME, read_store
from forecastaudit.panel.summary import CauseCount

__all__ = [
    "DEFAULT_SERIES_TIME_LIMIT",
    "STORE_NAME",
    "CauseCount",
    "PanelResult",
    "PanelSeries",
    "audit_panel",
    "independent_estimators",
    "looks_like_panel",
    "read_panel",
    "read_store",
]
