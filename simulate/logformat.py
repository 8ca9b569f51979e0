"""How an event log of another simulator maps onto cyclecheck's log: columns, names, time unit.

cyclecheck's event log has the columns ``transition,firing,time`` and optionally ``start`` and
``replication`` (see :mod:`.eventlog`). A log written by another tool names them otherwise, calls
its activities by other names and counts time in another unit. A :class:`LogFormat` says how to
read it:

``columns``
    our column name -> the log's column name, e.g. ``{"time": "End", "start": "Begin"}``; from the
    command line ``--columns transition=Activity,time=End,start=Begin,replication=Run``.
``rename``
    the log's transition name -> the model's transition id; from a two-column CSV file (log name,
    model id; ``#`` starts a comment line) or ``--rename LOGNAME=ID`` options. Names that are not
    renamed must be model ids themselves.
``time_scale``
    a factor > 0: the log's times (``time`` and ``start``) are multiplied by it to give model time
    units (``60`` for a log in minutes and a model in seconds).

Every problem is a :class:`~.errors.ModelError` naming the option or the file and line.
"""

from __future__ import annotations

import csv
import io
import math
import os
from collections.abc import Iterable, Mapping
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from .errors import ModelError, did_you_mean, shown

__all__ = ["COLUMNS", "OPTIONAL", "REQUIRED", "LogFormat", "log_format", "parse_columns"]

REQUIRED = ("transition", "firing", "time")
OPTIONAL = ("start", "replication")
COLUMNS = REQUIRED + OPTIONAL


@dataclass(frozen=True)
class LogFormat:
    """How to read a log: column names, transition names and time unit (see the module doc)."""

    columns: Mapping[str, str] = field(default_factory=dict)
    rename: Mapping[str, str] = field(default_factory=dict)
    time_scale: float = 1.0

    def column(self, name: str) -> str:
        """The log's name of our column ``name``."""
        return self.columns.get(name, name)

    @property
    def is_plain(self) -> bool:
        """True when the log is read as it is (no mapping, no rename, no scale)."""
        return not self.columns and not self.rename and self.time_scale == 1.0

    def describe(self) -> dict[str, Any]:
        """The format as a JSON-ready dict for the judgement document."""
        return {"columns": {c: self.column(c) for c in COLUMNS}, "renamed": len(self.rename),
                "time_scale": self.time_scale}


def parse_columns(text: str | Mapping[str, str] | None) -> dict[str, str]:
    """Read ``--columns``: ``transition=Activity,time=End`` or a dict of the same.

    Raises
    ------
    ModelError
        With item ``--columns``: a part without ``=``, an unknown column of ours (with the
        closest name), a column given twice, two of ours mapped to one column of the log.
    """
    if text is None:
        return {}
    if isinstance(text, Mapping):
        pairs = [(str(k), str(v)) for k, v in text.items()]
    else:
        pairs = []
        for part in (p.strip() for p in next(csv.reader([text]), [])):
            if not part:
                continue
            ours, eq, theirs = part.partition("=")
            if not eq or not ours.strip() or not theirs.strip():
                raise ModelError(f'"{part}" must read OURS=THEIRS, e.g. time=End (our columns: '
                                 f"{', '.join(COLUMNS)})", item="--columns")
            pairs.append((ours.strip(), theirs.strip()))
    out: dict[str, str] = {}
    for ours, theirs in pairs:
        if ours not in COLUMNS:
            raise ModelError(f'unknown column "{ours}"{did_you_mean(ours, COLUMNS)} (our '
                             f"columns: {', '.join(COLUMNS)})", item="--columns")
        if ours in out:
            raise ModelError(f'column "{ours}" is mapped twice', item="--columns")
        clash = [k for k, v in out.items() if v == theirs]
        if clash:
            raise ModelError(f'"{clash[0]}" and "{ours}" are both mapped to the log\'s column '
                             f'"{theirs}"', item="--columns")
        out[ours] = theirs
    return out


def _check_scale(scale: float) -> float:
    if (isinstance(scale, bool) or not isinstance(scale, (int, float))
            or not math.isfinite(scale) or scale <= 0):
        raise ModelError(f"must be a finite number > 0 (log time units -> model time units), "
                         f"got {shown(scale)}", item="--time-scale")
    return float(scale)


def _rename_file(path: Path, ids: Mapping[str, int], out: dict[str, str]) -> None:
    try:
        text = path.read_bytes().decode("utf-8-sig")
    except UnicodeDecodeError:
        raise ModelError("is not UTF-8 text, expected a rename table (CSV: log name, model id)",
                         file=path) from None
    except OSError as exc:
        raise ModelError(f"cannot be read: {exc.strerror or exc}", file=path) from None
    seen: dict[str, int] = {}
    for line_no, cells in enumerate(csv.reader(io.StringIO(text)), start=1):
        cells = [c.strip() for c in cells]
        if not any(cells) or cells[0].startswith("#"):
            continue
        if len(cells) != 2 or not cells[0] or not cells[1]:
            raise ModelError(f"a rename line has two cells, the log's name and the model's "
                             f"transition id, got {len(cells)}: {shown(','.join(cells))}",
                             file=path, item=f"line {line_no}")
        _add(out, cells[0], cells[1], ids, file=path, item=f"line {line_no}",
             first=seen.get(cells[0]))
        seen.setdefault(cells[0], line_no)


def _add(out: dict[str, str], log_name: str, model_id: str, ids: Mapping[str, int], *,
         file: Path | None, item: str, first: int | None = None) -> None:
    if model_id not in ids:
        hint = did_you_mean(model_id, list(ids)) if len(ids) <= 100_000 else ""
        raise ModelError(f'unknown transition id "{model_id}"{hint}: a log name must be '
                         "renamed to a transition id of the model", file=file, item=item)
    if log_name in out and out[log_name] != model_id:
        where = f" (line {first})" if first is not None else ""
        raise ModelError(f'"{log_name}" is renamed twice: to "{out[log_name]}"{where} and to '
                         f'"{model_id}"', file=file, item=item)
    out[log_name] = model_id


def log_format(transition_ids: Iterable[str], *, columns: str | Mapping[str, str] | None = None,
               rename: Iterable[str | os.PathLike[str]] | Mapping[str, str] | None = None,
               time_scale: float = 1.0) -> LogFormat:
    """Check the reading options of a log against the model's transition ids.

    ``rename`` is a dict (log name -> model id) or a list whose items are files (two-column
    CSV) or ``LOGNAME=ID`` texts; an item that names an existing file is a file.
    """
    ids = {t: i for i, t in enumerate(transition_ids)}
    table: dict[str, str] = {}
    if isinstance(rename, Mapping):
        for k, v in rename.items():
            _add(table, str(k), str(v), ids, file=None, item=f"rename {k}={v}")
    elif rename is not None:
        for entry in rename:
            text = os.fspath(entry)
            path = Path(text)
            if path.is_file():
                _rename_file(path, ids, table)
            elif "=" in text and not isinstance(entry, os.PathLike):
                name, _, tid = (part.strip() for part in text.rpartition("="))
                if not name or not tid:
                    raise ModelError("must read LOGNAME=ID", item=f"--rename {text}")
                _add(table, name, tid, ids, file=None, item=f"--rename {text}")
            else:
                raise ModelError("no such file (rename table: CSV with the log's name and the "
                                 "model's transition id), nor a LOGNAME=ID pair", file=path)
    return LogFormat(parse_columns(columns), table, _check_scale(time_scale))
