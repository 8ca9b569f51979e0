"""Read and check an event log of any simulator against the model's transition ids.

An event log is a table, one row per completed firing, with the columns
``transition,firing,time`` (firings count from 1, ``time`` is the completion) and optionally
``start`` and ``replication`` (firings are numbered within each replication); other columns are
ignored. It is a CSV file, a Parquet file (read with pyarrow; a file named ``.parquet`` or
starting with Parquet's magic bytes) or a pandas table in memory. Other column names, other
transition names and other time units are mapped by a :class:`~.logformat.LogFormat`.

Reading checks every row and the rows together (known transition ids, integer firing numbers,
finite times, no firing logged twice in a replication), finds the log's time resolution (the
coarsest grid its times lie on: a simulator that rounds its times, see
:func:`time_resolution`) and sorts the firings into an
:class:`EventLog`; judging the times against the model is :mod:`.tracecheck` and
:mod:`.judge`. Rows are checked column by column with numpy (no Python loop over rows): a log
of 10^7 rows reads in about the time pandas takes to parse it.
"""

from __future__ import annotations

import csv
import io
import os
import re
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from .errors import ModelError, did_you_mean
from .logformat import COLUMNS, REQUIRED, LogFormat
from .modelfile import Model

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["MAX_FIRING", "EventLog", "read_log", "time_resolution"]

MAX_FIRING = 2**53
"""Largest firing number: integers up to here survive a float64 column exactly."""
KEY_LIMIT = 2**62
"""Largest ``units × (largest firing + 1)`` packed into one int64 sort key."""
GRID_DIGITS = 9
"""Finest decimal grid :func:`time_resolution` looks for: 10^-9 time units."""
_GRID_BITS = 40  # a grid step must be at least 2^-40 of the largest time to be told apart
_GRID_SAMPLE = 1000  # values tried first: a log of unrounded times fails on them at once
_SUGGEST_LIMIT = 100_000  # difflib over more ids would make an error message slow
_FORMAT = "transition,firing,time (optionally start and replication)"
_PARQUET_MAGIC = b"PAR1"


def _fmt(x: float) -> str:
    return f"{float(x):.12g}"


class _Where:
    """Data row -> ``line N`` of a CSV file (``row N`` for a table), computed on demand."""

    def __init__(self, path: Path | None, data: bytes | None) -> None:
        self.path, self.data = path, data

    @cached_property
    def _lines(self) -> list[int]:
        assert self.data is not None
        text = self.data.decode("utf-8", errors="replace")
        lines = re.split(r"\r\n|\r|\n", text)
        return [i for i, s in enumerate(lines) if s.strip()]  # pandas skips blank lines

    def item(self, row: int) -> str:
        if self.data is None:
            return f"row {row + 1}"
        filled = self._lines  # filled[0] is the header
        return f"line {filled[min(row + 1, len(filled) - 1)] + 1}"

    def error(self, row: int, rule: str, count: int = 1) -> ModelError:
        more = f" ({count - 1} more rows like this)" if count > 1 else ""
        return ModelError(rule + more, file=self.path, item=self.item(row))


