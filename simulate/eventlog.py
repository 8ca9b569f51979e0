"""Read and check an event log of any simulator against the model's transition ids.

An event log is a CSV table, one line per completed firing, with the columns
``transition,firing,time`` (firings count from 1, ``time`` is the completion) and optionally
``start``; other columns are ignored. Reading checks every row and the rows together (known
transition ids, integer firing numbers, finite times, no firing logged twice) and sorts the
firings into an :class:`EventLog`; judging the times against the model is :mod:`.tracecheck`.
"""

from __future__ import annotations

import csv
import io
import os
import re
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from .errors import ModelError, did_you_mean
from .modelfile import Model

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["MAX_FIRING", "EventLog", "read_log"]

REQUIRED = ("transition", "firing", "time")
OPTIONAL = ("start",)
MAX_FIRING = 2**53
"""Largest firing number: integers up to here survive a float64 column exactly."""
KEY_LIMIT = 2**62
"""Largest ``transitions × (largest firing + 1)`` packed into one int64 sort key."""
_SUGGEST_LIMIT = 100_000  # difflib over more ids would make an error message slow
_FORMAT = "transition,firing,time (optionally start)"


def _fmt(x: float) -> str:
    return f"{float(x):.12g}"


@dataclass(frozen=True, eq=False)
class EventLog:
    """A checked event log, sorted by transition index, then firing number.

    ``transition`` and ``firing`` (int64, pairs unique), ``time`` and ``start`` (float64;
    ``start`` is None without the column), ``row``: position of each firing among the data rows
    of the file (from 0), ``path``: the file or None.
    """

    transition: np.ndarray
    firing: np.ndarray
    time: np.ndarray
    start: np.ndarray | None
    row: np.ndarray
    path: Path | None = None

    @property
    def n_firings(self) -> int:
        return int(self.transition.shape[0])

    @classmethod
    def from_frame(cls, model: Model, frame: pd.DataFrame) -> EventLog:
        """Check a table in memory (columns as in a log file; errors name ``row i`` from 1)."""
        return _events(model, {c: frame[c] for c in frame.columns if c in REQUIRED + OPTIONAL},
                       len(frame), _Where(None, None))


class _Where:
    """Row index -> ``line N`` of the file (``row N`` for a table in memory), on demand."""

    def __init__(self, path: Path | None, text: str | None) -> None:
        self.path, self.text = path, text

    def item(self, row: int) -> str:
        if self.text is None:
            return f"row {row + 1}"
        lines = re.split(r"\r\n|\r|\n", self.text)
        filled = [i for i, s in enumerate(lines) if s.strip()]  # pandas skips blank lines
        return f"line {filled[min(row + 1, len(filled) - 1)] + 1}"

    def error(self, row: int, rule: str, count: int = 1) -> ModelError:
        more = f" ({count - 1} more rows like this)" if count > 1 else ""
        return ModelError(rule + more, file=self.path, item=self.item(row))


