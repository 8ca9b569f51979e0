r"""The CSV tables of a model file: reading them with pyarrow (vectorized checks), and writing them.

The ``[[transitions]]`` and ``[[places]]`` entries of the TOML file and each CSV table are read
into rows (:class:`_Rows`) that :func:`cyclecheck.simulate.modelfile.load_model` joins and
checks as a whole; the file reading that both kinds of source share lives here too.

CSV tables
----------
``transitions_csv`` has the columns ``id`` and ``duration`` (``label`` optional); ``places_csv``
has ``from``, ``to``, ``tokens`` and ``hold`` (``label`` optional). A missing column is an error
naming it (a table without ``duration`` would silently give zero durations, one without
``tokens`` a deadlock). A ``duration`` or ``hold`` cell is a number or a distribution in cell
syntax, ``name(key=value, ...)`` with TOML values, quoted because it contains commas::

    from,to,tokens,hold
    fill,cap,0,1.5
    cap,fill,3,"gamma(mean=3, cv=0.5)"
    cap,cap,1,"empirical(values=[0.5, 0.7, 1.1])"

Every line has one cell per column of the header: a line with more or fewer fields is refused
with its line number (an unquoted distribution cell is the usual cause). Cells are stripped of
surrounding blanks; an empty number cell is an error (write 0), an empty label is no label; blank
lines are skipped. Line numbers in messages count every line of the file from 1 (header
included, and the lines inside a quoted cell too); places are also named by their index, the
place number of the result documents (TOML places first, then the rows of ``places_csv``).

Reading
-------
Tables are read by ``pyarrow.csv`` (multi-threaded, every column as text), numbers converted by
one vectorized cast per column, ids kept as Arrow strings so that
:func:`cyclecheck.simulate.modelfile.load_model` maps them to indices by one hashing pass
(Arrow's ``index_in``); no Python loop runs per row. Columns stay in the chunks the reader made
(joining them would copy every cell once more); cells are trimmed only when the file holds a
blank or a tab at all. Arrow's functions are called by name (:func:`arrow_call`) without
importing ``pyarrow.compute``. Line numbers are counted only when a message needs one. A file
that pyarrow would read otherwise than the rules above (a line of blanks, a quoted cell after
blanks, the header below blank lines) or cannot read (a ragged line) goes through pandas
instead, the reader these rules were written for, after a check of the field count of every
line.

The field count of each line comes from one vectorized pass over the bytes (commas and line
ends outside quotes), which agrees with pandas' reading whenever every quote that opens a
quoted cell stands at the start of a cell; files where it does not (a literal ``"`` inside an
unquoted cell) are counted by the :mod:`csv` module instead, slower but exact.
"""

from __future__ import annotations

import codecs
import csv
import io
import json
import os
import re
import warnings
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np

from ..algebra.eventgraph import MAX_TOKENS
from .durations import MAX_VALUE, Distribution, SpecTable, parse_spec
from .errors import ArgumentError, ModelError, did_you_mean, shown
from .files import read_input

if TYPE_CHECKING:
    import pandas as pd
    import pyarrow as pa

__all__ = ["write_csv_model"]



# --------------------------------------------------------------------------- files


def _read_file(path: Path, what: str) -> tuple[bytes, str]:
    """Bytes and text of a file, or a ModelError saying why it cannot be a model file."""
    return read_input(path, what)


# --------------------------------------------------------------------------- rows of one source


def cell(column: Any, i: int) -> str:
    """Entry ``i`` of a text column, a numpy object array or an Arrow string array (chunked or
    not)."""
    value = column[i]
    return value.as_py() if hasattr(value, "as_py") else value


# --------------------------------------------------------------------------- Arrow arrays


def arrow_compute() -> Any:
    """The module of Arrow's compute functions: ``call_function`` and the option classes.

    ``pyarrow.compute`` builds a Python wrapper with a docstring for each of Arrow's ~300
    functions when it is imported (about 50 ms of every run that reads a table); the reader
    calls a handful by name, through ``pyarrow._compute``, the module the public one
    re-exports them from (the public one where a pyarrow lacks it).
    """
    try:
        import pyarrow._compute as compute
    except ImportError:  # pragma: no cover - a pyarrow that moved its internals
        import pyarrow.compute as compute
    return compute


