"""Review pages rendered from result documents.

``render_page(document) -> str`` turns any result document of cyclecheck (``analyze``,
``simulate``, ``check``, ``trace``, ``sweep``; a plain dict, see :mod:`cyclecheck.reports.page`
for its shape) into one self-contained HTML page. This package computes nothing and writes no
file: saving a page safely is :func:`cyclecheck.simulate.save_page`. Errors are
:class:`ReportError`. matplotlib is imported only when a page is rendered.

>>> from cyclecheck.simulate import analyze           # doctest: +SKIP
>>> from cyclecheck.reports import render_page        # doctest: +SKIP
>>> html = render_page(analyze("models/packaging_cell.toml"))   # doctest: +SKIP
"""

from .page import MARKER, ReportError, render_page
from .schema import DOCUMENT_KIND, SCHEMA_VERSION, check_document

__all__ = ["DOCUMENT_KIND", "MARKER", "SCHEMA_VERSION", "ReportError", "check_document",
           "render_page"]