def read_log(model: Model, path: str | os.PathLike[str]) -> EventLog:
    """Read and check an event log file against the model's transition ids.

    Raises
    ------
    ModelError
        Naming the file, the line and the rule: unreadable, binary or non-UTF-8 file, empty
        log, missing or repeated columns, unknown transition ids (with the closest id), firing
        numbers that are not integers >= 1, times that are not finite numbers >= 0, a start
        after its completion, a firing logged twice.
    """
    import pandas as pd

    path = Path(path)
    if not path.is_file():
        raise ModelError("is a directory, expected an event log (CSV)" if path.is_dir() else
                         "no such file (event log)", file=path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise ModelError(f"cannot be read: {exc.strerror or exc}", file=path) from None
    if b"\0" in data:
        raise ModelError(f"is a binary file (it contains NUL bytes), expected an event log: a "
                         f"CSV table with the columns {_FORMAT}", file=path)
    try:
        text = data.decode("utf-8").removeprefix("\ufeff")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise ModelError(f"is not UTF-8 text (byte 0x{data[exc.start]:02x}), expected an event "
                         "log; save it as UTF-8", file=path, item=f"line {line}") from None
    first = re.search(r"\S", text)
    if first is None:
        raise ModelError(f"the event log is empty: the first line must name the columns "
                         f"{_FORMAT}, then one line per completed firing", file=path)
    line_no = text.count("\n", 0, first.start()) + 1
    end = re.compile(r"[\r\n]|$").search(text, first.start()).start()  # type: ignore[union-attr]
    header = [c.strip() for c in next(csv.reader([text[first.start():end]]))]
    position: dict[str, int] = {}
    for name in REQUIRED + OPTIONAL:
        found = [i for i, c in enumerate(header) if c == name]
        if len(found) > 1:
            raise ModelError(f'column "{name}" appears twice', file=path, item=f"line {line_no}")
        if found:
            position[name] = found[0]
        elif name in REQUIRED:
            others = [c for c in header if c not in REQUIRED + OPTIONAL]
            raise ModelError(f'missing column "{name}"{did_you_mean(name, others)} (an event '
                             f"log has the columns {_FORMAT}; other columns are ignored)",
                             file=path, item=f"line {line_no}")
    labels = [f"c{i}" for i in range(len(header))]
    try:
        # no usecols: with it pandas would drop the extra cells of a ragged line silently
        frame = pd.read_csv(io.BytesIO(data), header=0, names=labels,
                            dtype={labels[position["transition"]]: str}, keep_default_na=False,
                            na_filter=False, skipinitialspace=True, encoding="utf-8-sig")
    except (pd.errors.ParserError, ValueError) as exc:
        msg = str(exc).strip().removeprefix("Error tokenizing data. C error: ")
        m = re.search(r"in line (\d+)", msg)
        raise ModelError(f"cannot read the event log as CSV: {msg}", file=path,
                         item=f"line {m.group(1)}" if m else None) from None
    if len(frame) == 0:
        raise ModelError("the event log is empty: it has a header but no firing", file=path,
                         item=f"line {line_no}")
    cols = {name: frame[labels[i]] for name, i in position.items()}
    return _events(model, cols, len(frame), _Where(path, text))


def _numbers(col: pd.Series, name: str, where: _Where) -> np.ndarray:
    """A numeric column as float64; empty and non-numeric cells are errors."""
    import pandas as pd

    if col.dtype.kind in "iuf":
        return col.to_numpy(dtype=np.float64)
    text = col.astype(str).str.strip()
    values = pd.to_numeric(text, errors="coerce").to_numpy(dtype=np.float64)
    bad = np.flatnonzero(np.isnan(values) & ~text.str.lower().isin(["nan", "+nan", "-nan"])
                         .to_numpy(bool))
    if bad.size:
        r, cell = int(bad[0]), text.iloc[int(bad[0])]
        raise where.error(r, f"{name} is empty" if cell == "" else
                          f'{name} must be a number, got "{cell}"', bad.size)
    return values


def _times(col: pd.Series, name: str, where: _Where) -> np.ndarray:
    values = _numbers(col, name, where)
    with np.errstate(invalid="ignore"):
        bad = np.flatnonzero(~np.isfinite(values) | (values < 0))
    if bad.size:
        r = int(bad[0])
        raise where.error(r, f"{name} must be a finite number >= 0, got {float(values[r])!r}",
                          bad.size)
    return values + 0.0  # no negative zero


def _firings(col: pd.Series, where: _Where) -> np.ndarray:
    values = col.to_numpy() if col.dtype.kind in "iu" else _numbers(col, "firing", where)
    with np.errstate(invalid="ignore"):
        bad = np.flatnonzero(~((values >= 1) & (values <= MAX_FIRING) & (values % 1 == 0)))
    if bad.size:
        r = int(bad[0])
        raise where.error(r, f'firing must be an integer >= 1 (firings count from 1), got '
                             f'"{str(col.iloc[r]).strip()}"', bad.size)
    return values.astype(np.int64)


def _transitions(model: Model, col: pd.Series, where: _Where) -> np.ndarray:
    import pandas as pd

    ids = col.fillna("").astype(str).to_numpy(dtype=object)
    table = pd.Index(model.transition_ids)
    found = table.get_indexer(ids).astype(np.int64)
    missing = np.flatnonzero(found < 0)
    if missing.size:  # stripping every cell would cost more than the rest: only the misses
        ids[missing] = pd.Series(ids[missing], dtype=object).str.strip().to_numpy(dtype=object)
        found[missing] = table.get_indexer(ids[missing])
    unknown = np.flatnonzero(found < 0)
    if unknown.size:
        r = int(unknown[0])
        if ids[r] == "":
            raise where.error(r, "transition is empty", unknown.size)
        hint = (did_you_mean(ids[r], model.transition_ids)
                if model.n_transitions <= _SUGGEST_LIMIT else "")
        raise where.error(r, f'unknown transition "{ids[r]}"{hint}: the log must use the '
                             "transition ids of the model", unknown.size)
    return found


def _sort_key(t: np.ndarray, k: np.ndarray, n: int) -> np.ndarray | None:
    """``t · (max k + 1) + k`` as int64, or None when it could overflow."""
    width = int(k.max()) + 1
    return t * np.int64(width) + k if n * width < KEY_LIMIT else None


def _events(model: Model, cols: dict[str, Any], n_rows: int, where: _Where) -> EventLog:
    for name in REQUIRED:
        if name not in cols:
            raise ModelError(f'missing column "{name}" (an event log has the columns '
                             f"{_FORMAT})", file=where.path, item="columns")
    if n_rows == 0:
        raise ModelError("the event log is empty: it has no firing", file=where.path)
    t = _transitions(model, cols["transition"], where)
    k = _firings(cols["firing"], where)
    x = _times(cols["time"], "time", where)
    s = _times(cols["start"], "start", where) if "start" in cols else None
    if s is not None and (late := np.flatnonzero(s > x)).size:
        r = int(late[0])
        raise where.error(r, f"start {_fmt(s[r])} is after the completion time {_fmt(x[r])}",
                          late.size)
    key = _sort_key(t, k, model.n_transitions)
    order = np.lexsort((k, t)) if key is None else np.argsort(key)
    ts, ks = t[order], k[order]
    dup = np.flatnonzero((ts[1:] == ts[:-1]) & (ks[1:] == ks[:-1]))
    if dup.size:  # name the duplicate met first in the file, at its second line
        later = np.maximum(order[dup], order[dup + 1])
        j = int(np.argmin(later))
        first = int(min(order[dup[j]], order[dup[j] + 1]))
        raise where.error(int(later[j]), f'firing {ks[dup[j]]} of '
                          f'"{model.transition_ids[int(ts[dup[j]])]}" is logged twice (first '
                          f"at {where.item(first)})", dup.size)
    return EventLog(ts, ks, x[order], None if s is None else s[order], order.astype(np.int64),
                    where.path)