def arrow_call(name: str, *args: Any, options: Any = None) -> Any:
    """Arrow's compute function ``name`` on ``args`` (arrays, chunked or not)."""
    return arrow_compute().call_function(name, list(args), options)


def string_array(values: Sequence[str]) -> pa.Array:
    """An Arrow string array of Python strings, built from buffers (``pa.array`` imports
    pandas, about 0.3 s)."""
    import pyarrow as pa

    encoded = [v.encode() for v in values]
    offsets = np.zeros(len(encoded) + 1, dtype=np.int32)
    np.cumsum([len(e) for e in encoded], out=offsets[1:])
    return pa.Array.from_buffers(pa.string(), len(encoded),
                                 [None, pa.py_buffer(offsets), pa.py_buffer(b"".join(encoded))])


def chunks(array: Any) -> list[Any]:
    """The arrays of an Arrow array: its chunks, or itself when it is not chunked."""
    return array.chunks if hasattr(array, "num_chunks") else [array]


def _offsets(chunk: Any) -> np.ndarray:
    """Cell ``i`` of an Arrow string array is bytes ``offsets[i]:offsets[i + 1]`` of its data."""
    return np.frombuffer(chunk.buffers()[1], dtype=np.int32, count=len(chunk) + 1,
                         offset=chunk.offset * 4)


def empty_cells(column: Any) -> np.ndarray:
    """Rows of an Arrow string column (no nulls) whose cell is empty, read off the offsets."""
    found, first = [], 0
    for chunk in chunks(column):
        if len(chunk):
            off = _offsets(chunk)
            found.append(np.flatnonzero(off[1:] == off[:-1]) + first)
        first += len(chunk)
    return np.concatenate(found) if found else np.zeros(0, dtype=np.int64)


def all_empty(column: Any) -> bool:
    """True when every cell of an Arrow string column is empty (or it has no cells)."""
    return all(len(c) == 0 or _offsets(c)[-1] == _offsets(c)[0] for c in chunks(column))


@dataclass
class _Rows:
    """Transitions or places read from one source: the TOML entries or one CSV table."""

    file: Path
    # Text columns are numpy object arrays (TOML) or Arrow string arrays (CSV): see cell().
    ids: Any  # transitions: their ids; places: the "from" ids
    dst: Any = None  # places: the "to" ids (None for transitions)
    tokens: np.ndarray | None = None
    labels: Any = None
    specs: SpecTable | None = None
    line: Callable[[int], int] | None = None  # CSV: row -> line number
    data: bytes = b""  # CSV: the file's bytes, for the digest
    first: int = 0  # index in the whole model of row 0 (CSV rows follow the TOML entries)

    def item(self, i: int) -> str:
        """How messages name element ``i`` of these rows.

        A place is named by its index in the model (counted from 0, as in the result
        documents) beside its position in the file: ``place 3 (fill -> cap, index 2)`` for
        the third ``[[places]]`` entry, ``line 12 (place fill -> cap, index 10)`` for a row.
        """
        if self.dst is None:
            what = f'transition "{cell(self.ids, i)}"'
        else:
            what = f"{cell(self.ids, i)} -> {cell(self.dst, i)}, index {self.first + i}"
        if self.line is not None:
            return f"line {self.line(i)} ({what if self.dst is None else 'place ' + what})"
        return what if self.dst is None else f"place {i + 1} ({what})"

    def position(self, i: int) -> str:
        """Where element ``i`` stands in its file: ``as transition 2``, ``at line 3``."""
        if self.line is not None:
            return f"at line {self.line(i)}"
        return f"as {'transition' if self.dst is None else 'place'} {i + 1}"


# --------------------------------------------------------------------------- CSV tables


