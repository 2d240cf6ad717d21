"""Order-search audit and model-choice stability.

:func:`audit_order_search` runs every installed automatic order search with its own
defaults, records what each selected and how it decided, decomposes every disagreement into
its causes by re-running one search with one setting harmonised at a time, and runs our own
bounded exhaustive search under the reference likelihood (AICc on the canonical definition)
within each differencing choice a search made. Information criteria do not compare models
with different differencing, because the likelihoods are of different series (common
practice, no source); so the ranking is made within each choice. Candidates within 2 AICc
units of the best have substantial support (Burnham, K.P., Anderson, D.R. (2002), *Model
Selection and Multimodel Inference*, 2nd ed., section 2.6).

Modules: :mod:`.order_search` (the audit), :mod:`.decomposition` (re-runs with one setting
harmonised at a time), :mod:`.exhaustive` (our own search under the reference AICc).
"""

from forecastaudit.search.exhaustive import SUPPORT_BAND, exhaustive_reference_search
from forecastaudit.search.order_search import OrderSearchAudit, audit_order_search

__all__ = ["SUPPORT_BAND", "OrderSearchAudit", "audit_order_search", "exhaustive_reference_search"]
