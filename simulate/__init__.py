"""The application: model files, engines, estimation, judgement of logs, and the front door.

Everything the command line does, in Python, with the options named as on the command line::

    from cyclecheck.simulate import load_model, analyze, simulate, check, trace, sweep

    doc = check("models/packaging_cell.toml", report="page.html")
    doc["comparison"]["verdict"]            # 'agrees'

Each function takes a model file's path or a :class:`Model` from :func:`load_model` and returns
the document that ``--json`` prints. :func:`save_document`, :func:`save_page` and
:func:`report` write documents and pages with the command line's output safety;
:func:`load_document` reads a saved one. Every error a user can cause is a
:class:`CycleCheckError`.

The names are imported on first use, so that ``cyclecheck --help`` starts without numpy.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

__all__ = [
    "CycleCheckError",
    "Model",
    "ModelError",
    "RunSettings",
    "analyze",
    "check",
    "load_document",
    "load_model",
    "points_frame",
    "report",
    "save_document",
    "save_page",
    "simulate",
    "sweep",
    "trace",
]

#: Where each name of the front door lives.
_HOMES = {
    "CycleCheckError": "..algebra.exceptions",
    "Model": ".modelfile",
    "ModelError": ".errors",
    "RunSettings": ".settings",
    "analyze": ".api",
    "check": ".api",
    "load_document": ".files",
    "load_model": ".modelfile",
    "points_frame": ".api",
    "report": ".api",
    "save_document": ".api",
    "save_page": ".api",
    "simulate": ".api",
    "sweep": ".api",
    "trace": ".api",
}

if TYPE_CHECKING:  # pragma: no cover
    from ..algebra.exceptions import CycleCheckError
    from .api import (
        analyze,
        check,
        points_frame,
        report,
        save_document,
        save_page,
        simulate,
        sweep,
        trace,
    )
    from .errors import ModelError
    from .files import load_document
    from .modelfile import Model, load_model
    from .settings import RunSettings


def __getattr__(name: str) -> Any:
    home = _HOMES.get(name)
    if home is None:
        raise AttributeError(f"module {__name__!r} has no attribute {name!r}")
    value = getattr(importlib.import_module(home, __name__), name)
    globals()[name] = value  # later lookups skip this function
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