_SPACE, _LF, _CR, _QUOTE, _COMMA = 32, 10, 13, 34, 44
_LAW_CELL = re.compile(r'[A-Za-z_]\w*\s*\([^()"\r\n]*,[^()"\r\n]*\)')


@dataclass
class _Layout:
    """The records of a CSV file that pandas reads as lines: the header, then one per row.

    Blank lines are left out, as pandas skips them. ``counts`` holds the fields of each record;
    a record is located either by its byte offset (``starts``, ``stops``; the line number is
    counted only when a message needs it) or directly by its line number (``lines``).
    """

    counts: np.ndarray
    data: bytes
    starts: np.ndarray | None = None
    stops: np.ndarray | None = None
    lines: list[int] | None = None

    def line(self, record: int) -> int:
        """Line number (from 1) where record ``record`` starts."""
        record = min(record, len(self.counts) - 1)
        if self.lines is not None:
            return self.lines[record]
        offset = int(self.starts[record])  # type: ignore[index]
        d = self.data
        return d.count(b"\n", 0, offset) + d.count(b"\r", 0, offset) \
            - d.count(b"\r\n", 0, offset) + 1

    def text(self, record: int) -> str:
        """The text of a record (its first line when it comes from the csv module)."""
        if self.lines is not None:
            lines = re.split(r"\r\n|\r|\n", self.data.decode("utf-8", "replace"))
            return lines[self.lines[record] - 1]
        return self.data[int(self.starts[record]):int(self.stops[record])].decode(  # type: ignore[index]
            "utf-8", "replace")


def _quotes_open_cells(b: np.ndarray, quotes: np.ndarray, lo: int) -> bool:
    """True when quote parity splits the file as pandas does.

    Pandas opens a quoted cell only at the start of a cell (after blanks, which
    ``skipinitialspace`` drops); ``""`` inside a quoted cell is a quote. Parity agrees with
    that when every quote it takes for an opening one is one of those two.
    """
    opening = quotes[0::2]
    escaped = np.zeros(opening.size, dtype=bool)
    escaped[1:] = quotes[1:-1:2] == opening[1:] - 1  # the closing quote just before it
    p = opening[~escaped] - 1
    for _ in range(64):  # step back over the spaces before the quote
        space = p >= lo
        space[space] = b[p[space]] == _SPACE
        if not space.any():
            break
        p[space] -= 1
    else:
        return False
    inside = p >= lo
    return bool(np.isin(b[p[inside]], (_COMMA, _LF, _CR)).all())


def _scan(data: bytes) -> _Layout | None:
    """Field counts of every record in a few vectorized passes; None if quoting defeats them."""
    b = np.frombuffer(data, dtype=np.uint8)
    n = b.size
    lo = len(codecs.BOM_UTF8) if data.startswith(codecs.BOM_UTF8) else 0
    quotes = np.flatnonzero(b == _QUOTE)
    if quotes.size % 2:
        return None
    ends = np.flatnonzero(b == _LF)
    cr = np.flatnonzero(b == _CR)
    if cr.size:  # a CR ends a line unless an LF follows it
        lone = cr[(cr + 1 == n) | (b[np.minimum(cr + 1, n - 1)] != _LF)]
        if lone.size:
            ends = np.union1d(ends, lone)
    commas = np.flatnonzero(b == _COMMA)
    if quotes.size:
        if not _quotes_open_cells(b, quotes, lo):
            return None
        commas = commas[(np.searchsorted(quotes, commas) & 1) == 0]
        ends = ends[(np.searchsorted(quotes, ends) & 1) == 0]
    starts = np.concatenate(([lo], ends + 1))
    stops = np.append(ends, n)
    # Commas before each record's end; no comma sits on a line end, so the difference of
    # consecutive counts is the number of commas in a record.
    counts = np.diff(np.searchsorted(commas, stops), prepend=0) + 1
    length = stops - starts
    filled = np.flatnonzero(length > 0)
    length[filled] -= b[stops[filled] - 1] == _CR  # the CR of a CR LF
    keep = length > 0
    maybe = np.flatnonzero(keep & (counts == 1))
    if maybe.size:  # lines of blanks are blank lines too
        first = b[starts[maybe]]
        for r in maybe[(first == _SPACE) | (first == 9)].tolist():
            if not data[starts[r]:starts[r] + length[r]].strip(b" \t"):
                keep[r] = False
    return _Layout(counts[keep], data, starts[keep], starts[keep] + length[keep])


