"""Diagnosis: findings, tolerances and metrics; every estimate re-scored, tabled and explained.

Modules: :mod:`.findings` (the finding type and its kinds), :mod:`.tolerances`,
:mod:`.metrics` (accuracy, Ljung-Box, Diebold-Mariano), :mod:`.rescore`, :mod:`.tables`,
:mod:`.diagnose` (one finding per cause), :mod:`.forecasts` (back-transform, spread, forecast
comparisons) and :mod:`.holdout` (rolling-origin accuracy).
"""