@dataclass(frozen=True, eq=False)
class EventLog:
    """A checked event log, sorted by replication, transition index, then firing number.

    Attributes
    ----------
    transition, firing : ndarray of int64
        Model index of the transition and firing number (pairs unique in each replication).
    time, start : ndarray of float64
        Completion and start in model time units (``start`` is None without the column).
    row : ndarray of int64
        Position of each firing among the data rows of the source (from 0).
    path : Path or None
        The file, or None for a table in memory.
    replication : ndarray of int64 or None
        Index of each firing's replication into ``replication_labels`` (None without the column:
        one replication).
    replication_labels : tuple of str
        The replications as the log names them, in order (numerically when they are numbers).
    n_transitions : int
        Transitions of the model: ``unit = replication · n_transitions + transition`` numbers
        the (replication, transition) pairs, the series of firings judged one by one.
    source : str
        ``"csv"``, ``"parquet"`` or ``"table"``.
    resolution : float
        The coarsest grid all its times (and starts) lie on, in model time units (after
        ``--time-scale``); 0.0 when there is none (see :func:`time_resolution`).
    """

    transition: np.ndarray
    firing: np.ndarray
    time: np.ndarray
    start: np.ndarray | None
    row: np.ndarray
    path: Path | None = None
    replication: np.ndarray | None = None
    replication_labels: tuple[str, ...] = ("",)
    n_transitions: int = 0
    source: str = "table"
    where: _Where = field(default_factory=lambda: _Where(None, None), repr=False)
    resolution: float = 0.0

    @property
    def n_firings(self) -> int:
        return int(self.transition.shape[0])

    @property
    def n_replications(self) -> int:
        return len(self.replication_labels)

    @property
    def n_units(self) -> int:
        """Number of (replication, transition) series: ``replications × transitions``."""
        return self.n_replications * self.n_transitions

    @cached_property
    def unit(self) -> np.ndarray:
        """``replication · n_transitions + transition`` of each firing (sorted ascending)."""
        if self.replication is None:
            return self.transition
        return self.replication * np.int64(self.n_transitions) + self.transition

    def item(self, i: int) -> str:
        """Where firing ``i`` (in sorted order) is in the source: ``line N`` or ``row N``."""
        return self.where.item(int(self.row[i]))

    def in_replication(self, i: int) -> str:
        """``' in replication "r"'`` for a log with several replications, else ``''``."""
        if self.replication is None or self.n_replications == 1:
            return ""
        return f' in replication "{self.replication_labels[int(self.replication[i])]}"'

    @classmethod
    def from_frame(cls, model: Model, frame: pd.DataFrame,
                   fmt: LogFormat | None = None) -> EventLog:
        """Check a table in memory (columns as in a log file; errors name ``row i`` from 1)."""
        fmt = fmt or LogFormat()
        cols = _pick(list(map(str, frame.columns)), fmt, None, None)
        data = {ours: frame[frame.columns[i]] for ours, i in cols.items()}
        return _events(model, data, len(frame), _Where(None, None), fmt, "table")


def _pick(header: list[str], fmt: LogFormat, path: Path | None,
          item: str | None) -> dict[str, int]:
    """Our column name -> its position in the header; errors for missing or doubled ones."""
    position: dict[str, int] = {}
    for name in COLUMNS:
        theirs = fmt.column(name)
        found = [i for i, c in enumerate(header) if c == theirs]
        if len(found) > 1:
            raise ModelError(f'column "{theirs}" appears twice', file=path, item=item)
        if found:
            position[name] = found[0]
        elif name in fmt.columns:
            raise ModelError(f'column "{theirs}" (given by --columns {name}={theirs}) is not in '
                             f"the log{did_you_mean(theirs, header)}; its columns are "
                             + ", ".join(f'"{c}"' for c in header), file=path, item=item)
        elif name in REQUIRED:
            others = [c for c in header if c not in COLUMNS]
            raise ModelError(f'missing column "{name}"{did_you_mean(name, others)} (an event '
                             f"log has the columns {_FORMAT}; other columns are ignored; map "
                             "other names with --columns)", file=path, item=item)
    return position