def _slow_scan(data: bytes, text: str) -> _Layout | None:
    """Field counts and lines of every record through the csv module (exact, slower)."""
    reader = csv.reader(io.StringIO(text, newline=""), skipinitialspace=True)
    raw = re.split(r"\r\n|\r|\n", text)
    counts, lines = [], []
    end = 0
    try:
        for row in reader:
            start, end = end + 1, reader.line_num
            # A line of blanks is blank for pandas; a line "" is a row with an empty cell.
            if len(row) > 1 or any(s.strip(" \t") for s in raw[start - 1:end]):
                counts.append(len(row))
                lines.append(start)
    except csv.Error:
        return None
    return _Layout(np.array(counts, dtype=np.int64), data, lines=lines) if counts else None


def _check_fields(layout: _Layout, header: list[str], path: Path) -> None:
    """Refuse the first line whose number of fields differs from the header's."""
    k = len(header)
    bad = np.flatnonzero(layout.counts[1:] != k)
    if not bad.size:
        return
    r = int(bad[0]) + 1
    got = int(layout.counts[r])
    rule = (f"the line has {got} field{'s' if got != 1 else ''}, the header has {k} "
            f"({','.join(header)})")
    law = _LAW_CELL.search(layout.text(r)) if got > k else None
    if law:
        rule += f"; a distribution cell with commas must be quoted: {json.dumps(law.group())}"
    elif got > k:
        rule += ('; quote a cell that contains a comma (e.g. "Filler, left") or remove the '
                 "extra cells")
    else:
        rule += "; write a cell for every column (an empty cell is nothing between two commas)"
    if bad.size > 1:
        rule += f" ({bad.size - 1} more lines like this)"
    raise ModelError(rule, file=path, item=f"line {layout.line(r)}")


def _csv_lines(text: str) -> Callable[[int], int]:
    """Row index -> line number when no layout could be made (a file pandas will refuse)."""

    def line(row: int) -> int:
        lines = re.split(r"\r\n|\r|\n", text)
        filled = [i for i, s in enumerate(lines) if s.strip()]  # pandas skips blank lines
        return filled[row + 1] + 1 if row + 1 < len(filled) else len(lines)

    return line


def _header(text: str, allowed: tuple[str, ...], required: tuple[str, ...],
            path: Path) -> tuple[list[str], int]:
    """The column names (checked) and the offset in ``text`` where the header line starts."""
    start = re.search(r"\S", text)
    line = len(re.findall(r"\r\n|\r|\n", text[: start.start()])) + 1 if start else 1

    def bad_header(rule: str) -> ModelError:
        return ModelError(rule, file=path, item=f"line {line}")

    first = re.compile(r"[^\r\n]*").match(text, start.start()).group() if start else ""
    try:
        header = [c.strip() for c in next(csv.reader([first]))] if first else []
    except csv.Error as exc:
        raise bad_header(f"cannot read the header: {exc}") from None
    if not header:
        raise bad_header(f"the first line must name the columns, e.g. {','.join(allowed)}")
    for name in header:
        if name not in allowed:
            raise bad_header(f'unknown column "{name}"{did_you_mean(name, allowed)} '
                             f'(columns: {", ".join(allowed)})')
        if header.count(name) > 1:
            raise bad_header(f'column "{name}" appears twice')
    for name in required:
        if name not in header:
            raise bad_header(f'missing column "{name}" (columns: {", ".join(allowed)}); '
                             f"every table needs {', '.join(required)}")
    return header, start.start() if start else 0


