"""Reports of an audit: a self-contained HTML page, a compact notebook view, Markdown.

The renderers read what to say from :mod:`forecastaudit.report.content` and the figures
from :mod:`forecastaudit.report.plots`; they never compute audit results themselves.
"""

from forecastaudit.report.html import render_compact_html, render_html
from forecastaudit.report.markdown import render_markdown

__all__ = ["render_compact_html", "render_html", "render_markdown"]
