"""Review pages rendered from result documents.

``render_page(document) -> str`` turns a result document (a plain dict, see
:mod:`cyclecheck.reports.page` for its shape) into one self-contained HTML page;
``write_page(document, path, force=False)`` writes it atomically. Both raise
:class:`ReportError`. matplotlib is imported only when a page is rendered.
"""

from .page import ReportError, is_report, render_page, write_page

__all__ = ["ReportError", "is_report", "render_page", "write_page"]