#: A quoted cell after blanks: pandas (skipinitialspace) reads it as quoted, pyarrow would not.
_QUOTE_AFTER_BLANKS = re.compile(rb'(?:^|[,\r\n])[ \t]+"')


def _arrow_table(data: bytes, header: list[str], start: int) -> pa.Table | None:
    """Every column as text through ``pyarrow.csv``, or None where pyarrow cannot read the
    file, or would read it otherwise than pandas does (then pandas reads it)."""
    import pyarrow as pa
    import pyarrow.csv as pacsv

    quoted = b'"' in data
    if start != 0 or (quoted and _QUOTE_AFTER_BLANKS.search(data)):
        return None
    text = pa.string()
    try:
        return pacsv.read_csv(
            pa.py_buffer(data),
            read_options=pacsv.ReadOptions(column_names=header, skip_rows=1),
            parse_options=pacsv.ParseOptions(newlines_in_values=quoted),
            convert_options=pacsv.ConvertOptions(
                column_types={c: text for c in header}, null_values=[],
                strings_can_be_null=False, quoted_strings_can_be_null=False),
        )
    except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
        return None


def _lines(data: bytes, text: str, rows: int) -> Callable[[int], int]:
    """Row index -> line number, counted on first use (only messages need it)."""
    found: list[Callable[[int], int]] = []

    def line(row: int) -> int:
        if not found:
            layout = _scan(data) or _slow_scan(data, text)
            if layout is None or len(layout.counts) != rows + 1:
                layout = _slow_scan(data, text)
            if layout is None or len(layout.counts) != rows + 1:
                found.append(_csv_lines(text))
            else:
                found.append(lambda r, lay=layout: lay.line(r + 1))
        return found[0](row)

    return line


@dataclass
class _Table:
    """A CSV table as read: its columns as Arrow string arrays, chunked or not (whichever reader
    split the lines), its number of rows, row -> line number, the file's bytes, and whether
    they hold a blank or a tab at all (else no cell needs trimming)."""

    columns: dict[str, Any]
    rows: int
    line: Callable[[int], int]
    data: bytes
    blanks: bool

    def text(self, name: str, strip: bool) -> Any:
        """A text column as an Arrow string array: "" where the column is missing; leading
        blanks dropped as pandas' reader does (all blanks when ``strip``)."""
        import pyarrow as pa

        if name not in self.columns:  # empty strings from buffers (pa.scalar imports pandas)
            offsets = pa.py_buffer(np.zeros(self.rows + 1, dtype=np.int32))
            return pa.Array.from_buffers(pa.string(), self.rows,
                                         [None, offsets, pa.py_buffer(b"")])
        col = self.columns[name]
        if not self.blanks:
            return col
        trim = arrow_compute().TrimOptions(" \t" if strip else " ")
        return arrow_call("utf8_trim" if strip else "utf8_ltrim", col, options=trim)


def _read_csv(path: Path, required: tuple[str, ...], optional: tuple[str, ...],
              key: str, toml: Path) -> _Table:
    """A table read by pyarrow, or by pandas where pyarrow would split it otherwise."""
    if not path.exists():
        raise ModelError(f"no such file (named by {key} in {toml})", file=path)
    data, text = _read_file(path, "CSV table")
    header, start = _header(text, required + optional, required, path)
    table = _arrow_table(data, header, start)
    blanks = b" " in data or b"\t" in data
    if table is not None:
        return _Table({c: table.column(c) for c in header}, table.num_rows,
                      _lines(data, text, table.num_rows), data, blanks)
    df, line = _pandas_table(data, text, header, path)
    return _Table({c: _arrow(df[c]) for c in header}, len(df), line, data, blanks)


