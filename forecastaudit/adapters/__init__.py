"""Adapters: one module per estimator library, behind one protocol.

:mod:`.protocol` declares what every fit adapter declares and returns, :mod:`.search_protocol`
the same for automatic order searches, :mod:`.capture` runs a library call keeping its
warnings and printed output, and :mod:`.registry` holds the built-in and third-party
adapters. Importing this package loads no library; the registry imports the adapters on
first use, and a missing library makes its adapter report ``unavailable``.
"""