def read_log(model: Model, path: str | os.PathLike[str],
             fmt: LogFormat | None = None) -> EventLog:
    """Read and check an event log file (CSV or Parquet) against the model's transition ids.

    Raises
    ------
    ModelError
        Naming the file, the line (or row) and the rule: unreadable, binary or non-UTF-8 CSV,
        a ``.parquet`` file that is not Parquet, empty log, missing or repeated columns, a
        column of ``--columns`` that is not there, unknown transition names (with the closest
        id), firing numbers that are not integers >= 1, times that are not finite numbers
        >= 0, a start after its completion, a firing logged twice.
    """
    fmt = fmt or LogFormat()
    path = Path(path)
    if not path.is_file():
        raise ModelError("is a directory, expected an event log (CSV or Parquet)"
                         if path.is_dir() else "no such file (event log)", file=path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise ModelError(f"cannot be read: {exc.strerror or exc}", file=path) from None
    if path.suffix.lower() in (".parquet", ".pq") or data.startswith(_PARQUET_MAGIC):
        return _read_parquet(model, path, data, fmt)
    return _read_csv(model, path, data, fmt)


def _read_parquet(model: Model, path: Path, data: bytes, fmt: LogFormat) -> EventLog:
    import pyarrow as pa
    import pyarrow.parquet as pq

    try:
        table = pq.read_table(pa.BufferReader(data))
    except (pa.ArrowException, OSError, ValueError) as exc:
        raise ModelError(f"is not a Parquet file ({str(exc).strip().splitlines()[0]}); an "
                         "event log is a CSV file or a Parquet file", file=path) from None
    if table.num_rows == 0:
        raise ModelError("the event log is empty: it has no firing", file=path)
    cols = _pick(table.column_names, fmt, path, "columns")
    frame = {ours: table.column(i).to_pandas() for ours, i in cols.items()}
    return _events(model, frame, table.num_rows, _Where(path, None), fmt, "parquet")


def _read_csv(model: Model, path: Path, data: bytes, fmt: LogFormat) -> EventLog:
    import pandas as pd

    if b"\0" in data:
        raise ModelError(f"is a binary file (it contains NUL bytes), expected an event log: a "
                         f"CSV table with the columns {_FORMAT}, or a Parquet file", file=path)
    head = data[: 1 << 16]
    text = _decode(path, head, partial=len(data) > len(head)).removeprefix("\ufeff")
    if re.search(r"\S", text) is None and len(data) > len(head):
        text = _decode(path, data, partial=False).removeprefix("\ufeff")
    first = re.search(r"\S", text)
    if first is None:
        raise ModelError(f"the event log is empty: the first line must name the columns "
                         f"{_FORMAT}, then one line per completed firing", file=path)
    start = first.start()
    line_no = text.count("\n", 0, start) + 1
    end = re.compile(r"[\r\n]|$").search(text, start).start()  # type: ignore[union-attr]
    header = [c.strip() for c in next(csv.reader([text[start:end]]))]
    position = _pick(header, fmt, path, f"line {line_no}")
    labels = [f"c{i}" for i in range(len(header))]
    categories = {labels[position[c]]: "category" for c in ("transition", "replication")
                  if c in position}
    try:
        # no usecols: with it pandas would drop the extra cells of a ragged line silently
        frame = pd.read_csv(io.BytesIO(data), header=0, names=labels, dtype=categories,
                            keep_default_na=False, na_filter=False, skipinitialspace=True,
                            encoding="utf-8-sig")
    except UnicodeDecodeError:
        _decode(path, data, partial=False)
        raise  # pragma: no cover - _decode raises for the same bytes
    except (pd.errors.ParserError, ValueError) as exc:
        msg = str(exc).strip().removeprefix("Error tokenizing data. C error: ")
        m = re.search(r"in line (\d+)", msg)
        raise ModelError(f"cannot read the event log as CSV: {msg}", file=path,
                         item=f"line {m.group(1)}" if m else None) from None
    if len(frame) == 0:
        raise ModelError("the event log is empty: it has a header but no firing", file=path,
                         item=f"line {line_no}")
    cols = {name: frame[labels[i]] for name, i in position.items()}
    return _events(model, cols, len(frame), _Where(path, data), fmt, "csv")


def _decode(path: Path, data: bytes, *, partial: bool) -> str:
    """UTF-8 text of ``data``; a prefix of the file may end inside a character."""
    try:
        return data.decode("utf-8")
    except UnicodeDecodeError as exc:
        if partial and exc.start >= len(data) - 3:
            return data[: exc.start].decode("utf-8")
        line = data[: exc.start].count(b"\n") + 1
        raise ModelError(f"is not UTF-8 text (byte 0x{data[exc.start]:02x}), expected an event "
                         "log; save it as UTF-8", file=path, item=f"line {line}") from None


def _numbers(col: pd.Series, name: str, where: _Where) -> np.ndarray:
    """A numeric column as float64; empty and non-numeric cells are errors."""
    import pandas as pd

    if col.dtype.kind in "iuf":
        return col.to_numpy(dtype=np.float64)
    text = col.astype(str).str.strip()
    values = pd.to_numeric(text, errors="coerce").to_numpy(dtype=np.float64, na_value=np.nan)
    bad = np.flatnonzero(np.isnan(values) & ~text.str.lower().isin(["nan", "+nan", "-nan"])
                         .to_numpy(bool))
    if bad.size:
        r, cell = int(bad[0]), text.iloc[int(bad[0])]
        raise where.error(r, f"{name} is empty" if cell in ("", "None", "<NA>") else
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


def _codes(col: pd.Series) -> tuple[np.ndarray, list[str]]:
    """Codes into the distinct cells of a column (-1 for a missing cell) and the cells, as
    stripped text: one hash of the column, then work on the few distinct names only."""
    import pandas as pd

    if isinstance(col.dtype, pd.CategoricalDtype):
        codes, names = col.cat.codes.to_numpy(dtype=np.int64), list(col.cat.categories)
    else:
        codes, uniques = pd.factorize(col, use_na_sentinel=True)
        codes, names = codes.astype(np.int64), list(uniques)
    return codes, [str(s).strip() for s in names]


def _transitions(model: Model, col: pd.Series, fmt: LogFormat, where: _Where) -> np.ndarray:
    codes, names = _codes(col)
    index = {t: i for i, t in enumerate(model.transition_ids)}
    lookup = np.array([index.get(fmt.rename.get(s, s), -1) for s in names] + [-1], np.int64)
    found = lookup[codes]  # code -1 picks the final -1
    unknown = np.flatnonzero(found < 0)
    if unknown.size:
        r = int(unknown[0])
        name = names[codes[r]] if codes[r] >= 0 else ""
        if name == "":
            raise where.error(r, "transition is empty", unknown.size)
        hint = (did_you_mean(name, model.transition_ids)
                if model.n_transitions <= _SUGGEST_LIMIT else "")
        rename = " (after --rename)" if fmt.rename else ""
        raise where.error(r, f'unknown transition "{name}"{hint}: the log must use the '
                             f"transition ids of the model{rename}, or map its names with "
                             "--rename", unknown.size)
    return found


def _replications(col: pd.Series, where: _Where) -> tuple[np.ndarray, tuple[str, ...]]:
    codes, names = _codes(col)
    empty = np.flatnonzero((codes < 0) | (np.array([*names, ""])[codes] == ""))
    if empty.size:
        raise where.error(int(empty[0]), "replication is empty", empty.size)
    distinct = sorted(set(names), key=_natural)
    rank = {s: i for i, s in enumerate(distinct)}
    return np.array([rank[s] for s in names], dtype=np.int64)[codes], tuple(distinct)


def _natural(label: str) -> tuple[int, float, str]:
    try:
        return (0, float(label), label)
    except ValueError:
        return (1, 0.0, label)


def time_resolution(*columns: np.ndarray | None) -> float:
    """The coarsest grid every value lies on, or 0.0 when there is none: a simulator that
    writes its times rounded to 0.01 gives 0.01, to a quarter 0.25, to minutes in a log in
    seconds 60.

    The grid is ``g · 10^-j`` with ``j`` the fewest decimals, 0 to :data:`GRID_DIGITS`, the
    values have (``value · 10^j`` is an integer to 64 units in the last place: decimal
    fractions are not exact in binary) and ``g`` the greatest common divisor of those
    integers. Grids finer than 2^-40 of the largest value are not tried: every float lies on
    them.

    >>> time_resolution(np.array([0.25, 12.5, 3.0]))
    0.25
    >>> time_resolution(np.array([0.31, 12.5, 3.0]))
    0.01
    >>> time_resolution(np.array([120.0, 60.0]), np.array([0.0, 300.0]))
    60.0
    >>> time_resolution(np.array([0.1234567891234]))
    0.0
    """
    values = np.concatenate([c for c in columns if c is not None])
    if values.size == 0:
        return 0.0
    top = float(np.abs(values).max())
    sample = values[:_GRID_SAMPLE]
    for j in range(GRID_DIGITS + 1):
        scale = 10.0**j
        if top * scale > 2.0**_GRID_BITS:
            break
        if _on_grid(sample, scale) and _on_grid(values, scale):
            step = int(np.gcd.reduce(np.rint(np.abs(values) * scale).astype(np.int64)))
            return max(step, 1) * float(10.0**-j)
    return 0.0


def _on_grid(values: np.ndarray, scale: float) -> bool:
    y = values * scale
    return bool(np.all(np.abs(y - np.rint(y)) <= 64 * np.finfo(np.float64).eps * np.abs(y)))


def _sort_key(t: np.ndarray, k: np.ndarray, n: int) -> np.ndarray | None:
    """``t · (max k + 1) + k`` as int64, or None when it could overflow."""
    width = int(k.max()) + 1
    return t * np.int64(width) + k if n * width < KEY_LIMIT else None


def _events(model: Model, cols: dict[str, Any], n_rows: int, where: _Where, fmt: LogFormat,
            source: str) -> EventLog:
    for name in REQUIRED:
        if name not in cols:
            raise ModelError(f'missing column "{name}" (an event log has the columns '
                             f"{_FORMAT})", file=where.path, item="columns")
    if n_rows == 0:
        raise ModelError("the event log is empty: it has no firing", file=where.path)
    t = _transitions(model, cols["transition"], fmt, where)
    k = _firings(cols["firing"], where)
    x = _times(cols["time"], "time", where)
    s = _times(cols["start"], "start", where) if "start" in cols else None
    rep, labels = (_replications(cols["replication"], where) if "replication" in cols
                   else (None, ("",)))
    if s is not None and (late := np.flatnonzero(s > x)).size:
        r = int(late[0])
        raise where.error(r, f"start {_fmt(s[r])} is after the completion time {_fmt(x[r])}",
                          late.size)
    resolution = time_resolution(x, s) * fmt.time_scale  # on the log's own clock
    if fmt.time_scale != 1.0:
        x = x * fmt.time_scale
        s = None if s is None else s * fmt.time_scale
    n = model.n_transitions
    unit = t if rep is None else rep * np.int64(n) + t
    key = _sort_key(unit, k, n * len(labels))
    # stable: a radix-like merge that is fastest on the runs of a log written in time order
    order = np.lexsort((k, unit)) if key is None else np.argsort(key, kind="stable")
    us, ks = unit[order], k[order]
    dup = np.flatnonzero((us[1:] == us[:-1]) & (ks[1:] == ks[:-1]))
    if dup.size:  # name the duplicate met first in the file, at its second line
        later = np.maximum(order[dup], order[dup + 1])
        j = int(np.argmin(later))
        first = int(min(order[dup[j]], order[dup[j] + 1]))
        u = int(us[dup[j]])
        in_rep = f' in replication "{labels[u // n]}"' if rep is not None and len(labels) > 1 \
            else ""
        raise where.error(int(later[j]), f'firing {ks[dup[j]]} of '
                          f'"{model.transition_ids[u % n]}"{in_rep} is logged twice (first '
                          f"at {where.item(first)})", dup.size)
    return EventLog(t[order], ks, x[order], None if s is None else s[order],
                    order.astype(np.int64), where.path,
                    None if rep is None else rep[order], labels, n, source, where,
                    resolution)