def _pandas_table(data: bytes, text: str, header: list[str],
                  path: Path) -> tuple[pd.DataFrame, Callable[[int], int]]:
    """The table read by pandas, after the field count of every line is checked."""
    import pandas as pd

    layout = _scan(data) or _slow_scan(data, text)
    if layout is not None:
        _check_fields(layout, header, path)
    try:
        # pandas infers types chunk by chunk and warns when chunks disagree (numbers above, a
        # distribution or a bad cell further down); the checks below read such a column as
        # text, so the warning says nothing to the user. low_memory=False would silence it
        # too but costs a quarter of a second per 10^6 rows of mixed cells.
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", pd.errors.DtypeWarning)
            df = pd.read_csv(io.BytesIO(data), dtype=str, keep_default_na=False,
                             na_filter=False, skipinitialspace=True, encoding="utf-8-sig")
    except (pd.errors.ParserError, ValueError) as exc:
        msg = str(exc).strip().removeprefix("Error tokenizing data. C error: ")
        m = re.search(r"in line (\d+)", msg)
        raise ModelError(f"cannot read the CSV table: {msg} (quote cells that contain "
                         'commas, e.g. "gamma(mean=3, cv=0.5)")', file=path,
                         item=f"line {m.group(1)}" if m else None) from None
    df.columns = header
    if layout is not None and len(layout.counts) != len(df) + 1:
        layout = _slow_scan(data, text)  # the fast count disagrees with pandas: count exactly
    if layout is None or len(layout.counts) != len(df) + 1:
        return df, _csv_lines(text)
    return df, lambda row, lay=layout: lay.line(row + 1)


def _arrow(column: pd.Series) -> pa.Array:
    """A column pandas read as text, as an Arrow string array."""
    import pyarrow as pa

    return pa.array(column.astype(str).to_numpy(dtype=object), type=pa.string())


def _require(values: Any, name: str, fail: Any) -> None:
    empty = empty_cells(values)
    if empty.size:
        fail(int(empty[0]), f"{name} is empty", empty.size)


def _finite_nonneg(values: np.ndarray, name: str, shown: Any, fail: Any) -> None:
    bad = np.flatnonzero(~np.isfinite(values) | (values < 0) | (values > MAX_VALUE))
    if bad.size:
        r = int(bad[0])
        rule = ("finite" if not np.isfinite(values[r]) else ">= 0" if values[r] < 0 else
                "at most 1e100 (so that sums of firing times and their squares stay finite)")
        fail(r, f"{name} must be {rule}, got {shown(r)}", bad.size)


def _cast(column: Any, dtype: Any) -> np.ndarray | None:
    """An Arrow text column converted by one vectorized cast, or None where a cell is not
    such a number (then the column is read as text, cell by cell, for the message)."""
    import pyarrow as pa

    compute = arrow_compute()
    options = compute.CastOptions.safe(dtype)
    for attempt in (column, None):
        try:
            col = attempt if attempt is not None else arrow_call(
                "utf8_trim", column, options=compute.TrimOptions(" \t"))
            return numeric(arrow_call("cast", col, options=options))
        except (pa.ArrowInvalid, pa.ArrowNotImplementedError):
            continue
    return None


def numeric(array: Any, fill: float | None = None, dtype: Any = None) -> np.ndarray:
    """A numeric Arrow array (chunked or not) as a numpy array (a copy), nulls replaced by
    ``fill``, converted to ``dtype`` if given.

    Read from its buffers: ``to_numpy``, ``np.asarray``, ``pa.scalar`` or ``fill_null`` import
    pandas on their way (about 0.3 s of start-up), which a model without laws never needs.
    """
    own = np.dtype(array.type.to_pandas_dtype())
    parts = []
    for chunk in chunks(array):
        validity, data = chunk.buffers()[:2]
        if not len(chunk):
            continue
        part = np.frombuffer(data, dtype=own, count=len(chunk),
                             offset=chunk.offset * own.itemsize).astype(dtype or own)
        if chunk.null_count:
            if fill is None:
                raise ValueError("the array has nulls and no fill value was given")
            bits = np.unpackbits(np.frombuffer(validity, dtype=np.uint8), bitorder="little")
            part[~bits[chunk.offset:chunk.offset + len(chunk)].astype(bool)] = fill
        parts.append(part)
    if len(parts) == 1:
        return parts[0]
    return np.concatenate(parts) if parts else np.zeros(0, dtype=dtype or own)


def _spec_column(columns: dict[str, Any], name: str, fail: Any) -> SpecTable:
    import pyarrow as pa

    col = columns[name]
    values = _cast(col, pa.float64())
    # The fast path: numbers only. NaN stays text: "nan" in a cell is reported as written.
    if values is not None and not np.isnan(values).any():
        _finite_nonneg(values, name, lambda r: shown(float(values[r])), fail)
        values += 0.0  # -0.0 becomes 0.0 (values is a copy of the column)
        return SpecTable(values)
    import pandas as pd  # cell by cell: laws, blanks, or a message to write

    text = pd.Series(col.to_numpy(zero_copy_only=False), dtype=object).str.strip()
    values = pd.to_numeric(text, errors="coerce").to_numpy(dtype=np.float64)
    laws = np.isnan(values) & text.str.fullmatch(r"[A-Za-z_]\w*\s*\(.*\)").to_numpy(bool)
    empty = np.flatnonzero(~laws & (text == "").to_numpy(bool))
    if empty.size:
        fail(int(empty[0]), f"{name} is empty; write 0 for none", empty.size)
    nan_text = text.str.lower().isin(["nan", "+nan", "-nan"]).to_numpy(bool)
    junk = np.flatnonzero(~laws & np.isnan(values) & ~nan_text)
    if junk.size:
        r = int(junk[0])
        fail(r, f"{name} must be a number or a distribution such as gamma(mean=3, cv=0.5), "
                f"got {shown(text.iloc[r])}", junk.size)
    values = np.where(laws, 0.0, values)
    _finite_nonneg(values, name, lambda r: shown(text.iloc[r]), fail)
    codes = np.full(len(col), -1, dtype=np.int32)
    distinct: list[Distribution] = []
    rows = np.flatnonzero(laws)
    if rows.size:  # parse each distinct cell text once
        found, uniques = pd.factorize(text.iloc[rows])
        for u, law_text in enumerate(uniques):
            try:
                distinct.append(parse_spec(law_text))
            except ModelError as exc:
                fail(int(rows[np.argmax(found == u)]), f"{name}: {exc.rule}", 1)
        codes[rows] = found
    return SpecTable(values + 0.0, codes, distinct)


def _token_column(columns: dict[str, Any], fail: Any) -> np.ndarray:
    import pyarrow as pa

    col = columns["tokens"]
    text = None
    ints = _cast(col, pa.int64())
    if ints is not None and (ints.size == 0 or (0 <= ints.min() and ints.max() <= MAX_TOKENS)):
        return ints
    # Numbers are shown as numbers (1.0 is accepted, -1 or 0.5 are not), anything else as text.
    values = ints.astype(np.float64) if ints is not None else _cast(col, pa.float64())
    if values is None:
        import pandas as pd  # text: read cell by cell for the message

        text = pd.Series(col.to_numpy(zero_copy_only=False), dtype=object).str.strip()
        values = pd.to_numeric(text, errors="coerce").to_numpy(dtype=np.float64)
    with np.errstate(invalid="ignore"):
        bad = np.flatnonzero(~np.isfinite(values) | (values < 0) | (values > MAX_TOKENS)
                             | (values != np.floor(values)))
    if bad.size:
        r = int(bad[0])
        got = shown(text.iloc[r]) if text is not None else shown(_number(values[r]))
        fail(r, f"tokens must be an integer >= 0, got {got}", bad.size)
    return values.astype(np.int64)


def _number(x: float) -> int | float:
    """A number of a numeric column as the message shows it: integers without ``.0``."""
    return int(x) if np.isfinite(x) and x == np.floor(x) and abs(x) < 2**63 else float(x)


def _failer(rows: _Rows) -> Callable[[int, str, int], None]:
    def fail(row: int, rule: str, count: int) -> None:
        more = f" ({count - 1} more rows like this)" if count > 1 else ""
        raise ModelError(rule + more, file=rows.file, item=rows.item(row))

    return fail


def _csv_transitions(path: Path, toml: Path, first: int = 0) -> _Rows:
    table = _read_csv(path, ("id", "duration"), ("label",), "transitions_csv", toml)
    ids = table.text("id", strip=True)
    rows = _Rows(path, ids, labels=table.text("label", strip=False), line=table.line,
                 data=table.data, first=first)
    fail = _failer(rows)
    _require(ids, "id", fail)
    rows.specs = _spec_column(table.columns, "duration", fail)
    return rows


def _csv_places(path: Path, toml: Path, first: int = 0) -> _Rows:
    table = _read_csv(path, ("from", "to", "tokens", "hold"), ("label",), "places_csv", toml)
    rows = _Rows(path, table.text("from", strip=False), table.text("to", strip=False),
                 labels=table.text("label", strip=False), line=table.line, data=table.data,
                 first=first)
    fail = _failer(rows)
    _require(rows.ids, "from", fail)
    _require(rows.dst, "to", fail)
    rows.tokens = _token_column(table.columns, fail)
    rows.specs = _spec_column(table.columns, "hold", fail)
    return rows


# --------------------------------------------------------------------------- writing


def _cells(values: Any) -> Any:
    """Numbers stay numbers (written exactly by pandas); laws become their exact cell text."""
    arr = np.asarray(values, dtype=object) if not isinstance(values, np.ndarray) else values
    if arr.dtype != object:
        return np.asarray(arr, dtype=np.float64)
    if all(isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, bool)
           for v in arr.tolist()):
        return arr.astype(np.float64)
    return [parse_spec(v).to_text() for v in arr.tolist()]


def write_csv_model(
    directory: str | os.PathLike[str],
    name: str,
    duration: Any,
    source: Any,
    target: Any,
    tokens: Any,
    hold: Any,
    *,
    ids: Sequence[str] | None = None,
    time_unit: str = "",
) -> Path:
    """Write a model as a TOML file and two CSV tables; return the TOML path.

    Used by tests and benchmarks to build large models. Transitions get the ids ``t0, t1, ...``
    unless ``ids`` is given; ``duration`` and ``hold`` may hold numbers or specs (laws, tables,
    cell text), written in cell syntax.

    Files: ``<stem>.toml``, ``<stem>_transitions.csv``, ``<stem>_places.csv`` in ``directory``
    (created if needed), where ``stem`` is ``name`` with characters other than letters,
    digits, ``-``, ``_`` and ``.`` replaced by ``_``.
    """
    import pandas as pd

    directory = Path(directory)
    directory.mkdir(parents=True, exist_ok=True)
    stem = re.sub(r"[^\w.-]", "_", name) or "model"
    n = len(duration)
    names = list(ids) if ids is not None else [f"t{i}" for i in range(n)]
    if len(names) != n:
        raise ArgumentError(f"ids must have {n} entries, got {len(names)}")
    table = np.array(names, dtype=object)
    t_csv, p_csv = f"{stem}_transitions.csv", f"{stem}_places.csv"
    pd.DataFrame({"id": table, "duration": _cells(duration)}).to_csv(
        directory / t_csv, index=False)
    pd.DataFrame({
        "from": table[np.asarray(source, dtype=np.int64)],
        "to": table[np.asarray(target, dtype=np.int64)],
        "tokens": np.asarray(tokens, dtype=np.int64),
        "hold": _cells(hold),
    }).to_csv(directory / p_csv, index=False)
    toml_path = directory / f"{stem}.toml"
    lines = ["[model]", f"name = {json.dumps(name)}"]
    if time_unit:
        lines.append(f"time_unit = {json.dumps(time_unit)}")
    lines += [f"transitions_csv = {json.dumps(t_csv)}", f"places_csv = {json.dumps(p_csv)}", ""]
    toml_path.write_text("\n".join(lines), encoding="utf-8")
    return toml_path
